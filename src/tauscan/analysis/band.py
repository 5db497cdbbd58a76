"""The pass band of the source-to-probe transfer and the state of every capacitor and
inductor in it (short or open): the mid-band circuit.

1. The exact transfer H(j 2 pi f) of the circuit as read is swept upward from well below
   its slowest time constant until it has fallen far below its peak and rolls off steadily
   (a notch, such as an undamped testbench resonance, is swept past); the pass band is the
   contiguous range around the peak where |H| >= peak / sqrt 2, its edges f_low (0 when it
   reaches DC) and f_high, refined on the exact transfer; f_mid is their geometric mean.
2. Each capacitor and inductor gets a state at f_mid from its own corner with the
   resistance it sees in the mid-band circuit: a capacitor whose corner 1/(2 pi R C) is
   below f_mid is a short, an inductor whose corner R/(2 pi L) is below f_mid is open
   (the zero-value and short-circuit time-constant views of Gray, Hurst, Lewis and Meyer
   2009, ch. 7; Sedra and Smith, frequency-response chapter).  The states are iterated from
   the DC ones (capacitors open, inductors shorted) until none changes.
3. Low band: each shorted capacitor's short-circuit time constant R_sc C (R_sc seen with
   itself open, the other low-band capacitors shorted, the high-band ones open), and the
   low-corner estimate f_low_est = sum 1/(2 pi R_sc C) beside the exact f_low.
"""

from __future__ import annotations

import fnmatch
import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp

from tauscan.analysis.midband import MidBandNetwork
from tauscan.analysis.probe import Probe, candidate_rows
from tauscan.analysis.response import F3DB_MAX_HZ, Response, _refine, _refine_sloped
from tauscan.analysis.systems import Factors
from tauscan.analysis.zentries import by_columns
from tauscan.errors import CircuitError, SettingsError
from tauscan.factorization import factor
from tauscan.units import eng

#: Up to this many unknowns each sweep point is a dense solve, above it a sparse factorization.
SWEEP_DENSE = 300
#: Step of the sweep: six points a decade when points are cheap, a factor of four when
#: each one is a sparse complex factorization (the edges are refined afterwards).
DENSE_RATIO = 10 ** (1 / 6)
SPARSE_RATIO = 4.0
#: The sweep starts this far below the open-circuit estimate of the circuit as read (the
#: sum of time constants bounds the slowest pole: |p_min| >= 1 / b1 for real poles).
START_BELOW = 30.0
#: The sweep may stop once the transfer is this far below the -3 dB level (see :class:`_Tail`).
STOP_BELOW = 10.0
#: A transfer flat this many decades far below its peak has reached a feed-through floor.
FLOOR_DECADES = 3.0
#: Lowest frequency the sweep goes down to looking for a lower edge.
F_FLOOR_HZ = 1e-21
#: Rounds of the state iteration before it is given up with a warning.
MAX_ROUNDS = 8
#: f_high / f_low below this: the bands are not separated (common practice: a decade).
SEPARATION = 10.0
#: An element whose corner lies inside the pass band by more than this factor from both
#: edges shapes it (a corner at an edge is what makes the edge).
EDGE_MARGIN = 2.0


@dataclass(frozen=True)
class BandRequest:
    """How the mid-band circuit is chosen: ``mode`` "auto" (from the pass band), "dc" (the
    DC circuit) or "fixed" (at ``f_fixed_hz``); ``short`` / ``open``: name globs pinned."""

    mode: str = "auto"
    f_fixed_hz: float | None = None
    short: tuple[str, ...] = ()
    open: tuple[str, ...] = ()


