"""Sub-command handlers: each runs the stages it needs and hands the result to a reporter."""

from __future__ import annotations

import argparse
import dataclasses
import os
import sys
from collections.abc import Callable, Sequence

from tauscan.errors import EXIT_ERROR, SettingsError
from tauscan.report import formats


#: Points of the magnitude sweep drawn by ``--plot``.
PLOT_POINTS = 200


def add_subcommands(sub, add_common: Callable[..., None]) -> None:
    """Register the handlers (``expand`` is declared by the CLI itself)."""
    sub.choices["expand"].set_defaults(handler=cmd_expand)

    p = sub.add_parser("op", help="solve and print the DC operating point")
    add_common(p)
    _add_bias_options(p)
    p.add_argument("--format", choices=["table", "json"], default="table", help="table (default) or json")
    p.add_argument("-o", "--output", metavar="FILE", help="write to FILE instead of standard output")
    p.set_defaults(handler=cmd_op)

    p = sub.add_parser("scan", help="rank the capacitors and nodes that limit the bandwidth")
    add_common(p, several=True)
    _add_bias_options(p)
    _add_analysis_options(p)
    p.add_argument("--format", choices=formats.choices("scan"), default="table",
                   help="table (the terminal report; default), json (every figure), csv (one row per "
                        "capacitor), markdown (for a review), sarif (findings for code scanning), html (one "
                        "self-contained file: sortable tables, the plot inline, for a CI artifact)")
    p.add_argument("-o", "--output", metavar="FILE", help="write the report to FILE (atomically) instead of standard output")
    p.add_argument("--plot", metavar="FILE", help="also draw the shares and the response to FILE (.png or .svg)")
    p.add_argument("--top", type=_positive_int, default=20, metavar="N", help="rows per table (default 20; 0 for all)")
    p.add_argument("--columns", metavar="LIST",
                   help="the capacitor table's columns, comma-separated (default: as many as the width holds, "
                        "the essential first): capacitor, nodes, c, gain, class, miller, r, tau, share, signal-gain, "
                        "t, t-share, pole-share, f-without, f-cascoded")
    _add_batch_options(p)
    p.set_defaults(handler=cmd_scan)

    p = sub.add_parser("check", help="lint gate: findings against thresholds and waivers, with exit codes")
    add_common(p, several=True)
    _add_bias_options(p)
    _add_analysis_options(p)
    p.add_argument("--fail-on", choices=["note", "warning", "error", "never"], help="exit 1 on findings at or above this (default warning)")
    p.add_argument("--format", choices=formats.choices("check"), default="table",
                   help="table (one line per netlist and the findings; default), json, sarif, html (one "
                        "self-contained file for a CI artifact)")
    p.add_argument("-o", "--output", metavar="FILE", help="write the report to FILE (atomically) instead of standard output")
    _add_batch_options(p)
    p.set_defaults(handler=cmd_check)


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, not {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError("expected 0 or more")
    return value


def _add_batch_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--corner", action="append", default=[], metavar="NAME:PARAM=V,...",
                   help="scan once per corner: parameter overrides, temp=C and lib=SECTION (the .lib "
                        "section to read instead of the netlist's; repeatable)")
    p.add_argument("--jobs", type=_positive_int, default=0, metavar="N",
                   help="worker processes for several netlists or corners (default: the number of cores)")
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="send the scans to a Dask distributed scheduler (tcp://host:8786; needs the 'cluster' extra)")
    p.add_argument("--cluster-timeout", type=float, default=15.0, metavar="S",
                   help="seconds to wait for the scheduler (default 15)")


def _add_analysis_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--probe", metavar="NODE", help="output node of the transfer, or A,B for v(A) - v(B) "
                   "(default: the top-level node with the largest gain)")
    p.add_argument("--source", metavar="NAME", help="input source (default: every source with an AC value, together)")
    p.add_argument("--band", metavar="auto|dc|FREQ", help="the circuit analysed: auto (the mid-band circuit of the "
                   "pass band; default), dc (capacitors open, inductors shorted) or the states at a frequency")
    p.add_argument("--short", action="append", default=[], metavar="GLOB",
                   help="pin capacitors or inductors short in the analysed circuit (repeatable)")
    p.add_argument("--open", action="append", default=[], metavar="GLOB",
                   help="pin capacitors or inductors open in the analysed circuit (repeatable)")
    p.add_argument("--rank", choices=["transfer", "octc"], help="rank by transfer time constant (default: the "
                   "signal path first) or by open-circuit time constant")
    p.add_argument("--min-bandwidth", metavar="FREQ", help="bandwidth-floor rule threshold, e.g. 100k or 2.5meg")
    p.add_argument("--config", metavar="FILE", help="settings file (default: tauscan.toml or pyproject.toml found upwards)")


