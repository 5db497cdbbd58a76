"""Bipolar transistor: the Gummel-Poon model (H. K. Gummel and H. C. Poon, Bell
System Technical Journal 49, 1970) in SPICE2's form (Nagel 1975).

Normalized voltages (times +1 for NPN, -1 for PNP), Vt = kT/q:

    Ibe1 = IS (exp(VBE/(NF Vt)) - 1)     Ibe2 = ISE (exp(VBE/(NE Vt)) - 1)
    Ibc1 = IS (exp(VBC/(NR Vt)) - 1)     Ibc2 = ISC (exp(VBC/(NC Vt)) - 1)
    q1 = 1 / (1 - VBC/VAF - VBE/VAR)     q2 = Ibe1/IKF + Ibc1/IKR
    qb = q1 (1 + sqrt(1 + 4 q2)) / 2
    IC = (Ibe1 - Ibc1)/qb - Ibc1/BR - Ibc2
    IB = Ibe1/BF + Ibe2 + Ibc1/BR + Ibc2

Capacitances: CBE = TF d(Ibe1/qb)/dVBE + depletion(CJE, VJE, MJE);
CBC = TR gbc1 + XCJC depletion(CJC, VJC, MJC), the rest (1-XCJC) from the
external base; CCS = depletion(CJS, VJS, MJS) of the substrate junction.
The base resistance is taken constant (RB; IRB/RBM are not modelled), and the
transit-time bias terms XTF/VTF/ITF are not modelled.
"""

from __future__ import annotations

import numpy as np

from tauscan.circuit import GROUND, Circuit, Element
from tauscan.devices import cards, physics
from tauscan.devices import stamps as stamp_helpers
from tauscan.devices.base import DeviceOP, SmallSignal, series_stamps
from tauscan.devices.registry import DeviceModel, register
from tauscan.network import Network, Triplets

C, B, E = 0, 1, 2
_AREA_UP = ("is", "ise", "isc", "ikf", "ikr", "cje", "cjc", "cjs")
_AREA_DOWN = ("rb", "re", "rc")


