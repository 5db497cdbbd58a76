"""The scan report as JSON (the contract in the README), and the records other formats share."""

from __future__ import annotations

import orjson


def scan_record(run) -> dict:
    a = run.analysis
    data = a.to_json(run.lint.waived)
    data["netlist"] = run.request.netlist
    data["corner"] = run.request.corner
    data["title"] = a.title
    data["findings"] = [dict(f.to_json(), corner=run.request.corner) for f in run.lint.findings]
    data["waivers"] = [{"capacitor": w.capacitor, "reason": w.reason, "source": w.source} for w in run.lint.waivers]
    data["warnings"] = list(a.warnings)
    data["methods"] = dict(a.methods)
    data["floor"] = run.lint.floor
    ordered = {k: data[k] for k in ("netlist", "corner", "title", "source", "probe", "probe_reason",
                                    "drive_unit", "rank", "band", "summary", "floor", "capacitors", "nodes", "poles",
                                    "unstable_poles", "findings", "waivers", "warnings", "methods")}
    return ordered


#: Above this many capacitors the JSON is written compact (a report of 10^5 records is read
#: by programs, not people).
INDENT_LIMIT = 5000


def _dumps(data: dict, size: int) -> bytes:
    """The report as UTF-8 bytes, by orjson (a tenth of the json module's time on 10^5
    records; it writes NaN and infinities as null, as the report's contract says), ending in a
    newline."""
    option = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_APPEND_NEWLINE | (orjson.OPT_INDENT_2 if size <= INDENT_LIMIT else 0)
    return orjson.dumps(data, option=option)


def render(runs: list, exit_code: int | None = None, failures: list | None = None) -> str:
    """The report as text (see :func:`render_bytes`, which the command line writes as it is)."""
    return render_bytes(runs, exit_code, failures).decode("utf-8")


def render_bytes(runs: list, exit_code: int | None = None, failures: list | None = None) -> bytes:
    """The report as UTF-8 bytes: at 10^6 lines it is hundreds of MB, never copied into a str."""
    size = sum(len(r.analysis.capacitors) for r in runs)
    failures = list(failures or ())
    if len(runs) == 1 and exit_code is None and not failures:
        return _dumps(scan_record(runs[0]), size)
    data = {"runs": [scan_record(r) for r in runs]}
    data["findings"] = [f for r in data["runs"] for f in r["findings"]]
    if failures:
        data["errors"] = [f.to_json() for f in failures]
    if exit_code is not None:
        data["exit_code"] = exit_code
    return _dumps(data, size)
