"""Entries of Z = G^-1 at capacitor terminals, never a dense inverse.

Two exact methods:

* ``columns``: factor G once (SuperLU) and solve for the needed columns in
  batches, keeping only the needed entries of each batch.  Works for any MNA
  matrix.
* ``selected``: a selected inversion (Takahashi, Fagan and Chen 1973; Erisman
  and Tinney 1975): with ``A = L D U``, the entries of ``W = A^-1`` on the
  (symmetric) pattern of the factors follow from the recurrences

      W[i, j] = -sum_k W[i, k] L[k, j]        i > j
      W[j, i] = -sum_k U~[j, k] W[k, i]       i > j
      W[j, j] = 1/D[j] - sum_k U~[j, k] W[k, j]

  taken column by column from the last, using only entries already on the
  pattern.  Its cost grows with the fill, not with the number of columns, which
  matters for wide circuits with a capacitor at every node.  It needs a nodal
  matrix (no branch rows), so circuits with E, F or H sources use ``columns``.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable

import numpy as np
import scipy.sparse as sp

from tauscan.factorization import PermutedLU, fill_reducing_order, splu

#: Above this many distinct columns the selected inversion is used when it applies.
SELECTED_MIN_COLUMNS = 2000
#: Longest column structure for which the selected inversion runs on Python floats.
SMALL_STRUCT = 6
#: Largest dense right-hand side block (entries) per batch of column solves.
BATCH_ENTRIES = 4_000_000


class _NotClosed(Exception):
    """The stored pattern of the factors is not closed under the recurrences."""


def by_columns(g: sp.csc_matrix, rows: np.ndarray, cols: np.ndarray, lu: PermutedLU) -> np.ndarray:
    """Z[rows[k], cols[k]] by batched column solves with the factors ``lu`` of ``g``.

    Parameters
    ----------
    g : sparse (n, n)
        The MNA conductance matrix G (ground dropped).
    rows, cols : int arrays
        MNA rows of the wanted entries; -1 (ground) gives 0.
    lu : PermutedLU
        G's factors (made once per analysis).

    Returns
    -------
    ndarray of float, in ohms for node rows.
    """
    out = np.zeros(len(rows))
    valid = (rows >= 0) & (cols >= 0)
    if not valid.any():
        return out
    n = g.shape[0]
    wanted = np.unique(cols[valid])
    batch = max(1, min(512, BATCH_ENTRIES // max(n, 1)))
    order = np.argsort(cols, kind="stable")
    sorted_cols = cols[order]
    for start in range(0, len(wanted), batch):
        block = wanted[start : start + batch]
        rhs = np.zeros((n, len(block)))
        rhs[block, np.arange(len(block))] = 1.0
        sol = lu.solve(rhs)
        lo = np.searchsorted(sorted_cols, block[0], side="left")
        hi = np.searchsorted(sorted_cols, block[-1], side="right")
        pick = order[lo:hi]
        pick = pick[valid[pick]]
        where = np.searchsorted(block, cols[pick])
        out[pick] = sol[rows[pick], where]
    return out


def selected(g: sp.csc_matrix, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Z[rows[k], cols[k]] by selected inversion of a nodal matrix (see the module's notes).

    Parameters
    ----------
    g : sparse matrix, shape (n, n)
        A nodal conductance matrix (S), no branch rows.
    rows, cols : ndarray of int, shape (k,)
        Nodal rows and columns wanted, -1 for ground (gives 0).

    Returns
    -------
    ndarray, shape (k,)
        Ohms.  Raises ``_NotClosed`` when an entry falls outside the factor's pattern.
    """
    n = g.shape[0]
    out = np.zeros(len(rows))
    valid = (rows >= 0) & (cols >= 0)
    if not valid.any():
        return out
    r, c = rows[valid], cols[valid]
    # structurally symmetric matrix that also holds every wanted entry (explicit zeros)
    coo = g.tocoo()
    extra_r = np.concatenate([coo.col, r, c, np.arange(n)])
    extra_c = np.concatenate([coo.row, c, r, np.arange(n)])
    a = sp.csc_matrix(
        (np.concatenate([coo.data, np.zeros(len(extra_r))]), (np.concatenate([coo.row, extra_r]), np.concatenate([coo.col, extra_c]))),
        shape=(n, n),
    )
    a.sum_duplicates()
    # factor A[q][:, q] in that order: Z[r, c] = (A[q][:, q])^-1 [q^-1(r), q^-1(c)]
    q = fill_reducing_order(a)
    at = np.argsort(q)
    a = a[q][:, q].tocsc()
    r, c = at[r], at[c]
    try:
        lu = splu(a, pivot_threshold=0.0)
    except RuntimeError:
        raise _NotClosed() from None
    if not np.array_equal(lu.perm_r, lu.perm_c):
        raise _NotClosed()
    ac = a.tocoo()
    pa = lu.perm_r[ac.row].astype(np.int64)
    qa = lu.perm_c[ac.col].astype(np.int64)
    w = _takahashi(lu, n, np.maximum(pa, qa), np.minimum(pa, qa))
    # Pr A Pc = L U  ->  A^-1 = Pc W Pr  ->  Z[i, j] = W[perm_c[i], perm_r[j]]
    out[valid] = w.lookup(lu.perm_c[r].astype(np.int64), lu.perm_r[c].astype(np.int64))
    return out


