"""Open-circuit time constants, Miller gains and their split between nodes.

For a capacitor C between nodes a and b, with Z = G^-1 (capacitors open):

    R   = Zaa + Zbb - Zab - Zba                 (the resistance it sees: the zero-value /
                                                 open-circuit time-constant method of
                                                 Thornton et al. 1965; Gray et al. ch. 7)
    tau = R C
    Kab = Zba / Zaa,   Kba = Zab / Zbb          (drive one end, watch the other)
    tau = C Zaa (1 - Kab) + C Zbb (1 - Kba)     (the exact split between its two nodes)

The input side is the end whose drive gives the larger |K|; with K = -A the
input factor 1 - K = 1 + A is Miller's multiplication (Miller 1920).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Below this |Z| (ohms) a node is treated as held at AC ground by the network.
Z_FLOOR = 1e-30


@dataclass
class CapacitorTable:
    """Per-capacitor results as arrays (one entry per ranked capacitor)."""

    farads: np.ndarray
    zaa: np.ndarray
    zbb: np.ndarray
    zab: np.ndarray
    zba: np.ndarray
    grounded: np.ndarray  # bool: one end at (AC) ground
    a_is_ground: np.ndarray
    ohms: np.ndarray
    tau: np.ndarray
    k_ab: np.ndarray  # nan where undefined
    k_ba: np.ndarray
    input_is_a: np.ndarray  # bool
    gain: np.ndarray  # K across the capacitor, nan for grounded
    gain_reverse: np.ndarray
    factor_in: np.ndarray
    factor_out: np.ndarray  # nan for grounded
    part_a: np.ndarray
    part_b: np.ndarray
    klass: np.ndarray  # object: grounded | miller | bootstrap | regenerative


#: |gain| below this is no gain (round-off of an exact zero): the capacitor is classed grounded.
NO_GAIN = 1e-9


def capacitor_table(farads: np.ndarray, a_ground: np.ndarray, b_ground: np.ndarray,
                    zaa: np.ndarray, zbb: np.ndarray, zab: np.ndarray, zba: np.ndarray) -> CapacitorTable:
    """Resistance seen, time constant, gains both ways, input side, class and Miller factors
    of every capacitor at once (Thornton et al. 1965; Miller 1920).

    Parameters
    ----------
    farads : ndarray, shape (m,)
        Capacitances (F).
    a_ground, b_ground : ndarray of bool, shape (m,)
        Whether each end is at (AC) ground; the Z entries of a grounded end are ignored.
    zaa, zbb, zab, zba : ndarray, shape (m,)
        Entries of Z = G^-1 at the two ends (ohm): Z[a, a], Z[b, b], Z[a, b], Z[b, a].

    Returns
    -------
    CapacitorTable
        Arrays of shape (m,): ``ohms`` = Zaa + Zbb - Zab - Zba (ohm), ``tau`` (s), the gains
        ``k_ab`` = Zba / Zaa and ``k_ba`` = Zab / Zbb (NaN where undefined), the input side,
        the Miller factors 1 - K, the exact parts at each end (s) and the class.
    """
    zaa = np.where(a_ground, 0.0, zaa)
    zbb = np.where(b_ground, 0.0, zbb)
    zab = np.where(a_ground | b_ground, 0.0, zab)
    zba = np.where(a_ground | b_ground, 0.0, zba)
    grounded = a_ground | b_ground
    ohms = zaa + zbb - zab - zba
    tau = ohms * farads
    with np.errstate(divide="ignore", invalid="ignore"):
        k_ab = np.where(grounded | (np.abs(zaa) < Z_FLOOR), np.nan, zba / zaa)
        k_ba = np.where(grounded | (np.abs(zbb) < Z_FLOOR), np.nan, zab / zbb)
    input_is_a = np.where(grounded, ~a_ground, np.nan_to_num(np.abs(k_ab), nan=-1.0) >= np.nan_to_num(np.abs(k_ba), nan=-1.0))
    gain = np.where(grounded, np.nan, np.where(input_is_a, k_ab, k_ba))
    gain_reverse = np.where(grounded, np.nan, np.where(input_is_a, k_ba, k_ab))
    factor_in = np.where(grounded, 1.0, 1.0 - gain)
    factor_out = np.where(grounded, np.nan, 1.0 - gain_reverse)
    # exact split: C Zaa (1 - Kab) = C (Zaa - Zba) and C Zbb (1 - Kba) = C (Zbb - Zab)
    part_a = farads * (zaa - zba)
    part_b = farads * (zbb - zab)
    # a gain within round-off of zero is no gain: the far end does not move, as a ground
    # would not (its Miller factor is 1); "miller" for -1e-15 would send a designer looking
    no_gain = np.nan_to_num(np.abs(gain), nan=np.inf) < NO_GAIN
    klass = np.where(
        grounded | no_gain, "grounded",
        np.where(gain < 0, "miller", np.where(gain < 1, "bootstrap", "regenerative")),
    ).astype(object)
    return CapacitorTable(farads, zaa, zbb, zab, zba, grounded, a_ground, ohms, tau, k_ab, k_ba,
                          input_is_a.astype(bool), gain, gain_reverse, factor_in, factor_out, part_a, part_b, klass)


def miller_excess(t: CapacitorTable) -> np.ndarray:
    """The part the gain adds at the input node, C Znn (-K), for miller capacitors (else 0).

    Parameters
    ----------
    t : CapacitorTable
        From :func:`capacitor_table`, m capacitors.

    Returns
    -------
    ndarray, shape (m,)
        Seconds; zero for every capacitor not classed ``miller``.
    """
    z_in = np.where(t.input_is_a, t.zaa, t.zbb)
    return np.where(t.klass == "miller", t.farads * z_in * (-np.nan_to_num(t.gain)), 0.0)


def cascoded_tau(t: CapacitorTable) -> np.ndarray:
    """Time constant if the gain across a miller capacitor were cut to -1 (as a cascode does):
    the input part becomes C Zin (1 - (-1)), the output part stays.

    Parameters
    ----------
    t : CapacitorTable
        From :func:`capacitor_table`, m capacitors.

    Returns
    -------
    ndarray, shape (m,)
        Seconds; NaN where it would not help (not miller, or a gain above -1).
    """
    z_in = np.where(t.input_is_a, t.zaa, t.zbb)
    part_out = np.where(t.input_is_a, t.part_b, t.part_a)
    helps = (t.klass == "miller") & (np.nan_to_num(t.gain) < -1.0)
    return np.where(helps, 2.0 * t.farads * z_in + part_out, np.nan)


def node_sums(names: list[str], a_index: np.ndarray, b_index: np.ndarray, t: CapacitorTable, n_nodes: int,
              excess: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per node: its time constant (the parts at it) and its Miller part, from the exact split
    of every capacitor's time constant between its two ends.

    Parameters
    ----------
    names : list of str
        Unused (kept for callers that pass node names); may be empty.
    a_index, b_index : ndarray of int, shape (m,)
        Node row of each capacitor's ends, -1 for (AC) ground.
    t : CapacitorTable
        From :func:`capacitor_table`.
    n_nodes : int
        Number of node rows.
    excess : ndarray, shape (m,)
        :func:`miller_excess` (s).

    Returns
    -------
    tau, miller : ndarray, shape (n_nodes,)
        Seconds per node row.
    """
    tau = np.zeros(n_nodes)
    np.add.at(tau, a_index[a_index >= 0], t.part_a[a_index >= 0])
    np.add.at(tau, b_index[b_index >= 0], t.part_b[b_index >= 0])
    input_index = np.where(t.input_is_a, a_index, b_index)
    ok = input_index >= 0
    miller = np.zeros(n_nodes)
    np.add.at(miller, input_index[ok], excess[ok])
    return tau, miller