@dataclass(frozen=True)
class LowBandElement:
    """A capacitor shorted (or an inductor opened) at mid-band, with its low-band time constant."""

    name: str
    kind: str  # "c" or "l"
    value: float
    ohms: float
    tau_s: float
    file: str
    line: int

    def to_json(self) -> dict:
        tau = self.tau_s if math.isfinite(self.tau_s) else None
        return {"name": self.name, "kind": "capacitor" if self.kind == "c" else "inductor",
                "value": self.value, "ohms": self.ohms if math.isfinite(self.ohms) else None,
                "tau_s": tau, "corner_hz": 1 / (2 * math.pi * tau) if tau else None,
                "file": self.file, "line": self.line}


@dataclass
class Band:
    """The mid-band circuit chosen: mode, pass band and the states that differ from DC."""

    mode: str  # "auto", "dc" or "fixed"
    f_mid_hz: float | None = None
    f_low_hz: float | None = None
    f_high_hz: float | None = None
    f_low_estimate_hz: float | None = None
    #: element -> "short" | "open", for every capacitor and inductor whose state differs from DC
    states: dict[str, str] = field(default_factory=dict)
    #: element -> why its state was changed
    reasons: dict[str, str] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    low_band: list[LowBandElement] = field(default_factory=list)
    #: what circuit was analysed, in words
    note: str = ""

    def to_json(self) -> dict:
        def fin(x):
            return x if x is not None and math.isfinite(x) else None

        return {"mode": self.mode, "f_mid_hz": fin(self.f_mid_hz), "f_low_hz": fin(self.f_low_hz),
                "f_high_hz": fin(self.f_high_hz), "f_low_estimate_hz": fin(self.f_low_estimate_hz),
                "states": dict(self.states), "reasons": dict(self.reasons), "warnings": list(self.warnings),
                "low_band": [e.to_json() for e in self.low_band], "note": self.note}


# -- the sweep -----------------------------------------------------------------------------
class Sweep:
    """Every unknown of (G + sC) x = b at the frequencies asked for (None where singular)."""

    def __init__(self, factors: Factors, b: np.ndarray) -> None:
        self.factors = factors
        self.b = np.asarray(b, dtype=complex)
        self.dense = factors.g.shape[0] <= SWEEP_DENSE
        if self.dense:
            self._g, self._c = factors.g.toarray(), factors.c.toarray()

    def dc(self) -> np.ndarray:
        lu = self.factors.lu
        return lu.solve(self.b.real) + (1j * lu.solve(self.b.imag) if np.any(self.b.imag) else 0.0)

    def __call__(self, f: float) -> np.ndarray | None:
        if f == 0:
            return self.dc()
        s = 2j * math.pi * f
        try:
            if self.dense:
                x = _equilibrated_solve(self._g + s * self._c, self.b)
            else:
                solver = self.factors.complex
                x = solver.solve(solver.factor(s), self.b)
        except (np.linalg.LinAlgError, RuntimeError, la.LinAlgWarning):
            return None
        return x if np.all(np.isfinite(x)) else None


def _equilibrated_solve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve a x = b with rows, then columns, scaled to unit largest entries: a testbench
    puts terahenries and terafarads beside femtofarads, and the unscaled matrix looks
    singular to LAPACK's condition estimate while the scaled one is well posed."""
    with np.errstate(divide="ignore"):
        r = 1.0 / np.abs(a).max(axis=1)
    r[~np.isfinite(r)] = 1.0
    a1 = a * r[:, None]
    with np.errstate(divide="ignore"):
        c = 1.0 / np.abs(a1).max(axis=0)
    c[~np.isfinite(c)] = 1.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", la.LinAlgWarning)
        y = la.solve(a1 * c[None, :], r * b, check_finite=False)
    return c * y


