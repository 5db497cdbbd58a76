"""What every device group shares: the operating-point record of one device and
its small-signal stamps."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tauscan.devices import registry


@dataclass(slots=True)
class CapacitanceMatrix:
    """One device's capacitances over its terminals: ``matrix[i, j] = dQ_i / dV_j`` (F).

    Charge conservation makes every row and column sum to zero; a charge-based model's
    matrix need not be symmetric (its transcapacitances).  ``nodes[i]`` is terminal i's
    node; ``pair_names[(i, j)]`` (i < j) names the two-terminal part that the symmetric
    part between terminals i and j is reported as (``cgd``); a pair without a name is
    reported as ``c`` + both terminal names.  A matrix made of two-terminal parts
    (:meth:`from_pairs`) keeps them (``pairs``) and builds ``matrix`` only when asked: a
    large circuit has one per device, and per-device arrays would dominate its linearization.
    """

    terminals: tuple[str, ...]
    nodes: tuple[str, ...]
    given: np.ndarray | None = None
    pair_names: dict[tuple[int, int], str] = field(default_factory=dict)
    #: ``(part, i, j, farads)`` when the matrix is the sum of two-terminal parts
    pairs: list[tuple[str, int, int, float]] | None = None

    @property
    def matrix(self) -> np.ndarray:
        """The k x k matrix (F)."""
        if self.given is not None:
            return self.given
        m = np.zeros((len(self.terminals), len(self.terminals)))
        for _part, i, j, farads in self.pairs or ():
            m[i, i] += farads
            m[j, j] += farads
            m[i, j] -= farads
            m[j, i] -= farads
        return m

    @classmethod
    def from_pairs(cls, terminals: tuple[str, ...], nodes: tuple[str, ...],
                   pairs: list[tuple[str, int, int, float]],
                   names: dict[tuple[int, int], str] | None = None) -> "CapacitanceMatrix":
        """The matrix of two-terminal capacitances ``(part, i, j, farads)`` between
        terminals i and j: each adds ``C (e_i - e_j)(e_i - e_j)^T`` (symmetric).
        ``names``: the pair names when the caller has them (shared, read-only)."""
        if names is None:
            names = {(min(i, j), max(i, j)): part for part, i, j, _ in pairs}
        return cls(terminals, nodes, None, names, pairs)


@dataclass(slots=True)
class SmallSignal:
    """Linear primitives of one device at its operating point (node names, SI values).

    ``conductances``: (part, a, b, g); ``vccs``: (part, p, n, cp, cn, gm), a current
    ``gm*(v[cp]-v[cn])`` leaving node p into the device and entering n;
    ``capacitance``: the terminal capacitance matrix (None: the device has none).
    """

    conductances: list[tuple[str, str, str, float]] = field(default_factory=list)
    vccs: list[tuple[str, str, str, str, str, float]] = field(default_factory=list)
    capacitance: CapacitanceMatrix | None = None


@dataclass
class DeviceOP:
    """One device at the operating point: what ``tauscan op`` reports and linearization uses.

    ``values`` holds the named small-signal quantities (gm, gds, gmb for a
    MOSFET; gm, go, gpi, gmu for a bipolar; gd for a diode); ``caps`` the
    capacitances by part name; ``nodes`` the terminal -> node map used to
    place them (for a MOSFET ``d``/``s`` are the *effective* drain and source:
    swapped when VDS reverses).
    """

    name: str
    type: str
    model: str
    region: str
    current: float
    bias: dict[str, float]
    values: dict[str, float]
    caps: dict[str, float]
    nodes: dict[str, str]
    series: dict[str, float] = field(default_factory=dict)
    file: str = ""
    line: int = 0
    overridden: set[str] = field(default_factory=set)
    #: the registered model's family name (:mod:`tauscan.devices.registry`)
    family: str = ""
    #: a charge-based model's terminal capacitance matrix, ``(terminal keys of nodes, C)``
    #: with ``C[i, j] = dQ_i / dV_j``; None: the capacitances are the two-terminal ``caps``
    cmatrix: tuple[tuple[str, ...], np.ndarray] | None = None

    def small_signal(self) -> SmallSignal:
        """Linear primitives of this device, placed by its model."""
        return registry.by_name(self.family).stamps(self)


def mos_terminal_voltages(v: np.ndarray, t: np.ndarray, vgs: np.ndarray, vds: np.ndarray, vbs: np.ndarray,
                          width: int = 4) -> np.ndarray:
    """The terminal voltages a MOSFET's (limited) normalized biases stand for, in the columns
    d, g, s, b of an array ``width`` wide (the source's node voltage kept; more columns are
    the caller's to fill).

    Parameters
    ----------
    v : ndarray, shape (n, k)
        Node voltages at the devices' terminals, columns d, g, s, b first.
    t : ndarray, shape (n,)
        +1 for NMOS, -1 for PMOS.
    vgs, vds, vbs : ndarray, shape (n,)
        Normalized biases (V).
    width : int
        Columns of the result.

    Returns
    -------
    ndarray, shape (n, width)
    """
    used = np.empty((len(t), width))
    used[:, 2] = v[:, 2]
    used[:, 1] = v[:, 2] + t * vgs
    used[:, 0] = v[:, 2] + t * vds
    used[:, 3] = v[:, 2] + t * vbs
    return used


def series_stamps(params: dict, ext, nodes, parts: tuple[tuple[str, int], ...]):
    """Conductances of series resistances between external and internal terminals.

    ``parts`` pairs a resistance column of ``params`` (ohms per device) with a terminal
    index; devices with zero resistance have no internal node and get no stamp.
    """
    from tauscan.network import Triplets

    t = Triplets()
    for col, term in parts:
        r = params[col]
        has = r > 0
        if has.any():
            t.conductance(ext[has, term], nodes[has, term], 1.0 / r[has])
    return t
