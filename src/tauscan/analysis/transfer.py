"""Transfer time constants: the signal path's own first-order view (Hajimiri 2010).

With v = G^-1 b (node voltages per unit drive at DC) and the adjoint w = G^-T e (the output
per unit current injected at each node), H0 = e^T v and, for capacitor k between a and b,

    T_k = C_k (v_a - v_b)(w_a - w_b) / H0  =  tau_k (1 - H^k / H0)

(H^k: the gain with capacitor k shorted and the others open; Hajimiri, "Generalized
time- and transfer-constant circuit analysis", IEEE Trans. Circuits Syst. I 57(6), 2010).
Their sum is the first moment of the transfer, -H'(0)/H(0) = w^T C v / H0 (Elmore 1948),
and 1/(2 pi sum T) estimates the -3 dB frequency.  Node n's part is
(w_n / H0) sum_k C_k (v_n - v_m); its signal Miller part sums (w_n / H0) C_k (-v_m) over the
capacitors whose signal gain v_m / v_n is negative.  A capacitor or node that v or w does not
reach has T = 0 (judged relative to the largest): it is off the signal path.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tauscan.analysis.probe import Probe
from tauscan.analysis.systems import Factors
from tauscan.analysis.transcap import TransParts, transfer_parts

#: A difference below this fraction of the largest counts as zero: off the signal path
#: (exact cancellations, such as a balanced pair's tail, leave round-off of this order).
OFF_PATH = 1e-9


@dataclass
class TransferTable:
    """Transfer time constants of one network for one drive and probe."""

    h0: float
    cap_tau: np.ndarray  # per capacitor record, signed
    cap_gain: np.ndarray  # K_sig = v(node_out) / v(node_in); NaN where v(node_in) = 0
    cap_on: np.ndarray  # bool
    node_tau: np.ndarray  # per node row
    node_miller: np.ndarray
    node_on: np.ndarray
    #: the first moment -H'(0)/H(0), inductors included
    sum_tau: float
    #: node voltages per unit drive at DC (node rows): the nodes that carry signal
    v: np.ndarray
    #: per non-reciprocal device part (:mod:`tauscan.analysis.transcap`), signed
    trans_tau: np.ndarray = field(default_factory=lambda: np.zeros(0))


def _at(x: np.ndarray, rows: np.ndarray) -> np.ndarray:
    return np.where(rows >= 0, x[np.maximum(rows, 0)], 0.0)


def transfer_table(factors: Factors, n_nodes: int, a_rows: np.ndarray, b_rows: np.ndarray,
                   farads: np.ndarray, input_is_a: np.ndarray, b: np.ndarray, probe: Probe,
                   trans: TransParts | None = None) -> TransferTable | None:
    """Transfer time constants of every capacitor and node for one drive and probe (Hajimiri 2010).

    Parameters
    ----------
    factors : Factors
        G (and C) of the network, factored once.
    n_nodes : int
        Number of node rows (the first rows of G).
    a_rows, b_rows : ndarray of int, shape (m,)
        MNA rows of each capacitor's ends, -1 only for ground (a driven node keeps its row).
    farads : ndarray, shape (m,)
        Capacitances (F).
    input_is_a : ndarray of bool, shape (m,)
        Which end is the input side (from the open-circuit table): orients the signal gain.
    b : ndarray, shape (n,)
        The drive (MNA right-hand side per unit of the source's AC value).
    probe : Probe
        The output node (or pair).
    trans : TransParts, optional
        The devices' non-reciprocal parts (:mod:`tauscan.analysis.transcap`): their transfer
        time constants are ``trans_tau`` and their parts enter the nodes'.

    Returns
    -------
    TransferTable or None
        Signed time constants (s) per capacitor and node row; None when H0 = 0 (no
        low-frequency transfer on this network: nothing to divide by).
    """
    lu = factors.lu
    b = np.asarray(b)
    v = lu.solve(b.real) + (1j * lu.solve(b.imag) if np.iscomplexobj(b) and np.any(b.imag) else 0.0)
    e = probe.vector(factors.g.shape[0])
    w = lu.solve(e, trans="T")
    h0 = complex(e @ v)
    if h0 == 0 or not np.isfinite(h0):
        return None
    va, vb = _at(v, a_rows), _at(v, b_rows)
    wa, wb = _at(w, a_rows), _at(w, b_rows)
    dv, dw = va - vb, wa - wb
    tau = (farads * dv * dw / h0).real
    v_scale = np.abs(v[:n_nodes]).max(initial=0.0)
    w_scale = np.abs(w[:n_nodes]).max(initial=0.0)
    t_scale = np.abs(tau).max(initial=0.0)
    on = (np.abs(dv) > OFF_PATH * v_scale) & (np.abs(dw) > OFF_PATH * w_scale) & (np.abs(tau) > OFF_PATH * t_scale)
    tau = np.where(on, tau, 0.0)
    v_in = np.where(input_is_a, va, vb)
    v_out = np.where(input_is_a, vb, va)
    with np.errstate(divide="ignore", invalid="ignore"):
        gain = np.where(np.abs(v_in) > OFF_PATH * v_scale, (v_out / v_in).real, np.nan)
    part_a = (wa / h0 * farads * dv).real
    part_b = (-wb / h0 * farads * dv).real
    miller_a = np.where((va * vb).real < 0, (wa / h0 * farads * -vb).real, 0.0)
    miller_b = np.where((va * vb).real < 0, (wb / h0 * farads * -va).real, 0.0)
    node_tau = np.zeros(n_nodes)
    node_miller = np.zeros(n_nodes)
    for rows, part, mil in ((a_rows, part_a, miller_a), (b_rows, part_b, miller_b)):
        ok = (rows >= 0) & (rows < n_nodes) & on
        np.add.at(node_tau, rows[ok], part[ok])
        np.add.at(node_miller, rows[ok], mil[ok])
    trans_tau = np.zeros(0)
    if trans is not None and len(trans):
        trans_tau, trans_node = transfer_parts(trans, v, w, h0)
        scale = max(t_scale, float(np.abs(trans_tau).max(initial=0.0)))
        trans_on = np.abs(trans_tau) > OFF_PATH * scale
        trans_tau = np.where(trans_on, trans_tau, 0.0)
        for rows, part, keep in zip(trans.raw_rows, trans_node, trans_on.tolist()):
            ok = (rows >= 0) & (rows < n_nodes)
            if keep:
                np.add.at(node_tau, rows[ok], part[ok])
    n_scale = np.abs(node_tau).max(initial=0.0)
    # a node whose own voltage does not move still takes charge through a capacitor whose
    # other end does (C (v_n - v_m) with v_n = 0): it is on the path when its T_n is not nil
    node_on = np.abs(node_tau) > OFF_PATH * n_scale
    node_tau = np.where(node_on, node_tau, 0.0)
    node_miller = np.where(node_on, node_miller, 0.0)
    total = complex(w @ (factors.c @ v)) / h0
    return TransferTable(h0.real, tau, gain, on, node_tau, node_miller, node_on, total.real, v[:n_nodes], trans_tau)