class _Tail:
    """When the sweep may stop: the transfer lies far below its peak and rolls off steadily
    (the same slope, at least half a decade per decade, over the last three points), or it
    has stayed flat far below the peak for FLOOR_DECADES (a feed-through floor).  A notch
    (an undamped resonance of a testbench's LC, a zero) falls fast and then rises again:
    its slope changes from point to point, and the sweep goes on past it."""

    def __init__(self) -> None:
        self.points: list[tuple[float, float]] = []  # (log10 f, log10 |H|) far below the peak
        self.steady = 0

    def done(self, f: float, env: float, peak: float) -> bool:
        if f <= 0 or env >= peak / (math.sqrt(2) * STOP_BELOW):
            self.points.clear()
            self.steady = 0
            return False
        self.points.append((math.log10(f), math.log10(max(env, 1e-300))))
        if len(self.points) >= 3:
            (f0, m0), (f1, m1), (f2, m2) = self.points[-3:]
            s1, s2 = (m1 - m0) / (f1 - f0), (m2 - m1) / (f2 - f1)
            if s1 < -0.5 and s2 < -0.5 and abs(s2 - s1) < 0.2 * max(abs(s1), abs(s2)):
                self.steady += 1
            else:
                self.steady = 0
            if self.steady >= 2 or env == 0.0:
                return True
            flat = [m for fk, m in self.points if fk >= f2 - FLOOR_DECADES]
            if self.points[0][0] <= f2 - FLOOR_DECADES and max(flat) - min(flat) < 0.1:
                return True
        return False


@dataclass
class Passband:
    """The pass band of the transfer to the probe, on the circuit as read."""

    probe: Probe
    f_low: float  # 0: reaches DC
    f_high: float | None  # None: still in band at the top of the sweep
    peak: float
    #: H at the probe at every frequency solved (reused by the -3 dB search)
    known: dict[float, complex]
    top_hz: float
    #: whether each point was a sparse factorization (then worth reusing)
    sparse: bool = False

    @property
    def f_mid(self) -> float:
        if self.f_low <= 0:
            return 0.0
        return math.sqrt(self.f_low * (self.f_high if self.f_high else self.top_hz))


