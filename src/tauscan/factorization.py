"""Sparse LU of circuit matrices: the one place that calls SuperLU, and the fill-reducing
ordering every factorization uses.

Minimum degree on the pattern of A + A^T (SuperLU's MMD_AT_PLUS_A) suits circuit matrices,
which are nearly symmetric in structure, except for their few dense rows: a supply or bias
net joined to every stage.  Minimum degree updates the degree of such a node at every step,
and its time grows about with the square of the circuit (9 of the 13 s of a 10^6-line chain's
operating point went into ordering around one supply node).  Those nodes are therefore left
out of the minimum-degree ordering and placed last, where a dense row belongs anyway.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

#: SuperLU's supernode settings for circuit matrices: their supernodes are small, and the
#: defaults (relaxed supernodes, wide panels) cost more than they save.  Measured here (median
#: of five): a complex factorization of a 2e5-line mesh 0.143 -> 0.095 s, of a 1e5-line chain
#: 0.026 -> 0.011 s.
SUPERNODES = {"relax": 1, "panel_size": 1}

#: A row joined to more than DENSE_FACTOR * sqrt(n) others (and more than DENSE_MIN) is
#: ordered last (the usual threshold of approximate minimum-degree codes is of this form).
DENSE_FACTOR = 10.0
DENSE_MIN = 16


def fill_reducing_order(matrix: sp.spmatrix) -> np.ndarray:
    """A symmetric permutation under which a circuit matrix factors with little fill: minimum
    degree on the pattern of A + A^T without its dense rows, which come last.

    Parameters
    ----------
    matrix : sparse matrix, shape (n, n)

    Returns
    -------
    ndarray of int, shape (n,)
        ``q`` such that ``matrix[q][:, q]`` is the matrix to factor.
    """
    n = matrix.shape[0]
    a = sp.csr_matrix(matrix, copy=True)
    a.data = np.ones(len(a.data))
    pattern = (a + a.T).tocsr()
    pattern = (pattern - sp.diags(pattern.diagonal())).tocsr()  # the diagonal is no neighbour
    pattern.eliminate_zeros()
    degree = np.diff(pattern.indptr)
    dense = degree > max(DENSE_MIN, DENSE_FACTOR * math.sqrt(max(n, 1)))
    keep = np.flatnonzero(~dense)
    last = np.flatnonzero(dense)
    if len(keep) == 0:
        return np.arange(n)
    sub = pattern[keep][:, keep].tocsc()
    sub.data = np.ones(len(sub.data))
    # a diagonally dominant matrix of that pattern: its factorization only serves the ordering
    probe = (sub + sp.diags(np.asarray(sub.sum(axis=1)).ravel() + 1.0)).tocsc()
    lu = splu(probe, pivot_threshold=0.0, ordering="MMD_AT_PLUS_A")
    # Pr A Pc = L U puts column i at position perm_c[i]: the order is argsort(perm_c)
    return np.concatenate([keep[np.argsort(lu.perm_c)], last]).astype(np.int64)


#: Diagonal pivots are taken unless smaller than this fraction of their column's largest
#: entry: circuit matrices are nearly symmetric in structure, and an off-diagonal pivot
#: breaks the symmetric ordering (common practice for circuit solvers).
PIVOT_THRESHOLD = 0.01


def splu(matrix: sp.spmatrix, pivot_threshold: float = PIVOT_THRESHOLD, ordering: str = "NATURAL"):
    """SuperLU factors of ``matrix`` in symmetric mode with the circuit supernode settings.

    Parameters
    ----------
    matrix : sparse (n, n), real or complex
        Already in its fill-reducing order unless ``ordering`` asks SuperLU for one.
    pivot_threshold : float
        SuperLU's ``diag_pivot_thresh``: 0 takes every nonzero diagonal pivot as it comes.
    ordering : str
        SuperLU's ``permc_spec``; ``"NATURAL"`` keeps the order given.

    Raises ``RuntimeError`` (SuperLU's) when the matrix is exactly singular.
    """
    return spla.splu(sp.csc_matrix(matrix), permc_spec=ordering, diag_pivot_thresh=pivot_threshold,
                     options={"SymmetricMode": True}, **SUPERNODES)


class PermutedLU:
    """A factorization of ``A[q][:, q]`` that solves with ``A`` itself (and its transpose)."""

    __slots__ = ("lu", "q", "inverse")

    def __init__(self, lu, q: np.ndarray) -> None:
        self.lu, self.q, self.inverse = lu, q, np.argsort(q)

    def solve(self, b: np.ndarray, trans: str = "N") -> np.ndarray:
        return self.lu.solve(np.asarray(b)[self.q], trans=trans)[self.inverse]


def factor(matrix: sp.spmatrix, order: np.ndarray | None = None,
           pivot_threshold: float = PIVOT_THRESHOLD) -> PermutedLU:
    """Sparse LU of a circuit matrix in a fill-reducing order, solving with the matrix itself.

    Parameters
    ----------
    matrix : sparse matrix, shape (n, n)
        G, or G + sC (real or complex).
    order : ndarray of int, optional
        A permutation from :func:`fill_reducing_order` (computed when not given; pass it to
        reuse one order for many matrices of one pattern).
    pivot_threshold : float
        SuperLU's diagonal pivot threshold.

    Returns
    -------
    PermutedLU
        ``solve(b[, trans])`` solves with ``matrix`` (or its transpose) in the original order.

    Raises ``RuntimeError`` when the matrix is singular.
    """
    q = fill_reducing_order(matrix) if order is None else order
    return PermutedLU(splu(sp.csc_matrix(matrix)[q][:, q], pivot_threshold), q)


class OrderedLU:
    """Sparse LU for a sequence of matrices with one pattern (the Newton Jacobians): the
    ordering is computed for the first and reused by the later ones."""

    def __init__(self) -> None:
        self.perm: np.ndarray | None = None
        self.last: PermutedLU | None = None  # the latest factorization (for inspection)

    def factor(self, matrix: sp.spmatrix) -> PermutedLU:
        if self.perm is None or len(self.perm) != matrix.shape[0]:
            self.perm = fill_reducing_order(matrix)
        self.last = factor(matrix, self.perm)
        return self.last
