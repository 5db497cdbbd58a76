"""Small-signal analysis (METHOD in full): every capacitor's resistance, time constant,
gain and Miller class; node sums; bandwidth estimate against the exact poles and -3 dB;
and what to fix first.

>>> from tauscan import api
>>> result = api.scan("samples/sensor_readout.sp")          # doctest: +SKIP
>>> result.capacitors_frame().head()                        # doctest: +SKIP
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from operator import attrgetter

import numpy as np

from tauscan.analysis import poles as poles_mod
from tauscan.analysis import timeconstants as tc
from tauscan.analysis.result import Analysis, CapacitorResult, NodeResult
from tauscan.analysis.zentries import by_columns, factor, z_entries
from tauscan.circuit import Element
from tauscan.errors import SettingsError
from tauscan.linear.smallsignal import SmallSignalNetwork, linearize
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


def analyze(op: OperatingPoint, probe: str | None = None, source: str | None = None,
            settings: AnalysisSettings | None = None) -> Analysis:
    """Run the whole analysis at an operating point."""
    settings = settings or AnalysisSettings()
    ss = linearize(op)
    return analyze_network(ss, op, probe, source, settings)


def _source_element(ss: SmallSignalNetwork, name: str | None) -> Element | None:
    circuit = ss.circuit
    if name is not None:
        key = name.lower()
        for e in circuit.general:
            if e.name == key and e.kind in "vi":
                return e
        raise SettingsError(f"--source {name!r}: no independent voltage or current source of that name")
    for e in circuit.general:
        if e.kind in "vi" and e.source is not None and e.source.ac_mag:
            return e
    return None


def analyze_network(ss: SmallSignalNetwork, op: OperatingPoint, probe: str | None, source: str | None,
                    settings: AnalysisSettings) -> Analysis:
    net = ss.network
    warnings = list(op.warnings)
    lu = factor(ss.g)
    # -- capacitors ---------------------------------------------------------------
    records = ss.capacitors
    count = len(records)
    index = net.index
    # node indices of both ends, and whether each is an AC ground (rows: index - 1, -1 for a ground)
    ia = np.fromiter(map(index.__getitem__, (r.a for r in records)), dtype=np.int64, count=count)
    ib = np.fromiter(map(index.__getitem__, (r.b for r in records)), dtype=np.int64, count=count)
    is_ground = np.zeros(net.n_nodes, dtype=bool)
    is_ground[[index[name] for name in ss.ac_ground if name in index]] = True
    ground_a, ground_b = is_ground[ia], is_ground[ib]
    all_farads = np.fromiter((r.farads for r in records), dtype=float, count=count)
    out = (all_farads == 0) | (ground_a & ground_b) | (ia == ib)
    kept = np.flatnonzero(~out)
    keep = [records[k] for k in kept.tolist()]
    excluded = [records[k].name for k in np.flatnonzero(out).tolist()]
    a_rows = np.where(ground_a, -1, ia - 1)[kept]
    b_rows = np.where(ground_b, -1, ib - 1)[kept]
    farads = all_farads[kept]
    rows = np.concatenate([a_rows, b_rows, a_rows, b_rows])
    cols = np.concatenate([a_rows, b_rows, b_rows, a_rows])
    z, z_method = z_entries(ss, rows, cols, settings.z_method) if len(keep) else (np.zeros(0), "none")
    m = len(keep)
    zaa, zbb, zab, zba = z[:m], z[m : 2 * m], z[2 * m : 3 * m], z[3 * m :]
    table = tc.capacitor_table(farads, a_rows < 0, b_rows < 0, zaa, zbb, zab, zba)
    held = sorted({r.a for r, z in zip(keep, zaa) if z > GMIN_HELD_OHMS} | {r.b for r, z in zip(keep, zbb) if z > GMIN_HELD_OHMS})
    if held:
        warnings.append(f"nodes held almost only by GMIN or junction leakage (over {GMIN_HELD_OHMS:.0e} ohm to ground): "
                        + ", ".join(held[:8]) + (" ..." if len(held) > 8 else "")
                        + "; their time constants are not meaningful")
    inductor_tau = _inductor_time_constants(ss, lu)
    sum_tau = float(np.sum(table.tau)) + inductor_tau
    octc = 1.0 / (2 * math.pi * sum_tau) if sum_tau > 0 else None
    if sum_tau <= 0 and m:
        warnings.append("the capacitors' time constants do not add up to a positive total; the estimate is meaningless here")
    excess = tc.miller_excess(table)
    cascoded = tc.cascoded_tau(table)
    # -- poles and what to fix ---------------------------------------------------
    found = poles_mod.find_poles(ss.g, ss.c, lu, settings.dense_limit, cache=ss)
    warnings.extend(found.notes)
    shares = np.full(m, np.nan)
    if found.right is not None and found.left is not None and m:
        shares = poles_mod.pole_shares(ss.c, found.right, found.left, a_rows, b_rows, farads)
    dominant = found.dominant
    # -- -3 dB ----------------------------------------------------------------------
    src = _source_element(ss, source)
    probe_name, f3, note, dc_gain = None, None, "", None
    if src is None:
        note = "no source with an AC value (name one with --source)"
        if probe:
            warnings.append("no AC source: the -3 dB frequency was not computed")
    else:
        b = net.ac_vector(src)[1:]
        probe_name, probe_row, samples = _probe(ss, lu, b, probe, src, octc)
        if probe_row is not None and settings.response:
            resp = poles_mod.Response(ss.g, ss.c, b, probe_row, cache=ss)
            if not resp.dense:
                resp.known.update(samples)
            dc_gain = abs(resp(0.0))
            f3, note = poles_mod.f3db(resp, found, octc)
            if resp.ill_conditioned:
                warnings.append("the small-signal system is ill-conditioned (a node held almost only by GMIN or "
                                "junction leakage?); the -3 dB figure may be inaccurate")
    # -- records (columns computed with numpy, then turned into Python lists once) --------
    caps = _capacitor_records(keep, table, excess, cascoded, shares, sum_tau)
    # by time constant, largest first, equal ones by name: two stable sorts on C-level keys
    caps.sort(key=attrgetter("name"))
    caps.sort(key=attrgetter("tau_s"), reverse=True)
    nodes = _nodes(ss, keep, a_rows, b_rows, table, excess, sum_tau, settings.miller_threshold)
    methods = {"z": z_method, "poles": found.method}
    return Analysis(
        netlist=ss.circuit.file, title=ss.circuit.title, source=src.name if src else None, probe=probe_name,
        sum_tau_s=sum_tau, octc_hz=octc, poles=[complex(p) for p in found.values], poles_complete=found.complete,
        dominant_pole_hz=abs(dominant) / (2 * math.pi) if dominant is not None else None,
        dominant_q=poles_mod.quality_factor(dominant) if dominant is not None else None,
        f3db_hz=f3, f3db_note=note, dc_gain=dc_gain, capacitors=caps, nodes=nodes, inductor_tau_s=inductor_tau,
        excluded=excluded, warnings=warnings, methods=methods,
        bias_regions={d.name: d.region for d in op.devices}, floating=list(op.floating),
    )


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


def _inductor_time_constants(ss: SmallSignalNetwork, lu) -> float:
    """Sum of L / R for the inductors (R: the resistance each sees with the capacitors open)."""
    net = ss.network
    inductors = [e for e in ss.circuit.general if e.kind == "l"]
    if not inductors:
        return 0.0
    rows = np.array([net.branch_of[e.name] - 1 for e in inductors], dtype=np.int64)
    w = by_columns(ss.g, rows, rows, lu)
    return float(sum(-e.value * wk for e, wk in zip(inductors, w)))


def _probe(ss: SmallSignalNetwork, lu, b: np.ndarray, probe: str | None, src: Element, octc: float | None = None):
    """The named probe, or the node with the largest gain from the source.

    The gain is taken as the largest |H| at DC and at a few frequencies up to a
    thousand times the estimate, so that AC-coupled stages are judged in their
    pass band, not at DC.
    """
    net = ss.network
    if probe is not None:
        key = probe.lower()
        if key not in net.index or key in net.internal:
            raise SettingsError(f"--probe {probe!r}: no such node in the circuit")
        if key in ss.ac_ground:
            raise SettingsError(f"--probe {probe!r} is an AC ground (tied to ground through voltage sources)")
        return key, ss.row(key), {}
    n = ss.n_nodes
    solved: dict[float, np.ndarray] = {}
    if not np.any(b.imag):
        x0 = lu.solve(b.real)
        mags = np.abs(x0[:n])
        solved[0.0] = x0
    else:
        mags = np.zeros(n)
    if octc:
        solver = poles_mod.complex_solver(ss.g, ss.c, ss)
        for f in np.geomspace(octc / 10, octc * 1e3, 3).tolist():
            try:
                x = solver.solve(solver.factor(2j * math.pi * f), b.astype(complex))
            except RuntimeError:  # singular at this frequency: skip it
                continue
            if np.all(np.isfinite(x)):
                mags = np.maximum(mags, np.abs(x[:n]))
                solved[f] = x
    for name in list(ss.ac_ground) + list(net.internal):
        if name in net.index and net.index[name] > 0:
            mags[net.index[name] - 1] = -1
    if not np.any(mags > 0):
        return None, None, {}
    row = int(np.argmax(mags))
    # every node's response at those frequencies, for the lint stage to reuse
    ss.solved_responses = (src.name, solved)
    # the response at the chosen node at those frequencies, for the -3 dB search to reuse
    return net.nodes[row + 1], row, {f: complex(x[row]) for f, x in solved.items()}


def _nodes(ss, keep, a_rows, b_rows, table, excess, sum_tau, threshold) -> list[NodeResult]:
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
