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
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from tauscan.ordering import SUPERNODES, fill_reducing_order

#: Up to this many unknowns all poles are found with a dense eigen-solver.
DENSE_LIMIT = 800
#: Upward step of the -3 dB search in a large circuit (each point is a sparse complex
#: factorization; Newton's method with the slope then refines the bracket).
F3DB_STEP = 8.0
#: |H(0)| below this fraction of the highest |H| means no DC path: the -3 dB point is then
#: taken from the mid-band peak.
MID_BAND_RATIO = 1e-9
#: Up to this many unknowns a complex factorization that fails on diagonal pivots is redone
#: with threshold pivoting; above it the frequency is reported as singular.
PIVOTING_LIMIT = 20_000
#: Below this many unknowns ARPACK has no room for its Krylov space: always dense.
SPARSE_MIN = 40
#: Highest frequency the large-circuit -3 dB search steps to: a thousand times the transit
#: frequency of the fastest transistors (well under 1 THz; from memory), so a response still
#: flat there has no -3 dB point that matters.
F3DB_MAX_HZ = 1e15
#: Number of dominant poles sought in a large circuit.
SPARSE_POLES = 8
#: ARPACK restarts for the dominant pole, then for the next few: each restart costs up to
#: ncv sparse solves, so these bound the time spent on clustered poles (many equal stages).
ARPACK_RESTARTS = (40, 4)
#: Seed of the start vector of every ARPACK run (results never depend on earlier runs).
ARPACK_SEED = 20261202
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


def find_poles(g: sp.csc_matrix, c: sp.csc_matrix, lu=None, dense_limit: int = DENSE_LIMIT, cache: object | None = None) -> Poles:
    n = g.shape[0]
    if c.nnz == 0 or n == 0:
        return Poles(np.zeros(0, dtype=complex), True, "none")
    if n <= max(dense_limit, SPARSE_MIN):
        return _dense(g, c)
    return _sparse(g, c, lu, cache)


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


def _sparse(g, c, lu, cache=None) -> Poles:
    """The dominant pole first (ARPACK with k=1 converges fast when it stands apart), then
    as many of the next few as ARPACK finds within a bounded number of iterations: many
    identical stages give clusters of equal poles that it would chase for a long time."""
    n = g.shape[0]
    lu = lu or spla.splu(g.tocsc())
    op = spla.LinearOperator((n, n), matvec=lambda v: lu.solve(np.asarray(c @ v)), dtype=float)
    notes = []
    found = []
    first: tuple[complex, np.ndarray] | None = None  # the first round's eigenvalue and vector
    # a fixed start vector: ARPACK's own draws continue from call to call within a process,
    # which made a batch's figures depend on what ran before in its worker
    v0 = np.random.default_rng(ARPACK_SEED).standard_normal(n)
    for k, ncv, maxiter in ((1, min(n - 1, 24), ARPACK_RESTARTS[0]), (min(SPARSE_POLES, n - 2), min(n - 1, 32), ARPACK_RESTARTS[1])):
        try:
            if k == 1:
                lam, vectors = spla.eigs(op, k=1, ncv=ncv, which="LM", tol=1e-9, maxiter=maxiter, v0=v0)
                first = (complex(lam[0]), vectors[:, 0])
            else:
                lam = spla.eigs(op, k=k, ncv=ncv, which="LM", return_eigenvectors=False, tol=1e-9, maxiter=maxiter, v0=v0)
        except spla.ArpackNoConvergence as exc:
            lam = exc.eigenvalues
            if k > 1:
                notes.append(f"{len(lam)} of the {k} most dominant poles converged (the others are clustered); "
                             "the list of poles is not complete")
            elif not len(lam):
                notes.append("the sparse eigen-solver did not find the dominant pole within its iteration budget")
        found.extend(complex(x) for x in lam if abs(x) > 0)
    lam = _unique(np.array(found, dtype=complex))
    poles = -1.0 / lam
    order = np.lexsort((np.imag(poles), np.abs(poles)))
    poles = _tidy(poles[order])
    right = left = None
    if len(poles):
        pair = _arpack_vectors(g, c, lu, complex(poles[0]), first, v0)
        if pair is not None:
            right, left = pair
        else:
            try:
                right, left = eigenvectors(g, c, complex(poles[0]), cache=cache)
            except RuntimeError:
                notes.append("the dominant pole's eigenvectors could not be found; no pole shares")
    return Poles(poles, False, "sparse shift-invert", right, left, notes)