class BjtGroup:
    kind = "bjt"
    terminals = ("c", "b", "e")

    def __init__(self, elements: list[Element], circuit: Circuit, net: Network, temp_c: float, warnings: list[str]) -> None:
        self.elements = elements
        n = len(elements)
        self.vt = physics.thermal_voltage(temp_c)
        keys = list(cards.BJT_DEFAULTS) + ["type"]
        cols = {k: np.zeros(n) for k in keys if k != "tnom"}
        self.models = []
        self.ext = np.zeros((n, 3), dtype=np.int64)
        self.sub = np.zeros(n, dtype=np.int64)
        self.nodes = np.zeros((n, 3), dtype=np.int64)
        for i, e in enumerate(elements):
            model = circuit.models[e.model]
            p = cards.bjt_parameters(model, e)
            for key in ("xtf", "vtf", "itf", "irb", "rbm"):
                if key in model.params:
                    text = f"model {model.name}: {key.upper()} is not modelled (constant RB and TF are used)"
                    if text not in warnings:
                        warnings.append(text)
            self.models.append(model.name)
            area = e.params.get("area", 1.0) * e.params.get("m", 1.0)
            tnom = p["tnom"] if p["tnom"] is not None else physics.TNOM_C
            for key in _AREA_UP:
                p[key] = p[key] * area
            for key in _AREA_DOWN:
                p[key] = p[key] / area
            p["is"] = physics.scale_saturation_current(p["is"], temp_c, tnom, p["eg"], p["xti"], 1.0)
            for key in ("vje", "vjc", "vjs"):
                p[key] = physics.scale_junction_potential(p[key], temp_c, tnom)
            for key in cols:
                if key != "type":
                    cols[key][i] = p[key]
            cols["type"][i] = cards.BJT_TYPES[model.type]
            self.ext[i] = [net.node(x) for x in e.nodes[:3]]
            self.sub[i] = net.node(e.nodes[3]) if len(e.nodes) > 3 else net.node(GROUND)
        self.p = cols
        for i, e in enumerate(elements):
            c, b, em = self.ext[i]
            if cols["rc"][i] > 0:
                c = net.add_internal_node(e.name + "#c")
            if cols["rb"][i] > 0:
                b = net.add_internal_node(e.name + "#b")
            if cols["re"][i] > 0:
                em = net.add_internal_node(e.name + "#e")
            self.nodes[i] = [c, b, em]
        self.vcrit = physics.critical_voltage(cols["is"], self.vt)

    def series(self) -> Triplets:
        return series_stamps(self.p, self.ext, self.nodes, (("rc", C), ("rb", B), ("re", E)))

    def initial_state(self) -> dict[str, np.ndarray]:
        """SPICE's junction initialization: VBE = Vcrit, VBC = 0 (normalized)."""
        return {"vbe": self.vcrit.copy(), "vbc": np.zeros(len(self.elements))}

    def _normalized(self, x):
        v = x[self.nodes]
        t = self.p["type"]
        return t * (v[:, B] - v[:, E]), t * (v[:, B] - v[:, C])

    def transport(self, vbe, vbc) -> dict[str, np.ndarray]:
        """Gummel-Poon currents and their derivatives (normalized)."""
        p = self.p
        vt = self.vt
        ibe1, gbe1 = physics.diode_current(vbe, p["is"], p["nf"] * vt)
        ibe2, gbe2 = physics.diode_current(vbe, p["ise"], p["ne"] * vt)
        ibc1, gbc1 = physics.diode_current(vbc, p["is"], p["nr"] * vt)
        ibc2, gbc2 = physics.diode_current(vbc, p["isc"], p["nc"] * vt)
        inv_vaf = np.where(np.isfinite(p["vaf"]), 1.0 / p["vaf"], 0.0)
        inv_var = np.where(np.isfinite(p["var"]), 1.0 / p["var"], 0.0)
        inv_ikf = np.where(np.isfinite(p["ikf"]), 1.0 / p["ikf"], 0.0)
        inv_ikr = np.where(np.isfinite(p["ikr"]), 1.0 / p["ikr"], 0.0)
        den = 1.0 - vbc * inv_vaf - vbe * inv_var
        den = np.maximum(den, 1e-3)  # keeps q1 finite far outside the model's range
        q1 = 1.0 / den
        dq1_dvbe = q1 * q1 * inv_var
        dq1_dvbc = q1 * q1 * inv_vaf
        q2 = ibe1 * inv_ikf + ibc1 * inv_ikr
        sq = np.sqrt(np.maximum(1.0 + 4.0 * q2, 1e-12))
        qb = q1 * (1.0 + sq) / 2.0
        dqb_dvbe = dq1_dvbe * (1.0 + sq) / 2.0 + q1 * gbe1 * inv_ikf / sq
        dqb_dvbc = dq1_dvbc * (1.0 + sq) / 2.0 + q1 * gbc1 * inv_ikr / sq
        it = (ibe1 - ibc1) / qb
        dit_dvbe = gbe1 / qb - it / qb * dqb_dvbe
        dit_dvbc = -gbc1 / qb - it / qb * dqb_dvbc
        ic = it - ibc1 / p["br"] - ibc2
        ib = ibe1 / p["bf"] + ibe2 + ibc1 / p["br"] + ibc2
        return {
            "ic": ic, "ib": ib,
            "dic_dvbe": dit_dvbe, "dic_dvbc": dit_dvbc - gbc1 / p["br"] - gbc2,
            "dib_dvbe": gbe1 / p["bf"] + gbe2, "dib_dvbc": gbc1 / p["br"] + gbc2,
            "qb": qb, "gbe1": gbe1, "ibe1": ibe1, "gbc1": gbc1, "dqb_dvbe": dqb_dvbe,
        }

    def evaluate(self, x, state, limit: bool):
        vbe, vbc = self._normalized(x)
        changed = np.zeros(vbe.shape, dtype=bool)
        if state is not None and limit:
            p = self.p
            vbe, c1 = physics.pnjlim(vbe, state["vbe"], p["nf"] * self.vt, self.vcrit)
            vbc, c2 = physics.pnjlim(vbc, state["vbc"], p["nr"] * self.vt, self.vcrit)
            changed = c1 | c2
        r = self.transport(vbe, vbc)
        n = len(self.elements)
        t = self.p["type"]
        cur = np.zeros((n, 3))
        jac = np.zeros((n, 3, 3))
        cur[:, C] = t * r["ic"]
        cur[:, B] = t * r["ib"]
        cur[:, E] = -(cur[:, C] + cur[:, B])
        # d/dvb = d/dvbe + d/dvbc ; d/dve = -d/dvbe ; d/dvc = -d/dvbc (type factors cancel)
        for row, dvbe, dvbc in ((C, r["dic_dvbe"], r["dic_dvbc"]), (B, r["dib_dvbe"], r["dib_dvbc"])):
            jac[:, row, B] = dvbe + dvbc
            jac[:, row, E] = -dvbe
            jac[:, row, C] = -dvbc
        jac[:, E, :] = -(jac[:, C, :] + jac[:, B, :])
        v = x[self.nodes]
        used = np.empty((n, 3))
        used[:, B] = v[:, B]
        used[:, E] = v[:, B] - t * vbe
        used[:, C] = v[:, B] - t * vbc
        return cur, jac, used, {"vbe": vbe, "vbc": vbc}, bool(changed.any())

    def report(self, x: np.ndarray, net: Network) -> list[DeviceOP]:
        vbe, vbc = self._normalized(x)
        r = self.transport(vbe, vbc)
        p = self.p
        t = p["type"]
        # hybrid-pi from the Jacobian: ib = gpi vbe + gmu vbc, ic = (gm+go) vbe - (go+gmu) vbc
        gpi = r["dib_dvbe"]
        gmu = r["dib_dvbc"]
        go = -r["dic_dvbc"] - gmu
        gm = r["dic_dvbe"] - go
        vsc = t * (x[self.sub] - x[self.nodes[:, C]])
        cje = physics.depletion_capacitance(vbe, p["cje"], p["vje"], p["mje"], p["fc"])
        cjc = physics.depletion_capacitance(vbc, p["cjc"], p["vjc"], p["mjc"], p["fc"])
        ccs = physics.depletion_capacitance(vsc, p["cjs"], p["vjs"], p["mjs"], p["fc"])
        dfwd = (r["gbe1"] - r["ibe1"] / r["qb"] * r["dqb_dvbe"]) / r["qb"]
        cbe = p["tf"] * dfwd + cje
        cbc = p["tr"] * r["gbc1"] + p["xcjc"] * cjc
        cbx = (1.0 - p["xcjc"]) * cjc
        ic = t * r["ic"]
        out = []
        names = net.nodes
        for i, e in enumerate(self.elements):
            c, b, em = (names[k] for k in self.nodes[i])
            region = _region(vbe[i], vbc[i])
            caps = {"cbe": float(cbe[i]), "cbc": float(cbc[i]), "ccs": float(ccs[i])}
            bx = names[self.ext[i, B]]
            if cbx[i] > 0:
                if bx == b:
                    caps["cbc"] += float(cbx[i])
                else:
                    caps["cbx"] = float(cbx[i])
            out.append(DeviceOP(
                name=e.name, type="npn" if t[i] > 0 else "pnp", model=self.models[i], region=region,
                current=float(ic[i]),
                bias={"vbe": float(t[i] * vbe[i]), "vbc": float(t[i] * vbc[i]), "vce": float(t[i] * (vbe[i] - vbc[i])),
                      "ib": float(t[i] * r["ib"][i])},
                values={"gm": float(gm[i]), "go": float(go[i]), "gpi": float(gpi[i]), "gmu": float(gmu[i])},
                caps=caps,
                nodes={"c": c, "b": b, "e": em, "bx": bx, "sub": names[self.sub[i]],
                       "rc_ext": names[self.ext[i, C]], "rc_int": c, "rb_ext": bx, "rb_int": b,
                       "re_ext": names[self.ext[i, E]], "re_int": em},
                series={"rc": float(p["rc"][i]), "rb": float(p["rb"][i]), "re": float(p["re"][i])},
                file=e.file, line=e.line, family=MODEL.name,
            ))
        return out


