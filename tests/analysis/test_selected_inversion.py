"""The selected inversion against numpy's dense inverse, on both of its code paths.

Reference: ``numpy.linalg.inv`` of the same matrix.  The matrices are conductance
matrices of random resistor networks (chains, trees and meshes, with some asymmetric
transconductance entries), so the factor patterns range from a few rows per column
(the Python-float path) to dozens (the numpy path).
"""

import numpy as np
import pytest
import scipy.sparse as sp
from numpy.testing import assert_allclose

from tauscan.analysis import zentries


def _network(n: int, kind: str, seed: int) -> sp.csc_matrix:
    rng = np.random.default_rng(seed)
    edges = []
    if kind == "chain":
        edges = [(i, i + 1) for i in range(n - 1)] + [(i, i + 3) for i in range(0, n - 3, 7)]
    elif kind == "tree":
        edges = [(int(rng.integers(0, i)), i) for i in range(1, n)]
    else:  # mesh
        side = int(round(n ** 0.5))
        n = side * side
        for r in range(side):
            for c in range(side):
                k = r * side + c
                if c + 1 < side:
                    edges.append((k, k + 1))
                if r + 1 < side:
                    edges.append((k, k + side))
    g = np.zeros((n, n))
    for a, b in edges:
        y = rng.uniform(1e-4, 1e-2)
        g[a, a] += y
        g[b, b] += y
        g[a, b] -= y
        g[b, a] -= y
    g[np.arange(n), np.arange(n)] += rng.uniform(1e-6, 1e-4, n)  # paths to ground
    # transconductances: nonsymmetric values on the existing (symmetric) pattern
    for a, b in edges[:: max(1, len(edges) // 10)]:
        g[a, b] += rng.uniform(-5e-3, 5e-3)
    return sp.csc_matrix(g)


@pytest.mark.parametrize("kind", ["chain", "tree", "mesh"])
@pytest.mark.parametrize("small_limit", [0, zentries.SMALL_STRUCT, 10_000])
def test_selected_matches_dense_inverse(kind, small_limit, monkeypatch):
    monkeypatch.setattr(zentries, "SMALL_STRUCT", small_limit)
    g = _network(144, kind, seed=len(kind) + small_limit)
    n = g.shape[0]
    rng = np.random.default_rng(7)
    rows = rng.integers(-1, n, 300)
    cols = rng.integers(-1, n, 300)
    rows[:50] = cols[:50] = np.arange(50)  # diagonal entries
    z = zentries.selected(g, rows, cols)
    dense = np.linalg.inv(g.toarray())
    expected = np.where((rows >= 0) & (cols >= 0), dense[np.maximum(rows, 0), np.maximum(cols, 0)], 0.0)
    assert_allclose(z, expected, rtol=1e-9, atol=1e-12 * np.abs(dense).max())


def test_the_default_limit_mixes_both_paths_on_a_mesh(monkeypatch):
    """The mixed runs above take both the scalar and the block path on a mesh."""
    seen = []
    real = zentries._recurrences

    def spy(n, sizes, *rest):
        seen.append(sizes.copy())
        return real(n, sizes, *rest)

    monkeypatch.setattr(zentries, "_recurrences", spy)
    g = _network(144, "mesh", seed=len("mesh") + zentries.SMALL_STRUCT)
    zentries.selected(g, np.arange(10), np.arange(10))
    (sizes,) = seen
    assert sizes.min() <= zentries.SMALL_STRUCT < sizes.max()
