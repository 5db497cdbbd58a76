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
from tauscan.analysis.band import START_BELOW, Band, BandRequest, Passband, passband, pinned_states, reactives, settle
from tauscan.analysis.midband import MidBandNetwork
from tauscan.analysis.probe import SIGNAL_FLOOR, Drive, Probe, choose_probe, drive_of, named_probe
from tauscan.analysis.response import F3DB_MAX_HZ, Response, f3db, response_curve
from tauscan.analysis.result import Analysis, CapacitorResult, NodeResult
from tauscan.analysis.systems import Factors
from tauscan.analysis import transcap
from tauscan.analysis.transcap import TransParts, trans_parts
from tauscan.analysis.transfer import TransferTable, transfer_table
from tauscan.errors import SelectionError
from tauscan.units import eng
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
    #: how the mid-band circuit is chosen (see :mod:`tauscan.analysis.band`)
    band: BandRequest = BandRequest()
    #: "transfer" (rank by transfer time constant, the signal path first) or "octc"
    rank: str = "transfer"


def analyze(op: OperatingPoint, probe: str | None = None, source: str | None = None,
            settings: AnalysisSettings | None = None) -> Analysis:
    """Run the whole analysis at an operating point."""
    settings = settings or AnalysisSettings()
    ss = linearize(op)
    return analyze_network(ss, op, probe, source, settings)


def analyze_network(ss: SmallSignalNetwork, op: OperatingPoint, probe: str | None, source: str | None,
                    settings: AnalysisSettings) -> Analysis:
    """Every figure of the analysis of one small-signal network (see :mod:`tauscan.analysis`).

    The mid-band circuit is found first (:mod:`tauscan.analysis.band`); the open-circuit
    figures, the poles and the transfer time constants are then those of that circuit.

    Parameters
    ----------
    ss : SmallSignalNetwork
        G and C at the operating point, with every capacitor's record.
    op : OperatingPoint
        The operating point it was linearized at (bias regions, floating nodes, warnings).
    probe, source : str or None
        Output node (or ``a,b``) and input source of the transfer; None chooses them (see
        :mod:`tauscan.analysis.probe`).
    settings : AnalysisSettings

    Raises ``SelectionError`` for a probe or source the circuit does not have.
    """
    factors = Factors(ss.g, ss.c, ss.ac_ground_tree())
    warnings = list(op.warnings) + _capacitance_free_models(op)
    drive = drive_of(ss, source)
    named = named_probe(ss, probe) if probe else None
    if named is not None and drive is None:
        warnings.append("no AC source: the -3 dB frequency was not computed")
    dc_table = _table_of(ss, factors, settings.z_method)
    chosen = _mid_band(ss, factors, dc_table, drive, named, settings)
    work, wfactors = chosen.network, chosen.factors
    kept, table, z_method = chosen.table
    band = chosen.band
    warnings.extend(band.warnings)
    warnings.extend(_gmin_held(kept, table))
    inductor_tau = _inductor_time_constants(work, wfactors)
    trans = trans_parts(work, wfactors, settings.z_method)
    sum_tau = float(np.sum(table.tau)) + float(np.sum(trans.tau)) + inductor_tau
    octc = 1.0 / (2 * math.pi * sum_tau) if sum_tau > 0 else None
    if sum_tau <= 0 and (len(kept.records) or len(trans)):
        warnings.append("the capacitors' time constants do not add up to a positive total; the estimate is meaningless here")
    # -- the transfer: drive and probe on the analysed network ----------------------------
    b = None
    out_probe, probe_reason = None, ""
    if drive is not None:
        b = work.reduce(drive.b) if work is not ss else drive.b
        out_probe, probe_reason = _probe_on(ss, work, wfactors, b, chosen.passband, named, octc, warnings)
    e = out_probe.vector(wfactors.g.shape[0]) if out_probe is not None else None
    # -- poles and what to fix ---------------------------------------------------
    found = poles_mod.find_poles(wfactors, settings.dense_limit, b, e)
    edge = chosen.passband.f_high if chosen.passband is not None else None
    if not found.complete and b is not None and e is not None and edge:
        # the few smallest poles of a large circuit may be none that the transfer sees
        found = poles_mod.transfer_dominant(wfactors, found, b, e, edge)
    warnings.extend(found.notes)
    unstable = found.unstable()
    shares = np.full(len(kept.records), np.nan)
    trans_shares = np.full(len(trans), np.nan)
    dominant = found.dominant
    # pole shares refer to the dominant pole: none when the only candidate is unstable
    if dominant is not None and found.right is not None and found.left is not None:
        if len(kept.records):
            shares = poles_mod.pole_shares(work.c, found.right, found.left, kept.a_rows, kept.b_rows, kept.farads)
        if len(trans):
            trans_shares = transcap.pole_shares(trans, found.right, found.left, found.left @ (work.c @ found.right))
    tt = None
    if out_probe is not None:
        tt = transfer_table(wfactors, work.n_nodes, kept.raw_a, kept.raw_b, kept.farads,
                            np.asarray(table.input_is_a, dtype=bool), b, out_probe, trans)
    transfer = _transfer(work, wfactors, b, out_probe, octc, found, settings, chosen, factors, drive, warnings)
    transfer.probe_reason = probe_reason if out_probe is not None else ""
    elmore = None
    if tt is not None:
        if tt.sum_tau > 0:
            elmore = 1.0 / (2 * math.pi * tt.sum_tau)
        elif tt.sum_tau < 0:
            warnings.append("the transfer time constants add up to a negative total (positive feedback, or a "
                            "zero that leads): the signal-path estimate is not a bandwidth here")
        transfer.signal_nodes = _responding(work, tt.v)
    # -- records (columns computed with numpy, then turned into Python lists once) --------
    excess = tc.miller_excess(table)
    caps = _capacitor_records(kept.records, table, excess, tc.cascoded_tau(table), shares, sum_tau, tt)
    caps += _trans_records(trans, trans_shares, sum_tau, tt)
    nodes = _nodes(work, kept.a_rows, kept.b_rows, table, excess, sum_tau, settings.miller_threshold, tt, trans)
    _rank(caps, nodes, settings.rank if tt is not None else "octc")
    return Analysis(
        netlist=ss.circuit.file, title=ss.circuit.title, source=transfer.source, probe=transfer.probe,
        sum_tau_s=sum_tau, octc_hz=octc, poles=[complex(p) for p in found.values], poles_complete=found.complete,
        dominant_pole_hz=abs(dominant) / (2 * math.pi) if dominant is not None else None,
        dominant_q=poles_mod.quality_factor(dominant) if dominant is not None else None,
        f3db_hz=transfer.f3db_hz, f3db_note=transfer.note, dc_gain=transfer.dc_gain, capacitors=caps, nodes=nodes,
        inductor_tau_s=inductor_tau, excluded=kept.excluded, warnings=warnings,
        methods={"z": z_method, "poles": found.method, "dominant pole": found.dominance},
        bias_regions={d.name: d.region for d in op.devices}, floating=list(op.floating),
        signal_nodes=transfer.signal_nodes, curve=transfer.curve,
        band=band, elmore_hz=elmore, sum_transfer_tau_s=tt.sum_tau if tt is not None else None,
        unstable_poles=unstable, drive_unit=drive.unit if drive is not None else "",
        probe_reason=transfer.probe_reason, rank=settings.rank if tt is not None else "octc",
    )


