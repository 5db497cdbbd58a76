"""A device whose capacitances are a non-symmetric terminal matrix (as charge-based models
give), registered here with no project file edited: the whole matrix is stamped, and the
report splits it into two-terminal parts and one ``ctrans`` entry so that every sum holds.

The toy device is linear (id = gm vgs + gds vds) with a constant 4 x 4 matrix over
(d, g, s, b) whose rows and columns sum to zero.  References, all computed here with numpy
and scipy from nodal equations written by hand (not from tauscan's matrices):
- the first-order sum trace(G^-1 C) (Thornton et al. 1965; Gray, Hurst, Lewis, Meyer ch. 7);
- the device's entries add up to trace(Z_T C_T), its ``ctrans`` to trace(Z_T A) with
  A = (C_T - C_T^T)/2 (the split is exact by construction);
- the poles, by scipy.linalg.eigvals of the pencil (-G, C);
- the first moment of the transfer -H'(0)/H(0) = e^T G^-1 C G^-1 b / e^T G^-1 b (Elmore
  1948; Hajimiri 2010: the transfer time constants add up to it);
- the -3 dB frequency, by scipy.optimize.brentq on |H(j w)| from numpy solves.
"""

import math

import numpy as np
import pytest
import scipy.linalg
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from tauscan import api
from tauscan.analysis import AnalysisSettings
from tauscan.devices import registry
from tauscan.devices import stamps as stamp_helpers
from tauscan.devices.base import DeviceOP, SmallSignal
from tauscan.network import GMIN, Triplets

TERMINALS = ("d", "g", "s", "b")
PAIRS = {"cgd": ("g", "d"), "cgs": ("g", "s"), "cgb": ("g", "b"), "cdb": ("d", "b"), "csb": ("s", "b"), "cds": ("d", "s")}
#: the symmetric part's pair capacitances (F), invented for this test
PAIR_F = {"cgd": 3e-15, "cgs": 10e-15, "cgb": 1e-15, "cdb": 4e-15, "csb": 5e-15, "cds": 0.5e-15}
GM, GDS = 1e-3, 10e-6


def _matrix(non_reciprocal: float) -> np.ndarray:
    """Symmetric part from the pairs plus ``non_reciprocal`` times a fixed antisymmetric
    matrix with zero row and column sums (P K P, P the projector off the all-ones vector)."""
    m = np.zeros((4, 4))
    for part, (ta, tb) in PAIRS.items():
        i, j = TERMINALS.index(ta), TERMINALS.index(tb)
        c = PAIR_F[part]
        m[i, i] += c
        m[j, j] += c
        m[i, j] -= c
        m[j, i] -= c
    k = np.array([[0, 1.0, -0.5, 0.2], [-1.0, 0, 0.7, -0.3], [0.5, -0.7, 0, 0.4], [-0.2, 0.3, -0.4, 0]])
    p = np.eye(4) - np.ones((4, 4)) / 4
    return m + non_reciprocal * 1e-15 * (p @ k @ p)


class LinearGroup:
    terminals = TERMINALS

    def __init__(self, elements, circuit, net, temp_c, warnings):
        self.elements = elements
        self.cards = [circuit.models[e.model] for e in elements]
        self.nodes = np.array([[net.node(x) for x in e.nodes] for e in elements], dtype=np.int64)

    def series(self):
        return Triplets()

    def initial_state(self):
        return None

    def evaluate(self, x, state, limit):
        v = x[self.nodes]
        vgs, vds = v[:, 1] - v[:, 2], v[:, 0] - v[:, 2]
        i = GM * vgs + GDS * vds
        n = len(self.elements)
        cur = np.zeros((n, 4))
        cur[:, 0], cur[:, 2] = i, -i
        jac = np.zeros((n, 4, 4))
        for sign, row in ((1.0, 0), (-1.0, 2)):
            jac[:, row, 1] += sign * GM
            jac[:, row, 0] += sign * GDS
            jac[:, row, 2] -= sign * (GM + GDS)
        return cur, jac, v, None, False

    def report(self, x, net):
        out = []
        for k, e in enumerate(self.elements):
            names = dict(zip(TERMINALS, (net.nodes[j] for j in self.nodes[k])))
            c = _matrix(self.cards[k].params.get("nr", 0.0))
            out.append(DeviceOP(
                name=e.name, type="linear", model=self.cards[k].name, region="on", current=0.0, bias={},
                values={"gm": GM, "gds": GDS}, caps={}, nodes=names, file=e.file, line=e.line,
                family="linear4", cmatrix=(TERMINALS, c)))
        return out


