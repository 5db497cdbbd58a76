"""The analysis of one small-signal network, stage by stage: the capacitors that enter it,
their open-circuit time constants (Thornton et al. 1965; Gray, Hurst, Lewis and Meyer 2009,
ch. 7), the exact poles and the dominant pole's shares (Rommes and Martins 2006), the
source-to-probe transfer and its -3 dB frequency, and the ranked records."""

from __future__ import annotations

import math
from dataclasses import dataclass
from operator import attrgetter

import numpy as np

from tauscan.analysis import poles as poles_mod
from tauscan.analysis import timeconstants as tc
from tauscan.analysis.result import Analysis, CapacitorResult, NodeResult
from tauscan.analysis.probe import choose_probe, signal_nodes, source_element
from tauscan.analysis.response import Response, f3db, response_curve
from tauscan.analysis.systems import Factors
from tauscan.analysis.zentries import by_columns, z_entries
from tauscan.linear.smallsignal import CapacitorRecord, SmallSignalNetwork, linearize
from tauscan.op.result import OperatingPoint


#: A node that sees more than this resistance to ground is held by GMIN or leakage only.
GMIN_HELD_OHMS = 1e10


@dataclass(frozen=True)
class AnalysisSettings:
    #: a node is Miller-dominated when its Miller part is at least this share of its time constant
    miller_threshold: float = 0.5
    #: "auto", "columns" or "selected" (see :mod:`tauscan.analysis.zentries`)
    z_method: str = "auto"
    dense_limit: int = poles_mod.DENSE_LIMIT
    #: compute the -3 dB frequency (a frequency sweep with sparse solves)
    response: bool = True
    #: points of the source-to-probe magnitude sweep kept with the result (0: none; plots)
    curve_points: int = 0


def analyze(op: OperatingPoint, probe: str | None = None, source: str | None = None,
            settings: AnalysisSettings | None = None) -> Analysis:
    """Run the whole analysis at an operating point."""
    settings = settings or AnalysisSettings()
    ss = linearize(op)
    return analyze_network(ss, op, probe, source, settings)


def analyze_network(ss: SmallSignalNetwork, op: OperatingPoint, probe: str | None, source: str | None,
                    settings: AnalysisSettings) -> Analysis:
    """Every figure of the analysis of one small-signal network (see :mod:`tauscan.analysis`).

    Parameters
    ----------
    ss : SmallSignalNetwork
        G and C at the operating point, with every capacitor's record.
    op : OperatingPoint
        The operating point it was linearized at (bias regions, floating nodes, warnings).
    probe, source : str or None
        Output node and input source of the transfer; None chooses them (see
        :mod:`tauscan.analysis.probe`).
    settings : AnalysisSettings

    Raises ``SelectionError`` for a probe or source the circuit does not have.
    """
    factors = Factors(ss.g, ss.c, ss.ac_ground_tree())
    warnings = list(op.warnings)
    kept = _kept_capacitors(ss)
    table, z_method = _time_constants(ss, factors, kept, settings.z_method)
    warnings.extend(_gmin_held(kept, table))
    inductor_tau = _inductor_time_constants(ss, factors)
    sum_tau = float(np.sum(table.tau)) + inductor_tau
    octc = 1.0 / (2 * math.pi * sum_tau) if sum_tau > 0 else None
    if sum_tau <= 0 and len(kept.records):
        warnings.append("the capacitors' time constants do not add up to a positive total; the estimate is meaningless here")
    # -- poles and what to fix ---------------------------------------------------
    found = poles_mod.find_poles(factors, settings.dense_limit)
    warnings.extend(found.notes)
    shares = np.full(len(kept.records), np.nan)
    if found.right is not None and found.left is not None and len(kept.records):
        shares = poles_mod.pole_shares(ss.c, found.right, found.left, kept.a_rows, kept.b_rows, kept.farads)
    dominant = found.dominant
    transfer = _transfer(ss, factors, probe, source, octc, found, settings, warnings)
    # -- records (columns computed with numpy, then turned into Python lists once) --------
    excess = tc.miller_excess(table)
    caps = _capacitor_records(kept.records, table, excess, tc.cascoded_tau(table), shares, sum_tau)
    # by time constant, largest first, equal ones by name: two stable sorts on C-level keys
    caps.sort(key=attrgetter("name"))
    caps.sort(key=attrgetter("tau_s"), reverse=True)
    nodes = _nodes(ss, kept.a_rows, kept.b_rows, table, excess, sum_tau, settings.miller_threshold)
    return Analysis(
        netlist=ss.circuit.file, title=ss.circuit.title, source=transfer.source, probe=transfer.probe,
        sum_tau_s=sum_tau, octc_hz=octc, poles=[complex(p) for p in found.values], poles_complete=found.complete,
        dominant_pole_hz=abs(dominant) / (2 * math.pi) if dominant is not None else None,
        dominant_q=poles_mod.quality_factor(dominant) if dominant is not None else None,
        f3db_hz=transfer.f3db_hz, f3db_note=transfer.note, dc_gain=transfer.dc_gain, capacitors=caps, nodes=nodes,
        inductor_tau_s=inductor_tau, excluded=kept.excluded, warnings=warnings,
        methods={"z": z_method, "poles": found.method},
        bias_regions={d.name: d.region for d in op.devices}, floating=list(op.floating),
        signal_nodes=transfer.signal_nodes, curve=transfer.curve,
    )


