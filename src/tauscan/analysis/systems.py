"""The complex system G + sC of a small-signal network, factored for many s with one
ordering, and the factorizations an analysis makes, each made once (:class:`Factors`)."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from tauscan.errors import CircuitError
from tauscan.factorization import PermutedLU, factor, fill_reducing_order, splu

#: Up to this many unknowns a complex factorization that fails on diagonal pivots is redone
#: with threshold pivoting; above it the frequency is reported as singular.
PIVOTING_LIMIT = 20_000


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
            lu = splu(matrix, pivot_threshold=0.0)
        except RuntimeError:
            if matrix.shape[0] > PIVOTING_LIMIT:
                # threshold pivoting on a large circuit can fill without bound (a 5e5-line
                # chain went past 20 GB): report this frequency as singular instead
                raise
            lu = splu(matrix)
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




class Factors:
    """The factorizations of one small-signal system, each made once and only when first
    needed: the sparse LU of G (time constants, poles, the probe's DC response) and the
    complex solver of G + sC (its ordering is the costly part).  An analysis owns one;
    nothing is stored on the network it was made from.

    Parameters
    ----------
    g, c : sparse (n, n)
        Conductance and capacitance matrices, ground dropped (MNA rows).
    grounded : list of (row, parent row, source branch row, sign), optional
        AC-ground nodes taken out of the complex solves (see :class:`ComplexSolver`).
    """

    def __init__(self, g: sp.csc_matrix, c: sp.csc_matrix, grounded: list | None = None) -> None:
        self.g, self.c = g, c
        self._grounded = grounded
        self._lu: PermutedLU | None = None
        self._complex: ComplexSolver | None = None

    @property
    def lu(self) -> PermutedLU:
        """G factored (once); a singular G is a circuit error."""
        if self._lu is None:
            try:
                self._lu = factor(self.g)
            except RuntimeError as exc:
                raise CircuitError(f"the small-signal matrix G is singular ({exc}); a node without any path?") from None
        return self._lu

    @property
    def complex(self) -> ComplexSolver:
        """The solver of (G + sC) x = b, made once."""
        if self._complex is None:
            self._complex = ComplexSolver(self.g, self.c, self._grounded)
        return self._complex