def linear_stamps(dev):
    out = SmallSignal()
    n = dev.nodes
    out.conductances.append(("gds", n["d"], n["s"], dev.values["gds"]))
    out.vccs.append(("gm", n["d"], n["s"], n["g"], n["s"], dev.values["gm"]))
    stamp_helpers.capacitors(dev, out, PAIRS)
    return out


LINEAR4 = registry.DeviceModel(
    name="linear4", letter="m", model_types=frozenset({"nmos"}), levels=frozenset({77}), terminals=TERMINALS,
    quantities=frozenset({"gm", "gds"}), capacitances=frozenset(PAIRS), regions=("on",), poor_regions=frozenset(),
    json_values=("gm", "gds"), json_bias=(), json_caps=tuple(PAIRS), table_bias=(), output_conductance="gds",
    group=LinearGroup, stamps=linear_stamps,
)

RS, RD, RSRC, RB, CL = 10e3, 20e3, 1e3, 5e3, 50e-15
NETLIST = f"""a linear device with a non-reciprocal capacitance matrix
Vin in 0 dc 0 ac 1
Rs in g {RS}
M1 d g s b tq
Rd d 0 {RD}
Rsrc s 0 {RSRC}
Rb b 0 {RB}
CL d 0 {CL}
.model tq nmos (level=77 nr={{nr}})
.param nr=1
"""


@pytest.fixture
def linear4():
    registry.register(LINEAR4)
    yield LINEAR4
    registry.unregister(LINEAR4)


def _hand_system(non_reciprocal: float):
    """G, C (rows g, d, s, b) and the drive b, from the nodal equations of NETLIST."""
    g_, d, s, b = range(4)
    G = np.diag([1 / RS, 1 / RD, 1 / RSRC, 1 / RB]) + GMIN * np.eye(4)
    for sign, row in ((1.0, d), (-1.0, s)):  # id = gm (vg - vs) + gds (vd - vs) leaves d, enters s
        G[row, g_] += sign * GM
        G[row, d] += sign * GDS
        G[row, s] -= sign * (GM + GDS)
    ct = _matrix(non_reciprocal)
    order = [TERMINALS.index(t) for t in ("g", "d", "s", "b")]
    C = ct[np.ix_(order, order)].copy()
    C[d, d] += CL
    drive = np.array([1 / RS, 0, 0, 0])
    return G, C, drive, ct[np.ix_(order, order)]


@pytest.mark.parametrize("nr", [1.0, 2.5])
def test_a_non_reciprocal_matrix_is_stamped_whole_and_split_exactly(linear4, write, nr):
    path = write(NETLIST)
    result = api.scan(path, probe="d", source="vin", params={"nr": nr}, settings=AnalysisSettings())
    G, C, drive, ct = _hand_system(nr)
    Z = np.linalg.inv(G)
    # the first-order sum, every entry included
    assert_allclose(result.sum_tau_s, np.trace(Z @ C), rtol=1e-9)
    device = [c for c in result.capacitors if c.device == "m1"]
    names = {c.name for c in device}
    assert "m1:ctrans" in names and {"m1:cgd", "m1:cgs", "m1:cgb", "m1:cdb", "m1:csb", "m1:cds"} <= names
    assert_allclose(sum(c.tau_s for c in device), np.trace(Z @ ct), rtol=1e-9)
    anti = 0.5 * (ct - ct.T)
    trans = result.capacitor("m1:ctrans")
    assert trans.klass == "ctrans" and trans.gain is None
    assert_allclose(trans.tau_s, np.trace(Z @ anti), rtol=1e-9)
    assert_allclose(trans.farads, np.abs(anti).max(), rtol=1e-12)
    # each two-terminal part is the symmetric part's c_ij = -S_ij
    sym = 0.5 * (ct + ct.T)
    rows = ("g", "d", "s", "b")
    for part, (ta, tb) in PAIRS.items():
        assert_allclose(result.capacitor(f"m1:{part}").farads, -sym[rows.index(ta), rows.index(tb)], rtol=1e-12)
    # node parts add up to the same total
    assert_allclose(sum(n.tau_s for n in result.nodes), result.sum_tau_s, rtol=1e-9)
    # poles of the pencil
    expected = np.sort_complex(scipy.linalg.eigvals(-G, C))
    assert_allclose(np.sort_complex(np.array(result.poles)), expected, rtol=1e-6)
    # pole shares of the dominant pole add up to 1 with the ctrans entry in
    shares = [c.pole_share for c in result.capacitors if c.pole_share is not None]
    assert len(shares) == len(result.capacitors)
    assert_allclose(sum(shares), 1.0, rtol=1e-9)
    # the transfer's first moment, and its split by entries and by nodes
    e = np.array([0, 1.0, 0, 0])
    h0 = e @ Z @ drive
    moment = e @ Z @ C @ Z @ drive / h0
    assert_allclose(result.sum_transfer_tau_s, moment, rtol=1e-9)
    assert_allclose(sum(c.transfer_tau_s for c in result.capacitors), moment, rtol=1e-9)
    assert_allclose(sum(n.transfer_tau_s for n in result.nodes), moment, rtol=1e-9)
    # the -3 dB point of H(j w) = e^T (G + j w C)^-1 b
    def mag(f):
        return abs(e @ np.linalg.solve(G + 2j * math.pi * f * C, drive)) - abs(h0) / math.sqrt(2)
    f3 = brentq(mag, 1.0, 1e13, xtol=1e-6, rtol=1e-12)
    assert_allclose(result.f3db_hz, f3, rtol=1e-4)


