"""Exact poles, the dominant pole's eigenvectors and sensitivities, and the -3 dB frequency
(Rommes and Martins 2006 for the dominant pole and its sensitivities).

Poles are s = -1/lambda for the nonzero eigenvalues lambda of G^-1 C: dense
generalized eigenvalues for small circuits, shift-invert Arnoldi (ARPACK through
scipy.sparse.linalg.eigs, with the operator G^-1 C, i.e. shift 0) for the few
smallest ones of a large circuit, and for its transfer the dominant pole algorithm
(:func:`transfer_dominant`), since the smallest poles may be ones the transfer never sees.  Dominant-pole sensitivities follow Rommes
and Martins (IEEE Trans. Power Systems 21(3), 2006):

    S_k = (C_k / p) dp/dC_k = -C_k (y_a - y_b)(x_a - x_b) / (y^T C x)

with right and left eigenvectors x, y of the pole p.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from tauscan.analysis.systems import ComplexSolver, Factors

#: Up to this many unknowns all poles are found with a dense eigen-solver.
DENSE_LIMIT = 800
#: Below this many unknowns ARPACK has no room for its Krylov space: always dense.
SPARSE_MIN = 40
#: Number of dominant poles sought in a large circuit.
SPARSE_POLES = 8
#: ARPACK restarts for the dominant pole, then for the next few: each restart costs up to
#: ncv sparse solves, so these bound the time spent on clustered poles (many equal stages).
#: On the benchmarks' 2e5-line chain of 8,000 equal stages and their mesh, four restarts of
#: the second round found no more poles than two (one) and cost 0.4 s against 0.2 s.
ARPACK_RESTARTS = (40, 2)
#: Seed of the start vector of every ARPACK run (results never depend on earlier runs).
ARPACK_SEED = 20261202
#: An eigenvalue of G^-1 C smaller than this fraction of the largest is an infinite pole.
LAMBDA_FLOOR = 1e-13
#: A pole whose real part is positive beyond this fraction of its magnitude is unstable.
UNSTABLE_RTOL = 1e-9


@dataclass
class Poles:
    values: np.ndarray  # complex, sorted by magnitude (dominant first)
    complete: bool  # all finite poles (dense) or only the dominant few (sparse)
    method: str
    right: np.ndarray | None = None  # eigenvector of the dominant pole (MNA rows)
    left: np.ndarray | None = None
    notes: list[str] = field(default_factory=list)
    #: index in ``values`` of the transfer's dominant pole (largest |residue| / |Re p|)
    dominant_index: int = 0
    #: how the dominant pole was chosen
    dominance: str = "smallest magnitude"

    @property
    def dominant(self) -> complex | None:
        """The dominant pole; None when there is none, or when the one found lies in the right
        half-plane (an unstable pole is a finding of its own, never a bandwidth)."""
        if not len(self.values):
            return None
        p = complex(self.values[self.dominant_index])
        return None if p.real > UNSTABLE_RTOL * abs(p) else p

    def unstable(self) -> list[complex]:
        """Poles in the right half-plane (beyond round-off)."""
        return [complex(p) for p in self.values if p.real > UNSTABLE_RTOL * abs(p)]


def find_poles(factors: Factors, dense_limit: int = DENSE_LIMIT, b: np.ndarray | None = None,
               e: np.ndarray | None = None) -> Poles:
    """Exact poles of (G + sC): all of them for up to ``dense_limit`` unknowns, the dominant
    few (shift-invert Arnoldi) above it, with the dominant pole's right and left vectors.

    Parameters
    ----------
    factors : Factors
        G and C (sparse (n, n), MNA rows, ground dropped) and their factorizations.
    dense_limit : int
        Largest n solved by a dense generalized eigen-solver.
    b, e : ndarray, optional
        The drive and the probe vector of a transfer e^T (G + sC)^-1 b: with all poles known
        (dense), the dominant pole is then the transfer's, the stable pole with the largest
        |r_i| / |Re p_i| (r_i its residue; Rommes and Martins 2006), not merely the one of
        smallest magnitude, which the transfer may never see.

    Returns
    -------
    Poles
        Poles in rad/s (s-plane values), dominant first.
    """
    g, c = factors.g, factors.c
    n = g.shape[0]
    if c.nnz == 0 or n == 0:
        return Poles(np.zeros(0, dtype=complex), True, "none")
    if n <= max(dense_limit, SPARSE_MIN):
        return _dense(g, c, b, e)
    return _sparse(factors)


def _dense(g, c, b=None, e=None) -> Poles:
    lam, vl, vr = la.eig(c.toarray(), g.toarray(), left=True, right=True)
    finite = np.isfinite(lam)
    scale = np.max(np.abs(lam[finite]), initial=0.0)
    keep = finite & (np.abs(lam) > LAMBDA_FLOOR * scale) if scale > 0 else np.zeros(len(lam), bool)
    if not keep.any():
        return Poles(np.zeros(0, dtype=complex), True, "dense")
    poles = -1.0 / lam[keep]
    order = np.lexsort((np.imag(poles), np.abs(poles)))
    poles = _tidy(poles[order])
    columns = np.flatnonzero(keep)[order]
    # eig's left vector u satisfies u^H C = lambda u^H G, so y = conj(u) in y^T (G + pC) = 0
    pick, dominance = 0, "smallest magnitude"
    if b is not None and e is not None:
        x_all = vr[:, columns]
        y_all = np.conj(vl[:, columns])
        cd = c.toarray()
        with np.errstate(divide="ignore", invalid="ignore"):
            norm = np.einsum("ij,ij->j", y_all, cd @ x_all)
            residue = (e @ x_all) * (b @ y_all) / norm
            weight = np.abs(residue) / np.abs(poles.real)
        stable = (poles.real < 0) & np.isfinite(weight)
        if stable.any() and np.nanmax(np.where(stable, weight, -1.0)) > 0:
            pick = int(np.argmax(np.where(stable, weight, -1.0)))
            dominance = "largest |residue| / |Re p| of the transfer"
    k = columns[pick]
    return Poles(poles, True, "dense", vr[:, k], np.conj(vl[:, k]), dominant_index=pick, dominance=dominance)


def _sparse(factors: Factors) -> Poles:
    """The dominant pole first (ARPACK with k=1 converges fast when it stands apart), then
    as many of the next few as ARPACK finds within a bounded number of iterations: many
    identical stages give clusters of equal poles that it would chase for a long time."""
    g, c, lu = factors.g, factors.c, factors.lu
    n = g.shape[0]
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
                right, left = eigenvectors(factors, complex(poles[0]))
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


#: Newton steps of the dominant-pole iteration before it is given up, and the relative size
#: of a step that counts as converged (the solves near a pole carry round-off of about 1e-9
#: relative: the iteration converges quadratically down to it, then wanders).
DPA_STEPS = 12
DPA_TOL = 1e-8


def transfer_dominant(factors: Factors, found: Poles, b: np.ndarray, e: np.ndarray, start_hz: float) -> Poles:
    """The transfer's dominant pole for a large circuit, whose few poles found by shift-invert
    are the smallest ones and may be poles the transfer never sees (a bias filter, a coupling
    capacitor's corner): the dominant pole algorithm (Newton's method on 1/H(s); Martins,
    Lima and Pinto 1996, in the form of Rommes and Martins, IEEE Trans. Power Systems 21(3),
    2006), started on the imaginary axis at ``start_hz`` (the pass band's upper edge), then
    the larger |r| / |Re p| of that pole and the smallest one decides (the dominant pole of a
    transfer is the one with the largest |r| / |Re p|, Rommes and Martins 2006).

    Parameters
    ----------
    factors : Factors
        G and C of the network and its complex solver.
    found : Poles
        What :func:`find_poles` found (sparse: the smallest poles, the first with its vectors).
    b, e : ndarray, shape (n,)
        The drive and the probe vector of the transfer e^T (G + sC)^-1 b.
    start_hz : float
        Where the iteration starts, s0 = j 2 pi start_hz.

    Returns
    -------
    Poles
        ``found`` with the transfer's dominant pole among its values, its vectors, and how it
        was chosen; ``found`` itself when the iteration does not converge to a stable pole.
    """
    result = None
    for start in (start_hz, start_hz / 3):  # a second start when the first leads astray
        result = _dpa(factors, b, e, 2j * np.pi * start)
        if result is not None:
            break
    if result is None:
        notes = list(found.notes) + [f"the dominant pole algorithm found no pole from the pass band's edge (within "
                                     f"{DPA_STEPS} steps, its factorizations taking diagonal pivots): the smallest "
                                     "pole found stands for the transfer's dominant one"]
        return Poles(found.values, found.complete, found.method, found.right, found.left, notes,
                     dominant_index=found.dominant_index, dominance=found.dominance)
    p, x, y, residue = result
    if p.real > -UNSTABLE_RTOL * abs(p):
        return found
    weight = abs(residue) / abs(p.real)
    if len(found.values) and found.right is not None and found.left is not None:
        q = complex(found.values[found.dominant_index])
        if abs(q - p) > 1e-7 * abs(p) and _weight(q, found.right, found.left, b, e, factors.c) >= weight:
            return found
    values = list(found.values)
    same = [k for k, q in enumerate(values) if abs(q - p) <= 1e-7 * abs(p)]
    if same:
        index = same[0]
    else:
        values.append(p)
        values.sort(key=lambda q: (abs(q), q.imag))
        index = next(k for k, q in enumerate(values) if q == p)
    return Poles(_tidy(np.array(values, dtype=complex)), found.complete, found.method, x, y, list(found.notes),
                 dominant_index=index, dominance="largest |residue| / |Re p| of the transfer (dominant pole algorithm "
                 "from the pass band's edge, against the smallest pole)")


def _weight(p: complex, x: np.ndarray, y: np.ndarray, b: np.ndarray, e: np.ndarray, c) -> float:
    """|r| / |Re p| of a pole with right and left vectors x, y (r its residue in e^T (G+sC)^-1 b)."""
    den = y @ (c @ x)
    if den == 0 or p.real == 0:
        return 0.0
    return float(abs((e @ x) * (y @ b) / den) / abs(p.real))


def _dpa(factors: Factors, b: np.ndarray, e: np.ndarray, s: complex) -> tuple[complex, np.ndarray, np.ndarray, complex] | None:
    """Newton's method on 1/H: s <- s - H(s) / (w^T C v), with (G + sC) v = b and
    (G + sC)^T w = e (so that dH/ds = -w^T C v).  At convergence v and w are the pole's right
    and left vectors, and its residue is r = -H^2 / H' = H^2 / (w^T C v) (near the pole
    H ~ r / (s - p)), which needs no vector of the rows the complex solver takes out.  None
    when it does not converge within :data:`DPA_STEPS`."""
    solver = factors.complex
    c = factors.c
    b = np.asarray(b, dtype=complex)
    e = np.asarray(e, dtype=complex)
    for _ in range(DPA_STEPS):
        try:
            lu = solver.factor(s)
        except RuntimeError:  # a zero pivot exactly at this s: a step aside
            try:
                s = s * (1 + 1e-7) + 1e-7j * abs(s)
                lu = solver.factor(s)
            except RuntimeError:
                return None
        v = solver.solve(lu, b)
        w = solver.solve(lu, e, trans="T")
        h = e @ v
        d = w @ (c @ v)
        if d == 0 or not (np.isfinite(h) and np.isfinite(d)):
            return None
        step = h / d
        s_next = s - step
        if not np.isfinite(s_next):
            return None
        if abs(step) <= DPA_TOL * abs(s_next):
            nv, nw = np.linalg.norm(v), np.linalg.norm(w)
            if nv == 0 or nw == 0:
                return None
            p = complex(s_next)
            if abs(p.imag) <= 1e-7 * abs(p):
                p = complex(p.real, 0.0)
            return p, v / nv, w / nw, complex(h * h / d)
        s = complex(s_next)
    return None


def _tidy(poles: np.ndarray) -> np.ndarray:
    """Real poles get an exact zero imaginary part (round-off of a real eigen-solver)."""
    out = poles.astype(complex)
    small = np.abs(out.imag) <= 1e-9 * np.abs(out)
    out[small] = out[small].real
    return out


def eigenvectors(factors: Factors, p: complex, steps: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Right and left null vectors of (G + pC) by inverse iteration with a slightly shifted pole.

    Parameters
    ----------
    factors : Factors
        G and C of the network (n x n, ground dropped).
    p : complex
        The pole (rad/s).
    steps : int
        Inverse-iteration steps.

    Returns
    -------
    x, y : ndarray of complex, shape (n,)
        (G + pC) x ~ 0 and y^T (G + pC) ~ 0, each scaled to unit norm.
    """
    n = factors.g.shape[0]
    shift = p * (1.0 + 1e-8) + 1e-30
    solver = factors.complex
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
    """Each capacitor's share -S_k of the dominant pole (real part); with the non-reciprocal
    parts (:func:`tauscan.analysis.transcap.pole_shares`) they add up to 1.

    Parameters
    ----------
    c : sparse matrix, shape (n, n)
        The capacitance matrix (F).
    x, y : ndarray, shape (n,)
        Right and left eigenvectors of the pole.
    a_rows, b_rows : ndarray of int, shape (m,)
        MNA rows of each capacitor's ends, -1 for ground.
    farads : ndarray, shape (m,)
        Capacitances (F).

    Returns
    -------
    ndarray, shape (m,)
        Re(C_k (y_a - y_b)(x_a - x_b) / y^T C x), dimensionless; NaN when y^T C x = 0.
    """
    denominator = y @ (c @ x)
    if denominator == 0:
        return np.full(len(farads), np.nan)
    xa = np.where(a_rows >= 0, x[np.maximum(a_rows, 0)], 0.0)
    xb = np.where(b_rows >= 0, x[np.maximum(b_rows, 0)], 0.0)
    ya = np.where(a_rows >= 0, y[np.maximum(a_rows, 0)], 0.0)
    yb = np.where(b_rows >= 0, y[np.maximum(b_rows, 0)], 0.0)
    return np.real(farads * (ya - yb) * (xa - xb) / denominator)


def quality_factor(p: complex) -> float | None:
    """Q of a complex pole pair, |p| / (2 |Re p|).

    Parameters
    ----------
    p : complex
        The pole (rad/s).

    Returns
    -------
    float or None
        None for a real pole (or one on the imaginary axis).
    """
    if p.imag == 0 or p.real == 0:
        return None
    return abs(p) / (2.0 * abs(p.real))