class _Inverse:
    """Entries of W = (L U)^-1 on the closed pattern, stored along the pattern's columns:
    for entry e (row ``prow[e] > j`` of column j), ``lower[e] = W[prow[e], j]`` and
    ``upper[e] = W[j, prow[e]]``; ``diag[j] = W[j, j]``.  Entries are sorted by
    ``j * n + row`` (``ekeys``), so one search finds any of them."""

    def __init__(self, n: int, ekeys: np.ndarray, lower: np.ndarray, upper: np.ndarray, diag: np.ndarray) -> None:
        self.n, self.ekeys, self.lower, self.upper, self.diag = n, ekeys, lower, upper, diag

    def entries(self, col: np.ndarray, row: np.ndarray) -> np.ndarray:
        """Entry numbers of pattern positions (row > col), or _NotClosed."""
        want = col * self.n + row
        if not len(want):
            return np.zeros(0, dtype=np.int64)
        if not len(self.ekeys):
            raise _NotClosed()
        e = np.minimum(np.searchsorted(self.ekeys, want), len(self.ekeys) - 1)
        if not np.array_equal(self.ekeys[e], want):
            raise _NotClosed()
        return e

    def lookup(self, i: np.ndarray, j: np.ndarray) -> np.ndarray:
        out = np.empty(len(i))
        d = i == j
        out[d] = self.diag[i[d]]
        lo = i > j  # W[i, j] below the diagonal: column j, row i
        out[lo] = self.lower[self.entries(j[lo], i[lo])]
        up = i < j  # above: W[i, j] = upper entry of column i, row j
        out[up] = self.upper[self.entries(i[up], j[up])]
        return out


