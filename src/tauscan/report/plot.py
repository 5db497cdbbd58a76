"""The picture: for every netlist and corner, the time-constant shares as a ranked bar chart
beside the magnitude response at the probe, the open-circuit estimate, the -3 dB point and
the dominant pole marked with their values, and every pole shown.  Needs the optional
matplotlib extra (``pip install -e '.[plot]'`` in a checkout, ``pip install 'tauscan[plot]'``
otherwise)."""

from __future__ import annotations

import io
import math

import numpy as np

from tauscan.errors import SettingsError
from tauscan.units import eng

#: the file types ``--plot`` writes
FORMATS = ("png", "svg")
#: our colours per capacitor class
COLOURS = {"miller": "#8e3b8e", "regenerative": "#c0392b", "bootstrap": "#2a9d8f", "grounded": "#9aa5b1",
           "ctrans": "#e9c46a"}


def check(path: str) -> str:
    """The format of ``path`` for ``--plot``, checked before anything runs: its extension, and
    matplotlib being installed."""
    fmt = path.rsplit(".", 1)[-1].lower() if "." in path else ""
    if fmt not in FORMATS:
        raise SettingsError(f"--plot writes .png or .svg files, not {path!r}")
    import importlib.util

    if importlib.util.find_spec("matplotlib") is None:
        raise SettingsError("--plot needs matplotlib: pip install -e '.[plot]' in a checkout of tauscan "
                            "(pip install 'tauscan[plot]' otherwise)")
    return fmt


def _label(run) -> str:
    name = run.request.netlist.rsplit("/", 1)[-1]
    return f"{name} [corner {run.request.corner}]" if run.request.corner else name


def render_all(runs: list, path: str, top: int | None = 15) -> bytes:
    """One row per run (netlist and corner): shares left, response right."""
    fmt = check(path)
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    matplotlib.rcParams["svg.fonttype"] = "none"  # SVG text stays text (searchable, and smaller)
    rows = len(runs)
    top = top or 15
    fig, axes = plt.subplots(rows, 2, figsize=(13, 4.8 * rows), gridspec_kw={"width_ratios": [1, 1.3]}, squeeze=False)
    for (left, right), run in zip(axes, runs):
        _shares(left, run, top)
        _response(right, run)
    fig.tight_layout()
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, dpi=110)
    plt.close(fig)
    return buffer.getvalue()


def _shares(ax, run, top: int) -> None:
    a = run.analysis
    ranked = a.on_path_capacitors if a.rank == "transfer" and a.sum_transfer_tau_s is not None else a.capacitors
    caps = ranked[:top][::-1]
    use_transfer = a.rank == "transfer" and a.sum_transfer_tau_s is not None
    shares = [100 * ((c.transfer_share if use_transfer else c.share) or 0.0) for c in caps]
    ax.barh([c.name for c in caps], shares, color=[COLOURS.get(c.klass, "#555") for c in caps])
    ax.set_xlabel("share of the sum of " + ("transfer " if use_transfer else "") + "time constants (%)")
    ax.set_title(f"{_label(run)}: where the time constant goes (top {len(caps)})", fontsize=10)
    for klass in sorted({c.klass for c in caps}):
        ax.bar(0, 0, color=COLOURS.get(klass, "#555"), label=klass)
    if caps:
        ax.legend(loc="lower right", fontsize=8)


def _response(ax, run) -> None:
    a = run.analysis
    freqs, mags = run.response_curve()
    if freqs is None or mags is None or not np.any(mags > 0):
        ax.text(0.5, 0.5, "no AC source or probe: no response", ha="center", va="center", transform=ax.transAxes)
        ax.set_axis_off()
        return
    db = 20 * np.log10(np.maximum(mags, 1e-300))
    ax.semilogx(freqs, db, color="#264653", label=f"|H| from {a.source} to {a.probe}")
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel(f"|H| at {a.probe} (dB)")
    ax.set_title(f"{_label(run)}: response", fontsize=10)
    estimate = a.elmore_hz if a.rank == "transfer" and a.elmore_hz else a.octc_hz
    what = "signal-path estimate" if estimate is a.elmore_hz and a.elmore_hz else "open-circuit estimate"
    if estimate:
        ax.axvline(estimate, color="#e76f51", linestyle="--", label=f"{what} {eng(estimate, 'Hz')}")
    if a.f3db_hz:
        ax.axvline(a.f3db_hz, color="#2a9d8f", linestyle=":", label=f"-3 dB (exact) {eng(a.f3db_hz, 'Hz')}")
    if a.dominant_pole_hz:
        ax.axvline(a.dominant_pole_hz, color="#6d597a", linestyle="-.", alpha=0.7,
                   label=f"dominant pole {eng(a.dominant_pole_hz, 'Hz')}")
    pole_hz = [abs(complex(p)) / (2 * math.pi) for p in a.poles]
    pole_hz = [f for f in pole_hz if f > 0 and freqs[0] <= f <= freqs[-1]]
    if pole_hz:
        ax.plot(pole_hz, [db.min()] * len(pole_hz), "x", color="#c0392b", label=f"poles ({len(pole_hz)})")
    ax.legend(fontsize=8)
    ax.grid(True, which="both", alpha=0.3)