def _add_bias_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--temp", type=float, metavar="C", help="temperature in Celsius (overrides .temp)")
    p.add_argument("--op", dest="op_file", metavar="FILE", help="operating point from a file (CSV or JSON; see README)")


def parse_params(items: Sequence[str]) -> dict[str, float]:
    """``--param NAME=VALUE`` items -> {name: value}; values take SPICE suffixes."""
    from tauscan.units import parse_assignment

    from tauscan.units import OptionValueError

    out: dict[str, float] = {}
    for item in items:
        try:
            pair = parse_assignment(item)
        except OptionValueError as exc:
            raise SettingsError(f"--param {item!r}: {exc}") from None
        if pair is None:
            raise SettingsError(f"--param expects NAME=VALUE with a number, not {item!r}")
        out[pair[0]] = pair[1]
    return out


def read_circuit(args: argparse.Namespace):
    from tauscan.pipeline import ScanRequest, read_options, settings_for
    from tauscan.reader import read_netlist

    request = ScanRequest(args.netlist, include_dirs=tuple(args.include_dirs), x_mega=args.x_mega)
    return read_netlist(args.netlist, parse_params(args.param), options=read_options(request, settings_for(request)))


def solve(args: argparse.Namespace, circuit):
    from tauscan.op import operating_point

    return operating_point(circuit, args.temp, args.op_file)


def cmd_expand(args: argparse.Namespace) -> int:
    from tauscan.report import expand_view
    from tauscan.report.output import write_text

    circuit = read_circuit(args)
    text = expand_view.render_json(circuit) if args.format == "json" else expand_view.render_table(circuit)
    write_text(text, args.output, protect=(args.netlist,))
    return 0


def cmd_op(args: argparse.Namespace) -> int:
    from tauscan.report import op_view
    from tauscan.report.output import write_text

    op = solve(args, read_circuit(args))
    text = op_view.render_json(op) if args.format == "json" else op_view.render_table(op)
    write_text(text, args.output, protect=(args.netlist,))
    return 0


def _requests(args: argparse.Namespace, netlists: list[str]):
    from tauscan.lint.settings import band_value, bandwidth_value
    from tauscan.pipeline import ScanRequest

    from tauscan.corners import parse_corner

    floor = bandwidth_value(args.min_bandwidth) if args.min_bandwidth else None
    band = band_value(args.band) if getattr(args, "band", None) else None
    params = parse_params(args.param)
    from tauscan.pipeline import settings_for

    given = [parse_corner(text) for text in args.corner]
    requests = []
    for netlist in netlists:
        # corners from the settings file run beside the nominal case; given ones replace it
        corners = given or [None, *settings_for(ScanRequest(netlist, config=args.config)).corners]
        for corner in corners:
            merged = dict(params)
            temp = args.temp
            if corner is not None:
                merged.update(corner.params)
                temp = corner.temp_c if corner.temp_c is not None else temp
            requests.append(ScanRequest(netlist=netlist, params=merged, temp_c=temp, op_file=args.op_file,
                                        probe=args.probe, source=args.source, config=args.config,
                                        min_bandwidth=floor, fail_on=getattr(args, "fail_on", None),
                                        band=band, short=tuple(getattr(args, "short", ())),
                                        open=tuple(getattr(args, "open", ())), rank=getattr(args, "rank", None),
                                        corner=corner.name if corner else None,
                                        lib_section=corner.lib if corner else None,
                                        include_dirs=tuple(args.include_dirs), x_mega=args.x_mega))
    if getattr(args, "plot", None) or getattr(args, "format", None) == "html":  # the plot draws every run's transfer
        requests = [dataclasses.replace(r, curve_points=PLOT_POINTS) for r in requests]
    return requests


def _run_all(requests, jobs: int = 1, cluster: str | None = None, timeout: float = 15.0):
    """Scan every request (see :func:`_run_batch`).  A netlist scanned at several corners
    has its transfer fixed once: its first run chooses the probe (when neither the command
    line nor the settings name one), and every other corner of it uses that probe, so that no
    corner changes what is measured and ``(worst)`` compares the same transfer.  The two
    rounds share one pool of worker processes."""
    from tauscan.pipeline import ScanFailure

    groups: dict[str, list[int]] = {}
    for k, r in enumerate(requests):
        groups.setdefault(r.netlist, []).append(k)
    leaders = [ks[0] for ks in groups.values() if len(ks) > 1 and requests[ks[0]].probe is None]
    if not leaders:
        return _run_batch(requests, jobs, cluster, timeout)
    workers = jobs or os.cpu_count() or 1
    pool = None
    if not cluster and workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        pool = ProcessPoolExecutor(max_workers=min(workers, len(requests)))
    try:
        results: list = [None] * len(requests)
        # (a batch: one failing run is a failure of its own, never the command's error)
        for k, result in zip(leaders, _run_batch([requests[k] for k in leaders], jobs, cluster, timeout, pool, False)):
            results[k] = result
        rest = []
        for ks in groups.values():
            lead = results[ks[0]]
            for k in ks:
                if results[k] is not None:
                    continue
                request = requests[k]
                if lead is not None and not isinstance(lead, ScanFailure) and lead.analysis.probe:
                    request = dataclasses.replace(request, pinned_probe=lead.analysis.probe)
                rest.append((k, request))
        for (k, _), result in zip(rest, _run_batch([r for _, r in rest], jobs, cluster, timeout, pool, False)):
            results[k] = result
    finally:
        if pool is not None:
            pool.shutdown()
    return results


