"""The transfer from a source to one row of the small-signal system, its -3 dB frequency
and a magnitude sweep.

The -3 dB frequency is where |H(j 2 pi f)| falls to |H(0)| / sqrt 2: a dense solve per point
for a small circuit; for a large one each point is a sparse complex factorization, so each
also gives the slope d ln|H| / d ln f (one more solve with the same factors) and the crossing
is refined by Newton's method kept inside its bracket.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import scipy.linalg as la

from tauscan.analysis.poles import DENSE_LIMIT, Poles
from tauscan.analysis.probe import Probe
from tauscan.analysis.systems import Factors

#: Upward step of the -3 dB search in a large circuit (each point is a sparse complex
#: factorization; Newton's method with the slope then refines the bracket).
F3DB_STEP = 8.0
#: |H(0)| below this fraction of the highest |H| means no DC path: the -3 dB point is then
#: taken from the mid-band peak.
MID_BAND_RATIO = 1e-9
#: Highest frequency the large-circuit -3 dB search steps to: a thousand times the transit
#: frequency of the fastest transistors (well under 1 THz; from memory), so a response still
#: flat there has no -3 dB point that matters.
F3DB_MAX_HZ = 1e15


class Response:
    """H(j 2 pi f) from a source vector to a probe (a :class:`Probe`, or one row)."""

    def __init__(self, factors: Factors, b: np.ndarray, row: "int | Probe") -> None:
        g, c = factors.g, factors.c
        self.b = b.astype(complex)
        self.probe = row if isinstance(row, Probe) else Probe(None, int(row))
        self.ill_conditioned = False
        self.dense = g.shape[0] <= DENSE_LIMIT
        #: H at frequencies already solved (by the probe choice, or here), reused as they are
        self.known: dict[float, complex] = {}
        #: d ln|H| / d ln f where a sparse point was solved here (one more solve with the
        #: same factors: dH/ds = -e_row^T (G + sC)^-1 C x)
        self.slopes: dict[float, float] = {}
        if self.dense:
            self._gd, self._cd = g.toarray(), c.toarray()
        else:
            self._c = c.tocsr()
            self._solver = factors.complex

    def __call__(self, f: float) -> complex:
        if f in self.known:
            return self.known[f]
        s = 2j * math.pi * f
        try:
            if self.dense:
                with warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always", la.LinAlgWarning)
                    x = la.solve(self._gd + s * self._cd, self.b)
                if caught:
                    self.ill_conditioned = True
            else:
                factored = self._solver.factor(s)
                x = self._solver.solve(factored, self.b)
                h = complex(self.probe.of(x))
                if h != 0 and f > 0:
                    dh = -complex(self.probe.of(self._solver.solve(factored, self._c @ x)))
                    slope = (s * dh / h).real
                    if math.isfinite(slope):
                        self.slopes[f] = slope
                self.known[f] = h  # each sparse point is a factorization: never twice
                return h
        except (np.linalg.LinAlgError, RuntimeError):
            # singular at this frequency (an undamped resonance, or a loop of reactances)
            self.ill_conditioned = True
            return complex(math.nan, math.nan)
        return complex(self.probe.of(x))

    def dc(self) -> float:
        return abs(self(0.0))


def f3db(resp: Response, poles: Poles, estimate_hz: float | None = None) -> tuple[float | None, str]:
    """Where |H| falls to 1/sqrt(2) of |H(0)| (or of the mid-band peak when H(0) = 0).

    Small circuits: a sweep over the whole pole band, then regula falsi on the first
    crossing.  Large ones (each point a sparse complex factorization): steps upward from
    below the dominant pole or the estimate (:data:`F3DB_STEP`), then Newton's method with
    the slope each point gives (:func:`_refine_sloped`).

    Parameters
    ----------
    resp : Response
        The transfer H(f) of one drive and probe.
    poles : Poles
        The network's poles (rad/s), which bound the sweep.
    estimate_hz : float, optional
        The first-order estimate (Hz), a starting point for large circuits.

    Returns
    -------
    f3db : float or None
        Hz; None when |H| does not fall that far below the top of the sweep.
    note : str
        How it was found.
    """
    h0 = resp.dc()
    if not math.isfinite(h0):
        return None, "the response is singular at DC; no -3 dB figure"
    if not resp.dense:
        return _f3db_stepping(resp, h0, poles, estimate_hz)
    mags = np.abs(poles.values) / (2 * math.pi) if len(poles.values) else np.array([estimate_hz or 1.0])
    lo = max(float(np.min(mags)) / 1e4, 1e-3)
    hi = min(float(np.max(mags)) * 1e4 if poles.complete else float(np.min(mags)) * 1e6, 1e18)
    per_decade = 8 if resp.dense else 3
    count = max(8, int(math.ceil(math.log10(hi / lo) * per_decade)))
    freqs = np.geomspace(lo, hi, count)
    values = [abs(resp(f)) for f in freqs]
    if not math.isfinite(h0) or not all(math.isfinite(v) for v in values):
        return None, "the response is singular at some frequency; no -3 dB figure"
    note = "|H(0)|/sqrt(2)"
    start = 0
    reference = h0
    if h0 <= MID_BAND_RATIO * max(values):
        start = int(np.argmax(values))
        reference = values[start]
        note = "mid-band peak/sqrt(2) (no DC path from the source to the probe)"
    if reference == 0:
        return None, "the probe does not respond to the source"
    target = reference / math.sqrt(2.0)
    for k in range(start + 1, len(freqs)):
        if values[k] < target <= values[k - 1]:
            return _refine(resp, target, freqs[k - 1], freqs[k], values[k - 1], values[k]), note
    return None, "no -3 dB point within the searched band"


def _gap(target: float):
    """g(|H|) = ln|H| - ln target (a very negative number for |H| = 0)."""
    log_target = math.log(target)

    def gap_of(v: float) -> float:
        return math.log(v) - log_target if v > 0 else -1e300

    return gap_of


def _settled(fa: float, fb: float, ga: float, gb: float) -> tuple[bool, float | None]:
    """Whether a bracket's ends already answer: (True, None) when they do not bracket a
    crossing, (True, that end) when one lies on it, else (False, None)."""
    if not (math.isfinite(ga) and math.isfinite(gb)) or ga * gb > 0:
        return True, None
    if ga == 0:
        return True, fa
    if gb == 0:
        return True, fb
    return False, None


def _refine(resp: Response, target: float, fa: float, fb: float,
            va: float | None = None, vb: float | None = None) -> float | None:
    """The crossing of |H| = target between a bracket (``va``, ``vb``: |H| there, when
    known), by the Illinois variant of regula falsi on log|H| against log f: nearly straight
    on a roll-off, so it takes a few evaluations, and the bracket is kept throughout.
    Stops when the frequency is known to 1e-9 (cheap dense points) or 1e-4 (each point a
    sparse factorization: the large-circuit search uses :func:`_refine_sloped`)."""
    gap_of = _gap(target)
    a, b = math.log(fa), math.log(fb)
    ga = gap_of(abs(resp(fa)) if va is None else va)
    gb = gap_of(abs(resp(fb)) if vb is None else vb)
    settled, answer = _settled(fa, fb, ga, gb)
    if settled:
        return answer
    # log|H| falls about as fast as log f near the crossing: the same tolerance serves both
    tol = 1e-9 if resp.dense else 1e-4
    x = b
    for _ in range(100):
        x = (a * gb - b * ga) / (gb - ga)
        if not (min(a, b) < x < max(a, b)):
            x = 0.5 * (a + b)
        gx = gap_of(abs(resp(math.exp(x))))
        if not math.isfinite(gx):
            return None
        if abs(gx) < tol:
            break
        if gx * gb < 0:  # the root lies between x and the old b
            a, ga = b, gb
        else:  # the old a stays a second time: halve its weight (Illinois)
            ga *= 0.5
        b, gb = x, gx
        if abs(b - a) < tol:
            break
    return math.exp(x)


def _refine_sloped(resp: Response, target: float, fa: float, fb: float, va: float, vb: float) -> float | None:
    """The crossing of |H| = target in a bracket (|H| = ``va`` above it at ``fa``, ``vb``
    below it at ``fb``) where every point costs a sparse factorization: Newton's method on
    g = ln|H| - ln target against ln f, with the slope each point gives for one more solve
    (:attr:`Response.slopes`), kept inside the bracket; a Newton step that would leave it,
    or a point with no falling slope, gives way to the Illinois step of :func:`_refine`.
    Stops when |g| < 1e-6 (ln f then known to about that, on a roll-off of order one)."""
    gap_of = _gap(target)
    a, b = math.log(fa), math.log(fb)
    ga, gb = gap_of(va), gap_of(vb)
    settled, answer = _settled(fa, fb, ga, gb)
    if settled:
        return answer
    tol = 1e-6
    # an end already within the tolerance is the answer (a point the pass-band search solved)
    if abs(ga) < tol or abs(gb) < tol:
        return fa if abs(ga) <= abs(gb) else fb
    # the newest point and its slope: the end nearer the crossing to begin with
    near_a = abs(ga) <= abs(gb)
    x, gx, fx = (a, ga, fa) if near_a else (b, gb, fb)
    slope = resp.slopes.get(fx)
    last_side: bool | None = None
    for _ in range(60):
        step_ok = slope is not None and slope < 0
        if step_ok:
            candidate = x - gx / slope
            step_ok = min(a, b) < candidate < max(a, b)
        if not step_ok:
            candidate = (a * gb - b * ga) / (gb - ga)
            if not (min(a, b) < candidate < max(a, b)):
                candidate = 0.5 * (a + b)
        fx = math.exp(candidate)
        gnew = gap_of(abs(resp(fx)))
        if not math.isfinite(gnew):
            return None
        x = candidate
        slope = resp.slopes.get(fx)
        if abs(gnew) < tol:
            return fx
        # keep the bracket: the new point replaces the end on its side; when secant steps
        # land on one side twice running, the other end's weight is halved (Illinois)
        side = gnew > 0
        if side:
            a, ga = candidate, gnew
        else:
            b, gb = candidate, gnew
        if not step_ok and side == last_side:
            if side:
                gb *= 0.5
            else:
                ga *= 0.5
        last_side = side
        gx = gnew
        if abs(b - a) < tol:
            return fx
    return math.exp(x)


def _f3db_stepping(resp: Response, h0: float, poles: Poles, estimate_hz: float | None) -> tuple[float | None, str]:
    """Step up from below the dominant pole; the reference is |H(0)|, or the highest |H| met
    so far when the probe has (almost) no DC path from the source (AC coupling), as in the
    sweep of small circuits."""
    guesses = [abs(p) / (2 * math.pi) for p in poles.values[:1]] + ([estimate_hz] if estimate_hz else [])
    f = min(guesses) / 8 if guesses else 1.0
    # a frequency already solved a little lower (the probe choice's) serves as the start
    below = [k for k in resp.known if f / 8 <= k <= f]
    if below:
        f = max(below)
    value = abs(resp(f))
    steps = 0
    while value < h0 / math.sqrt(2.0) and steps < 60:  # start below the crossing
        f /= 8
        value = abs(resp(f))
        steps += 1
    peak = max(h0, value)
    step = F3DB_STEP
    # frequencies already solved above the start are taken first, as uneven steps
    ahead = sorted(k for k in resp.known if k > f)
    while steps < 120:
        f_next = ahead.pop(0) if ahead else f * step
        v_next = abs(resp(f_next))
        if not math.isfinite(v_next):
            return None, "the response is singular at some frequency; no -3 dB figure"
        peak = max(peak, v_next)
        mid_band = h0 <= MID_BAND_RATIO * peak
        target = (peak if mid_band else h0) / math.sqrt(2.0)
        if v_next < target <= value:
            note = ("mid-band peak/sqrt(2) (no DC path from the source to the probe), found by stepping up"
                    if mid_band else "|H(0)|/sqrt(2), found by stepping up from the dominant pole")
            return _refine_sloped(resp, target, f, f_next, value, v_next), note
        # across a flat band (within 1 % over the step) stride eight times further: an
        # AC-coupled probe can lie decades above its coupling pole, and each point costs a
        # factorization; a wider bracket costs the refinement about one more point
        flat = value > 0 and abs(math.log(v_next / value)) < 0.01 if v_next > 0 else False
        step = F3DB_STEP ** 2 if flat else F3DB_STEP
        f, value, steps = f_next, v_next, steps + 1
        if f > F3DB_MAX_HZ:
            break
    return None, f"no -3 dB point below {F3DB_MAX_HZ:.0e} Hz"


def response_curve(factors: Factors, b: np.ndarray, row: "int | Probe", f_lo: float, f_hi: float,
                   points: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """|H| over a logarithmic sweep (for plots).

    Parameters
    ----------
    factors : Factors
    b : ndarray, shape (n,)
        The drive.
    row : int or Probe
        The output row, or the probe.
    f_lo, f_hi : float
        Sweep limits (Hz).
    points : int
        Number of frequencies.

    Returns
    -------
    freqs, mags : ndarray, shape (points,)
        Hz, and |H| in the probe's unit per unit of drive.
    """
    resp = Response(factors, b, row)
    freqs = np.geomspace(f_lo, f_hi, points)
    return freqs, np.array([abs(resp(f)) for f in freqs])
