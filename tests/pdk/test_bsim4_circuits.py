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


COUPLED = """* common-source stage with an AC-coupled input and a bypassed source resistor (our own)
.lib "{lib}" tt
vdd vdd 0 1.8
vsig sig 0 dc 0 ac 1
rsig sig in 1k
cin in g 1n
rb1 vdd g 100k
rb2 g 0 100k
xm1 d g s 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5 nf=2
rs s 0 2k
cs s 0 100p
rd vdd d 10k
cl d 0 100f
"""


def _edges(freqs, mags) -> tuple[float, float, float]:
    """(peak |H|, lower and upper frequencies where |H| crosses peak / sqrt 2), log-interpolated."""
    f, m = np.log(np.asarray(freqs)), np.asarray(mags)
    k = int(np.argmax(m))
    level = m[k] / math.sqrt(2.0)

    def cross(i, j):
        t = (level - m[i]) / (m[j] - m[i])
        return float(math.exp(f[i] + t * (f[j] - f[i])))

    lo = next(i for i in range(k, 0, -1) if m[i - 1] < level)
    hi = next(i for i in range(k, len(m) - 1) if m[i + 1] < level)
    return float(m[k]), cross(lo - 1, lo), cross(hi, hi + 1)


def test_coupled_stage_mid_band_matches_the_reference_simulator(tmp_path, sky130_lib):
    # the mid-band circuit (METHOD section 6) of a band-pass stage: its pass band edges, mid-band
    # gain and -3 dB point against the simulator's AC analysis; the transistor's own matrix
    # parts (some negative) stay what they are, only the coupling and bypass capacitors short
    text = COUPLED.format(lib=sky130_lib)
    path = tmp_path / "coupled.sp"
    path.write_text(text + ".end\n")
    result = api.scan(str(path), probe="d")
    band = result.band
    assert set(band.states) == {"cin", "cs"} and set(band.states.values()) == {"short"}
    freqs, mags = ngspice.ac_magnitude(text, "d", 1e2, 1e11)
    peak, f_low, f_high = _edges(freqs, mags)
    at_mid = float(np.interp(math.log(band.f_mid_hz), np.log(freqs), mags))
    print(f"\ncoupled stage against {ngspice.version()}: f_low {band.f_low_hz:.4g} / {f_low:.4g} Hz, "
          f"f_high {band.f_high_hz:.4g} / {f_high:.4g} Hz, -3 dB {result.f3db_hz:.4g} Hz, "
          f"mid-band gain {abs(result.dc_gain):.4g} / {at_mid:.4g}")
    assert band.f_low_hz == pytest.approx(f_low, rel=0.03)
    assert band.f_high_hz == pytest.approx(f_high, rel=0.03)
    assert result.f3db_hz == pytest.approx(f_high, rel=0.03)
    # tauscan's mid-band gain is that of the mid-band circuit (the shorts exact); the simulator's
    # |H(f_mid)| is lowered by both band edges, by about (f_mid/f_high)^2/2 + (f_low/f_mid)^2/2
    edges = 0.5 * (band.f_mid_hz / f_high) ** 2 + 0.5 * (f_low / band.f_mid_hz) ** 2
    assert abs(result.dc_gain) * (1 - edges) == pytest.approx(at_mid, rel=0.005)
