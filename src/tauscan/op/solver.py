"""The DC operating point: Newton-Raphson on the modified nodal equations.

    F(x) = G_lin x + i_dev(x) - b = 0

Each iteration stamps every device's Jacobian and equivalent current (at
voltage-limited terminal voltages), factors the sparse matrix once (SuperLU)
and solves.  Convergence needs both a small update (``reltol``, ``vntol``,
``abstol``) and a small KCL residual at every node.  When plain Newton fails,
gmin stepping and then source stepping follow automatically (the usual SPICE
continuation methods, Nagel 1975).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from tauscan.circuit import Circuit
from tauscan.devices import registry
from tauscan.errors import CircuitError, ConvergenceError
from tauscan.network import GMIN, Network, Triplets
from tauscan.op import topology
from tauscan.op.result import OperatingPoint
from tauscan.factorization import OrderedLU

#: Newton steps taken after convergence to polish the solution (see DCSolver._polish).
POLISH_STEPS = 2
#: A device current above this (A) is reported as a sign of a broken bias network.
MAX_DEVICE_CURRENT = 1.0

#: Built-in families first, in this order (it fixes the numbering of internal nodes); other
#: registered models follow in the order their first device appears.
FAMILY_ORDER = ("mos", "bsim4", "bjt", "diode")


#: Largest DC system whose singular error names the unknowns involved (a dense SVD).
SINGULAR_DETAIL_SIZE = 2000


@dataclass(frozen=True)
class SolverSettings:
    """Tolerances and limits; names and defaults as SPICE's ``.options``."""

    reltol: float = 1e-3
    vntol: float = 1e-6
    abstol: float = 1e-12
    itl1: int = 100  # Newton iterations for one solve
    gmin: float = GMIN

    @classmethod
    def from_options(cls, options: dict) -> "SolverSettings":
        values = {}
        for key in ("reltol", "vntol", "abstol"):
            if isinstance(options.get(key), float):
                values[key] = options[key]
        if isinstance(options.get("itl1"), float):
            values["itl1"] = int(options["itl1"])
        if isinstance(options.get("gmin"), float):
            values["gmin"] = options["gmin"]
        return cls(**values)


class _NotConverged(Exception):
    def __init__(self, x: np.ndarray, dx: np.ndarray, step: str) -> None:
        super().__init__(step)
        self.x, self.dx, self.step = x, dx, step


