"""Findings as SARIF 2.1.0 (OASIS Static Analysis Results Interchange Format), so that
code-scanning services can show them on the netlist's lines."""

from __future__ import annotations

import hashlib
import json
import os
import pathlib
import urllib.parse

from tauscan import __version__
from tauscan.lint.rules import RULES

SCHEMA = "https://json.schemastore.org/sarif-2.1.0.json"
LEVEL = {"error": "error", "warning": "warning", "note": "note"}


def _uri(path: str) -> str:
    """A relative URI reference (percent-encoded: paths with spaces), or a file: URI
    for a file outside the working folder (RFC 3986, as SARIF 2.1.0 section 3.10 asks)."""
    try:
        rel = os.path.relpath(path)
    except ValueError:
        rel = path
    if rel.startswith(".."):
        return pathlib.Path(os.path.abspath(path)).as_uri()
    return urllib.parse.quote(rel.replace(os.sep, "/"))


def _fingerprint(f, corner: str | None = None) -> str:
    """Stable across runs and line moves: the rule, the file, the subject and the corner."""
    return hashlib.sha256(f"{f.rule}\0{_uri(f.file)}\0{f.subject}\0{corner or ''}".encode()).hexdigest()[:32]


def document(runs: list, failures: list | None = None) -> dict:
    rule_ids = list(RULES)
    rules = [{
        "id": r.id,
        "name": r.summary.title().replace(" ", ""),
        "shortDescription": {"text": r.summary},
        "fullDescription": {"text": r.description},
        "defaultConfiguration": {"level": LEVEL[r.severity]},
    } for r in RULES.values()]
    results = []
    artifacts: dict[str, int] = {}
    for run in runs:
        for f in run.lint.findings:
            uri = _uri(f.file)
            artifacts.setdefault(uri, len(artifacts))
            location = {"artifactLocation": {"uri": uri, "index": artifacts[uri]}}
            if f.line:
                location["region"] = {"startLine": int(f.line)}
            corner = run.request.corner
            results.append({
                "ruleId": f.rule,
                "ruleIndex": rule_ids.index(f.rule),
                "level": LEVEL[f.severity],
                "message": {"text": f.message + (f" [corner {corner}]" if corner else "")},
                "locations": [{"physicalLocation": location, "logicalLocations": [{"name": f.subject}]}],
                "partialFingerprints": {"tauscanSubject/v1": _fingerprint(f, corner)},
                "properties": {**{k: v for k, v in f.numbers.items() if isinstance(v, (int, float, str))},
                               **({"corner": corner} if corner else {})},
            })
    # the figures each finding was judged on, per netlist (SARIF property bags are free-form)
    analyses = []
    for run in runs:
        a = run.analysis
        analyses.append({
            "netlist": _uri(run.request.netlist), "corner": run.request.corner,
            "source": a.source, "probe": a.probe, "probe_reason": a.probe_reason, "drive_unit": a.drive_unit,
            "rank": a.rank, "summary": a.summary_json(run.lint.waived),
            "band": a.band.to_json() if a.band is not None else None,
            "off_signal_path": [c.name for c in a.off_path_capacitors],
        })
    # a netlist of the batch that stopped with an error: a tool execution notification
    notes = []
    for f in failures or ():
        location = {"artifactLocation": {"uri": _uri(f.file or f.netlist)}}
        if f.line:
            location["region"] = {"startLine": int(f.line), **({"startColumn": int(f.col)} if f.col else {})}
        notes.append({"level": "error", "message": {"text": f.headline}, "locations": [{"physicalLocation": location}]})
    invocation = {"executionSuccessful": not notes}
    if notes:
        invocation["toolExecutionNotifications"] = notes
    return {
        "$schema": SCHEMA,
        "version": "2.1.0",
        "runs": [{
            "tool": {"driver": {"name": "tauscan", "version": __version__, "rules": rules}},
            "artifacts": [{"location": {"uri": uri}} for uri in artifacts],
            "results": results,
            "invocations": [invocation],
            "properties": {"analyses": analyses},
        }],
    }


def render(runs: list, failures: list | None = None) -> str:
    return json.dumps(document(runs, failures), indent=2) + "\n"