def _run_batch(requests, jobs: int = 1, cluster: str | None = None, timeout: float = 15.0, pool=None,
               alone_raises: bool = True):
    """Scan every request: on a Dask cluster when one is named, else in worker processes
    (``pool``, or a pool of its own) when there are several and jobs allow.  A request alone
    raises its error (``alone_raises``: the command's only netlist) instead of returning it."""
    if not requests:
        return []
    from tauscan.pipeline import scan, scan_in_worker_or_failure, scan_or_failure
    from tauscan.report.progress import StageProgress

    if cluster:
        from tauscan.cluster import run_on_cluster

        return run_on_cluster(requests, cluster, timeout)

    workers = jobs or os.cpu_count() or 1
    if len(requests) > 1 and workers > 1:
        if pool is not None:
            return list(pool.map(scan_in_worker_or_failure, requests))
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=min(workers, len(requests))) as own:
            return list(own.map(scan_in_worker_or_failure, requests))
    with StageProgress() as progress:
        if len(requests) == 1 and alone_raises:  # one netlist: its error is the command's
            return [scan(requests[0], progress)]
        return [scan_or_failure(r, progress) for r in requests]


def _split(results: list) -> tuple[list, list]:
    """(runs, failures) of a batch; each failure's located error is printed to stderr."""
    from tauscan.pipeline import ScanFailure

    failures = [r for r in results if isinstance(r, ScanFailure)]
    runs = [r for r in results if not isinstance(r, ScanFailure)]
    # a parameter override that no netlist of the batch has is a typo, not a corner that
    # one netlist happens not to use
    if runs:
        unknown = set.intersection(*(set(r.unknown_params) for r in runs))
        if unknown:
            name = sorted(unknown)[0]
            raise SettingsError(runs[0].unknown_params[name], runs[0].request.netlist)
    for f in failures:
        print(f.rendered, file=sys.stderr)
    return runs, failures


def cmd_scan(args: argparse.Namespace) -> int:
    from tauscan.report.output import write_bytes, write_text

    from tauscan.report import scan_table

    columns = scan_table.parse_columns(args.columns)  # (checked before anything runs)
    if args.plot:
        from tauscan.report import plot

        plot.check(args.plot)
    runs, failures = _split(_run_all(_requests(args, args.netlist), args.jobs, args.cluster, args.cluster_timeout))
    if not runs:
        return EXIT_ERROR
    top = args.top or None
    fmt = args.format
    if fmt == "table" and args.output is None:
        scan_table.print_to_terminal(runs, top, columns)
    elif fmt == "table":
        write_text(scan_table.render(runs, top, columns=columns), args.output, protect=tuple(args.netlist))
    else:
        write_text(_render("scan", fmt, runs, top, failures=failures), args.output, protect=tuple(args.netlist))
    if args.plot:
        from tauscan.report import plot

        write_bytes(plot.render_all(runs, args.plot, top), args.plot, protect=tuple(args.netlist))
    return EXIT_ERROR if failures else 0


def _render(command: str, fmt: str, runs: list, top: int | None, exit_code: int | None = None,
            failures: list | None = None) -> str | bytes:
    from tauscan.gcpause import paused_gc

    with paused_gc():  # a record per capacitor: many objects, no cycles
        if fmt == "json":  # written as the bytes it is made of
            from tauscan.report import scan_json

            return scan_json.render_bytes(runs, exit_code, failures)
        return formats.render(command, fmt, runs, top, exit_code, failures)


def cmd_check(args: argparse.Namespace) -> int:
    from tauscan.lint.gate import exit_code
    from tauscan.report.output import write_text

    runs, failures = _split(_run_all(_requests(args, args.netlist), args.jobs, args.cluster, args.cluster_timeout))
    code = max([exit_code(r.lint.findings, r.settings.fail_on) for r in runs] + [EXIT_ERROR if failures else 0])
    if args.format == "table" and args.output is None:
        from tauscan.report import check_table

        if runs:
            check_table.print_to_terminal(runs, code)
        return code
    write_text(_render("check", args.format, runs, None, code, failures), args.output, protect=tuple(args.netlist))
    return code
