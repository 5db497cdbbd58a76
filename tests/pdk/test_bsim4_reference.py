"""SKY130's BSIM4 devices against the reference simulator (Debian's ngspice, the Berkeley
implementation of the published BSIM4 equations), point by point.

One netlist per (device type, corner, temperature) holds every geometry and bias of the grid,
four copies of each biased device: copy j drives terminal j with a 1 V AC source, so the
terminal currents of an AC analysis at 1 MHz give column j of the terminal capacitance matrix
(C_ij = Im(I_i) / omega); tauscan's side is the same quantity of its linearized device, internal
nodes eliminated.  The same netlist, without its control block, is what tauscan reads.
Bias points, geometries and the netlist are our own; the cards are the library's.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tauscan.op import operating_point
from tauscan.reader import read_netlist
from tests.reference import ngspice

#: geometries (W um, L um, nf, m, more instance parameters): short, long, narrow, wide, fingers,
#: copies, and diffusion lengths (the stress effect)
GEOMETRIES = [(0.42, 0.15, 1, 1, ""), (7.0, 0.15, 1, 1, ""), (1.0, 0.5, 1, 1, ""), (0.42, 4.0, 1, 1, ""),
              (5.0, 8.0, 1, 1, ""), (4.0, 0.25, 2, 3, ""),
              # layout-dependent stress: diffusion lengths on one side and the other, and between fingers
              (1.0, 0.15, 1, 1, "sa=0.5 sb=0.8"), (2.0, 0.18, 2, 1, "sa=0.3 sb=0.4 sd=0.25")]
#: normalized biases (V): subthreshold to strong inversion, linear to saturation, body bias
VGS = (0.25, 0.6, 1.0, 1.8)
VDS = (0.05, 0.5, 1.8)
VBS = (0.0, -0.8)
TERMINALS = "dgsb"
FREQ = 1e6
#: (corner, temperature C): typical at 27 and 85 C, and a slow corner
SETTINGS = [("tt", 27.0), ("tt", 85.0), ("ss", 27.0)]


def _points():
    return [(geo, (vg, vd, vb)) for geo in GEOMETRIES for vg in VGS for vd in VDS for vb in VBS]


def _netlist(lib, kind: str, corner: str, temp: float) -> tuple[str, list]:
    sign = 1.0 if kind == "nfet" else -1.0
    lines = [f"* SKY130 {kind} grid for the reference comparison (our own)", f'.lib "{lib}" {corner}', f".temp {temp:g}"]
    points = _points()
    for k, ((w, l, nf, m, extra), (vg, vd, vb)) in enumerate(points):
        for j, t in enumerate(TERMINALS):
            name = f"{k}_{t}"
            dc = {"d": sign * vd, "g": sign * vg, "s": 0.0, "b": sign * vb}
            for x in TERMINALS:
                ac = " ac 1" if x == t else ""
                lines.append(f"v{x}{name} {x}{name} 0 dc {dc[x]:g}{ac}")
            lines.append(f"xm{name} d{name} g{name} s{name} b{name} sky130_fd_pr__{kind}_01v8 w={w} l={l} nf={nf} "
                         f"m={m} nrd=0 nrs=0 {extra}".rstrip())
    return "\n".join(lines) + "\n", points


def _reference(text: str, kind: str, points: list) -> dict[str, float]:
    vec = f"msky130_fd_pr__{kind}_01v8"
    control = ["op"]
    for k in range(len(points)):
        for q in ("id", "gm", "gds", "gmbs", "isub", "igidl", "igisl"):
            control.append(f"print @m.xm{k}_d.{vec}[{q}]")
    control.append(f"ac lin 1 {FREQ:g} {FREQ:g}")
    for k in range(len(points)):
        for t in TERMINALS:
            for x in TERMINALS:
                control.append(f"let q{k}_{t}{x} = imag(i(v{x}{k}_{t}))")
        control.append("print " + " ".join(f"q{k}_{t}{x}" for t in TERMINALS for x in TERMINALS))
    return ngspice.run_control(text, control)


def _terminal_matrix(dev, omega: float) -> np.ndarray:
    """What the simulator's AC analysis measures of tauscan's device: its small-signal network
    (conductances, transconductances, the terminal capacitance matrix, the body network's
    resistors) as an admittance G + j omega C, the internal nodes eliminated (a Schur
    complement), then C_ij = Im(Y_ij) / omega over the external d, g, s, b."""
    ss = dev.small_signal()
    ext = [dev.nodes[k] for k in ("d_phys", "g", "s_phys")] + [dev.nodes.get("rbpb_ext", dev.nodes["b"])]
    names = list(ext)
    for _part, a, b, _g in ss.conductances:
        names += [a, b]
    for _part, p, n, cp, cn, _g in ss.vccs:
        names += [p, n, cp, cn]
    names += list(ss.capacitance.nodes)
    index = {name: i for i, name in enumerate(dict.fromkeys(names))}
    y = np.zeros((len(index), len(index)), dtype=complex)
    for _part, a, b, g in ss.conductances:
        i, j = index[a], index[b]
        y[i, i] += g
        y[j, j] += g
        y[i, j] -= g
        y[j, i] -= g
    for _part, p, n, cp, cn, g in ss.vccs:
        for row, sign in ((index[p], 1.0), (index[n], -1.0)):
            y[row, index[cp]] += sign * g
            y[row, index[cn]] -= sign * g
    rows = [index[x] for x in ss.capacitance.nodes]
    y[np.ix_(rows, rows)] += 1j * omega * ss.capacitance.matrix
    e = [index[x] for x in ext]
    i = [k for k in range(len(index)) if k not in e]
    y_ext = y[np.ix_(e, e)]
    if i:
        y_ext = y_ext - y[np.ix_(e, i)] @ np.linalg.solve(y[np.ix_(i, i)], y[np.ix_(i, e)])
    return y_ext.imag / omega


@pytest.mark.parametrize("kind", ["nfet", "pfet"])
@pytest.mark.parametrize("corner,temp", SETTINGS)
def test_devices_match_the_reference_simulator(tmp_path, sky130_lib, kind, corner, temp):
    text, points = _netlist(sky130_lib, kind, corner, temp)
    path = tmp_path / "grid.sp"
    path.write_text(text + ".end\n")
    ref = _reference(text, kind, points)
    op = operating_point(read_netlist(str(path)))
    vec = f"msky130_fd_pr__{kind}_01v8"
    worst_c = None
    worst = {"id": (0.0, ""), "gm": (0.0, ""), "gds": (0.0, ""), "gmbs": (0.0, ""), "leak": (0.0, ""), "C": (0.0, "")}
    omega = 2.0 * math.pi * FREQ
    for k, (geo, bias) in enumerate(points):
        where = f"W/L/nf/m={geo} vgs/vds/vbs={bias}"
        dev = op.device(f"xm{k}_d")
        assert dev.family == "bsim4"
        r = {q: ref[f"@m.xm{k}_d.{vec}[{q}]"] for q in ("id", "gm", "gds", "gmbs")}
        ours = {"id": abs(dev.current), "gm": dev.values["gm"], "gds": dev.values["gds"], "gmbs": dev.values["gmb"]}
        for q in ours:  # (the simulator's vectors include the m copies, as ours do)
            theirs = abs(r[q]) if q == "id" else r[q]
            if q == "id" and theirs <= 1e-9:
                continue
            scale = abs(theirs) if q == "id" else max(abs(theirs), 1e-3 * abs(ours["gm"]) + 1e-15)
            err = abs(ours[q] - theirs) / scale
            if err > worst[q][0]:
                worst[q] = (err, where)
        # the substrate current and the gate-induced leakages, where they flow
        for q in ("isub", "igidl", "igisl"):
            theirs = abs(ref[f"@m.xm{k}_d.{vec}[{q}]"])
            if theirs > 1e-15:
                err = abs(abs(dev.values[q]) - theirs) / theirs
                if err > worst["leak"][0]:
                    worst["leak"] = (err, f"{q} {where}")
        theirs_c = np.array([[-ref.get(f"ac1.q{k}_{t}{x}", ref.get(f"q{k}_{t}{x}", math.nan)) / omega for t in TERMINALS] for x in TERMINALS])
        mine = _terminal_matrix(op.device(f"xm{k}_d"), omega)
        err = float(np.abs(mine - theirs_c).max() / np.abs(theirs_c).max())
        if err > worst["C"][0]:
            worst["C"] = (err, where)
            worst_c = (mine, theirs_c)
    # the geometries fall in at least six different bins of the library (short, long, narrow, wide)
    per_geometry = len(points) // len(GEOMETRIES)
    bins = {op.circuit.models[op.device(f"xm{g * per_geometry}_d").model].card_name for g in range(len(GEOMETRIES))}
    assert len(bins) >= 6, bins
    print(f"\n{kind} {corner} {temp:g} C against {ngspice.version()}: worst relative errors")
    for q, (err, where) in worst.items():
        print(f"  {q:5s} {err:9.2e}  at {where}")
    limits = {"id": 0.01, "gm": 0.02, "gds": 0.02, "gmbs": 0.02, "leak": 0.01, "C": 0.03}
    for q, (err, where) in worst.items():
        assert err <= limits[q], f"{q}: {err:.3g} at {where}" + (
            f"\nours (fF):\n{worst_c[0] * 1e15}\nreference (fF):\n{worst_c[1] * 1e15}" if q == "C" else "")


#: a BSIM4 card of our own (version 4.5, no body network) with the pocket-implant threshold
#: terms DVTP0/DVTP1, which SKY130's cards leave at zero
POCKET = (".model pocket nmos level=54 version=4.5 toxe=3n toxm=3n vth0=0.45 k1=0.5 k2=0.01 u0=0.03 "
          "vsat=1e5 rdsw=100 dvtp0=2e-8 dvtp1=1.5 lint=1e-8 pclm=1 pdiblc2=0.005 capmod=2")


def test_own_card_with_pocket_terms_matches_the_reference_simulator(tmp_path):
    lines = ["* own card with the pocket terms (our own)", POCKET]
    biases = [(vg, vd) for vg in (0.3, 0.7, 1.2) for vd in (0.05, 0.6, 1.2)]
    for k, (vg, vd) in enumerate(biases):
        lines += [f"vd{k} d{k} 0 {vd}", f"vg{k} g{k} 0 {vg}", f"m{k} d{k} g{k} 0 0 pocket w=1u l=0.1u"]
    text = "\n".join(lines) + "\n"
    ref = ngspice.run(text, [f"@m{k}[{q}]" for k in range(len(biases)) for q in ("id", "gm", "gds", "vth")])
    path = tmp_path / "pocket.sp"
    path.write_text(text + ".end\n")
    op = operating_point(read_netlist(str(path)))
    for k, bias in enumerate(biases):
        dev = op.device(f"m{k}")
        assert dev.bias["vth"] == pytest.approx(ref[f"@m{k}[vth]"], abs=1e-6), bias
        # (the card leaves most parameters at the manual's defaults: this checks those too)
        assert dev.current == pytest.approx(ref[f"@m{k}[id]"], rel=1e-5), bias
        assert dev.values["gm"] == pytest.approx(ref[f"@m{k}[gm]"], rel=1e-5), bias
        assert dev.values["gds"] == pytest.approx(ref[f"@m{k}[gds]"], rel=1e-4), bias


def test_own_card_terminal_matrix_without_body_network(tmp_path):
    # the same card of our own (no body network: junction capacitances go to the body terminal
    # itself) with areas and perimeters, its 4 x 4 matrix against the simulator's AC currents
    card = POCKET + " cjs=1e-3 cjsws=2e-10 cjswgs=3e-10 mjs=0.4 pbs=0.8"
    lines = ["* own card, terminal matrix (our own)", card]
    biases = [(0.3, 0.6, 0.0), (1.0, 0.05, -0.4), (1.2, 1.0, 0.0)]
    for k, (vg, vd, vb) in enumerate(biases):
        for t in TERMINALS:
            dc = {"d": vd, "g": vg, "s": 0.0, "b": vb}
            for x in TERMINALS:
                lines.append(f"v{x}{k}_{t} {x}{k}_{t} 0 dc {dc[x]:g}" + (" ac 1" if x == t else ""))
            lines.append(f"m{k}_{t} d{k}_{t} g{k}_{t} s{k}_{t} b{k}_{t} pocket w=2u l=0.2u "
                         "ad=0.5p as=0.5p pd=3u ps=3u")
    text = "\n".join(lines) + "\n"
    control = [f"ac lin 1 {FREQ:g} {FREQ:g}"]
    for k in range(len(biases)):
        for t in TERMINALS:
            for x in TERMINALS:
                control.append(f"let q{k}_{t}{x} = imag(i(v{x}{k}_{t}))")
        control.append("print " + " ".join(f"q{k}_{t}{x}" for t in TERMINALS for x in TERMINALS))
    ref = ngspice.run_control(text, control)
    path = tmp_path / "own.sp"
    path.write_text(text + ".end\n")
    op = operating_point(read_netlist(str(path)))
    omega = 2.0 * math.pi * FREQ
    for k, bias in enumerate(biases):
        dev = op.device(f"m{k}_d")
        assert dev.cmatrix[0] == ("d_phys", "g", "s_phys", "b")  # no internal body nodes
        theirs = np.array([[-ref.get(f"ac1.q{k}_{t}{x}", ref.get(f"q{k}_{t}{x}", math.nan)) / omega
                            for t in TERMINALS] for x in TERMINALS])
        mine = _terminal_matrix(dev, omega)
        err = float(np.abs(mine - theirs).max() / np.abs(theirs).max())
        print(f"own card at vgs/vds/vbs={bias}: terminal matrix within {err:.2e} of the largest entry")
        assert err < 0.01, (bias, np.array2string(mine * 1e15, precision=4), np.array2string(theirs * 1e15, precision=4))
