"""The picture: time-constant shares as a ranked bar chart beside the magnitude response
at the probe, with the open-circuit estimate and the exact poles marked.  Needs the
optional matplotlib extra (``pip install 'tauscan[plot]'``)."""

from __future__ import annotations

import math

import numpy as np

from tauscan.errors import SettingsError


def render(run, freqs: np.ndarray | None, mags: np.ndarray | None, path: str, top: int = 15) -> bytes:
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise SettingsError("--plot needs matplotlib: pip install 'tauscan[plot]'") from None
    fmt = path.rsplit(".", 1)[-1].lower()
    if fmt not in ("png", "svg"):
        raise SettingsError(f"--plot writes .png or .svg files, not {path!r}")
    a = run.analysis
    fig, (left, right) = plt.subplots(1, 2, figsize=(12, 5), gridspec_kw={"width_ratios": [1, 1.3]})
    caps = a.capacitors[:top][::-1]
    colours = {"miller": "#8e3b8e", "regenerative": "#c0392b", "bootstrap": "#2a9d8f", "grounded": "#9aa5b1"}
    left.barh([c.name for c in caps], [100 * c.share for c in caps], color=[colours.get(c.klass, "#555") for c in caps])
    left.set_xlabel("share of the sum of time constants (%)")
    left.set_title("Where the time constant goes")
    for klass, colour in colours.items():
        left.bar(0, 0, color=colour, label=klass)
    left.legend(loc="lower right", fontsize=8)
    if freqs is not None and mags is not None and np.any(mags > 0):
        db = 20 * np.log10(np.maximum(mags, 1e-300))
        right.semilogx(freqs, db, color="#264653")
        right.set_xlabel("frequency (Hz)")
        right.set_ylabel(f"|H| at {a.probe} (dB)")
        right.set_title(f"Response from {a.source} to {a.probe}")
        if a.octc_hz:
            right.axvline(a.octc_hz, color="#e76f51", linestyle="--", label="open-circuit estimate")
        if a.f3db_hz:
            right.axvline(a.f3db_hz, color="#2a9d8f", linestyle=":", label="-3 dB (exact)")
        lo, hi = freqs[0], freqs[-1]
        pole_hz = [abs(p) / (2 * math.pi) for p in a.poles if lo <= abs(p) / (2 * math.pi) <= hi]
        if pole_hz:
            right.plot(pole_hz, [db.min()] * len(pole_hz), "x", color="#c0392b", label="poles")
        right.legend(fontsize=8)
        right.grid(True, which="both", alpha=0.3)
    else:
        right.text(0.5, 0.5, "no AC source or probe: no response", ha="center", va="center", transform=right.transAxes)
        right.set_axis_off()
    fig.tight_layout()
    import io

    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, dpi=110)
    plt.close(fig)
    return buffer.getvalue()