def passband(ss, factors: Factors, b: np.ndarray, probe: Probe | None, start_hz: float,
             top_hz: float) -> Passband | None:
    """Sweep the transfer, choose the probe when none is given (the candidate node with the
    highest peak), and find the pass band's edges.  None when nothing responds."""
    sweep = Sweep(factors, b)
    ratio = DENSE_RATIO if sweep.dense else SPARSE_RATIO
    cand = candidate_rows(ss)
    freqs: list[float] = []
    values: list[np.ndarray] = []  # the probe's value, or every candidate's, per point

    def watch(x: np.ndarray) -> np.ndarray:
        return np.atleast_1d(probe.of(x)) if probe is not None else x[: ss.n_nodes][cand]

    # the candidates' values are kept in single precision on a large circuit (memory)
    kind = np.complex64 if probe is None and not sweep.dense else complex
    x0 = sweep(0.0)
    if x0 is not None:
        freqs.append(0.0)
        values.append(watch(x0).astype(kind))
    peak = float(np.abs(values[0]).max(initial=0.0)) if values else 0.0
    f = start_hz
    tail = _Tail()
    last = None
    while f <= top_hz:
        x = sweep(f)
        step = ratio
        if x is not None:
            v = watch(x)
            freqs.append(f)
            values.append(v.astype(kind))
            env = float(np.abs(v).max(initial=0.0))
            peak = max(peak, env)
            if tail.done(f, env, peak):
                break
            # across a flat stretch (within 1 % over a step) of a large circuit, stride
            # further: each point is a factorization, and the edges are refined afterwards
            if not sweep.dense and last is not None and last > 0 and abs(math.log(max(env, 1e-300) / last)) < 0.01:
                step = ratio ** 2
            last = env
        f *= step
    if not freqs or peak == 0:
        return None
    block = np.array(values)  # points x watched
    if probe is None:
        mags = np.abs(block).max(axis=0)
        rows = np.flatnonzero(cand)
        col = int(np.argmax(mags))
        row = int(rows[col])
        probe = Probe(ss.network.nodes[row + 1], row)
        h = block[:, col].astype(complex)
    else:
        h = block[:, 0]
    mag = np.abs(h)
    resp = Response(factors, b, probe)
    resp.known.update({fk: complex(hk) for fk, hk in zip(freqs, h)})
    kp = int(np.argmax(mag))
    top = float(mag[kp])
    # (a maximum within 1e-6 of its neighbours is a flat band, not a peak: refining it would
    # cost a factorization for nothing, and nudge the level off |H(0)|/sqrt(2))
    if 0 < kp < len(freqs) - 1 and freqs[kp - 1] > 0 and top - min(mag[kp - 1], mag[kp + 1]) > 1e-6 * top:
        top = max(top, _peak(resp, freqs[kp - 1: kp + 2], mag[kp - 1: kp + 2], 6 if resp.dense else 1))
    level = top / math.sqrt(2)
    refine = _refine if resp.dense else _refine_sloped
    f_high = None
    for k in range(kp + 1, len(freqs)):
        if mag[k] < level:
            lo, v_lo, hi, v_hi = freqs[k - 1], float(mag[k - 1]), freqs[k], float(mag[k])
            if lo == 0:  # already below the level at the first swept point: step down to the edge
                lo = hi / ratio
                v_lo = abs(resp(lo))
                while v_lo < level and lo > F_FLOOR_HZ:
                    hi, v_hi = lo, v_lo
                    lo /= ratio
                    v_lo = abs(resp(lo))
                if v_lo < level:
                    break
            f_high = refine(resp, level, lo, hi, v_lo, v_hi)
            break
    f_low = 0.0
    for k in range(kp - 1, -1, -1):
        if mag[k] < level:
            lo, v_lo = freqs[k], float(mag[k])
            hi, v_hi = freqs[k + 1], float(mag[k + 1])
            if lo == 0:  # below the first swept point: step down to the edge
                lo = hi / ratio
                v_lo = abs(resp(lo))
                while v_lo >= level and lo > F_FLOOR_HZ:
                    hi, v_hi = lo, v_lo
                    lo /= ratio
                    v_lo = abs(resp(lo))
                if v_lo >= level:
                    break
            f_low = (_refine(resp, level, lo, hi, v_lo, v_hi) if resp.dense
                     else _refine_sloped(resp, level, hi, lo, v_hi, v_lo)) or hi
            break
    return Passband(probe, f_low, f_high, top, dict(resp.known), freqs[-1], not sweep.dense)


def _peak(resp: Response, f3, m3, rounds: int) -> float:
    """The maximum of |H| near an interior sweep maximum (three points around it): the vertex
    of the parabola through log|H| against log f, evaluated on the exact transfer and
    re-fitted ``rounds`` times.  The -3 dB level is taken from the true peak, not the grid's
    (six points a decade miss a broad peak by a few tenths of a per cent)."""
    xs = [math.log(f) for f in f3]
    ys = [math.log(max(m, 1e-300)) for m in m3]
    best = max(m3)
    for _ in range(rounds):
        (x0, x1, x2), (y0, y1, y2) = xs, ys
        den = (x0 - x1) * (x0 - x2) * (x1 - x2)
        a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den if den else 0.0
        if a >= 0:
            break
        b = (x2 * x2 * (y0 - y1) + x1 * x1 * (y2 - y0) + x0 * x0 * (y1 - y2)) / den
        xv = min(max(-b / (2 * a), x0), x2)
        if min(abs(xv - x0), abs(xv - x1), abs(xv - x2)) < 1e-9:
            break
        mv = abs(resp(math.exp(xv)))
        if not math.isfinite(mv):
            break
        best = max(best, mv)
        # keep the three points around the highest one
        pts = sorted(zip(xs + [xv], ys + [math.log(max(mv, 1e-300))]))
        k = max(range(len(pts)), key=lambda i: pts[i][1])
        k = min(max(k, 1), len(pts) - 2)
        (xs, ys) = map(list, zip(*pts[k - 1: k + 2]))
    return best


