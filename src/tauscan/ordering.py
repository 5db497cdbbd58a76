"""A fill-reducing ordering for circuit matrices, shared by every sparse factorization.

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
    """``q`` such that ``matrix[q][:, q]`` factors with little fill: minimum degree on the
    pattern of A + A^T without its dense rows, which come last."""
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
    lu = spla.splu(probe, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options={"SymmetricMode": True},
                   **SUPERNODES)
    # Pr A Pc = L U puts column i at position perm_c[i]: the order is argsort(perm_c)
    return np.concatenate([keep[np.argsort(lu.perm_c)], last]).astype(np.int64)


class PermutedLU:
    """A factorization of ``A[q][:, q]`` that solves with ``A`` itself (and its transpose)."""

    def __init__(self, lu, q: np.ndarray) -> None:
        self.lu, self.q, self.inverse = lu, q, np.argsort(q)

    def solve(self, b: np.ndarray, trans: str = "N") -> np.ndarray:
        return self.lu.solve(np.asarray(b)[self.q], trans=trans)[self.inverse]