@dataclass
class _Kept:
    """The capacitors that enter the analysis, with both ends as MNA rows (-1: an AC ground)."""

    records: list[CapacitorRecord]
    a_rows: np.ndarray
    b_rows: np.ndarray
    farads: np.ndarray
    excluded: list[str]  # names of those left out: zero, shorted, or between two AC grounds


def _kept_capacitors(ss: SmallSignalNetwork) -> _Kept:
    net = ss.network
    records = ss.capacitors
    count = len(records)
    index = net.index
    ia = np.fromiter(map(index.__getitem__, (r.a for r in records)), dtype=np.int64, count=count)
    ib = np.fromiter(map(index.__getitem__, (r.b for r in records)), dtype=np.int64, count=count)
    is_ground = np.zeros(net.n_nodes, dtype=bool)
    is_ground[[index[name] for name in ss.ac_ground if name in index]] = True
    ground_a, ground_b = is_ground[ia], is_ground[ib]
    all_farads = np.fromiter((r.farads for r in records), dtype=float, count=count)
    out = (all_farads == 0) | (ground_a & ground_b) | (ia == ib)
    kept = np.flatnonzero(~out)
    return _Kept([records[k] for k in kept.tolist()], np.where(ground_a, -1, ia - 1)[kept],
                 np.where(ground_b, -1, ib - 1)[kept], all_farads[kept],
                 [records[k].name for k in np.flatnonzero(out).tolist()])


def _time_constants(ss: SmallSignalNetwork, factors: Factors, kept: _Kept, method: str):
    """The capacitors' open-circuit table from the Z entries at their terminals."""
    a_rows, b_rows = kept.a_rows, kept.b_rows
    rows = np.concatenate([a_rows, b_rows, a_rows, b_rows])
    cols = np.concatenate([a_rows, b_rows, b_rows, a_rows])
    m = len(kept.records)
    if m:
        z, z_method = z_entries(ss, rows, cols, method, lambda: factors.lu)
    else:
        z, z_method = np.zeros(0), "none"
    zaa, zbb, zab, zba = z[:m], z[m : 2 * m], z[2 * m : 3 * m], z[3 * m :]
    return tc.capacitor_table(kept.farads, a_rows < 0, b_rows < 0, zaa, zbb, zab, zba), z_method


def _gmin_held(kept: _Kept, table) -> list[str]:
    held = sorted({r.a for r, z in zip(kept.records, table.zaa) if z > GMIN_HELD_OHMS}
                  | {r.b for r, z in zip(kept.records, table.zbb) if z > GMIN_HELD_OHMS})
    if not held:
        return []
    return [f"nodes held almost only by GMIN or junction leakage (over {GMIN_HELD_OHMS:.0e} ohm to ground): "
            + ", ".join(held[:8]) + (" ..." if len(held) > 8 else "") + "; their time constants are not meaningful"]


@dataclass
class _Transfer:
    source: str | None = None
    probe: str | None = None
    f3db_hz: float | None = None
    note: str = ""
    dc_gain: float | None = None
    signal_nodes: frozenset[str] | None = None
    curve: tuple[list[float], list[float]] | None = None


def _transfer(ss: SmallSignalNetwork, factors: Factors, probe: str | None, source: str | None,
              octc: float | None, found: poles_mod.Poles, settings: AnalysisSettings, warnings: list[str]) -> _Transfer:
    """The source-to-probe transfer: probe choice, -3 dB, the nodes on the signal path and,
    when asked for, a magnitude sweep around the figures of interest."""
    src = source_element(ss, source)
    if src is None:
        if probe:
            warnings.append("no AC source: the -3 dB frequency was not computed")
        return _Transfer(note="no source with an AC value (name the input source)")
    out = _Transfer(source=src.name)
    b = ss.network.ac_vector(src)[1:]
    choice = choose_probe(ss, factors, b, probe, octc)
    out.probe = choice.name
    out.signal_nodes = signal_nodes(ss, factors, b, octc, choice.low_band)
    if choice.row is None or not settings.response:
        return out
    resp = Response(factors, b, choice.row)
    if not resp.dense:
        resp.known.update(choice.known)
    out.dc_gain = abs(resp(0.0))
    out.f3db_hz, out.note = f3db(resp, found, octc)
    if resp.ill_conditioned:
        warnings.append("the small-signal system is ill-conditioned (a node held almost only by GMIN or "
                        "junction leakage?); the -3 dB figure may be inaccurate")
    dominant = found.dominant
    marks = [f for f in (octc, abs(dominant) / (2 * math.pi) if dominant is not None else None, out.f3db_hz) if f]
    if settings.curve_points and marks:
        freqs, mags = response_curve(factors, b, choice.row, min(marks) / 1e3, max(marks) * 1e3, settings.curve_points)
        out.curve = (freqs.tolist(), mags.tolist())
    return out