def _capacitance_free_models(op: OperatingPoint) -> list[str]:
    """One warning per device model whose devices all have zero capacitances: the card
    gives no capacitance parameters, so those devices drop out of the ranking."""
    by_model: dict[str, list] = {}
    for dev in op.devices:
        by_model.setdefault(dev.model, []).append(dev)
    out = []
    for model, devices in by_model.items():
        if all(not any(v for v in d.caps.values()) for d in devices):
            out.append(f"model {model} gives no capacitance parameters: the capacitances of its {len(devices)} "
                       f"device{'s' * (len(devices) != 1)} ({devices[0].name}{', ...' if len(devices) > 1 else ''}) "
                       "are zero, and the ranking says nothing about them")
    return out


@dataclass
class _Kept:
    """The capacitors that enter the analysis, with both ends as MNA rows (-1: an AC ground)."""

    records: list[CapacitorRecord]
    a_rows: np.ndarray
    b_rows: np.ndarray
    farads: np.ndarray
    excluded: list[str]  # names of those left out: zero, shorted, or between two AC grounds
    #: both ends as MNA rows, -1 for ground only (AC-ground nodes keep their rows)
    raw_a: np.ndarray = None  # type: ignore[assignment]
    raw_b: np.ndarray = None  # type: ignore[assignment]


def _kept_capacitors(ss) -> _Kept:
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
                 [records[k].name for k in np.flatnonzero(out).tolist()], (ia - 1)[kept], (ib - 1)[kept])


