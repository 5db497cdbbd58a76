"""MOSFET level 1 (Shichman and Hodges, IEEE JSSC 3(3), 1968) with Meyer gate
capacitances (J. E. Meyer, RCA Review 32, 1971), SPICE2 parameter conventions.

In the normalized frame (voltages times +1 for NMOS, -1 for PMOS, drain and
source swapped when VDS < 0):

    VT   = VTO + GAMMA (sqrt(PHI - VBS) - sqrt(PHI))
    beta = KP W / Leff,  Leff = L - 2 LD,   KP = UO COX when KP is absent
    cutoff     VGS <= VT            ID = 0
    saturation VDS >= VGS - VT      ID = beta/2 (VGS-VT)^2 (1 + LAMBDA VDS)
    triode     otherwise            ID = beta VDS (VGS - VT - VDS/2) (1 + LAMBDA VDS)
"""

from __future__ import annotations

import numpy as np

from tauscan.circuit import Circuit, Element
from tauscan.devices import cards, physics
from tauscan.devices.base import DeviceOP, SmallSignal, mos_terminal_voltages, series_stamps
from tauscan.devices import stamps as stamp_helpers
from tauscan.devices.registry import DeviceModel, register
from tauscan.errors import CircuitError
from tauscan.network import Network, Triplets

D, G, S, B = 0, 1, 2, 3


def _model_columns(model, element: Element, temp_c: float, warnings: list[str]) -> dict[str, float]:
    """A model's level-1 parameters at ``temp_c``, as the numbers every device of it shares
    (``element``: the first device that uses it, named by a wrong-type error)."""
    p = cards.mos_parameters(model, element, warnings)
    tnom = p["tnom"] if p["tnom"] is not None else physics.TNOM_C
    cox_area = physics.EPS_OX / p["tox"] if p["tox"] else 0.0
    kp = p["kp"]
    if kp is None:
        kp = p["uo"] * 1e-4 * cox_area if cox_area else 2e-5
    ratio = (temp_c + physics.CELSIUS_TO_KELVIN) / (tnom + physics.CELSIUS_TO_KELVIN)
    kp = kp * ratio ** -1.5  # mobility ~ T^-1.5 (common practice)
    typ = cards.MOS_TYPES[model.type]
    nan = float("nan")
    return {
        "type": typ, "vto": typ * p["vto"], "kp": kp, "gamma": p["gamma"], "phi": max(p["phi"], 0.1),
        "lambda": p["lambda"], "ld": p["ld"], "cox_area": cox_area, "cgso": p["cgso"], "cgdo": p["cgdo"],
        "cgbo": p["cgbo"], "js": p["js"], "is": p["is"],
        # IS(T) is linear in IS: one factor per model
        "is_scale": float(physics.scale_saturation_current(1.0, temp_c, tnom, 1.11, 3.0, 1.0)),
        "cbd": nan if p["cbd"] is None else p["cbd"], "cbs": nan if p["cbs"] is None else p["cbs"],
        "cj": p["cj"], "cjsw": p["cjsw"], "pb": float(physics.scale_junction_potential(p["pb"], temp_c, tnom)),
        "mj": p["mj"], "mjsw": p["mjsw"], "fc": p["fc"], "rd": p["rd"], "rs": p["rs"], "rsh": p["rsh"],
    }