def test_a_symmetric_matrix_has_no_ctrans_entry(linear4, write):
    path = write(NETLIST)
    result = api.scan(path, probe="d", source="vin", params={"nr": 0.0})
    assert not any(c.name.endswith(":ctrans") for c in result.capacitors)
    G, C, _, _ = _hand_system(0.0)
    assert_allclose(result.sum_tau_s, np.trace(np.linalg.inv(G) @ C), rtol=1e-9)


def test_the_mid_band_circuit_keeps_the_non_reciprocal_part(linear4, write):
    """With a coupling capacitor in front (shorted in the mid-band circuit), the figures are
    those of the hand system with it shorted and
    the bias resistor in: the ctrans entry is projected with the rest of C."""
    rbias = 1e6
    text = NETLIST.replace(f"Rs in g {RS}", f"Cc in x 1u\nRs x g {RS}\nRbias g 0 {rbias}")
    result = api.scan(write(text), probe="d", source="vin", params={"nr": 1.0})
    assert result.band.states.get("cc") == "short"
    G, C, drive, ct = _hand_system(1.0)
    G[0, 0] += 1 / rbias
    Z = np.linalg.inv(G)
    assert_allclose(result.sum_tau_s, np.trace(Z @ C), rtol=1e-9)
    assert_allclose(result.capacitor("m1:ctrans").tau_s, np.trace(Z @ (0.5 * (ct - ct.T))), rtol=1e-9)
    e = np.array([0, 1.0, 0, 0])
    moment = e @ Z @ C @ Z @ drive / (e @ Z @ drive)
    assert_allclose(result.sum_transfer_tau_s, moment, rtol=1e-9)
    assert_allclose(sum(c.transfer_tau_s for c in result.capacitors), moment, rtol=1e-9)


@pytest.mark.parametrize("command,fmt", [("scan", "table"), ("scan", "json"), ("scan", "csv"), ("scan", "markdown"),
                                         ("check", "table"), ("check", "sarif"), ("check", "json")])
def test_every_report_shows_the_ctrans_entry(linear4, write, command, fmt):
    from tauscan.pipeline import ScanRequest, scan
    from tauscan.report.formats import render

    run = scan(ScanRequest(write(NETLIST), probe="d", source="vin"))
    text = render(command, fmt, [run], top=None, exit_code=0)
    if command == "scan" or fmt == "json":  # (the check table and SARIF list findings, not parts)
        assert "m1:ctrans" in text
    if fmt == "json":
        import json

        caps = json.loads(text)
        caps = caps["runs"][0]["capacitors"] if "runs" in caps else caps["capacitors"]
        entry = next(c for c in caps if c["name"] == "m1:ctrans")
        assert entry["class"] == "ctrans" and entry["gain"] is None