def _arpack_vectors(g, c, lu, pole: complex, first, v0) -> tuple[np.ndarray, np.ndarray] | None:
    """Right and left vectors of the dominant pole straight from ARPACK: the right one from the
    first round (an eigenvector x of G^-1 C is a null vector of G + pC), the left one from the
    transposed operator G^-T C^T.  None when either is not that pole's (the caller then uses
    inverse iteration, which costs a complex factorization)."""
    if first is None:
        return None
    lam = -1.0 / pole
    lam1, x = first
    if abs(lam1 - lam) > 1e-7 * abs(lam):
        if abs(lam1.conjugate() - lam) > 1e-7 * abs(lam):
            return None
        x = np.conj(x)
    n = g.shape[0]
    ct = c.T.tocsc()
    op_t = spla.LinearOperator((n, n), matvec=lambda v: lu.solve(np.asarray(ct @ v), trans="T"), dtype=float)
    try:
        mu, vectors = spla.eigs(op_t, k=1, ncv=min(n - 1, 24), which="LM", tol=1e-9, maxiter=ARPACK_RESTARTS[0], v0=v0)
    except spla.ArpackNoConvergence:
        return None
    y = vectors[:, 0]
    mu0 = complex(mu[0])
    if abs(mu0 - lam) > 1e-7 * abs(lam):
        if abs(mu0.conjugate() - lam) > 1e-7 * abs(lam):
            return None
        y = np.conj(y)
    return x.astype(complex), y.astype(complex)


def _unique(values: np.ndarray, rtol: float = 1e-8) -> np.ndarray:
    out: list[complex] = []
    for v in values:
        if not any(abs(v - u) <= rtol * abs(u) for u in out):
            out.append(v)
    return np.array(out, dtype=complex)


def _tidy(poles: np.ndarray) -> np.ndarray:
    """Real poles get an exact zero imaginary part (round-off of a real eigen-solver)."""
    out = poles.astype(complex)
    small = np.abs(out.imag) <= 1e-9 * np.abs(out)
    out[small] = out[small].real
    return out