def _capacitor_records(keep, table, excess, cascoded, shares, sum_tau: float) -> list[CapacitorResult]:
    m = len(keep)
    if not m:
        return []
    input_a = np.asarray(table.input_is_a, dtype=bool)
    grounded = np.asarray(table.grounded, dtype=bool)
    tau = np.asarray(table.tau, dtype=float)
    part_in = np.where(input_a, table.part_a, table.part_b).tolist()
    part_out = np.where(input_a, table.part_b, table.part_a).tolist()
    with np.errstate(divide="ignore", invalid="ignore"):
        share = (tau / sum_tau).tolist() if sum_tau else [math.nan] * m
        removed = sum_tau - tau
        if_removed = np.where(removed > 0, 1.0 / (2 * math.pi * removed), np.nan)
        with_cascode = sum_tau - tau + cascoded
        if_cascoded = np.where(np.isfinite(cascoded) & (with_cascode > 0), 1.0 / (2 * math.pi * with_cascode), np.nan)
    if_removed_l = [None if x != x else x for x in if_removed.tolist()]
    if_cascoded_l = [None if x != x else x for x in if_cascoded.tolist()]
    shares_l = [x if math.isfinite(x) else None for x in np.asarray(shares, dtype=float).tolist()]
    klass = [str(k) for k in table.klass.tolist()]
    gain = np.asarray(table.gain, dtype=float).tolist()
    gain_rev = np.asarray(table.gain_reverse, dtype=float).tolist()
    f_in = np.asarray(table.factor_in, dtype=float).tolist()
    f_out = np.asarray(table.factor_out, dtype=float).tolist()
    ohms = np.asarray(table.ohms, dtype=float).tolist()
    tau_l = tau.tolist()
    excess_l = np.asarray(excess, dtype=float).tolist()
    input_l = input_a.tolist()
    grounded_l = grounded.tolist()
    caps = []
    append = caps.append
    for k, r in enumerate(keep):
        g = grounded_l[k]
        if input_l[k]:
            node_in, node_out = r.a, r.b
        else:
            node_in, node_out = r.b, r.a
        if g:
            node_out = "0"
        append(CapacitorResult(
            r.name, node_in, node_out, r.farads, klass[k],
            None if g else gain[k], None if g else gain_rev[k], f_in[k], None if g else f_out[k],
            ohms[k], tau_l[k], share[k], part_in[k], part_out[k], excess_l[k], shares_l[k],
            if_removed_l[k], if_cascoded_l[k], r.file, r.line, r.device, r.comment,
        ))
    return caps


def _inductor_time_constants(ss: SmallSignalNetwork, factors: Factors) -> float:
    """Sum of L / R for the inductors (R: the resistance each sees with the capacitors open)."""
    net = ss.network
    inductors = [e for e in ss.circuit.general if e.kind == "l"]
    if not inductors:
        return 0.0
    rows = np.array([net.branch_of[e.name] - 1 for e in inductors], dtype=np.int64)
    w = by_columns(ss.g, rows, rows, factors.lu)
    return float(sum(-e.value * wk for e, wk in zip(inductors, w)))


def _nodes(ss, a_rows, b_rows, table, excess, sum_tau, threshold) -> list[NodeResult]:
    n = ss.n_nodes
    node_tau, miller = tc.node_sums([], a_rows, b_rows, table, n, excess)
    touched = np.union1d(a_rows[a_rows >= 0], b_rows[b_rows >= 0]).astype(np.int64)
    names = ss.network.nodes
    taus = node_tau[touched]
    mts = miller[touched]
    with np.errstate(divide="ignore", invalid="ignore"):
        shares = (taus / sum_tau).tolist() if sum_tau else [math.nan] * len(touched)
        m_share = np.where(taus > 0, mts / taus, 0.0).tolist()
    dominated = ((taus > 0) & (mts >= threshold * taus)).tolist()
    out = [NodeResult(names[row + 1], t, sh, mt, ms, dom)
           for row, t, sh, mt, ms, dom in zip(touched.tolist(), taus.tolist(), shares, mts.tolist(), m_share, dominated)]
    out.sort(key=attrgetter("node"))
    out.sort(key=attrgetter("tau_s"), reverse=True)
    return out
