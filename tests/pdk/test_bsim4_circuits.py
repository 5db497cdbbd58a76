"""Small SKY130 circuits of our own against the reference simulator (Debian's ngspice): the
operating point node by node, and the scan's -3 dB frequency against the simulator's AC
analysis (the frequency where |v(out)| falls 3 dB below its low-frequency value, interpolated
on a 100-points-per-decade sweep)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tauscan import api
from tauscan.op import operating_point
from tauscan.reader import read_netlist
from tests.reference import ngspice

CS = """* common-source stage with a resistor load (our own)
.lib "{lib}" tt
vdd vdd 0 1.8
vin g 0 dc 0.75 ac 1
rd vdd out 8k
xm1 out g 0 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5 nf=2
cl out 0 50f
"""

FIRST_STAGE = """.lib "{{lib}}" tt
vdd vdd 0 1.8
vcm inp 0 dc 0.9 ac 1
vref inn 0 dc 0.9
ib vdd tail 20u
xmt tail tail 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1
xm0 s tail 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1
xm1 x inn s 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5
xm2 {out} inp s 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5
xm3 x x vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=0.5
xm4 {out} x vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=0.5
"""

OTA5 = ("* five-transistor OTA, open loop, mirror load (our own)\n" + FIRST_STAGE.format(out="out")
        + "cl out 0 200f\n")

MILLER = ("* two-stage Miller OTA with a MIM compensation capacitor, open loop (our own)\n"
          + FIRST_STAGE.format(out="o1")
          + "xm5 out o1 vdd vdd sky130_fd_pr__pfet_01v8 w=20 l=0.5\n"
          + "xm6 out tail 0 0 sky130_fd_pr__nfet_01v8 w=10 l=1\n"
          + "xcc o1 out sky130_fd_pr__cap_mim_m3_1 w=10 l=10\n"
          + "cl out 0 500f\n")

CIRCUITS = {"common-source": (CS, ["g", "out"]), "five-transistor OTA": (OTA5, ["tail", "s", "x", "out"]),
            "two-stage Miller OTA": (MILLER, ["tail", "s", "x", "o1", "out"])}


def _f3db(freqs, mags) -> float:
    f, m = np.log(np.asarray(freqs)), 20.0 * np.log10(np.asarray(mags))
    target = m[0] - 20.0 * math.log10(math.sqrt(2.0))
    below = np.flatnonzero(m < target)
    assert below.size, "the sweep never falls 3 dB"
    k = int(below[0])
    t = (target - m[k - 1]) / (m[k] - m[k - 1])
    return float(math.exp(f[k - 1] + t * (f[k] - f[k - 1])))


@pytest.mark.parametrize("name", list(CIRCUITS))
def test_circuit_matches_the_reference_simulator(tmp_path, sky130_lib, name):
    template, nodes = CIRCUITS[name]
    text = template.format(lib=sky130_lib)
    path = tmp_path / "c.sp"
    path.write_text(text + ".end\n")
    ref = ngspice.run(text, [f"v({n})" for n in nodes])
    op = operating_point(read_netlist(str(path)))
    worst_v = max(abs(op.voltage(n) - ref[f"v({n})"]) for n in nodes)
    result = api.scan(str(path), probe="out")
    freqs, mags = ngspice.ac_magnitude(text, "out", 1e2, 1e11)
    theirs = _f3db(freqs, mags)
    ours = result.f3db_hz
    print(f"\n{name} against {ngspice.version()}: worst node error {worst_v * 1e6:.3f} uV; "
          f"-3 dB {ours:.4g} Hz against {theirs:.4g} Hz ({(ours / theirs - 1) * 100:+.2f} %)")
    assert worst_v < 1e-3
    assert ours == pytest.approx(theirs, rel=0.03)
