"""A device model written here, registered at run time, with no project file edited: a
two-terminal element with a cubic current law I = G1 V + G3 V^3 and a constant capacitance
C0, on a model card of its own type.  A circuit using it is biased and scanned.

References: the DC point is the root of the KCL equation found by scipy.optimize.brentq;
the scan's figures are the closed forms of one RC pole (R the source resistance in
parallel with the element's small-signal resistance 1 / (G1 + 3 G3 V^2)).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from tauscan import api
from tauscan.devices import registry
from tauscan.devices.base import CapacitanceMatrix, DeviceOP, SmallSignal
from tauscan.network import Triplets


class CubicGroup:
    """Every cubic element of a circuit, vectorized as the built-in groups are."""

    terminals = ("p", "n")

    def __init__(self, elements, circuit, net, temp_c, warnings):
        self.elements = elements
        cards = [circuit.models[e.model].params for e in elements]
        self.g1 = np.array([c.get("g1", 1e-3) for c in cards])
        self.g3 = np.array([c.get("g3", 0.0) for c in cards])
        self.c0 = np.array([c.get("c0", 0.0) for c in cards])
        self.models = [e.model for e in elements]
        self.nodes = np.array([[net.node(x) for x in e.nodes] for e in elements], dtype=np.int64)

    def series(self):
        return Triplets()

    def initial_state(self):
        return None

    def evaluate(self, x, state, limit):
        v = x[self.nodes]
        vd = v[:, 0] - v[:, 1]
        i = self.g1 * vd + self.g3 * vd**3
        g = self.g1 + 3 * self.g3 * vd**2
        jac = np.zeros((len(vd), 2, 2))
        jac[:, 0, 0] = jac[:, 1, 1] = g
        jac[:, 0, 1] = jac[:, 1, 0] = -g
        return np.stack([i, -i], axis=1), jac, v, None, False

    def report(self, x, net):
        v = x[self.nodes]
        vd = v[:, 0] - v[:, 1]
        out = []
        for k, e in enumerate(self.elements):
            p, n = (net.nodes[j] for j in self.nodes[k])
            out.append(DeviceOP(
                name=e.name, type="cubic", model=self.models[k], region="on", current=float(self.g1[k] * vd[k] + self.g3[k] * vd[k] ** 3),
                bias={"v": float(vd[k])}, values={"g": float(self.g1[k] + 3 * self.g3[k] * vd[k] ** 2)},
                caps={"c": float(self.c0[k])}, nodes={"p": p, "n": n}, file=e.file, line=e.line, family="cubic",
            ))
        return out


def cubic_stamps(dev):
    out = SmallSignal()
    out.conductances.append(("g", dev.nodes["p"], dev.nodes["n"], dev.values["g"]))
    if dev.caps.get("c"):  # one two-terminal part: its terminal matrix is C0 [[1, -1], [-1, 1]]
        out.capacitance = CapacitanceMatrix.from_pairs(("p", "n"), (dev.nodes["p"], dev.nodes["n"]),
                                                       [("c", 0, 1, dev.caps["c"])])
    return out


CUBIC = registry.DeviceModel(
    name="cubic", letter="d", model_types=frozenset({"cubic"}), levels=None, terminals=("p", "n"),
    quantities=frozenset({"g", "c"}), capacitances=frozenset({"c"}), regions=("on",), poor_regions=frozenset(),
    json_values=("g",), json_bias=("v",), json_caps=("c",), table_bias=("v",), output_conductance="g",
    group=CubicGroup, stamps=cubic_stamps,
)


@pytest.fixture
def cubic():
    registry.register(CUBIC)
    yield CUBIC
    registry.unregister(CUBIC)


NETLIST = """a cubic element behind a resistor
Vin in 0 dc 2 ac 1
R1 in a 1k
Dx a 0 cub1
Dj a 0 dj
.model cub1 cubic (g1=1m g3=2m c0=3p)
.model dj d (is=1e-30 cjo=0)
"""


def test_a_registered_model_is_biased_and_scanned(cubic, write):
    path = write(NETLIST)
    circuit = api.read(path)
    op = api.bias(circuit)
    # KCL at a: (2 - v)/1k = G1 v + G3 v^3 (the diode of IS = 1e-30 A carries nothing)
    v = brentq(lambda v: (2 - v) / 1e3 - (1e-3 * v + 2e-3 * v**3), 0.0, 2.0, xtol=1e-15)
    assert_allclose(op.voltage("a"), v, rtol=1e-6)
    dev = op.device("dx")
    assert dev.family == "cubic" and dev.region == "on"
    assert_allclose(dev.values["g"], 1e-3 + 6e-3 * v**2, rtol=1e-6)
    # both models of the letter D coexist: the built-in diode still evaluates its card
    assert op.device("dj").family == "diode"
    result = api.scan(path, probe="a")
    r = 1.0 / (1e-3 + dev.values["g"])
    cap = result.capacitor("dx:c")
    assert cap.klass == "grounded"
    assert_allclose(cap.ohms, r, rtol=1e-6)
    assert_allclose(result.sum_tau_s, r * 3e-12, rtol=1e-6)
    assert_allclose(result.f3db_hz, 1 / (2 * math.pi * r * 3e-12), rtol=1e-6)
    # the op JSON writes the model's own quantities
    record = next(d for d in op.to_json()["devices"] if d["name"] == "dx")
    assert record["g"] == dev.values["g"] and record["caps"] == {"c": 3e-12}


def test_without_the_registration_the_card_is_refused_with_its_location(write):
    from tauscan.errors import CircuitError

    path = write(NETLIST)
    with pytest.raises(CircuitError) as err:
        api.bias(api.read(path))
    assert err.value.line == 4 and "'cubic' model" in err.value.message
