"""Entries of Z = G^-1 at capacitor terminals (METHOD section 1), never a dense inverse.

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

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from tauscan.circuit import GROUND
from tauscan.errors import CircuitError

#: Above this many distinct columns the selected inversion is used when it applies.
SELECTED_MIN_COLUMNS = 2000
#: Columns whose pattern positions are looked up together in the selected inversion.
TAKAHASHI_CHUNK = 2048
#: Longest column structure for which the selected inversion runs on Python floats.
SMALL_STRUCT = 6
#: Largest dense right-hand side block (entries) per batch of column solves.
BATCH_ENTRIES = 4_000_000


class _NotClosed(Exception):
    """The stored pattern of the factors is not closed under the recurrences."""


def factor(matrix: sp.csc_matrix, what: str = "G"):
    """Sparse LU of a circuit matrix.  Minimum-degree ordering on G + G^T with diagonal
    pivots preferred: circuit matrices are nearly symmetric in structure, and the default
    column ordering can fill badly (seen here: 33 s against 0.75 s on 10^5 nodes)."""
    try:
        return spla.splu(matrix.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.01,
                         options={"SymmetricMode": True})
    except RuntimeError as exc:
        raise CircuitError(f"the small-signal matrix {what} is singular ({exc}); a node without any path?") from None


def by_columns(g: sp.csc_matrix, rows: np.ndarray, cols: np.ndarray, lu=None) -> np.ndarray:
    """Z[rows[k], cols[k]] by batched column solves; rows/cols of -1 (ground) give 0."""
    out = np.zeros(len(rows))
    valid = (rows >= 0) & (cols >= 0)
    if not valid.any():
        return out
    lu = lu or factor(g)
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
    """Z[rows[k], cols[k]] by selected inversion of a nodal matrix (see module doc)."""
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
    try:
        lu = spla.splu(a, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options={"SymmetricMode": True})
    except RuntimeError:
        raise _NotClosed() from None
    if not np.array_equal(lu.perm_r, lu.perm_c):
        raise _NotClosed()
    ac = a.tocoo()
    pa = lu.perm_r[ac.row].astype(np.int64)
    qa = lu.perm_c[ac.col].astype(np.int64)
    w_keys, w_vals = _takahashi(lu, n, np.maximum(pa, qa), np.minimum(pa, qa))
    # Pr A Pc = L U  ->  A^-1 = Pc W Pr  ->  Z[i, j] = W[perm_c[i], perm_r[j]]
    wi = lu.perm_c[r]
    wj = lu.perm_r[c]
    keys = wi.astype(np.int64) * n + wj
    pos = np.searchsorted(w_keys, keys)
    pos = np.minimum(pos, len(w_keys) - 1)
    if not np.array_equal(w_keys[pos], keys):
        raise _NotClosed()
    out[valid] = w_vals[pos]
    return out


def _takahashi(lu, n: int, a_rows: np.ndarray, a_cols: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """W = (L U)^-1 on the closed pattern of the factors and of the permuted matrix
    (``a_rows >= a_cols``: its entries folded below the diagonal)."""
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
    prow = np.fromiter(itertools.chain.from_iterable(structs), dtype=np.int64, count=int(pptr[-1]))
    # the pattern of W: lower, its transpose, the diagonal; sorted keys row*n + col
    cols_of = np.repeat(np.arange(n, dtype=np.int64), sizes)
    keys = np.unique(np.concatenate([prow * n + cols_of, cols_of * n + prow, np.arange(n, dtype=np.int64) * (n + 1)]))
    vals = np.zeros(len(keys))
    lower.sort_indices()
    upper.sort_indices()
    l_ptr, l_idx, l_val = lower.indptr, lower.indices, lower.data
    u_ptr, u_idx, u_val = upper.indptr, upper.indices, upper.data
    if n and int(sizes.max()) <= SMALL_STRUCT:
        return keys, _takahashi_small(n, sizes, pptr, prow, cols_of, keys, diag, lower, upper)

    def positions(k: np.ndarray) -> np.ndarray:
        p = np.searchsorted(keys, k)
        p = np.minimum(p, len(keys) - 1)
        if not np.array_equal(keys[p], k):
            raise _NotClosed()
        return p

    for top in range(n - 1, -1, -TAKAHASHI_CHUNK):
        columns = range(top, max(top - TAKAHASHI_CHUNK, -1), -1)
        # the positions every column of this chunk reads and writes, found in one search
        wanted = []
        for j in columns:
            sj = prow[pptr[j] : pptr[j + 1]]
            wanted.append((sj[:, None] * n + sj[None, :]).ravel())
            wanted.append(sj * n + j)
            wanted.append(j * n + sj)
            wanted.append(np.array([j * (n + 1)], dtype=np.int64))
        found = positions(np.concatenate(wanted))
        at = 0
        for j in columns:
            s = prow[pptr[j] : pptr[j + 1]]
            m_s = len(s)
            block_pos = found[at : at + m_s * m_s]
            at += m_s * m_s
            col_pos = found[at : at + m_s]
            at += m_s
            row_pos = found[at : at + m_s]
            at += m_s
            diag_pos = found[at]
            at += 1
            djj = diag[j]
            if m_s == 0:
                vals[diag_pos] = 1.0 / djj
                continue
            # L[s, j] and U~[j, s] as dense vectors over s (0 where not stored)
            lv = np.zeros(m_s)
            seg = slice(l_ptr[j], l_ptr[j + 1])
            li, lx = l_idx[seg], l_val[seg]
            m = li > j
            lv[np.searchsorted(s, li[m])] = lx[m]
            uv = np.zeros(m_s)
            seg = slice(u_ptr[j], u_ptr[j + 1])
            ui, ux = u_idx[seg], u_val[seg]
            m = ui > j
            uv[np.searchsorted(s, ui[m])] = ux[m] / djj
            wss = vals[block_pos].reshape(m_s, m_s)
            col = -(wss @ lv)  # W[s, j]
            vals[col_pos] = col
            vals[row_pos] = -(uv @ wss)  # W[j, s]
            vals[diag_pos] = 1.0 / djj - uv @ col
    return keys, vals


def _takahashi_small(n: int, sizes: np.ndarray, pptr: np.ndarray, prow: np.ndarray, cols_of: np.ndarray,
                     keys: np.ndarray, diag: np.ndarray, lower, upper) -> np.ndarray:
    """The same recurrences on Python floats, for patterns whose every column is short
    (chains and trees of stages), where per-column numpy calls would cost more than the
    work.  Every position and factor entry is looked up beforehand in a few vector calls."""

    def positions(k: np.ndarray) -> list[int]:
        p = np.minimum(np.searchsorted(keys, k), len(keys) - 1)
        if not np.array_equal(keys[p], k):
            raise _NotClosed()
        return p.tolist()

    # the m x m block W[s, s] of every column, row-major, as positions
    per_entry = sizes[cols_of]
    total = int(per_entry.sum())
    first = np.repeat(np.arange(len(prow), dtype=np.int64), per_entry)
    block_start = np.repeat(np.cumsum(per_entry) - per_entry, per_entry)
    second = np.repeat(pptr[:-1][cols_of], per_entry) + (np.arange(total, dtype=np.int64) - block_start)
    pair_pos = positions(prow[first] * n + prow[second])
    pair_ptr = np.zeros(n + 1, dtype=np.int64)
    pair_ptr[1:] = np.cumsum(sizes * sizes)
    col_pos = positions(prow * n + cols_of)
    row_pos = positions(cols_of * n + prow)
    diag_pos = positions(np.arange(n, dtype=np.int64) * (n + 1))
    lv = np.asarray(lower[prow, cols_of]).ravel().tolist()  # L[s, j]
    uv = (np.asarray(upper[cols_of, prow]).ravel() / diag[cols_of]).tolist()  # U~[j, s]
    d = diag.tolist()
    ptr = pptr.tolist()
    pp = pair_ptr.tolist()
    size = sizes.tolist()
    vals = [0.0] * len(keys)
    for j in range(n - 1, -1, -1):
        m = size[j]
        b0 = ptr[j]
        if m == 0:
            vals[diag_pos[j]] = 1.0 / d[j]
        elif m == 1:
            w = vals[pair_pos[pp[j]]]
            c = -w * lv[b0]
            vals[col_pos[b0]] = c
            vals[row_pos[b0]] = -uv[b0] * w
            vals[diag_pos[j]] = 1.0 / d[j] - uv[b0] * c
        elif m == 2:
            q = pp[j]
            w00, w01, w10, w11 = vals[pair_pos[q]], vals[pair_pos[q + 1]], vals[pair_pos[q + 2]], vals[pair_pos[q + 3]]
            l0, l1, u0, u1 = lv[b0], lv[b0 + 1], uv[b0], uv[b0 + 1]
            c0 = -(w00 * l0 + w01 * l1)
            c1 = -(w10 * l0 + w11 * l1)
            vals[col_pos[b0]] = c0
            vals[col_pos[b0 + 1]] = c1
            vals[row_pos[b0]] = -(u0 * w00 + u1 * w10)
            vals[row_pos[b0 + 1]] = -(u0 * w01 + u1 * w11)
            vals[diag_pos[j]] = 1.0 / d[j] - (u0 * c0 + u1 * c1)
        else:
            q = pp[j]
            w = [[vals[pair_pos[q + a * m + b]] for b in range(m)] for a in range(m)]
            ls = lv[b0 : b0 + m]
            us = uv[b0 : b0 + m]
            diag_sum = 0.0
            for a in range(m):
                row = w[a]
                c = 0.0
                for b in range(m):
                    c -= row[b] * ls[b]
                vals[col_pos[b0 + a]] = c
                diag_sum += us[a] * c
                r = 0.0
                for b in range(m):
                    r -= us[b] * w[b][a]
                vals[row_pos[b0 + a]] = r
            vals[diag_pos[j]] = 1.0 / d[j] - diag_sum
    return np.array(vals)


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
    """The nodal G (no branch rows) and a map MNA node row -> nodal row (-1: AC ground).

    Voltage sources and inductors are shorts at DC: their nodes are merged (or
    grounded).  Returns None when E, F or H sources need branch rows.
    """
    circuit = ss.circuit
    if any(e.kind in "efh" for e in circuit.elements):
        return None
    net = ss.network
    parent = list(range(net.n_nodes))

    def find(a: int) -> int:
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    for e in circuit.elements:
        if e.kind in "vl":
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


def z_entries(ss, rows: np.ndarray, cols: np.ndarray, method: str = "auto") -> tuple[np.ndarray, str]:
    """Z[rows[k], cols[k]] for MNA node rows (-1 = ground), and the method used."""
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
    return by_columns(ss.g, rows, cols), "columns"


__all__ = ["z_entries", "by_columns", "selected", "factor", "GROUND"]
