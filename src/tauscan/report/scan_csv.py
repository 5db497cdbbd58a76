"""The ranked capacitors as CSV, one row each (the JSON capacitor fields)."""

from __future__ import annotations


def render(runs: list) -> str:
    import pandas as pd

    frames = []
    corners = any(run.request.corner for run in runs)
    for run in runs:
        frame = run.analysis.capacitors_frame(run.lint.waived)
        if corners:
            frame.insert(0, "corner", run.request.corner or "")
        if len(runs) > 1:
            frame.insert(0, "netlist", run.request.netlist)
        frames.append(frame)
    frame = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
    return frame.to_csv(index=False, float_format="%.6g", lineterminator="\n")