def _table_of(ss, factors: Factors, method: str):
    """(kept capacitors, their open-circuit table, the Z method) of a network."""
    kept = _kept_capacitors(ss)
    table, z_method = _time_constants(ss, factors, kept, method)
    return kept, table, z_method


def _time_constants(ss, factors: Factors, kept: _Kept, method: str):
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


@dataclass
class _Chosen:
    """The network analysed (the base one, or the mid-band one), with what led to it."""

    network: object
    factors: Factors
    table: tuple
    band: Band
    passband: Passband | None = None


def _mid_band(ss, factors: Factors, dc_table, drive: Drive | None, named: Probe | None,
              settings: AnalysisSettings) -> _Chosen:
    """The pass band (auto), the element states at f_mid and the network they give."""
    request = settings.band
    pins = pinned_states(reactives(ss), request) if request.short or request.open else {}
    band = Band(mode=request.mode)
    found = None
    f_mid = 0.0
    if request.mode == "dc":
        band.note = "the DC circuit (asked for): capacitors open, inductors shorted"
    elif drive is None:
        band.mode = "dc"
        band.note = "the DC circuit: no source with an AC value, so no transfer to find a pass band from"
    elif request.mode == "fixed":
        f_mid = float(request.f_fixed_hz)
        band.f_mid_hz = f_mid
    else:
        kept, table, _ = dc_table
        dc_sum = float(np.sum(table.tau)) + _inductor_time_constants(ss, factors)
        start = 1.0 / (2 * math.pi * dc_sum) / START_BELOW if dc_sum > 0 else 1e-3
        found = passband(ss, factors, drive.b, named, start, F3DB_MAX_HZ)
        if found is None:
            band.mode = "dc"
            band.note = "the DC circuit: the probe does not respond to the drive at any frequency swept"
        else:
            band.f_low_hz, band.f_high_hz = found.f_low, found.f_high
            f_mid = found.f_mid
            band.f_mid_hz = f_mid
    if f_mid <= 0 and not pins:
        if band.mode == "auto":
            band.note = "the DC circuit: the pass band reaches down to DC, so no element changes state"
        return _Chosen(ss, factors, dc_table, band, found)
    kept_dc, table_dc, z_method = dc_table

    def table_of(network, net_factors):
        kept, table, _ = _table_of(network, net_factors, settings.z_method)
        return kept, table

    mid = settle(ss, factors, table_of, (kept_dc, table_dc), f_mid, pins, band)
    if mid.network is ss:
        band.note = band.note or f"the DC circuit: no element changes state at f_mid = {eng(f_mid, 'Hz')}"
        return _Chosen(ss, factors, dc_table, band, found)
    shorts = sum(1 for v in band.states.values() if v == "short")
    opens = len(band.states) - shorts
    where = f"f_mid = {eng(f_mid, 'Hz')}" if f_mid > 0 else "DC"
    band.note = (f"the mid-band circuit at {where}: {shorts} capacitor{'s' * (shorts != 1)} shorted, "
                 f"{opens} inductor{'s' * (opens != 1)} opened")
    kept, table = mid.table
    return _Chosen(mid.network, mid.factors, (kept, table, z_method), band, found)


def _probe_on(ss, work, wfactors: Factors, b: np.ndarray, found: Passband | None, named: Probe | None,
              octc: float | None, warnings: list[str]) -> tuple[Probe | None, str]:
    """The probe on the analysed network and why it was chosen: the one named, or the one
    the pass-band sweep chose, or (no sweep) the node with the largest response."""
    if named is not None:
        name, reason = named.name, "named"
    elif found is not None:
        name, reason = found.probe.name, "the top-level node with the largest response over the sweep"
    else:
        name = None
    if name is not None:
        try:
            return named_probe(work, name, allow_ground=work is not ss), reason
        except SelectionError as exc:
            warnings.append(f"the probe {name!r} is not a node of the mid-band circuit ({exc.reason}); no transfer figures")
            return None, ""
    choice = choose_probe(work, wfactors, b, None, octc)
    if choice.row is None:
        return None, ""
    return Probe(choice.name, choice.row), "the top-level node with the largest response at DC and in band"


def _responding(work, v: np.ndarray) -> frozenset[str]:
    """Nodes whose voltage responds to the drive (above :data:`SIGNAL_FLOOR` of the largest)."""
    mags = np.abs(v)
    top = mags.max(initial=0.0)
    if top == 0:
        return frozenset()
    names = work.network.nodes
    return frozenset(names[i + 1] for i in np.flatnonzero(mags > SIGNAL_FLOOR * top))


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
    probe_reason: str = ""


