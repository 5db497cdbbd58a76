"""Exact poles, the dominant pole's eigenvectors and sensitivities, and the -3 dB frequency
(METHOD sections 4 and 5).

Poles are s = -1/lambda for the nonzero eigenvalues lambda of G^-1 C: dense
generalized eigenvalues for small circuits, shift-invert Arnoldi (ARPACK through
scipy.sparse.linalg.eigs, with the operator G^-1 C, i.e. shift 0) for the few
dominant ones of a large circuit.  Dominant-pole sensitivities follow Rommes
and Martins (IEEE Trans. Power Systems 21(3), 2006):

    S_k = (C_k / p) dp/dC_k = -C_k (y_a - y_b)(x_a - x_b) / (y^T C x)

with right and left eigenvectors x, y of the pole p.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.optimize import brentq

#: Up to this many unknowns all poles are found with a dense eigen-solver.
DENSE_LIMIT = 800
#: Number of dominant poles sought in a large circuit.
SPARSE_POLES = 8
#: An eigenvalue of G^-1 C smaller than this fraction of the largest is an infinite pole.
LAMBDA_FLOOR = 1e-13


@dataclass
class Poles:
    values: np.ndarray  # complex, sorted by magnitude (dominant first)
    complete: bool  # all finite poles (dense) or only the dominant few (sparse)
    method: str
    right: np.ndarray | None = None  # eigenvector of the dominant pole (MNA rows)
    left: np.ndarray | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def dominant(self) -> complex | None:
        return complex(self.values[0]) if len(self.values) else None


def find_poles(g: sp.csc_matrix, c: sp.csc_matrix, lu=None, dense_limit: int = DENSE_LIMIT) -> Poles:
    n = g.shape[0]
    if c.nnz == 0 or n == 0:
        return Poles(np.zeros(0, dtype=complex), True, "none")
    if n <= dense_limit:
        return _dense(g, c)
    return _sparse(g, c, lu)


def _dense(g, c) -> Poles:
    lam, vl, vr = la.eig(c.toarray(), g.toarray(), left=True, right=True)
    finite = np.isfinite(lam)
    scale = np.max(np.abs(lam[finite]), initial=0.0)
    keep = finite & (np.abs(lam) > LAMBDA_FLOOR * scale) if scale > 0 else np.zeros(len(lam), bool)
    if not keep.any():
        return Poles(np.zeros(0, dtype=complex), True, "dense")
    poles = -1.0 / lam[keep]
    order = np.lexsort((np.imag(poles), np.abs(poles)))
    poles = poles[order]
    k = np.flatnonzero(keep)[order[0]]
    # eig's left vector u satisfies u^H C = lambda u^H G, so y = conj(u) in y^T (G + pC) = 0
    return Poles(_tidy(poles), True, "dense", vr[:, k], np.conj(vl[:, k]))


def _sparse(g, c, lu) -> Poles:
    n = g.shape[0]
    lu = lu or spla.splu(g.tocsc())
    op = spla.LinearOperator((n, n), matvec=lambda v: lu.solve(np.asarray(c @ v)), dtype=float)
    k = min(SPARSE_POLES, n - 2)
    notes = []
    try:
        lam = spla.eigs(op, k=k, which="LM", return_eigenvectors=False, tol=1e-10, maxiter=max(2000, 20 * n // 100))
    except spla.ArpackNoConvergence as exc:
        lam = exc.eigenvalues
        notes.append("the sparse eigen-solver found only some of the dominant poles")
    lam = lam[np.abs(lam) > 0]
    poles = -1.0 / lam
    order = np.lexsort((np.imag(poles), np.abs(poles)))
    poles = _tidy(poles[order])
    right = left = None
    if len(poles):
        right, left = eigenvectors(g, c, complex(poles[0]))
    return Poles(poles, False, "sparse shift-invert", right, left, notes)


def _tidy(poles: np.ndarray) -> np.ndarray:
    """Real poles get an exact zero imaginary part (round-off of a real eigen-solver)."""
    out = poles.astype(complex)
    small = np.abs(out.imag) <= 1e-9 * np.abs(out)
    out[small] = out[small].real
    return out


def eigenvectors(g, c, p: complex, steps: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Right and left null vectors of (G + pC) by inverse iteration with a slightly shifted pole."""
    n = g.shape[0]
    shift = p * (1.0 + 1e-8) + 1e-30
    m = (g + shift * c).astype(complex).tocsc()
    lu = spla.splu(m)
    rng = np.random.default_rng(12345)  # fixed seed: results are deterministic
    x = rng.standard_normal(n) + 0j
    y = rng.standard_normal(n) + 0j
    for _ in range(steps):
        x = lu.solve(x)
        x /= np.linalg.norm(x)
        y = lu.solve(y, trans="T")
        y /= np.linalg.norm(y)
    return x, y