def _region(vbe: float, vbc: float) -> str:
    """Region from the junction biases (0.4 V as the turn-on knee: common practice)."""
    on_be = vbe > 0.4
    on_bc = vbc > 0.4
    if on_be and on_bc:
        return "saturation"
    if on_be:
        return "forward-active"
    if on_bc:
        return "reverse-active"
    return "cutoff"


#: where each capacitance part sits: part -> (terminal, terminal)
CAP_TERMINALS = {"cbe": ("b", "e"), "cbc": ("b", "c"), "cbx": ("bx", "c"), "ccs": ("c", "sub")}


def stamps(dev: DeviceOP) -> SmallSignal:
    """The hybrid-pi model: gpi, gmu, go and gm, the capacitances and the series resistances."""
    out = SmallSignal()
    n, v = dev.nodes, dev.values
    c, b, e = n["c"], n["b"], n["e"]
    out.conductances.append(("gpi", b, e, v.get("gpi", 0.0)))
    out.conductances.append(("gmu", b, c, v.get("gmu", 0.0)))
    out.conductances.append(("go", c, e, v.get("go", 0.0)))
    out.vccs.append(("gm", c, e, b, e, v.get("gm", 0.0)))
    stamp_helpers.capacitors(dev, out, CAP_TERMINALS)
    stamp_helpers.series(dev, out)
    return out


MODEL = register(DeviceModel(
    name="bjt", letter="q", model_types=frozenset(cards.BJT_TYPES), levels=None, terminals=("c", "b", "e", "sub"),
    quantities=frozenset({"gm", "go", "gpi", "gmu", "id", "ic"}) | frozenset(CAP_TERMINALS),
    capacitances=frozenset(CAP_TERMINALS),
    regions=("forward-active", "saturation", "reverse-active", "cutoff"), poor_regions=frozenset({"saturation", "cutoff"}),
    json_values=("gm", "gpi", "go", "gmu"), json_bias=("vbe", "vce", "ib"), json_caps=("cbe", "cbc", "ccs"),
    table_bias=("vbe", "vce"), output_conductance="go", group=BjtGroup, stamps=stamps,
    table_ratios=(("ic/ib", "current", "ib"),),
))