class MosGroup:
    kind = "mos"
    terminals = ("d", "g", "s", "b")

    def __init__(self, elements: list[Element], circuit: Circuit, net: Network, temp_c: float, warnings: list[str]) -> None:
        self.elements = elements
        n = len(elements)
        vt = physics.thermal_voltage(temp_c)
        self.vt = vt
        # each model's parameters once, then every quantity as a column over the devices
        model_of: dict[str, int] = {}
        per_model: list[dict[str, float]] = []
        which = np.empty(n, dtype=np.int64)
        for i, e in enumerate(elements):
            k = model_of.get(e.model)
            if k is None:
                k = model_of[e.model] = len(per_model)
                per_model.append(_model_columns(circuit.models[e.model], e, temp_c, warnings))
            which[i] = k
        names = list(model_of)
        self.models = [names[k] for k in which.tolist()]
        m = {key: np.array([pm[key] for pm in per_model], dtype=float)[which] for key in per_model[0]}
        inst = {key: np.fromiter((e.params.get(key, default) for e in elements), dtype=float, count=n)
                for key, default in cards.MOS_INSTANCE.items()}
        w, mult = inst["w"], inst["m"]
        leff = inst["l"] - 2.0 * m["ld"]
        for bad, message in ((leff <= 0, "effective channel length L - 2*LD = {:g} m is not positive"),
                             ((w <= 0) | (mult <= 0), "W and M must be positive")):
            if np.any(bad):
                i = int(np.argmax(bad))
                e = elements[i]
                raise CircuitError(f"{e.name}: " + message.format(leff[i]), e.file, e.line)

        def saturation(area: np.ndarray) -> np.ndarray:
            given = (m["js"] > 0) & (area > 0)
            return np.where(given, m["js"] * area, m["is"]) * mult * m["is_scale"]

        self.p = {
            "type": m["type"], "vto": m["vto"], "kp": m["kp"], "gamma": m["gamma"], "phi": m["phi"],
            "lam": m["lambda"], "beta": m["kp"] * w / leff * mult, "cox": m["cox_area"] * w * leff * mult,
            "cgso": m["cgso"] * w * mult, "cgdo": m["cgdo"] * w * mult, "cgbo": m["cgbo"] * leff * mult,
            "isd": saturation(inst["ad"]), "iss": saturation(inst["as"]),
            "cbd0": np.where(np.isnan(m["cbd"]), m["cj"] * inst["ad"], m["cbd"]) * mult,
            "cbs0": np.where(np.isnan(m["cbs"]), m["cj"] * inst["as"], m["cbs"]) * mult,
            "cbdsw": m["cjsw"] * inst["pd"] * mult, "cbssw": m["cjsw"] * inst["ps"] * mult,
            "pb": m["pb"], "mj": m["mj"], "mjsw": m["mjsw"], "fc": m["fc"],
            "rd": np.where(m["rd"] != 0, m["rd"], m["rsh"] * inst["nrd"]) / mult,
            "rs": np.where(m["rs"] != 0, m["rs"], m["rsh"] * inst["nrs"]) / mult,
            "w": w, "leff": leff, "mult": mult,
        }
        cols = self.p
        index = net.index
        self.ext = np.fromiter((index[x] for e in elements for x in e.nodes), dtype=np.int64, count=4 * n).reshape(n, 4)
        self.nodes = self.ext.copy()
        for i in np.flatnonzero((cols["rd"] > 0) | (cols["rs"] > 0)).tolist():
            if cols["rd"][i] > 0:
                self.nodes[i, D] = net.add_internal_node(elements[i].name + "#d")
            if cols["rs"][i] > 0:
                self.nodes[i, S] = net.add_internal_node(elements[i].name + "#s")
        self.vcrit = physics.critical_voltage(np.maximum(np.minimum(cols["isd"], cols["iss"]), 1e-30), vt)

    # -- DC -------------------------------------------------------------------------
    def series(self) -> Triplets:
        return series_stamps(self.p, self.ext, self.nodes, (("rd", D), ("rs", S)))

    def initial_state(self) -> dict[str, np.ndarray]:
        """SPICE's junction initialization: VDS = 0.1, VGS = VTO, VBS = -1 (normalized)."""
        n = len(self.elements)
        return {"vgs": self.p["vto"].copy(), "vds": np.full(n, 0.1), "vbs": np.full(n, -1.0)}

    def _normalized(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        v = x[self.nodes]
        t = self.p["type"]
        return t * (v[:, G] - v[:, S]), t * (v[:, D] - v[:, S]), t * (v[:, B] - v[:, S])

    def evaluate(self, x: np.ndarray, state: dict[str, np.ndarray] | None, limit: bool):
        """Terminal currents, Jacobian, the terminal voltages used, new state, and whether limiting acted."""
        vgs, vds, vbs = self._normalized(x)
        if state is not None and limit:
            vgs, vds, vbs, changed = self._limit(vgs, vds, vbs, state)
        else:
            changed = np.zeros(vgs.shape, dtype=bool)
        res = self.channel(vgs, vds, vbs)
        t = self.p["type"]
        n = len(self.elements)
        fwd = res["forward"]
        ids, gm, gds, gmb = res["ids"], res["gm"], res["gds"], res["gmb"]
        # bulk junctions (normalized: current from bulk into drain/source region)
        vbd = vbs - vds
        ibd, gbd = physics.diode_current(vbd, self.p["isd"], self.vt)
        ibs, gbs = physics.diode_current(vbs, self.p["iss"], self.vt)
        cur = np.zeros((n, 4))
        jac = np.zeros((n, 4, 4))
        # channel current leaving the effective drain node, entering the effective source node
        de = np.where(fwd, D, S)
        se = np.where(fwd, S, D)
        rows = np.arange(n)
        cur[rows, de] += t * ids
        cur[rows, se] -= t * ids
        for sign, term in ((1.0, de), (-1.0, se)):
            jac[rows, term, de] += sign * gds
            jac[rows, term, G] += sign * gm
            jac[rows, term, B] += sign * gmb
            jac[rows, term, se] -= sign * (gm + gds + gmb)
        # junction currents leave the bulk node
        cur[:, B] += t * (ibd + ibs)
        cur[:, D] -= t * ibd
        cur[:, S] -= t * ibs
        jac[:, B, B] += gbd + gbs
        jac[:, B, D] -= gbd
        jac[:, B, S] -= gbs
        jac[:, D, D] += gbd
        jac[:, D, B] -= gbd
        jac[:, S, S] += gbs
        jac[:, S, B] -= gbs
        used = mos_terminal_voltages(x[self.nodes], t, vgs, vds, vbs)
        return cur, jac, used, {"vgs": vgs, "vds": vds, "vbs": vbs}, bool(changed.any())

    def _limit(self, vgs, vds, vbs, state):
        old_gs, old_ds, old_bs = state["vgs"], state["vds"], state["vbs"]
        new_gs, new_ds = physics.limit_fet(vgs, vds, old_gs, old_ds, self.threshold(old_bs))
        # bulk junction
        old_bd = old_bs - old_ds
        lim_bs, _ = physics.pnjlim(vbs, old_bs, self.vt, self.vcrit)
        lim_bd, _ = physics.pnjlim(vbs - new_ds, old_bd, self.vt, self.vcrit)
        new_bs = np.where(new_ds >= 0, lim_bs, lim_bd + new_ds)
        changed = (np.abs(new_gs - vgs) > 1e-12) | (np.abs(new_ds - vds) > 1e-12) | (np.abs(new_bs - vbs) > 1e-12)
        return new_gs, new_ds, new_bs, changed

    def threshold(self, vbs: np.ndarray) -> np.ndarray:
        """Threshold in the normalized frame at bulk-source voltage ``vbs``.

        For forward-biased bulk (VBS > 0) the square root is continued as
        ``sqrt(PHI) / (1 + VBS/(2 PHI))`` (SPICE2's form, recalled from memory).
        """
        phi = self.p["phi"]
        sphi = np.sqrt(phi)
        sarg = np.where(vbs <= 0, np.sqrt(np.maximum(phi - vbs, 1e-12)), sphi / (1.0 + 0.5 * np.maximum(vbs, 0) / phi))
        return self.p["vto"] + self.p["gamma"] * (sarg - sphi)

    def channel(self, vgs, vds, vbs) -> dict[str, np.ndarray]:
        """Drain current and its derivatives in the normalized, effective (swapped) frame."""
        fwd = vds >= 0
        vgs_e = np.where(fwd, vgs, vgs - vds)
        vds_e = np.abs(vds)
        vbs_e = np.where(fwd, vbs, vbs - vds)
        phi = self.p["phi"]
        sphi = np.sqrt(phi)
        sarg = np.where(vbs_e <= 0, np.sqrt(np.maximum(phi - vbs_e, 1e-12)), sphi / (1.0 + 0.5 * np.maximum(vbs_e, 0) / phi))
        dsarg = np.where(vbs_e <= 0, -0.5 / sarg, -0.5 * sphi / phi / (1.0 + 0.5 * np.maximum(vbs_e, 0) / phi) ** 2)
        von = self.p["vto"] + self.p["gamma"] * (sarg - sphi)
        dvon_dvbs = self.p["gamma"] * dsarg
        vgst = vgs_e - von
        beta = self.p["beta"]
        lam = self.p["lam"]
        clm = 1.0 + lam * vds_e
        on = vgst > 0
        sat = on & (vds_e >= vgst)
        tri = on & ~sat
        ids = np.where(sat, 0.5 * beta * vgst**2 * clm, np.where(tri, beta * vds_e * (vgst - 0.5 * vds_e) * clm, 0.0))
        gm = np.where(sat, beta * vgst * clm, np.where(tri, beta * vds_e * clm, 0.0))
        gds = np.where(
            sat,
            0.5 * beta * vgst**2 * lam,
            np.where(tri, beta * (vgst - vds_e) * clm + beta * lam * vds_e * (vgst - 0.5 * vds_e), 0.0),
        )
        gmb = -gm * dvon_dvbs
        region = np.where(sat, "saturation", np.where(tri, "triode", "cutoff"))
        return {"ids": ids, "gm": gm, "gds": gds, "gmb": gmb, "forward": fwd, "vgst": vgst, "von": von,
                "vgs_e": vgs_e, "vds_e": vds_e, "region": region}

    # -- operating point ---------------------------------------------------------------
    def report(self, x: np.ndarray, net: Network) -> list[DeviceOP]:
        vgs, vds, vbs = self._normalized(x)
        res = self.channel(vgs, vds, vbs)
        vbd = vbs - vds
        _, gbd = physics.diode_current(vbd, self.p["isd"], self.vt)
        _, gbs = physics.diode_current(vbs, self.p["iss"], self.vt)
        cgs_e, cgd_e, cgb = meyer(res["vgst"], res["vds_e"], self.p["cox"], self.p["phi"])
        p = self.p
        cbd = physics.depletion_capacitance(vbd, p["cbd0"], p["pb"], p["mj"], p["fc"]) + physics.depletion_capacitance(vbd, p["cbdsw"], p["pb"], p["mjsw"], p["fc"])
        cbs = physics.depletion_capacitance(vbs, p["cbs0"], p["pb"], p["mj"], p["fc"]) + physics.depletion_capacitance(vbs, p["cbssw"], p["pb"], p["mjsw"], p["fc"])
        out = []
        names = net.nodes
        for i, e in enumerate(self.elements):
            fwd = bool(res["forward"][i])
            cgs_i, cgd_i = (cgs_e[i], cgd_e[i]) if fwd else (cgd_e[i], cgs_e[i])
            d, g, s, b = (names[k] for k in self.nodes[i])
            typ = "nmos" if p["type"][i] > 0 else "pmos"
            sign = p["type"][i] * (1.0 if fwd else -1.0)
            out.append(DeviceOP(
                name=e.name, type=typ, model=self.models[i], region=str(res["region"][i]),
                current=float(sign * res["ids"][i]),
                bias={"vgs": float(p["type"][i] * vgs[i]), "vds": float(p["type"][i] * vds[i]), "vbs": float(p["type"][i] * vbs[i]),
                      "vth": float(p["type"][i] * res["von"][i]), "vov": float(res["vgst"][i]),
                      # level 1: the channel pinches off at vds = vgs - vth
                      "vdsat": float(max(res["vgst"][i], 0.0)),
                      "margin": float(res["vds_e"][i] - max(res["vgst"][i], 0.0))},
                values={"gm": float(res["gm"][i]), "gds": float(res["gds"][i]), "gmb": float(res["gmb"][i]),
                        "gbd": float(gbd[i]), "gbs": float(gbs[i])},
                caps={"cgs": float(cgs_i + p["cgso"][i]), "cgd": float(cgd_i + p["cgdo"][i]), "cgb": float(cgb[i] + p["cgbo"][i]),
                      "cbd": float(cbd[i]), "cbs": float(cbs[i])},
                nodes={"d": d if fwd else s, "s": s if fwd else d, "g": g, "b": b, "d_phys": d, "s_phys": s,
                       "rd_ext": names[self.ext[i, D]], "rd_int": d, "rs_ext": names[self.ext[i, S]], "rs_int": s},
                series={"rd": float(p["rd"][i]), "rs": float(p["rs"][i])},
                file=e.file, line=e.line, family=MODEL.name,
            ))
        return out


def meyer(vgst: np.ndarray, vds: np.ndarray, cox: np.ndarray, phi: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Meyer's intrinsic gate capacitances (Cgs, Cgd, Cgb) in the effective frame.

    Accumulation (VGST <= -PHI): Cgb = Cox.  Depletion (-PHI < VGST <= 0):
    Cgb = -VGST Cox / PHI, and for VGST > -PHI/2 Cgs = 2/3 Cox (1 + 2 VGST/PHI).
    Saturation: Cgs = 2/3 Cox.  Triode, with VDSAT = VGST:
    Cgs = 2/3 Cox [1 - (VDSAT-VDS)^2 / (2 VDSAT-VDS)^2],
    Cgd = 2/3 Cox [1 - VDSAT^2 / (2 VDSAT-VDS)^2]  (Meyer 1971; SPICE2's form).
    """
    cgs = np.zeros_like(vgst)
    cgd = np.zeros_like(vgst)
    cgb = np.zeros_like(vgst)
    acc = vgst <= -phi
    dep = (vgst > -phi) & (vgst <= 0)
    dep_hi = dep & (vgst > -phi / 2)
    on = vgst > 0
    sat = on & (vds >= vgst)
    tri = on & ~sat
    cgb = np.where(acc, cox, np.where(dep, -vgst * cox / phi, 0.0))
    cgs = np.where(dep_hi, 2.0 / 3.0 * cox * (1.0 + 2.0 * vgst / phi), cgs)
    cgs = np.where(sat, 2.0 / 3.0 * cox, cgs)
    vdsat = np.where(tri, vgst, 1.0)
    denom = np.where(tri, (2.0 * vdsat - vds) ** 2, 1.0)
    cgs = np.where(tri, 2.0 / 3.0 * cox * (1.0 - (vdsat - vds) ** 2 / denom), cgs)
    cgd = np.where(tri, 2.0 / 3.0 * cox * (1.0 - vdsat**2 / denom), cgd)
    return cgs, cgd, cgb


#: where each capacitance part sits: part -> (terminal, terminal)
CAP_TERMINALS = {"cgs": ("g", "s_phys"), "cgd": ("g", "d_phys"), "cgb": ("g", "b"), "cbd": ("b", "d_phys"),
                 "cbs": ("b", "s_phys")}


def stamps(dev: DeviceOP) -> SmallSignal:
    """gm and gmb between the effective drain and source, gds, the bulk junctions'
    conductances, the capacitances and the series resistances."""
    out = SmallSignal()
    n, v = dev.nodes, dev.values
    b = n["b"]
    stamp_helpers.mos_channel(dev, out)
    out.conductances.append(("gbd", b, n["d_phys"], v.get("gbd", 0.0)))
    out.conductances.append(("gbs", b, n["s_phys"], v.get("gbs", 0.0)))
    stamp_helpers.capacitors(dev, out, CAP_TERMINALS)
    stamp_helpers.series(dev, out)
    return out


MODEL = register(DeviceModel(
    name="mos", letter="m", model_types=frozenset(cards.MOS_TYPES), levels=None, terminals=("d", "g", "s", "b"),
    quantities=frozenset({"gm", "gds", "gmb", "id"}) | frozenset(CAP_TERMINALS), capacitances=frozenset(CAP_TERMINALS),
    regions=("saturation", "triode", "cutoff"), poor_regions=frozenset({"triode", "cutoff"}),
    json_values=("gm", "gds", "gmb"), json_bias=("vov", "vgs", "vds", "vth", "vdsat", "margin"), json_caps=tuple(CAP_TERMINALS),
    table_bias=("vth", "vov", "vds", "vdsat", "margin"), output_conductance="gds", group=MosGroup, stamps=stamps,
))