def pole_shares(c: sp.csc_matrix, x: np.ndarray, y: np.ndarray, a_rows: np.ndarray, b_rows: np.ndarray, farads: np.ndarray) -> np.ndarray:
    """Each capacitor's share -S_k of the dominant pole (real part); they add up to 1."""
    denominator = y @ (c @ x)
    if denominator == 0:
        return np.full(len(farads), np.nan)
    xa = np.where(a_rows >= 0, x[np.maximum(a_rows, 0)], 0.0)
    xb = np.where(b_rows >= 0, x[np.maximum(b_rows, 0)], 0.0)
    ya = np.where(a_rows >= 0, y[np.maximum(a_rows, 0)], 0.0)
    yb = np.where(b_rows >= 0, y[np.maximum(b_rows, 0)], 0.0)
    return np.real(farads * (ya - yb) * (xa - xb) / denominator)


def quality_factor(p: complex) -> float | None:
    """Q of a complex pole pair, |p| / (2 |Re p|); None for a real pole."""
    if p.imag == 0 or p.real == 0:
        return None
    return abs(p) / (2.0 * abs(p.real))


# -- frequency response ------------------------------------------------------------------

class Response:
    """|H(j 2 pi f)| from a source vector to one row, by sparse complex solves."""

    def __init__(self, g: sp.csc_matrix, c: sp.csc_matrix, b: np.ndarray, row: int) -> None:
        self.g, self.c, self.b, self.row = g.tocsc(), c.tocsc(), b, row
        self.dense = g.shape[0] <= DENSE_LIMIT
        if self.dense:
            self._gd, self._cd = self.g.toarray(), self.c.toarray()

    def __call__(self, f: float) -> complex:
        s = 2j * math.pi * f
        if self.dense:
            x = la.solve(self._gd + s * self._cd, self.b)
        else:
            x = spla.splu((self.g + s * self.c).astype(complex).tocsc()).solve(self.b.astype(complex))
        return complex(x[self.row])

    def dc(self) -> float:
        return abs(self(0.0))


def f3db(resp: Response, poles: Poles) -> tuple[float | None, str]:
    """Where |H| falls to 1/sqrt(2) of |H(0)| (or of the mid-band peak when H(0) = 0).

    Returns the frequency (Hz, or None) and a note on how it was found.
    """
    h0 = resp.dc()
    mags = np.abs(poles.values) / (2 * math.pi) if len(poles.values) else np.array([1.0])
    lo = max(float(np.min(mags)) / 1e4, 1e-3)
    hi = min(float(np.max(mags)) * 1e4 if poles.complete else float(np.min(mags)) * 1e6, 1e18)
    per_decade = 8 if resp.dense else 4
    count = max(8, int(math.ceil(math.log10(hi / lo) * per_decade)))
    freqs = np.geomspace(lo, hi, count)
    values = []
    reference = h0
    note = "|H(0)|/sqrt(2)"
    for k, f in enumerate(freqs):
        values.append(abs(resp(f)))
        if k == 0 and h0 < 1e-9 * max(values[0], 1e-300):
            reference = 0.0
    if reference == 0.0 or h0 == 0.0:
        peak = int(np.argmax(values))
        reference = values[peak]
        note = "mid-band peak/sqrt(2) (no DC path from the source to the probe)"
        start = peak
    else:
        start = 0
    if reference == 0:
        return None, "the probe does not respond to the source"
    target = reference / math.sqrt(2.0)
    for k in range(start + 1, len(freqs)):
        if values[k] < target <= values[k - 1]:
            fa, fb = math.log(freqs[k - 1]), math.log(freqs[k])
            root = brentq(lambda lf: abs(resp(math.exp(lf))) - target, fa, fb, xtol=1e-10, rtol=1e-12)
            return math.exp(root), note
    return None, "no -3 dB point within the searched band"