def eigenvectors(g, c, p: complex, steps: int = 3, cache: object | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Right and left null vectors of (G + pC) by inverse iteration with a slightly shifted pole."""
    n = g.shape[0]
    shift = p * (1.0 + 1e-8) + 1e-30
    solver = complex_solver(g, c, cache)
    lu = solver.factor(shift)
    rng = np.random.default_rng(12345)  # fixed seed: results are deterministic
    x = rng.standard_normal(n) + 0j
    y = rng.standard_normal(n) + 0j
    for _ in range(steps):
        x = solver.solve(lu, x)
        x /= np.linalg.norm(x)
        y = _solve_transposed(solver, lu, y)
        y /= np.linalg.norm(y)
    return x, y


def _solve_transposed(solver: ComplexSolver, lu, b: np.ndarray) -> np.ndarray:
    """Solve (G + pC)^T y = b with the symmetrically permuted factors (P M P^T)^T = P M^T P^T."""
    return solver.solve(lu, b, trans="T")


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

class Factored:
    """One factorization of G + sC (reduced and reordered), with its s and matrix."""

    __slots__ = ("lu", "s", "matrix")

    def __init__(self, lu, s: complex, matrix=None) -> None:
        self.lu, self.s, self.matrix = lu, s, matrix

    def solve(self, rhs: np.ndarray, trans: str = "N") -> np.ndarray:
        """Solve with up to two steps of iterative refinement (the factors take the diagonal
        pivots as they come, so a step of refinement buys back what a small pivot loses)."""
        x = self.lu.solve(rhs, trans=trans)
        if self.matrix is None:
            return x
        m = self.matrix if trans == "N" else self.matrix.T
        scale = np.linalg.norm(rhs)
        for _ in range(2):
            r = rhs - m @ x
            if not scale or np.linalg.norm(r) <= 1e-12 * scale:
                break
            x = x + self.lu.solve(r, trans=trans)
        return x


class ComplexSolver:
    """Solves (G + sC) x = b for many s with one fill-reducing ordering.

    Nodes tied to ground through independent voltage sources (``grounded``: rows in
    an order where each comes after the node it is referred to) are taken out with
    their sources' branch rows: their voltages follow from the right-hand side, and
    the rest is solved without them.  The branch rows have no diagonal, so keeping
    them forces off-diagonal pivots, and a supply node reaches every stage: a swap
    there filled one factorization of a 2e5-line chain sixty times over.

    The pattern of the reduced G + sC does not depend on s, so the minimum-degree
    ordering is computed once; each factorization then runs in SuperLU's symmetric
    mode with that order, preferring diagonal pivots (on circuit matrices this
    is about ten times faster than the default column ordering, which fills badly).
    Solutions have zeros in the removed branch rows (the sources' currents).
    """

    def __init__(self, g: sp.csc_matrix, c: sp.csc_matrix, grounded: list | None = None) -> None:
        n = g.shape[0]
        g = g.tocsc().astype(complex)
        c = c.tocsc().astype(complex)
        self.n = n
        self.grounded = list(grounded or [])
        removed = {row for row, _, _, _ in self.grounded} | {br for _, _, br, _ in self.grounded}
        keep = np.array([i for i in range(n) if i not in removed], dtype=np.int64) if removed else np.arange(n)
        if len(keep) == 0:  # nothing left to solve for: keep the full system
            self.grounded, keep = [], np.arange(n)
        self.keep = keep
        self.fixed_rows = np.array([row for row, _, _, _ in self.grounded], dtype=np.int64)
        g_rows = g[keep]
        c_rows = c[keep]
        self._g_fix = g_rows[:, self.fixed_rows].tocsc()
        self._c_fix = c_rows[:, self.fixed_rows].tocsc()
        gk = g_rows[:, keep].tocsc()
        ck = c_rows[:, keep].tocsc()
        # the ordering depends on the pattern of |G| + |C| only
        self.perm = fill_reducing_order(abs(gk) + abs(ck))
        self.inverse = np.argsort(self.perm)
        self._g = gk[self.perm][:, self.perm].tocsc()
        self._c = ck[self.perm][:, self.perm].tocsc()

    def factor(self, s: complex) -> Factored:
        """G + sC factored in the fixed order with diagonal pivots wherever they are nonzero.
        A threshold of 1 % made SuperLU swap a few gate rows at some frequencies, and each
        swap filled the factors of a long chain ten times over (0.3 s against 0.02 s at
        5e4 lines) for no better residual; iterative refinement in :meth:`solve` covers the
        small pivots instead.  A factorization that fails that way is redone with the
        threshold."""
        matrix = (self._g + s * self._c).tocsc()
        try:
            lu = spla.splu(matrix, permc_spec="NATURAL", diag_pivot_thresh=0.0, options={"SymmetricMode": True},
                           **SUPERNODES)
        except RuntimeError:
            if matrix.shape[0] > PIVOTING_LIMIT:
                # threshold pivoting on a large circuit can fill without bound (a 5e5-line
                # chain went past 20 GB): report this frequency as singular instead
                raise
            lu = spla.splu(matrix, permc_spec="NATURAL", diag_pivot_thresh=0.01, options={"SymmetricMode": True},
                           **SUPERNODES)
        return Factored(lu, s, matrix)

    def _fixed_voltages(self, b: np.ndarray) -> np.ndarray:
        v = np.zeros(self.n, dtype=complex)
        for row, parent, branch, sign in self.grounded:
            v[row] = (v[parent] if parent >= 0 else 0.0) + sign * b[branch]
        return v[self.fixed_rows]

    def solve(self, f: Factored, b: np.ndarray, trans: str = "N") -> np.ndarray:
        """x of (G + sC) x = b (``trans="T"``: of the transposed system, on the reduced rows)."""
        b = np.asarray(b, dtype=complex)
        rhs = b[self.keep]
        fixed = None
        if len(self.fixed_rows) and trans == "N":
            fixed = self._fixed_voltages(b)
            if np.any(fixed):
                rhs = rhs - (self._g_fix @ fixed + f.s * (self._c_fix @ fixed))
        x = np.zeros(self.n, dtype=complex)
        x[self.keep] = f.solve(rhs[self.perm], trans=trans)[self.inverse]
        if fixed is not None:
            x[self.fixed_rows] = fixed
        return x


def complex_solver(g, c, cache: object | None = None) -> ComplexSolver:
    """The ComplexSolver for (G, C), made once per ``cache`` object (its ordering is the costly
    part); a small-signal network as ``cache`` also tells which nodes are AC grounds."""
    if cache is not None:
        found = getattr(cache, "_complex_solver", None)
        if found is not None:
            return found
    tree = getattr(cache, "ac_ground_tree", None)
    solver = ComplexSolver(g, c, tree() if callable(tree) else None)
    if cache is not None:
        cache._complex_solver = solver
    return solver


class Response:
    """|H(j 2 pi f)| from a source vector to one row."""

    def __init__(self, g: sp.csc_matrix, c: sp.csc_matrix, b: np.ndarray, row: int, cache: object | None = None) -> None:
        self.b, self.row = b.astype(complex), row
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
            self._solver = complex_solver(g, c, cache)

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
                h = complex(x[self.row])
                if h != 0 and f > 0:
                    dh = -complex(self._solver.solve(factored, self._c @ x)[self.row])
                    slope = (s * dh / h).real
                    if math.isfinite(slope):
                        self.slopes[f] = slope
                self.known[f] = h  # each sparse point is a factorization: never twice
                return h
        except (np.linalg.LinAlgError, RuntimeError):
            # singular at this frequency (an undamped resonance, or a loop of reactances)
            self.ill_conditioned = True
            return complex(math.nan, math.nan)
        return complex(x[self.row])

    def dc(self) -> float:
        return abs(self(0.0))


def f3db(resp: Response, poles: Poles, estimate_hz: float | None = None) -> tuple[float | None, str]:
    """Where |H| falls to 1/sqrt(2) of |H(0)| (or of the mid-band peak when H(0) = 0).

    Small circuits: a sweep over the whole pole band, then regula falsi on the first
    crossing.  Large ones (each point a sparse complex factorization): steps
    upward from below the dominant pole or the estimate (:data:`F3DB_STEP`), then Newton's
    method with the slope each point gives (:func:`_refine_sloped`).
    Returns the frequency (Hz, or None) and a note on how it was found.
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


def response_curve(g, c, b: np.ndarray, row: int, f_lo: float, f_hi: float, points: int = 200,
                   cache: object | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies (Hz) and |H| from a log sweep (for plots)."""
    resp = Response(g, c, b, row, cache=cache)
    freqs = np.geomspace(f_lo, f_hi, points)
    return freqs, np.array([abs(resp(f)) for f in freqs])