# -- states ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Reactive:
    """A capacitor or inductor that may change state."""

    name: str
    kind: str  # "c" or "l"
    value: float
    a: str
    b: str
    file: str
    line: int


def reactives(ss) -> list[Reactive]:
    """Every capacitor record and every inductor of the base network, netlist order."""
    out = [Reactive(r.name, "c", r.farads, r.a, r.b, r.file, r.line) for r in ss.capacitors if r.farads]
    out += [Reactive(e.name, "l", float(e.value), e.nodes[0], e.nodes[1], e.file, e.line) for e in ss.inductors()]
    return out


def pinned_states(elements: list[Reactive], request: BandRequest) -> dict[str, str]:
    """Element -> state pinned by the ``short`` / ``open`` globs; a glob that matches no
    capacitor or inductor is an error (a stale pin must not pass unseen)."""
    names = [e.name for e in elements]
    pins: dict[str, str] = {}
    for state, globs in (("short", request.short), ("open", request.open)):
        for glob in globs:
            hits = fnmatch.filter(names, glob.lower())
            if not hits:
                raise SettingsError(f"--{state} {glob!r} matches no capacitor or inductor of the circuit")
            for name in hits:
                if pins.get(name, state) != state:
                    raise SettingsError(f"{name} is pinned both short and open")
                pins[name] = state
    return pins


def corner_hz(e: Reactive, ohms: float) -> float:
    """1/(2 pi R C) for a capacitor, R/(2 pi L) for an inductor (R and C taken as their
    magnitudes: a negative part of a charge-based device's split matrix has a corner where its
    magnitude puts it, not a negative one that would always read as below f_mid)."""
    r = abs(ohms)
    if e.kind == "c":
        if not math.isfinite(r):
            return 0.0
        return math.inf if r == 0 else 1.0 / (2 * math.pi * r * abs(e.value))
    if not math.isfinite(r):
        return math.inf
    return r / (2 * math.pi * abs(e.value))


def choose_states(ss, elements: list[Reactive], ohms: dict[str, float], f_mid: float,
                  pins: dict[str, str]) -> tuple[frozenset[str], frozenset[str]]:
    """The shorted capacitors and opened inductors at ``f_mid`` from each element's corner
    (the resistance it sees in the present mid-band circuit).  Shorts are taken from the
    lowest corner up, and a capacitor whose ends are already joined (by a voltage source, an
    inductor left shorted, or an earlier short) stays open: it would close a loop of shorts."""
    opened = {e.name for e in elements if e.kind == "l"
              and (pins.get(e.name) == "open" or (e.name not in pins and e.name in ohms
                                                  and corner_hz(e, ohms[e.name]) < f_mid))}
    index = ss.network.index
    parent = list(range(ss.network.n_nodes))

    def find(a: int) -> int:
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    def join(a: int, b: int) -> bool:
        a, b = find(a), find(b)
        if a == b:
            return False
        parent[max(a, b)] = min(a, b)
        return True

    for e in ss.circuit.general:
        if e.kind in "veh" or (e.kind == "l" and e.name not in opened):
            join(index[e.nodes[0]], index[e.nodes[1]])
    wanted = []
    for e in elements:
        if e.kind != "c":
            continue
        pin = pins.get(e.name)
        if pin == "short":
            wanted.append((-1.0, e))
        elif pin is None and e.name in ohms:
            fc = corner_hz(e, ohms[e.name])
            if fc < f_mid:
                wanted.append((fc, e))
    wanted.sort(key=lambda item: (item[0], item[1].name))
    shorted = {e.name for _fc, e in wanted if join(index[e.a], index[e.b])}
    return frozenset(shorted), frozenset(opened)