def _transfer(work, wfactors: Factors, b: np.ndarray | None, probe: Probe | None, octc: float | None,
              found: poles_mod.Poles, settings: AnalysisSettings, chosen: _Chosen, base_factors: Factors,
              drive: Drive | None, warnings: list[str]) -> _Transfer:
    """The source-to-probe transfer: its -3 dB frequency (on the circuit as read when the
    mid-band circuit differs from it: the pass band's upper edge), the low-frequency gain
    and, when asked for, a magnitude sweep around the figures of interest."""
    if drive is None:
        return _Transfer(note="no source with an AC value (name the input source)")
    out = _Transfer(source=drive.name)
    if probe is None:
        return out
    out.probe = probe.name
    passband_found = chosen.passband
    resp = Response(wfactors, b, probe)
    out.dc_gain = resp(0.0).real
    if not settings.response:
        return out
    as_read = isinstance(work, MidBandNetwork)
    if passband_found is not None and chosen.band.f_low_hz:
        out.f3db_hz = passband_found.f_high
        out.note = ("upper edge of the pass band (|H| = peak/sqrt(2) on the circuit as read)" if out.f3db_hz
                    else "no -3 dB point: the pass band has no upper edge below the top of the sweep")
    else:
        if passband_found is not None and not as_read and passband_found.sparse and not resp.dense:
            resp.known.update(passband_found.known)  # each was a sparse factorization
        out.f3db_hz, out.note = f3db(resp, found, octc)
    if resp.ill_conditioned:
        warnings.append("the small-signal system is ill-conditioned (a node held almost only by GMIN or "
                        "junction leakage?); the -3 dB figure may be inaccurate")
    dominant = found.dominant
    marks = [f for f in (octc, abs(dominant) / (2 * math.pi) if dominant is not None else None, out.f3db_hz,
                         chosen.band.f_low_hz) if f]
    if settings.curve_points and marks:
        if passband_found is not None:  # the circuit as read, as a simulator would show it
            curve_factors, curve_b, curve_probe = base_factors, drive.b, passband_found.probe
        else:
            curve_factors, curve_b, curve_probe = wfactors, b, probe
        # the sweep spans every pole found (within 20 decades of the figures), with margin
        pole_hz = [abs(complex(p)) / (2 * math.pi) for p in found.values if np.isfinite(p) and p != 0]
        lo, hi = min(marks), max(marks)
        span = [f for f in pole_hz if lo * 1e-10 <= f <= hi * 1e10]
        f_lo = min([lo / 1e3, *(f / 10 for f in span)])
        f_hi = max([hi * 1e3, *(f * 10 for f in span)])
        freqs, mags = response_curve(curve_factors, curve_b, curve_probe, f_lo, f_hi, settings.curve_points)
        out.curve = (freqs.tolist(), mags.tolist())
    return out


def _rank(caps: list[CapacitorResult], nodes: list[NodeResult], rank: str) -> None:
    """Largest first, equal ones by name (stable sorts on C-level keys): by transfer time
    constant with the signal path first, or by open-circuit time constant (``"octc"``)."""
    caps.sort(key=attrgetter("name"))
    nodes.sort(key=attrgetter("node"))
    if rank == "octc":
        caps.sort(key=attrgetter("tau_s"), reverse=True)
        nodes.sort(key=attrgetter("tau_s"), reverse=True)
        return
    caps.sort(key=lambda c: c.transfer_tau_s if c.transfer_tau_s is not None else -math.inf, reverse=True)
    caps.sort(key=lambda c: not c.on_signal_path)
    nodes.sort(key=lambda n: n.transfer_tau_s if n.transfer_tau_s is not None else -math.inf, reverse=True)
    nodes.sort(key=lambda n: not n.on_signal_path)


def _capacitor_records(keep, table, excess, cascoded, shares, sum_tau: float, tt: TransferTable | None) -> list[CapacitorResult]:
    m = len(keep)
    if not m:
        return []
    if tt is not None:
        t_tau = tt.cap_tau.tolist()
        with np.errstate(divide="ignore", invalid="ignore"):
            t_share = (tt.cap_tau / tt.sum_tau).tolist() if tt.sum_tau else [None] * m
        grounded_now = np.asarray(table.grounded, dtype=bool).tolist()
        t_gain = [None if (x != x or grounded_now[k]) else x for k, x in enumerate(tt.cap_gain.tolist())]
        t_on = tt.cap_on.tolist()
    else:
        t_tau = t_share = t_gain = [None] * m
        t_on = [True] * m
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
            t_tau[k], t_share[k], t_gain[k], t_on[k],
        ))
    return caps


