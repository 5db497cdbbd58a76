"""The reference simulator's harness, checked before anything is compared with it: a linear
circuit against its closed form, and a SKY130 transistor's gm against the simulator's own
currents (a central difference of two more operating points)."""

from __future__ import annotations

import pytest

from tauscan.op import operating_point
from tauscan.reader import read_netlist
from tests.reference import ngspice

DIVIDER = "* divider (our own)\nv1 in 0 1.8\nr1 in mid 1k\nr2 mid 0 2k\nr3 mid out 500\nr4 out 0 1.5k\n"


def test_linear_circuit_against_the_closed_form_and_tauscan(write):
    values = ngspice.run(DIVIDER, ["v(mid)", "v(out)"])
    # by hand: r3 + r4 = 2k in parallel with r2 = 1k; v(mid) = 1.8 * 1k / 2k = 0.9; v(out) = 0.9 * 1.5/2
    assert values["v(mid)"] == pytest.approx(0.9, rel=1e-9)
    assert values["v(out)"] == pytest.approx(0.675, rel=1e-9)
    op = operating_point(read_netlist(write(DIVIDER)))
    assert op.voltage("mid") == pytest.approx(values["v(mid)"], rel=1e-9)
    print(f"reference simulator: {ngspice.version()}")


DEVICE = """* one SKY130 nfet (our own bias)
.lib "{lib}" tt
vd d 0 1.2
vg g 0 {vg}
xm1 d g 0 0 sky130_fd_pr__nfet_01v8 w=1 l=0.15 nf=1 nrd=0 nrs=0
"""
VEC = "@m.xm1.msky130_fd_pr__nfet_01v8"


def test_sky130_device_vectors_are_read_consistently(sky130_lib):
    # the harness reads the device's vectors under the name the wrapper gives it; without
    # source and drain resistance (nrs=nrd=0) the model's gm is the terminal transconductance
    at = ngspice.run(DEVICE.format(lib=sky130_lib, vg=0.9), [f"{VEC}[id]", f"{VEC}[gm]", f"{VEC}[gds]"])
    h = 0.005
    up = ngspice.run(DEVICE.format(lib=sky130_lib, vg=0.9 + h), [f"{VEC}[id]"])[f"{VEC}[id]"]
    down = ngspice.run(DEVICE.format(lib=sky130_lib, vg=0.9 - h), [f"{VEC}[id]"])[f"{VEC}[id]"]
    ids, gm = at[f"{VEC}[id]"], at[f"{VEC}[gm]"]
    assert 1e-6 < ids < 1e-3 and at[f"{VEC}[gds]"] > 0
    assert gm == pytest.approx((up - down) / (2 * h), rel=0.02)