def short_circuit_ohms(ss, shorted: list[Reactive], opened: frozenset[str]) -> dict[str, float]:
    """The resistance each shorted capacitor sees with itself open and the other states kept:
    the base G with every other short as a zero-volt branch and the opened inductors' branch
    currents held at zero, R = -1 / (G^-1)[j, j] at the capacitor's branch j."""
    if not shorted:
        return {}
    g = ss.g.tocsr().astype(float)
    n = g.shape[0]
    branch_of = ss.network.branch_of
    drop = [branch_of[name] - 1 for name in opened if name in branch_of]
    if drop:
        keep = np.ones(n)
        keep[drop] = 0.0
        mask = sp.diags(keep)
        g = (mask @ g @ mask + sp.diags(1.0 - keep)).tocsr()
    rows, cols, vals = [], [], []
    for k, e in enumerate(shorted):
        j = n + k
        for node, sign in ((e.a, 1.0), (e.b, -1.0)):
            r = ss.row(node)
            if r >= 0:
                rows += [r, j]
                cols += [j, r]
                vals += [sign, sign]
    m = len(shorted)
    extra = sp.csr_matrix((vals, (rows, cols)), shape=(n + m, n + m))
    aux = (sp.block_diag([g, sp.csr_matrix((m, m))]) + extra).tocsc()
    try:
        lu = factor(aux)
    except RuntimeError:
        raise CircuitError("the mid-band shorts close a loop with a voltage source or inductor "
                           f"({', '.join(e.name for e in shorted[:4])}); pin one of them open (--open)") from None
    branch = np.arange(n, n + m, dtype=np.int64)
    diag = by_columns(aux, branch, branch, lu)
    with np.errstate(divide="ignore"):
        return {e.name: float(-1.0 / d) if d != 0 else math.inf for e, d in zip(shorted, diag)}


def open_inductor_ohms(mid, opened: list[Reactive], lu) -> dict[str, float]:
    """The resistance across each opened inductor in the mid-band circuit (Z_aa + Z_bb -
    Z_ab - Z_ba of its ends)."""
    if not opened:
        return {}
    a = np.array([mid.row(e.a) if e.a not in mid.ac_ground else -1 for e in opened], dtype=np.int64)
    b = np.array([mid.row(e.b) if e.b not in mid.ac_ground else -1 for e in opened], dtype=np.int64)
    z = by_columns(mid.g, np.concatenate([a, b, a, b]), np.concatenate([a, b, b, a]), lu)
    m = len(opened)
    r = z[:m] + z[m : 2 * m] - z[2 * m : 3 * m] - z[3 * m :]
    return {e.name: float(x) for e, x in zip(opened, r)}


def shorted_inductor_ohms(mid, inductors: list[Reactive], lu) -> dict[str, float]:
    """The resistance each inductor left shorted sees: -1 / (G^-1)[j, j] at its branch."""
    if not inductors:
        return {}
    rows = np.array([mid.network.branch_of[e.name] - 1 for e in inductors], dtype=np.int64)
    d = by_columns(mid.g, rows, rows, lu)
    with np.errstate(divide="ignore"):
        return {e.name: float(-1.0 / x) if x != 0 else math.inf for e, x in zip(inductors, d)}


@dataclass
class MidBand:
    """What :func:`settle` found: the network to analyse (the base one when nothing changed
    state), its factors, the open capacitors' table of its last round, and the band."""

    network: object
    factors: Factors
    table: object
    band: Band