class DCSolver:
    def __init__(self, circuit: Circuit, temp_c: float, settings: SolverSettings | None = None, pinned: dict[str, float] | None = None) -> None:
        self.circuit = circuit
        self.temp_c = temp_c
        self.settings = settings or SolverSettings.from_options(circuit.options)
        self.warnings: list[str] = []
        topology.check_voltage_loops(circuit)
        net = Network(circuit)
        self.floating = topology.floating_nodes(circuit, net)
        topology.check_current_sources(circuit, self.floating)
        self.groups = []
        letters = registry.letters()
        by_model: dict[registry.DeviceModel, list] = {}
        for e in circuit.general:
            if e.kind in letters:
                by_model.setdefault(registry.model_for(e, circuit), []).append(e)
        order = sorted(by_model, key=lambda m: FAMILY_ORDER.index(m.name) if m.name in FAMILY_ORDER else len(FAMILY_ORDER))
        for model in order:  # a stable sort: other models stay in the order first met
            self.groups.append(model.group(by_model[model], circuit, net, temp_c, self.warnings))
        net.seal()
        self.net = net
        self.pinned = dict(pinned or {})
        self.size = net.size + len(self.pinned)
        lin = net.linear_g()
        for g in self.groups:
            lin.extend(g.series())
        b = np.zeros(self.size)
        b[: net.size] = net.source_vector()
        for k, (node, volts) in enumerate(sorted(self.pinned.items())):
            row = net.size + k
            i = net.node(node)
            lin.add([i, row], [row, i], [1.0, 1.0])
            b[row] = volts
        self.lin = lin.matrix(self.size)
        self.lin_abs = abs(self.lin)
        self.b = b
        self.n_node_rows = net.n_nodes - 1
        self._lu = OrderedLU()

    # -- assembly ----------------------------------------------------------------------
    def _devices(self, x: np.ndarray, states: list, limit: bool):
        trip = Triplets()
        ieq = np.zeros(self.size)
        iabs = np.zeros(self.size)
        new_states = []
        limited = False
        for g, state in zip(self.groups, states):
            cur, jac, used, new_state, changed = g.evaluate(x, state, limit)
            nodes = g.nodes
            t = nodes.shape[1]
            trip.add(np.repeat(nodes, t, axis=1).ravel(), np.tile(nodes, (1, t)).ravel(), jac.ravel())
            eq = cur - np.einsum("ntk,nk->nt", jac, used)
            ieq += np.bincount(nodes.ravel(), eq.ravel(), minlength=self.size)
            iabs += np.bincount(nodes.ravel(), np.abs(cur).ravel(), minlength=self.size)
            new_states.append(new_state)
            limited = limited or changed
        return trip.matrix(self.size), ieq, iabs, new_states, limited

    def _residual(self, x: np.ndarray, scale: float, gshunt: float, states: list) -> bool:
        """KCL check at ``x`` without limiting: every node's residual within tolerance."""
        jdev, ieq, iabs, _, _ = self._devices(x, states, limit=False)
        xr = x[1:]
        # at unlimited voltages, device current = J x + ieq
        r = self.lin @ xr + jdev @ xr + ieq[1:] + gshunt * np.concatenate([xr[: self.n_node_rows], np.zeros(len(xr) - self.n_node_rows)]) - scale * self.b[1:]
        tol = self.settings.reltol * (self.lin_abs @ np.abs(xr) + iabs[1:] + np.abs(scale * self.b[1:])) + self.settings.abstol
        nodes = slice(0, self.n_node_rows)
        return bool(np.all(np.abs(r[nodes]) <= tol[nodes]))

    def newton(self, x0: np.ndarray, scale: float, gshunt: float, states: list, step: str, max_iter: int | None = None):
        s = self.settings
        x = x0.copy()
        shunt = sp.diags(np.concatenate([np.full(self.n_node_rows, gshunt + s.gmin), np.zeros(self.size - 1 - self.n_node_rows)]), format="csc")
        dx = np.zeros_like(x)
        for iteration in range(max_iter or s.itl1):
            jdev, ieq, _, new_states, limited = self._devices(x, states, limit=True)
            a = (self.lin + jdev + shunt).tocsc()
            rhs = scale * self.b[1:] - ieq[1:]
            try:
                xr = self._lu.factor(a).solve(rhs)
            except RuntimeError:
                if iteration == 0:
                    raise self._singular(a) from None
                # singular only at a Newton iterate (a node whose devices all went off at once):
                # not the circuit's structure, so the continuation strategies take over
                raise _NotConverged(x, dx, step) from None
            if not np.all(np.isfinite(xr)):
                raise _NotConverged(x, dx, step)
            x_new = np.concatenate([[0.0], xr])
            dx = x_new - x
            states = new_states
            x = x_new
            if iteration == 0 or limited:
                continue
            volt = np.abs(dx[1 : self.n_node_rows + 1]) <= s.reltol * np.maximum(np.abs(x[1 : self.n_node_rows + 1]), np.abs(x[1 : self.n_node_rows + 1] - dx[1 : self.n_node_rows + 1])) + s.vntol
            curr = np.abs(dx[self.n_node_rows + 1 :]) <= s.reltol * np.abs(x[self.n_node_rows + 1 :]) + s.abstol * 1e3
            if volt.all() and curr.all():
                _, _, _, check_states, _ = self._devices(x, states, limit=False)
                if self._residual(x, scale, gshunt + s.gmin, check_states):
                    x, check_states = self._polish(x, scale, shunt, check_states)
                    return x, check_states, iteration + 2
        raise _NotConverged(x, dx, step)

    def _polish(self, x, scale, shunt, states):
        """Up to :data:`POLISH_STEPS` more unlimited Newton steps from a converged point:
        Newton's quadratic convergence takes the error from about ``reltol`` to far below it,
        so that results do not depend on where the iteration happened to stop."""
        for _ in range(POLISH_STEPS):
            jdev, ieq, _, new_states, _ = self._devices(x, states, limit=False)
            a = (self.lin + jdev + shunt).tocsc()
            try:
                xr = self._lu.factor(a).solve(scale * self.b[1:] - ieq[1:])
            except RuntimeError:  # singular at the converged point: keep it as it is
                return x, states
            if not np.all(np.isfinite(xr)):
                return x, states
            x_new = np.concatenate([[0.0], xr])
            _, _, _, states, _ = self._devices(x_new, new_states, limit=False)
            step = np.max(np.abs(x_new - x), initial=0.0)
            x = x_new
            if step <= 1e-12 * max(np.max(np.abs(x), initial=0.0), 1.0):
                break
        return x, states

    def _singular(self, a) -> CircuitError:
        """The error of a singular DC system, naming the unknowns it leaves undetermined (the
        nodes and the source branches of the matrix's null vector, for systems small enough to
        decompose: up to :data:`SINGULAR_DETAIL_SIZE` unknowns)."""
        involved = ""
        if a.shape[0] <= SINGULAR_DETAIL_SIZE:
            dense = a.toarray()
            _, sigma, vt = np.linalg.svd(dense)
            if sigma.size and sigma[-1] <= 1e-12 * max(sigma[0], 1.0):
                v = np.abs(vt[-1])
                names = self._unknown_names()
                picked = [names[i] for i in np.flatnonzero(v > 0.1 * v.max())[:8].tolist()]
                if picked:
                    involved = ": it leaves undetermined " + ", ".join(picked)
        return CircuitError(
            "the DC equations are singular (a loop of voltage sources, or a node driven only by current sources?)"
            + involved, self.circuit.file,
        )

    def _unknown_names(self) -> list[str]:
        """What each unknown of the DC system is (ground left out, as in the matrix): ``node x``,
        or ``current of v1``."""
        net = self.net
        names = [f"node {n}" for n in net.nodes]
        branches = sorted(net.branch_of.items(), key=lambda item: item[1])
        names += [f"current of {name}" for name, _ in branches]
        names += ["?"] * max(net.size - len(names), 0)
        return names[1:]

    # -- strategies --------------------------------------------------------------------
    def solve(self) -> OperatingPoint:
        x0 = np.zeros(self.size)
        init = [g.initial_state() for g in self.groups]
        total = 0
        last: _NotConverged | None = None
        for strategy in (self._plain, self._gmin_stepping, self._source_stepping):
            try:
                x, states, iterations, name = strategy(x0, init)
                total += iterations
                return self._result(x, total, name)
            except _NotConverged as exc:
                last = exc
        assert last is not None
        raise self._failure(last)

    def _plain(self, x0, init):
        x, states, it = self.newton(x0, 1.0, 0.0, init, "Newton from zero")
        return x, states, it, "newton"

    def _gmin_stepping(self, x0, init):
        x, states, total = x0, init, 0
        g = 1e-2
        while True:
            x, states, it = self.newton(x, 1.0, g, states, f"gmin stepping at {g:.0e} S")
            total += it
            if g <= self.settings.gmin:
                break
            g = max(g / 10.0, 0.0) if g / 10.0 > self.settings.gmin else 0.0
            if g == 0.0:
                x, states, it = self.newton(x, 1.0, 0.0, states, "gmin stepping, final step")
                total += it
                break
        return x, states, total, "gmin stepping"

    def _source_stepping(self, x0, init):
        x, states, total = x0, init, 0
        scale, step = 0.0, 0.1
        x, states, it = self.newton(x, 0.0, 0.0, states, "source stepping at 0%")
        total += it
        while scale < 1.0:
            target = min(1.0, scale + step)
            try:
                x_try, s_try, it = self.newton(x, target, 0.0, states, f"source stepping at {target:.0%}")
            except _NotConverged:
                step /= 4.0
                if step < 1e-4:
                    raise
                continue
            x, states, scale = x_try, s_try, target
            total += it
            step = min(step * 2.0, 0.25)
        return x, states, total, "source stepping"

    def _failure(self, exc: _NotConverged) -> ConvergenceError:
        net = self.net
        dx = np.abs(exc.dx[: net.n_nodes])
        worst = [int(i) for i in np.argsort(-dx)[:4] if dx[i] > 0 and i > 0]
        nodes = ", ".join(f"{net.nodes[i]} (last change {dx[i]:.3g} V)" for i in worst) or "none identified"
        names = {net.nodes[i] for i in worst}
        devices = sorted({e.name for e in self.circuit.general if e.kind in "mqd" and names.intersection(e.nodes)})[:6]
        return ConvergenceError(
            f"the DC operating point did not converge (Newton, gmin stepping and source stepping all failed; "
            f"last step tried: {exc.step}); nodes that would not settle: {nodes}; devices there: {', '.join(devices) or 'none'}; "
            "check the bias network, or supply node voltages with --op",
            self.circuit.file,
        )

    def _result(self, x: np.ndarray, iterations: int, strategy: str) -> OperatingPoint:
        net = self.net
        x_net = x[: net.size]
        if not np.all(np.isfinite(x_net)) or np.max(np.abs(x_net[: net.n_nodes]), initial=0.0) > 1e6:
            i = int(np.argmax(np.abs(np.nan_to_num(x_net[: net.n_nodes], nan=np.inf))))
            raise CircuitError(
                f"the DC solution is not physical: node {net.nodes[i]!r} sits at {x_net[i]:.3g} V (a node with no DC path?)",
                self.circuit.file,
            )
        devices = []
        for g in self.groups:
            devices.extend(g.report(x_net, net))
        order = {e.name: k for k, e in enumerate(self.circuit.general)}
        devices.sort(key=lambda d: order[d.name])
        warnings = list(self.warnings)
        for d in devices:
            if abs(d.current) > MAX_DEVICE_CURRENT:
                warnings.append(
                    f"{d.name} carries {d.current:.3g} A at the operating point: a junction or channel is driven far "
                    "outside its model's range; check the bias"
                )
        for node in self.floating:
            warnings.append(f"node {node} has no DC path to ground; GMIN ({self.settings.gmin:g} S) holds it")
        return OperatingPoint(self.circuit, net, x_net, self.temp_c, devices, warnings, list(self.floating), iterations, strategy)


def solve_dc(circuit: Circuit, temp_c: float | None = None, settings: SolverSettings | None = None, pinned: dict[str, float] | None = None) -> OperatingPoint:
    """Solve the DC operating point of ``circuit`` at ``temp_c`` (default: ``.temp``, else 27 C)."""
    if temp_c is None:
        temp_c = circuit.temp_c if circuit.temp_c is not None else 27.0
    return DCSolver(circuit, temp_c, settings, pinned).solve()
