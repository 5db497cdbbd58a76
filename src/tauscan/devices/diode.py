"""Junction diode (SPICE2 conventions, Nagel 1975):

    ID = IS (exp(VD/(N Vt)) - 1),   reverse breakdown below -BV:
    ID -= IBV exp(-(VD + BV)/(N Vt))
    CJ = TT gd + depletion(CJO, VJ, M, FC)
"""

from __future__ import annotations

import numpy as np

from tauscan.circuit import Circuit, Element
from tauscan.devices import cards, physics
from tauscan.devices import stamps as stamp_helpers
from tauscan.devices.base import DeviceOP, SmallSignal, series_stamps
from tauscan.devices.registry import DeviceModel, register
from tauscan.network import Network, Triplets

A, K = 0, 1


class DiodeGroup:
    kind = "diode"
    terminals = ("a", "k")

    def __init__(self, elements: list[Element], circuit: Circuit, net: Network, temp_c: float, warnings: list[str]) -> None:
        self.elements = elements
        n = len(elements)
        self.vt = physics.thermal_voltage(temp_c)
        cols = {k: np.zeros(n) for k in ("is", "n", "rs", "cjo", "vj", "m", "tt", "fc", "bv", "ibv")}
        self.models = []
        self.ext = np.zeros((n, 2), dtype=np.int64)
        self.nodes = np.zeros((n, 2), dtype=np.int64)
        for i, e in enumerate(elements):
            model = circuit.models[e.model]
            p = cards.diode_parameters(model, e)
            self.models.append(model.name)
            area = e.params.get("area", 1.0) * e.params.get("m", 1.0)
            tnom = p["tnom"] if p["tnom"] is not None else physics.TNOM_C
            cols["is"][i] = physics.scale_saturation_current(p["is"] * area, temp_c, tnom, p["eg"], p["xti"], p["n"])
            cols["n"][i] = p["n"]
            cols["rs"][i] = p["rs"] / area
            cols["cjo"][i] = p["cjo"] * area
            cols["vj"][i] = physics.scale_junction_potential(p["vj"], temp_c, tnom)
            cols["m"][i] = p["m"]
            cols["tt"][i] = p["tt"]
            cols["fc"][i] = p["fc"]
            cols["bv"][i] = p["bv"]
            cols["ibv"][i] = p["ibv"] * area
            self.ext[i] = [net.node(x) for x in e.nodes]
        self.p = cols
        for i, e in enumerate(elements):
            a, k = self.ext[i]
            if cols["rs"][i] > 0:
                a = net.add_internal_node(e.name + "#a")
            self.nodes[i] = [a, k]
        self.nvt = cols["n"] * self.vt
        self.vcrit = physics.critical_voltage(cols["is"], self.nvt)

    def series(self) -> Triplets:
        return series_stamps(self.p, self.ext, self.nodes, (("rs", A),))

    def initial_state(self):
        return {"vd": self.vcrit.copy()}

    def current(self, vd):
        i, g = physics.diode_current(vd, self.p["is"], self.nvt)
        finite = np.isfinite(self.p["bv"])
        if finite.any():
            bv = np.where(finite, self.p["bv"], 0.0)
            eb, deb = physics.safe_exp(-(vd + bv) / self.nvt)
            i = i - np.where(finite, self.p["ibv"] * eb, 0.0)
            g = g + np.where(finite, self.p["ibv"] * deb / self.nvt, 0.0)
        return i, g

    def evaluate(self, x, state, limit: bool):
        v = x[self.nodes]
        vd = v[:, A] - v[:, K]
        changed = np.zeros(vd.shape, dtype=bool)
        if state is not None and limit:
            vd, changed = physics.pnjlim(vd, state["vd"], self.nvt, self.vcrit)
        i, g = self.current(vd)
        n = len(self.elements)
        cur = np.stack([i, -i], axis=1)
        jac = np.zeros((n, 2, 2))
        jac[:, A, A] = g
        jac[:, A, K] = -g
        jac[:, K, A] = -g
        jac[:, K, K] = g
        used = np.stack([v[:, K] + vd, v[:, K]], axis=1)
        return cur, jac, used, {"vd": vd}, bool(changed.any())

    def report(self, x: np.ndarray, net: Network) -> list[DeviceOP]:
        v = x[self.nodes]
        vd = v[:, A] - v[:, K]
        i, g = self.current(vd)
        p = self.p
        cj = p["tt"] * g + physics.depletion_capacitance(vd, p["cjo"], p["vj"], p["m"], p["fc"])
        names = net.nodes
        out = []
        for k, e in enumerate(self.elements):
            a, cath = (names[j] for j in self.nodes[k])
            region = "forward" if vd[k] > 0.4 else ("breakdown" if np.isfinite(p["bv"][k]) and vd[k] < -p["bv"][k] else "reverse")
            out.append(DeviceOP(
                name=e.name, type="diode", model=self.models[k], region=region, current=float(i[k]),
                bias={"vd": float(vd[k])}, values={"gd": float(g[k])}, caps={"cj": float(cj[k])},
                nodes={"a": a, "k": cath, "rs_ext": names[self.ext[k, A]], "rs_int": a},
                series={"rs": float(p["rs"][k])}, file=e.file, line=e.line, family=MODEL.name,
            ))
        return out


#: where each capacitance part sits: part -> (terminal, terminal)
CAP_TERMINALS = {"cj": ("a", "k")}


def stamps(dev: DeviceOP) -> SmallSignal:
    """gd, the junction capacitance and the series resistance."""
    out = SmallSignal()
    out.conductances.append(("gd", dev.nodes["a"], dev.nodes["k"], dev.values.get("gd", 0.0)))
    stamp_helpers.capacitors(dev, out, CAP_TERMINALS)
    stamp_helpers.series(dev, out)
    return out


MODEL = register(DeviceModel(
    name="diode", letter="d", model_types=frozenset(cards.DIODE_TYPES), levels=None, terminals=("a", "k"),
    quantities=frozenset({"gd", "cj", "id"}), capacitances=frozenset(CAP_TERMINALS),
    regions=("forward", "reverse", "breakdown"), poor_regions=frozenset(),
    json_values=("gd",), json_bias=("vd",), json_caps=("cj",),
    table_bias=("vd",), output_conductance="gd", group=DiodeGroup, stamps=stamps,
))