def settle(ss, factors: Factors, table_of: Callable, dc_table, f_mid: float, pins: dict[str, str],
           band: Band) -> MidBand:
    """Iterate the states at ``f_mid`` from the DC ones to a fixed point (see the module text).

    ``table_of(network, factors)`` gives the open capacitors' table of a network (as the
    analysis computes it: ``(kept, table)``, with ``table.ohms`` per kept record); ``dc_table``
    is that of the base network, already computed.
    """
    elements = reactives(ss)
    by_name = {e.name: e for e in elements}
    shorted, opened = frozenset(), frozenset()
    network, net_factors, table = ss, factors, dc_table
    ohms = _open_ohms(dc_table)
    if f_mid > 0:
        ohms.update(shorted_inductor_ohms(ss, [e for e in elements if e.kind == "l"], factors.lu))
    for _round in range(MAX_ROUNDS):
        if f_mid > 0:
            states = choose_states(ss, elements, ohms, f_mid, pins)
        else:  # the DC circuit: only the pins change states
            states = (frozenset(n for n, s in pins.items() if s == "short"),
                      frozenset(n for n, s in pins.items() if s == "open" and by_name[n].kind == "l"))
        if states == (shorted, opened):
            break
        shorted, opened = states
        if not shorted and not opened:
            network, net_factors, table = ss, factors, dc_table
            ohms = _open_ohms(dc_table)
            continue
        network = MidBandNetwork(ss, shorted, opened)
        net_factors = Factors(network.g, network.c, network.ac_ground_tree())
        table = table_of(network, net_factors)
        ohms = _open_ohms(table)
        ohms.update(short_circuit_ohms(ss, [by_name[n] for n in sorted(shorted)], opened))
        ohms.update(open_inductor_ohms(network, [by_name[n] for n in sorted(opened)], net_factors.lu))
        ohms.update(shorted_inductor_ohms(network, [e for e in elements if e.kind == "l" and e.name not in opened],
                                          net_factors.lu))
    else:
        band.warnings.append(f"the element states at f_mid did not settle in {MAX_ROUNDS} rounds; the last ones are used")
    _describe(band, elements, shorted, opened, ohms, f_mid, pins)
    return MidBand(network, net_factors, table, band)


def _open_ohms(table) -> dict[str, float]:
    kept, tab = table
    return {r.name: float(x) for r, x in zip(kept.records, np.asarray(tab.ohms, dtype=float).tolist())}


def _describe(band: Band, elements: list[Reactive], shorted, opened, ohms, f_mid: float, pins) -> None:
    """States, reasons, the low-band time constants and the separation warnings."""
    for e in elements:
        state = "short" if e.name in shorted else "open" if e.name in opened else None
        if state is None:
            if pins.get(e.name) == "open" and e.kind == "c":
                band.reasons[e.name] = "pinned open (its DC state)"
            continue
        band.states[e.name] = state
        r = ohms.get(e.name, math.nan)
        if e.name in pins:
            band.reasons[e.name] = f"pinned {state}"
        else:
            band.reasons[e.name] = (f"corner {eng(corner_hz(e, r), 'Hz')} (R {eng(abs(r), 'ohm')}) "
                                    f"below f_mid {eng(f_mid, 'Hz')}")
        if e.kind == "c":
            tau = abs(r) * e.value
        else:
            tau = abs(e.value) / abs(r) if r else math.inf
        band.low_band.append(LowBandElement(e.name, e.kind, e.value, r, tau, e.file, e.line))
    band.low_band.sort(key=lambda x: (x.tau_s, x.name))
    rates = [1.0 / (2 * math.pi * x.tau_s) for x in band.low_band if x.tau_s and math.isfinite(x.tau_s)]
    band.f_low_estimate_hz = sum(rates) if rates else None
    lo, hi = band.f_low_hz, band.f_high_hz
    if lo and hi:
        if hi / lo < SEPARATION:
            band.warnings.append(f"the pass band is narrow (f_high / f_low = {hi / lo:.3g}, under {SEPARATION:g}): "
                                 "the low and high bands are not separated, and the first-order figures are rough")
        inside = []
        for e in elements:
            if e.name not in ohms:
                continue
            fc = corner_hz(e, ohms[e.name])
            if lo * EDGE_MARGIN < fc < hi / EDGE_MARGIN:
                inside.append(f"{e.name} ({eng(fc, 'Hz')})")
        if inside:
            band.warnings.append("elements with a corner inside the pass band (" + eng(lo, "Hz") + " to " + eng(hi, "Hz")
                                 + ") shape it, and the bands are not separated: " + ", ".join(inside[:6])
                                 + (" ..." if len(inside) > 6 else ""))