def _trans_records(trans: TransParts, shares: np.ndarray, sum_tau: float, tt: TransferTable | None) -> list[CapacitorResult]:
    """The ``device:ctrans`` entries (:mod:`tauscan.analysis.transcap`): no gain, no Miller
    factor; ``farads`` is the largest entry of the non-reciprocal part, ``ohms`` tau over it;
    ``node_in`` the terminal node taking the largest part of it."""
    out = []
    for k, rec in enumerate(trans.records):
        tau = float(trans.tau[k])
        parts = trans.node_parts[k]
        order = np.argsort(-np.abs(parts), kind="stable").tolist()
        node_in = rec.nodes[order[0]]
        node_out = rec.nodes[order[1]] if len(order) > 1 else "0"
        farads = float(trans.farads[k])
        removed = sum_tau - tau
        t_tau = t_share = None
        on = True
        if tt is not None and k < len(tt.trans_tau):
            t_tau = float(tt.trans_tau[k])
            t_share = t_tau / tt.sum_tau if tt.sum_tau else None
            on = t_tau != 0.0
        share = float(shares[k]) if k < len(shares) and math.isfinite(shares[k]) else None
        out.append(CapacitorResult(
            rec.name, node_in, node_out, farads, "ctrans", None, None, 1.0, None,
            tau / farads if farads else math.nan, tau, tau / sum_tau if sum_tau else math.nan,
            float(parts[order[0]]), tau - float(parts[order[0]]), 0.0, share,
            1.0 / (2 * math.pi * removed) if removed > 0 else None, None, rec.file, rec.line, rec.device, "",
            t_tau, t_share, None, on,
        ))
    return out


def _inductor_time_constants(ss: SmallSignalNetwork, factors: Factors) -> float:
    """Sum of L / R for the inductors (R: the resistance each sees with the capacitors open)."""
    net = ss.network
    inductors = ss.inductors()
    if not inductors:
        return 0.0
    rows = np.array([net.branch_of[e.name] - 1 for e in inductors], dtype=np.int64)
    w = by_columns(ss.g, rows, rows, factors.lu)
    return float(sum(-e.value * wk for e, wk in zip(inductors, w)))


def _nodes(ss, a_rows, b_rows, table, excess, sum_tau, threshold, tt: TransferTable | None,
           trans: TransParts) -> list[NodeResult]:
    n = ss.n_nodes
    node_tau, miller = tc.node_sums([], a_rows, b_rows, table, n, excess)
    touched = [a_rows[a_rows >= 0], b_rows[b_rows >= 0]]
    if len(trans.rows):  # the ctrans parts, one block per device, added in one go
        rows = np.concatenate([np.asarray(r, dtype=np.int64) for r in trans.rows])
        part = np.concatenate([np.asarray(q, dtype=float) for q in trans.node_parts])
        ok = (rows >= 0) & (rows < n)
        np.add.at(node_tau, rows[ok], part[ok])
        touched.append(rows[ok])
    touched = np.unique(np.concatenate(touched)).astype(np.int64)
    names = ss.network.nodes
    taus = node_tau[touched]
    mts = miller[touched]
    with np.errstate(divide="ignore", invalid="ignore"):
        shares = (taus / sum_tau).tolist() if sum_tau else [math.nan] * len(touched)
        m_share = np.where(taus > 0, mts / taus, 0.0).tolist()
    dominated = ((taus > 0) & (mts >= threshold * taus)).tolist()
    k = len(touched)
    if tt is not None:
        tn = tt.node_tau[touched]
        tm = tt.node_miller[touched]
        with np.errstate(divide="ignore", invalid="ignore"):
            t_share = (tn / tt.sum_tau).tolist() if tt.sum_tau else [None] * k
            t_miller = np.where(tn > 0, tm / tn, 0.0).tolist()
        t_tau, t_on = tn.tolist(), tt.node_on[touched].tolist()
        # judged on the signal path: the signal's own Miller part
        dominated = ((tn > 0) & (tm >= threshold * tn)).tolist()
    else:
        t_tau = t_share = t_miller = [None] * k
        t_on = [True] * k
    return [NodeResult(names[row + 1], t, sh, mt, ms, dom, tt_, ts, tm_, on)
            for row, t, sh, mt, ms, dom, tt_, ts, tm_, on in zip(touched.tolist(), taus.tolist(), shares, mts.tolist(),
                                                               m_share, dominated, t_tau, t_share, t_miller, t_on)]