def _takahashi(lu, n: int, a_rows: np.ndarray, a_cols: np.ndarray) -> _Inverse:
    """W = (L U)^-1 on the closed pattern of the factors and of the permuted matrix
    (``a_rows >= a_cols``: its entries folded below the diagonal).

    Short columns (at most :data:`SMALL_STRUCT` rows: chains and trees of stages) run on
    scalars, long ones (meshes fill) on numpy blocks gathered from their parent's block; the
    positions the short columns read are found for all of them at once beforehand."""
    lower = lu.L.tocsc()
    upper = lu.U.tocsr()
    diag = upper.diagonal()
    if np.any(diag == 0):
        raise _NotClosed()
    # strictly lower pattern: the stored entries of L and U^T, closed under fill
    # (symbolic elimination on the elimination tree), so every entry the
    # recurrences reach is on the pattern
    lc = lower.tocoo()
    uc = upper.tocoo()
    pr = np.concatenate([lc.row, uc.col, a_rows]).astype(np.int64)
    pc = np.concatenate([lc.col, uc.row, a_cols]).astype(np.int64)
    strict = pr > pc
    seed = sp.csc_matrix((np.ones(int(strict.sum())), (pr[strict], pc[strict])), shape=(n, n))
    seed.sum_duplicates()
    seed.sort_indices()
    structs = _symbolic_closure(seed, n)
    sizes = np.fromiter((len(x) for x in structs), dtype=np.int64, count=n)
    pptr = np.zeros(n + 1, dtype=np.int64)
    pptr[1:] = np.cumsum(sizes)
    total = int(pptr[-1])
    prow = np.fromiter(itertools.chain.from_iterable(structs), dtype=np.int64, count=total)
    del structs
    cols_of = np.repeat(np.arange(n, dtype=np.int64), sizes)
    w = _Inverse(n, cols_of * n + prow, np.zeros(total), np.zeros(total), np.zeros(n))
    # for the short columns, every pair a < b of the column's rows: W[s_a, s_b] is the upper
    # entry (column s_a, row s_b), W[s_b, s_a] the lower one; pairs column by column, a then b
    # (long columns read their block from their parent's instead, see _recurrences)
    short = sizes <= SMALL_STRUCT
    offset = np.arange(total, dtype=np.int64) - pptr[cols_of]  # index a of each entry in its column
    partners = np.where(short[cols_of], sizes[cols_of] - 1 - offset, 0)
    first = np.repeat(np.arange(total, dtype=np.int64), partners)
    group_start = np.repeat(np.cumsum(partners) - partners, partners)
    second = first + 1 + (np.arange(len(first), dtype=np.int64) - group_start)
    pair_e = w.entries(prow[first], prow[second])
    del first, second, group_start, partners, offset
    pair_ptr = np.zeros(n + 1, dtype=np.int64)
    pair_ptr[1:] = np.cumsum(np.where(short, sizes * (sizes - 1) // 2, 0))
    lv = np.asarray(lower[prow, cols_of]).ravel()  # L[s, j]
    uv = np.asarray(upper[cols_of, prow]).ravel() / diag[cols_of]  # U~[j, s] = U[j, s] / D[j]
    _recurrences(n, sizes, pptr, pair_ptr, pair_e, prow, lv, uv, diag, w)
    return w


def _recurrences(n, sizes, pptr, pair_ptr, pair_e, prow, lv, uv, diag, w: _Inverse) -> None:
    """The recurrences from the last column to the first.

    A long column j reads W[s, s] (s: its rows, s[0] its parent p in the elimination tree)
    from p's full block over [p] + rows(p), since s[1:] lies within rows(p): a gather, no
    search.  Full blocks are kept only while a long child still needs them."""
    wl, wu, wd = w.lower, w.upper, w.diag
    size = sizes.tolist()
    ptr = pptr.tolist()
    pp = pair_ptr.tolist()
    d = diag.tolist()
    small = SMALL_STRUCT
    rows_l = prow.tolist()
    lv_l, uv_l = lv.tolist(), uv.tolist()
    # the one pair of each two-row column (scalar path)
    first_pair = pair_e[np.minimum(pair_ptr[:-1], max(len(pair_e) - 1, 0))] if len(pair_e) else np.zeros(n, dtype=np.int64)
    pe_l = np.where(sizes == 2, first_pair, 0).tolist()
    triu: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    # how many long columns still need each column's full block
    long_cols = np.flatnonzero(sizes > small)
    waiting = np.bincount(prow[pptr[long_cols]], minlength=n).tolist() if len(long_cols) else [0] * n
    full: dict[int, np.ndarray] = {}

    def short_block(j: int, m: int, e0: int) -> np.ndarray:
        if m not in triu:
            triu[m] = np.triu_indices(m, 1)
        iu, ju = triu[m]
        pe = pair_e[pp[j] : pp[j + 1]]
        block = np.empty((m, m))
        block[iu, ju] = wu[pe]  # W[s_a, s_b], a < b
        block[ju, iu] = wl[pe]  # W[s_b, s_a]
        block.flat[:: m + 1] = wd[prow[e0 : e0 + m]]
        return block

    def full_block(p: int) -> np.ndarray:
        found = full.get(p)
        if found is not None:
            return found
        m, e0 = size[p], ptr[p]  # a short parent: assemble its block now
        f = np.empty((m + 1, m + 1))
        f[0, 0] = wd[p]
        f[0, 1:] = wu[e0 : e0 + m]
        f[1:, 0] = wl[e0 : e0 + m]
        if m:
            f[1:, 1:] = short_block(p, m, e0)
        full[p] = f
        return f

    for j in range(n - 1, -1, -1):
        m = size[j]
        e0 = ptr[j]
        if m == 0:
            wd[j] = 1.0 / d[j]
        elif m == 1 and small >= 1:
            a = rows_l[e0]
            waa = wd[a]
            c = -waa * lv_l[e0]
            wl[e0] = c
            wu[e0] = -uv_l[e0] * waa
            wd[j] = 1.0 / d[j] - uv_l[e0] * c
        elif m == 2 and small >= 2:
            q = pe_l[j]
            w00, w11 = wd[rows_l[e0]], wd[rows_l[e0 + 1]]
            w01, w10 = wu[q], wl[q]
            l0, l1, u0, u1 = lv_l[e0], lv_l[e0 + 1], uv_l[e0], uv_l[e0 + 1]
            c0 = -(w00 * l0 + w01 * l1)
            c1 = -(w10 * l0 + w11 * l1)
            wl[e0] = c0
            wl[e0 + 1] = c1
            wu[e0] = -(u0 * w00 + u1 * w10)
            wu[e0 + 1] = -(u0 * w01 + u1 * w11)
            wd[j] = 1.0 / d[j] - (u0 * c0 + u1 * c1)
        else:
            s = prow[e0 : e0 + m]
            if m <= small:
                block = short_block(j, m, e0)
            else:
                p = rows_l[e0]
                fp = full_block(p)
                rows_p = prow[ptr[p] : ptr[p] + size[p]]
                at = np.searchsorted(rows_p, s[1:])
                if len(at) and (at.max() >= len(rows_p) or not np.array_equal(rows_p[at], s[1:])):
                    raise _NotClosed()
                idx = np.concatenate(([0], at + 1))
                block = fp[np.ix_(idx, idx)]
                waiting[p] -= 1
                if waiting[p] == 0:
                    del full[p]
            lj = lv[e0 : e0 + m]
            uj = uv[e0 : e0 + m]
            col = -(block @ lj)  # W[s, j]
            row = -(uj @ block)  # W[j, s]
            wl[e0 : e0 + m] = col
            wu[e0 : e0 + m] = row
            wd[j] = 1.0 / d[j] - uj @ col
            if waiting[j]:
                f = np.empty((m + 1, m + 1))
                f[0, 0] = wd[j]
                f[0, 1:] = row
                f[1:, 0] = col
                f[1:, 1:] = block
                full[j] = f


def _symbolic_closure(seed: sp.csc_matrix, n: int) -> list[list[int]]:
    """Row structure below the diagonal of each column of the Cholesky-like fill of ``seed``
    (sorted lists of Python ints: most columns of a circuit hold a handful of rows)."""
    ptr, idx = seed.indptr.tolist(), seed.indices.tolist()
    structs: list[list[int]] = []
    children: list[list[int]] = [[] for _ in range(n)]
    for j in range(n):
        col = idx[ptr[j] : ptr[j + 1]]
        kids = children[j]
        if kids:
            merged = set(col)
            for child in kids:
                merged.update(x for x in structs[child] if x > j)
            col = sorted(merged)
        structs.append(col)
        if col:
            children[col[0]].append(j)
    return structs


def nodal_reduction(ss) -> tuple[sp.csc_matrix, np.ndarray] | None:
    """The nodal G (no branch rows) and a map from MNA node rows to its rows.

    Voltage sources and inductors are shorts at DC: their nodes are merged (or grounded).

    Parameters
    ----------
    ss : SmallSignalNetwork or MidBandNetwork

    Returns
    -------
    (g, mapped) or None
        ``g``: sparse, shape (p, p), siemens; ``mapped``: ndarray of int, shape (n_nodes,),
        the nodal row of each MNA node row (-1: AC ground).  None when E, F or H sources
        need branch rows.
    """
    shorts = ss.dc_shorts()
    if shorts is None:
        return None
    net = ss.network
    parent = list(range(net.n_nodes))

    def find(a: int) -> int:
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for e in shorts:
        a, b = find(net.node(e.nodes[0])), find(net.node(e.nodes[1]))
        if a != b:
            # ground (index 0) always stays the representative
            lo, hi = min(a, b), max(a, b)
            parent[hi] = lo
    reps = np.array([find(i) for i in range(net.n_nodes)])
    keep = np.unique(reps[reps > 0])
    new_index = -np.ones(net.n_nodes, dtype=np.int64)
    new_index[keep] = np.arange(len(keep))
    mapped = new_index[reps]  # full node index -> nodal row (-1 for ground)
    g = ss.g.tocoo()
    nn = net.n_nodes - 1
    node_entries = (g.row < nn) & (g.col < nn)
    r = mapped[g.row[node_entries] + 1]
    c = mapped[g.col[node_entries] + 1]
    v = g.data[node_entries]
    ok = (r >= 0) & (c >= 0)
    nodal = sp.csc_matrix((v[ok], (r[ok], c[ok])), shape=(len(keep), len(keep)))
    return nodal, mapped[1:]


def z_entries(ss, rows: np.ndarray, cols: np.ndarray, method: str, lu: Callable[[], PermutedLU]) -> tuple[np.ndarray, str]:
    """Z[rows[k], cols[k]] of Z = G^-1 for MNA node rows, and the method used.

    Parameters
    ----------
    ss : SmallSignalNetwork or MidBandNetwork
    rows, cols : ndarray of int, shape (k,)
        MNA node rows (ground dropped), -1 for ground.
    method : str
        ``"auto"``, ``"columns"`` (solves with G's factors, one per distinct column) or
        ``"selected"`` (selected inversion of the nodal matrix).
    lu : callable
        Gives G's factors when the column method needs them (G is factored once per
        analysis, and not at all for the selected inversion when nothing else needs it).

    Returns
    -------
    z : ndarray, shape (k,)
        Ohms.
    method : str
        The method used.
    """
    rows = np.asarray(rows, dtype=np.int64)
    cols = np.asarray(cols, dtype=np.int64)
    n_cols = len(np.unique(cols[cols >= 0]))
    if method == "auto":
        method = "selected" if n_cols >= SELECTED_MIN_COLUMNS else "columns"
    if method == "selected":
        reduced = nodal_reduction(ss)
        if reduced is not None:
            nodal, mapped = reduced
            r = np.where(rows >= 0, mapped[np.maximum(rows, 0)], -1)
            c = np.where(cols >= 0, mapped[np.maximum(cols, 0)], -1)
            try:
                return selected(nodal, r, c), "selected"
            except _NotClosed:
                pass
    return by_columns(ss.g, rows, cols, lu()), "columns"


__all__ = ["z_entries", "by_columns", "selected"]
