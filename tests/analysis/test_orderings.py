"""A fill-reducing ordering computed once and reused must give the fill of a fresh
factorization with that ordering (a reused ordering that was applied inverted once made a
mesh's complex factorizations 18 times fuller and 60 times slower), and the right answer.

Reference: scipy.sparse.linalg.splu with the same ordering option, and numpy.linalg.solve.
"""

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.testing import assert_allclose

from tauscan.analysis.systems import ComplexSolver, Factors
from tauscan.factorization import OrderedLU


def _grid(side: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    n = side * side
    rows, cols, vals = [], [], []
    for r in range(side):
        for c in range(side):
            k = r * side + c
            for other in ((k + 1) if c + 1 < side else None, (k + side) if r + 1 < side else None):
                if other is None:
                    continue
                y = rng.uniform(1e-4, 1e-3)
                rows += [k, other, k, other]
                cols += [k, other, other, k]
                vals += [y, y, -y, -y]
    g = sp.csc_matrix((vals, (rows, cols)), shape=(n, n)) + sp.eye(n, format="csc") * 1e-6
    c = sp.diags(rng.uniform(1e-15, 1e-14, n), format="csc")
    # shuffle the numbering, as a netlist's node order would be
    p = rng.permutation(n)
    return g[p][:, p].tocsc(), c[p][:, p].tocsc()


def _fresh_fill(a) -> int:
    lu = spla.splu(a.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.01, options={"SymmetricMode": True})
    return lu.L.nnz + lu.U.nnz


def test_newton_factorizations_keep_the_fill_of_the_first():
    g, _ = _grid(30)
    lu = OrderedLU()
    lu.factor(g)
    factors = lu.factor(g * 1.5)  # same pattern, new values: the ordering is reused
    assert lu.last.lu.L.nnz + lu.last.lu.U.nnz <= 1.05 * _fresh_fill(g)
    b = np.arange(g.shape[0], dtype=float)
    assert_allclose(factors.solve(b), np.linalg.solve((g * 1.5).toarray(), b), rtol=1e-9)


def test_complex_factorizations_keep_the_fill_of_a_fresh_ordering():
    g, c = _grid(30)
    solver = ComplexSolver(g, c)
    s = 2j * np.pi * 1e9
    lu = solver.factor(s)
    assert lu.lu.L.nnz + lu.lu.U.nnz <= 1.3 * _fresh_fill(g + s * c)
    b = np.ones(g.shape[0], dtype=complex)
    assert_allclose(solver.solve(lu, b), np.linalg.solve((g + s * c).toarray(), b), rtol=1e-9)


def test_ac_grounds_taken_out_give_the_full_systems_node_voltages(write):
    """Stacked and driven voltage sources: the reduced solve must give the node voltages of
    the full MNA system (numpy.linalg.solve on the dense matrix), at several frequencies."""
    from tauscan.linear import linearize
    from tauscan.op import solve_dc
    from tauscan.reader import read_netlist

    text = ("stacked sources\nV1 a 0 dc 1\nV2 b a dc 0.5\nVin in b dc 0 ac 1\nR1 in x 1k\nC1 x 0 1p\n"
            "R2 x y 2k\nC2 x y 0.5p\nG1 y 0 x 0 1m\nR3 y a 5k\nC3 y 0 0.2p\nVf y z dc 0\nR4 z 0 10k\n")
    circuit = read_netlist(write(text))
    ss = linearize(solve_dc(circuit))
    solver = Factors(ss.g, ss.c, ss.ac_ground_tree()).complex
    assert {ss.network.nodes[r + 1] for r, _, _, _ in solver.grounded} == {"a", "b", "in"}
    b = ss.network.ac_vector(circuit.element("vin"))[1:].astype(complex)
    n = ss.n_nodes
    for f in (0.0, 1e6, 1e9, 1e12):
        s = 2j * np.pi * f
        x = solver.solve(solver.factor(s), b)
        full = np.linalg.solve((ss.g + s * ss.c).toarray(), b)
        assert_allclose(x[:n], full[:n], rtol=1e-10, atol=1e-14)


def test_dense_rows_go_last_and_solves_stay_exact():
    """A grid with a 'supply' node joined to every node: the ordering must be a permutation
    with that node last, keep the fill of minimum degree on the grid alone, and solve
    exactly (numpy.linalg.solve on the dense matrix, both the matrix and its transpose)."""
    from tauscan.factorization import PermutedLU, fill_reducing_order

    g, _ = _grid(30)
    n = g.shape[0]
    hub = 17
    y = 1e-5
    others = np.array([k for k in range(n) if k != hub])
    star = sp.csc_matrix((np.concatenate([np.full(n - 1, -y), np.full(n - 1, -y), [y * (n - 1)]]),
                          (np.concatenate([others, np.full(n - 1, hub), [hub]]),
                           np.concatenate([np.full(n - 1, hub), others, [hub]]))), shape=(n, n))
    a = (g + star + sp.diags(np.full(n, y))).tocsc()
    q = fill_reducing_order(a)
    assert sorted(q.tolist()) == list(range(n)) and q[-1] == hub
    lu = spla.splu(a[q][:, q].tocsc(), permc_spec="NATURAL", diag_pivot_thresh=0.01, options={"SymmetricMode": True})
    # the hub adds one dense row and column to the factors, and no more
    assert lu.L.nnz + lu.U.nnz <= 1.3 * _fresh_fill(g) + 2 * n
    b = np.linspace(-1.0, 2.0, n)
    solver = PermutedLU(lu, q)
    assert_allclose(solver.solve(b), np.linalg.solve(a.toarray(), b), rtol=1e-9)
    assert_allclose(solver.solve(b, trans="T"), np.linalg.solve(a.toarray().T, b), rtol=1e-9)
