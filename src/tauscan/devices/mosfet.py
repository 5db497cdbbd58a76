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
from tauscan.devices.base import DeviceOP, series_stamps
from tauscan.errors import CircuitError
from tauscan.network import Network, Triplets

D, G, S, B = 0, 1, 2, 3


class MosGroup:
    kind = "mos"
    terminals = ("d", "g", "s", "b")

    def __init__(self, elements: list[Element], circuit: Circuit, net: Network, temp_c: float, warnings: list[str]) -> None:
        self.elements = elements
        n = len(elements)
        vt = physics.thermal_voltage(temp_c)
        self.vt = vt
        cols = {k: np.zeros(n) for k in (
            "type", "vto", "kp", "gamma", "phi", "lam", "beta", "cox", "cgso", "cgdo", "cgbo",
            "isd", "iss", "cbd0", "cbs0", "cbdsw", "cbssw", "pb", "mj", "mjsw", "fc", "rd", "rs", "w", "leff", "mult",
        )}
        self.models = []
        ext = np.zeros((n, 4), dtype=np.int64)
        self.nodes = np.zeros((n, 4), dtype=np.int64)
        for i, e in enumerate(elements):
            model = circuit.models[e.model]
            p = cards.mos_parameters(model, e, warnings)
            self.models.append(model.name)
            inst = dict(cards.MOS_INSTANCE)
            inst.update({k: v for k, v in e.params.items()})
            tnom = p["tnom"] if p["tnom"] is not None else physics.TNOM_C
            w, l_drawn, mult = inst["w"], inst["l"], inst["m"]
            leff = l_drawn - 2.0 * p["ld"]
            if leff <= 0:
                raise CircuitError(f"{e.name}: effective channel length L - 2*LD = {leff:g} m is not positive", e.file, e.line)
            if w <= 0 or mult <= 0:
                raise CircuitError(f"{e.name}: W and M must be positive", e.file, e.line)
            cox_area = physics.EPS_OX / p["tox"] if p["tox"] else 0.0
            kp = p["kp"]
            if kp is None:
                kp = p["uo"] * 1e-4 * cox_area if cox_area else 2e-5
            ratio = (temp_c + physics.CELSIUS_TO_KELVIN) / (tnom + physics.CELSIUS_TO_KELVIN)
            kp = kp * ratio ** -1.5  # mobility ~ T^-1.5 (common practice)
            typ = cards.MOS_TYPES[model.type]
            cols["type"][i] = typ
            cols["vto"][i] = typ * p["vto"]
            cols["kp"][i] = kp
            cols["gamma"][i] = p["gamma"]
            cols["phi"][i] = max(p["phi"], 0.1)
            cols["lam"][i] = p["lambda"]
            cols["beta"][i] = kp * w / leff * mult
            cols["cox"][i] = cox_area * w * leff * mult
            cols["cgso"][i] = p["cgso"] * w * mult
            cols["cgdo"][i] = p["cgdo"] * w * mult
            cols["cgbo"][i] = p["cgbo"] * leff * mult
            i_sat = lambda area: (p["js"] * area if p["js"] > 0 and area > 0 else p["is"]) * mult  # noqa: E731
            cols["isd"][i] = physics.scale_saturation_current(i_sat(inst["ad"]), temp_c, tnom, 1.11, 3.0, 1.0)
            cols["iss"][i] = physics.scale_saturation_current(i_sat(inst["as"]), temp_c, tnom, 1.11, 3.0, 1.0)
            cols["cbd0"][i] = (p["cbd"] if p["cbd"] is not None else p["cj"] * inst["ad"]) * mult
            cols["cbs0"][i] = (p["cbs"] if p["cbs"] is not None else p["cj"] * inst["as"]) * mult
            cols["cbdsw"][i] = p["cjsw"] * inst["pd"] * mult
            cols["cbssw"][i] = p["cjsw"] * inst["ps"] * mult
            cols["pb"][i] = physics.scale_junction_potential(p["pb"], temp_c, tnom)
            cols["mj"][i] = p["mj"]
            cols["mjsw"][i] = p["mjsw"]
            cols["fc"][i] = p["fc"]
            cols["rd"][i] = (p["rd"] or p["rsh"] * inst["nrd"]) / mult
            cols["rs"][i] = (p["rs"] or p["rsh"] * inst["nrs"]) / mult
            cols["w"][i] = w
            cols["leff"][i] = leff
            cols["mult"][i] = mult
            ext[i] = [net.node(x) for x in e.nodes]
        self.p = cols
        self.ext = ext
        for i, e in enumerate(elements):
            d, g, s, b = ext[i]
            if cols["rd"][i] > 0:
                d = net.add_internal_node(e.name + "#d")
            if cols["rs"][i] > 0:
                s = net.add_internal_node(e.name + "#s")
            self.nodes[i] = [d, g, s, b]
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
        v = x[self.nodes]
        used = np.empty((n, 4))
        used[:, S] = v[:, S]
        used[:, G] = v[:, S] + t * vgs
        used[:, D] = v[:, S] + t * vds
        used[:, B] = v[:, S] + t * vbs
        return cur, jac, used, {"vgs": vgs, "vds": vds, "vbs": vbs}, bool(changed.any())

    def _limit(self, vgs, vds, vbs, state):
        old_gs, old_ds, old_bs = state["vgs"], state["vds"], state["vbs"]
        von = self.threshold(old_bs)
        vgd = vgs - vds
        old_gd = old_gs - old_ds
        fwd = old_ds >= 0
        # forward: limit VGS then VDS
        f_vgs = physics.fetlim(vgs, old_gs, von)
        f_vds = physics.limvds(f_vgs - vgd, old_ds)
        # reverse: limit VGD then -VDS
        r_vgd = physics.fetlim(vgd, old_gd, von)
        r_vds = -physics.limvds(-(vgs - r_vgd), -old_ds)
        r_vgs = r_vgd + r_vds
        new_gs = np.where(fwd, f_vgs, r_vgs)
        new_ds = np.where(fwd, f_vds, r_vds)
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
                      "vth": float(p["type"][i] * res["von"][i]), "vov": float(res["vgst"][i])},
                values={"gm": float(res["gm"][i]), "gds": float(res["gds"][i]), "gmb": float(res["gmb"][i]),
                        "gbd": float(gbd[i]), "gbs": float(gbs[i])},
                caps={"cgs": float(cgs_i + p["cgso"][i]), "cgd": float(cgd_i + p["cgdo"][i]), "cgb": float(cgb[i] + p["cgbo"][i]),
                      "cbd": float(cbd[i]), "cbs": float(cbs[i])},
                nodes={"d": d if fwd else s, "s": s if fwd else d, "g": g, "b": b, "d_phys": d, "s_phys": s,
                       "rd_ext": names[self.ext[i, D]], "rd_int": d, "rs_ext": names[self.ext[i, S]], "rs_int": s},
                series={"rd": float(p["rd"][i]), "rs": float(p["rs"][i])},
                file=e.file, line=e.line,
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
