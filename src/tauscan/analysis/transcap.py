"""The non-reciprocal parts of device capacitance matrices in the analysis.

A charge-based device model gives a terminal matrix C_T (C_ij = dQ_i/dV_j) that need not be
symmetric.  Its symmetric part is reported as two-terminal capacitors (each handled as any
capacitor is, :mod:`tauscan.analysis.timeconstants`); the remainder A = (C_T - C_T^T)/2 is
one entry per device, ``device:ctrans``.  Every figure below is the capacitor's formula
written for a terminal block instead of a branch, so that the entries still add up:

* open-circuit time constant: tau = trace(A Z_T) = sum_ij A_ij Z[n_j, n_i], its part at
  terminal i being (A Z_T)_ii (a capacitor's part at node a is (C_k Z)_aa = C (Z_aa - Z_ba));
  with them, sum of all entries = trace(G^-1 C), the first-order sum of Thornton et al. (1965);
* pole share: y^T A x / y^T C x with x, y the dominant pole's right and left eigenvectors
  (as a capacitor's C (y_a - y_b)(x_a - x_b) / y^T C x; Rommes and Martins 2006);
* transfer time constant: w^T A v / H0, its part at terminal i being w_i (A v)_i / H0
  (Hajimiri 2010: the first moment w^T C v / H0 split by elements).

Today's built-in models give symmetric matrices: there is no such entry for them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tauscan.analysis.zentries import z_entries


@dataclass
class TransParts:
    """The ``ctrans`` entries of one network: per record, its terminals' rows and figures."""

    records: list
    #: per record: MNA row of each terminal, -1 for ground and AC-ground nodes (Z is zero there)
    rows: list[np.ndarray]
    #: per record: MNA row of each terminal, -1 for ground only (the signal is not zero at a
    #: driven node)
    raw_rows: list[np.ndarray]
    tau: np.ndarray
    #: per record: its open-circuit part at each terminal (sums to its tau)
    node_parts: list[np.ndarray]
    #: per record: the largest |A_ij|, the size of the non-reciprocal part (F)
    farads: np.ndarray

    def __len__(self) -> int:
        return len(self.records)


def trans_parts(network, factors, method: str) -> TransParts:
    """The open-circuit figures of every non-reciprocal part of ``network``.

    Parameters
    ----------
    network : SmallSignalNetwork or MidBandNetwork
        Its ``transcaps`` records give the parts; its numbering places their nodes.
    factors : Factors
        G's factors (used when the Z entries are taken by columns).
    method : str
        ``"auto"``, ``"columns"`` or ``"selected"`` (:func:`tauscan.analysis.zentries.z_entries`).

    Returns
    -------
    TransParts
        Per record: tau = trace(A Z_T) (s), its parts at the terminals (s), the largest
        |A_ij| (F) and the terminals' rows.
    """
    records = list(getattr(network, "transcaps", ()) or ())
    if not records:
        return TransParts([], [], [], np.zeros(0), [], np.zeros(0))
    index = network.network.index
    grounds = {index[name] for name in network.ac_ground if name in index}
    rows, raw = [], []
    for rec in records:
        mapped = np.array([index[n] for n in rec.nodes], dtype=np.int64)
        raw.append(mapped - 1)  # ground (0) -> -1
        rows.append(np.array([-1 if m in grounds else m - 1 for m in mapped.tolist()], dtype=np.int64))
    # Z[n_j, n_i] for every terminal pair of every record, in one request
    want_r, want_c = [], []
    for r in rows:
        size = len(r)
        want_r.append(np.repeat(r, size))  # j runs slowest below: Z[j, i] at [j * size + i]
        want_c.append(np.tile(r, size))
    z, _ = z_entries(network, np.concatenate(want_r), np.concatenate(want_c), method, lambda: factors.lu)
    taus, parts, sizes = [], [], []
    at = 0
    for rec, r in zip(records, rows):
        size = len(r)
        block = z[at:at + size * size].reshape(size, size)  # block[j, i] = Z[n_j, n_i]
        at += size * size
        block = np.where((r[:, None] >= 0) & (r[None, :] >= 0), block, 0.0)
        a = np.asarray(rec.matrix, dtype=float)
        part = np.einsum("ij,ji->i", a, block)  # (A Z_T)_ii
        parts.append(part)
        taus.append(float(part.sum()))
        sizes.append(float(np.abs(a).max(initial=0.0)))
    return TransParts(records, rows, raw, np.array(taus), parts, np.array(sizes))


def _at(x: np.ndarray, rows: np.ndarray) -> np.ndarray:
    return np.where(rows >= 0, x[np.maximum(rows, 0)], 0.0)


def pole_shares(parts: TransParts, x: np.ndarray, y: np.ndarray, denominator: complex) -> np.ndarray:
    """Each entry's share of the dominant pole, Re(y^T A x / y^T C x).

    Parameters
    ----------
    parts : TransParts
    x, y : ndarray, shape (n,)
        Right and left eigenvectors of the dominant pole (MNA rows, ground dropped).
    denominator : complex
        y^T C x for the whole C.

    Returns
    -------
    ndarray, shape (len(parts),)
        Dimensionless; NaN when the denominator is zero.
    """
    if not len(parts) or denominator == 0:
        return np.full(len(parts), np.nan)
    return np.array([np.real(_at(y, r) @ (np.asarray(rec.matrix) @ _at(x, r)) / denominator)
                     for rec, r in zip(parts.records, parts.raw_rows)])


def transfer_parts(parts: TransParts, v: np.ndarray, w: np.ndarray, h0: complex) -> tuple[np.ndarray, list[np.ndarray]]:
    """Each entry's transfer time constant w^T A v / H0 and its parts w_i (A v)_i / H0.

    Parameters
    ----------
    parts : TransParts
    v : ndarray, shape (n,)
        Node voltages per unit drive at DC, G^-1 b.
    w : ndarray, shape (n,)
        The adjoint, G^-T e (e: the probe vector).
    h0 : complex
        The low-frequency gain e^T v.

    Returns
    -------
    tau : ndarray, shape (len(parts),)
        Seconds, signed.
    node_parts : list of ndarray
        Per entry, seconds at each of its terminals (they add up to its tau).
    """
    taus, node_parts = [], []
    for rec, r in zip(parts.records, parts.raw_rows):
        part = np.real(_at(w, r) * (np.asarray(rec.matrix) @ _at(v, r)) / h0)
        node_parts.append(part)
        taus.append(float(part.sum()))
    return np.array(taus), node_parts
