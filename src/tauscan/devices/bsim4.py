"""BSIM4 MOSFETs (level 54), evaluated from the BSIM4 technical manual (University of
California, Berkeley; versions 4.5-4.8) with the model flags SKY130's cards use; any other flag
value, and any effect the card switches on that is not evaluated, is a located error
(:mod:`tauscan.devices.bsim4_card`).

One group evaluates every BSIM4 device of a circuit, vectorized.  Each device has internal
nodes where the card asks for them: the drain and source behind RSH * NRD and RSH * NRS, and,
with RBODYMOD = 1, the body network (intrinsic body b', drain- and source-side body nodes db and
sb, five resistors).  Currents, conductances and the 4 x 4 (6 x 6 with the body network) terminal
capacitance matrix come from the same formulas by forward-mode differentiation
(:mod:`tauscan.devices.dual`), so the Newton Jacobian and the small-signal network are exact.
"""

from __future__ import annotations

import numpy as np

from tauscan.circuit import Circuit, Element
from tauscan.devices import bsim4_eval, physics
from tauscan.devices import stamps as stamp_helpers
from tauscan.devices.base import DeviceOP, SmallSignal, mos_terminal_voltages
from tauscan.devices.bsim4_card import EXP_THRESHOLD, MIN_EXP, device_columns
from tauscan.devices.dual import Dual
from tauscan.devices.registry import DeviceModel, register
from tauscan.network import Network, Triplets

D, G, S, B, DB, SB = 0, 1, 2, 3, 4, 5
#: the conductance SPICE simulators put across every junction (GMIN, siemens)
GMIN = 1e-12
#: the body network's resistors: part -> (terminal it leaves, terminal it reaches)
BODY_RESISTORS = {"rbpb": ("b_ext", "b"), "rbpd": ("b", "db"), "rbps": ("b", "sb"), "rbdb": ("b_ext", "db"),
                  "rbsb": ("b_ext", "sb")}
_BODY_COLUMNS = {"b_ext": None, "b": B, "db": DB, "sb": SB}


class Bsim4Group:
    kind = "bsim4"
    terminals = ("d", "g", "s", "b")

    def __init__(self, elements: list[Element], circuit: Circuit, net: Network, temp_c: float, warnings: list[str]) -> None:
        self.elements = elements
        cards = [circuit.models[e.model] for e in elements]
        self.models = [e.model for e in elements]
        self.p = p = device_columns(elements, cards, temp_c)
        n = len(elements)
        index = net.index
        self.ext = np.fromiter((index[x] for e in elements for x in e.nodes), dtype=np.int64, count=4 * n).reshape(n, 4)
        nodes = np.empty((n, 6), dtype=np.int64)
        nodes[:, :4] = self.ext
        nodes[:, DB] = self.ext[:, B]
        nodes[:, SB] = self.ext[:, B]
        self.body = p["rbodymod"] == 1.0
        for i in range(n):
            name = elements[i].name
            if p["rd_ext"][i] > 0:
                nodes[i, D] = net.add_internal_node(name + "#d")
            if p["rs_ext"][i] > 0:
                nodes[i, S] = net.add_internal_node(name + "#s")
            if self.body[i]:
                nodes[i, B] = net.add_internal_node(name + "#b")
                nodes[i, DB] = net.add_internal_node(name + "#db")
                nodes[i, SB] = net.add_internal_node(name + "#sb")
        self.nodes = nodes
        scale = p["m"]
        # body resistor conductances: 1/R + GBMIN, times the multiplier
        self.gbody = {part: np.where(p[part] > 1e-3, p["gbmin"] + 1.0 / np.maximum(p[part], 1e-3), 1e3) * scale
                      for part in BODY_RESISTORS}
        self.vcrit = {s: physics.critical_voltage(np.maximum(p["isat_" + s], 1e-30), p["nvt_" + s]) for s in "sd"}

    # -- DC -------------------------------------------------------------------------
    def series(self) -> Triplets:
        t = Triplets()
        p, ext, nodes = self.p, self.ext, self.nodes
        for col, term in (("rd_ext", D), ("rs_ext", S)):
            has = p[col] > 0
            if has.any():
                t.conductance(ext[has, term], nodes[has, term], p["m"][has] / p[col][has])
        body = self.body
        if body.any():
            for part, (a, b) in BODY_RESISTORS.items():
                na = ext[body, B] if a == "b_ext" else nodes[body, _BODY_COLUMNS[a]]
                nb = nodes[body, _BODY_COLUMNS[b]]
                t.conductance(na, nb, self.gbody[part][body])
        return t

    def initial_state(self) -> dict[str, np.ndarray]:
        """The usual junction initialization: VDS = 0.1, VGS = VTH0, junctions at 0."""
        n = len(self.elements)
        zero = np.zeros(n)
        return {"vgs": self.p["vth0_t"].copy(), "vds": np.full(n, 0.1), "vbs": zero.copy(), "vbs_j": zero.copy(),
                "vbd_j": zero.copy(), "vth": self.p["vth0_t"].copy()}

    def _bias(self, x: np.ndarray):
        v = x[self.nodes]
        t = self.p["type"]
        return (t * (v[:, G] - v[:, S]), t * (v[:, D] - v[:, S]), t * (v[:, B] - v[:, S]),
                t * (v[:, SB] - v[:, S]), t * (v[:, DB] - v[:, D]))

    def evaluate(self, x: np.ndarray, state: dict[str, np.ndarray] | None, limit: bool):
        vgs, vds, vbs, vbs_j, vbd_j = self._bias(x)
        changed = np.zeros(vgs.shape, dtype=bool)
        if state is not None and limit:
            vgs, vds, vbs, vbs_j, vbd_j, changed = self._limit(vgs, vds, vbs, vbs_j, vbd_j, state)
        ch = bsim4_eval.evaluate(self.p, *Dual.variables(vgs, vds, vbs), charges=False)
        n = len(self.elements)
        t = self.p["type"]
        cur = np.zeros((n, 6))
        jac = np.zeros((n, 6, 6))
        fwd = ch.forward
        sign = np.where(fwd, 1.0, -1.0)
        _stamp(cur, jac, t, Dual(ch.ids.v * sign, ch.ids.d * sign), D, S)
        sub = ch.isub
        if np.any(sub.v):  # into the effective drain, out of the body
            on = fwd.astype(float)
            _stamp(cur, jac, t, Dual(sub.v * on, sub.d * on), D, B)
            _stamp(cur, jac, t, Dual(sub.v * (1.0 - on), sub.d * (1.0 - on)), S, B)
        for leak, term in ((ch.igidl, D), (ch.igisl, S)):
            if np.any(leak.v):
                _stamp(cur, jac, t, leak, term, B)
        for side, j_term, c_term, vj in (("s", SB, S, vbs_j), ("d", DB, D, vbd_j)):
            i, g = self._junction(side, vj)
            ti = t * i
            cur[:, j_term] += ti
            cur[:, c_term] -= ti
            jac[:, j_term, j_term] += g
            jac[:, j_term, c_term] -= g
            jac[:, c_term, j_term] -= g
            jac[:, c_term, c_term] += g
        v = x[self.nodes]
        used = mos_terminal_voltages(v, t, vgs, vds, vbs, 6)
        used[:, SB] = v[:, S] + t * vbs_j
        used[:, DB] = used[:, D] + t * vbd_j
        new_state = {"vgs": vgs, "vds": vds, "vbs": vbs, "vbs_j": vbs_j, "vbd_j": vbd_j, "vth": ch.vth}
        return cur, jac, used, new_state, bool(changed.any())

    def _junction(self, side: str, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Junction current from the body side into the diffusion, and its conductance (DIOMOD = 1:
        the diode law, continued linearly above the forward limit IJTH, no breakdown)."""
        p = self.p
        isat, nvt, vj, ivj = p["isat_" + side], p["nvt_" + side], p["vjfwd_" + side], p["ivjfwd_" + side]
        m = p["m"]
        with np.errstate(over="ignore", invalid="ignore"):
            arg = v / nvt
            e = np.exp(np.clip(arg, -EXP_THRESHOLD, EXP_THRESHOLD * 2))
            lin = v > vj
            i = np.where(arg < -EXP_THRESHOLD, isat * (MIN_EXP - 1.0),
                         np.where(lin, ivj - isat + ivj / nvt * (v - vj), isat * (e - 1.0)))
            g = np.where(arg < -EXP_THRESHOLD, 0.0, np.where(lin, ivj / nvt, isat * e / nvt))
        on = isat > 0
        i = np.where(on, i, 0.0) + GMIN * v
        g = np.where(on, g, 0.0) + GMIN
        return i * m, g * m

    def _limit(self, vgs, vds, vbs, vbs_j, vbd_j, state):
        new_gs, new_ds = physics.limit_fet(vgs, vds, state["vgs"], state["vds"], state["vth"])
        new_bs = vbs  # the channel's body voltage crosses no junction: no limiting
        lim_bsj, _ = physics.pnjlim(vbs_j, state["vbs_j"], self.p["nvt_s"], self.vcrit["s"])
        lim_bdj, _ = physics.pnjlim(vbd_j, state["vbd_j"], self.p["nvt_d"], self.vcrit["d"])
        changed = ((np.abs(new_gs - vgs) > 1e-12) | (np.abs(new_ds - vds) > 1e-12)
                   | (np.abs(lim_bsj - vbs_j) > 1e-12) | (np.abs(lim_bdj - vbd_j) > 1e-12))
        return new_gs, new_ds, new_bs, lim_bsj, lim_bdj, changed

    # -- operating point ---------------------------------------------------------------
    def report(self, x: np.ndarray, net: Network) -> list[DeviceOP]:
        vgs, vds, vbs, vbs_j, vbd_j = self._bias(x)
        p = self.p
        ch = bsim4_eval.evaluate(p, *Dual.variables(vgs, vds, vbs), charges=True)
        fwd = ch.forward
        # effective-frame small-signal values (drain and source swapped when VDS < 0)
        dg, dd, db = ch.ids.d
        gm, gmb = dg, db
        gds = np.where(fwd, dd, -(dg + dd + db))
        sg, sd_, sb = ch.isub.d
        sub = {"gsub_g": sg, "gsub_b": sb, "gsub_d": np.where(fwd, sd_, -(sg + sd_ + sb))}
        currents = {"isub": ch.isub.v, "igidl": ch.igidl.v, "igisl": ch.igisl.v}  # (A, normalized)
        for name, leak in (("ggidl", ch.igidl), ("ggisl", ch.igisl)):  # physical frame
            for k, part in enumerate("gdb"):
                sub[f"{name}_{part}"] = leak.d[k]
        _, gbs = self._junction("s", vbs_j)
        _, gbd = self._junction("d", vbd_j)
        cbs = self._junction_cap("s", vbs_j)
        cbd = self._junction_cap("d", vbd_j)
        q = ch.charges
        n = len(self.elements)
        intrinsic = np.zeros((n, 4, 4))
        for row, key in ((D, "d"), (G, "g"), (S, "s"), (B, "b")):
            dqg, dqd, dqb = q[key].d
            intrinsic[:, row, G] = dqg
            intrinsic[:, row, D] = dqd
            intrinsic[:, row, B] = dqb
            intrinsic[:, row, S] = -(dqg + dqd + dqb)
        vds_e = np.abs(vds)
        out = []
        names = net.nodes
        for i, e in enumerate(self.elements):
            body = bool(self.body[i])
            d, g, s, b, dbn, sbn = (names[k] for k in self.nodes[i])
            f = bool(fwd[i])
            if body:
                order = ("d_phys", "g", "s_phys", "b", "db", "sb")
                cm = np.zeros((6, 6))
                cm[:4, :4] = intrinsic[i]
                for a, c, cap in ((DB, D, cbd[i]), (SB, S, cbs[i])):
                    cm[a, a] += cap
                    cm[c, c] += cap
                    cm[a, c] -= cap
                    cm[c, a] -= cap
            else:
                order = ("d_phys", "g", "s_phys", "b")
                cm = intrinsic[i].copy()
                for c, cap in ((D, cbd[i]), (S, cbs[i])):
                    cm[B, B] += cap
                    cm[c, c] += cap
                    cm[B, c] -= cap
                    cm[c, B] -= cap
            typ = "nmos" if p["type"][i] > 0 else "pmos"
            t = p["type"][i]
            nodes = {"d": d if f else s, "s": s if f else d, "g": g, "b": b, "d_phys": d, "s_phys": s,
                     "db": dbn, "sb": sbn,
                     "rd_ext": names[self.ext[i, D]], "rd_int": d, "rs_ext": names[self.ext[i, S]], "rs_int": s}
            series = {"rd": float(p["rd_ext"][i] / p["m"][i]), "rs": float(p["rs_ext"][i] / p["m"][i])}
            if body:
                b_ext = names[self.ext[i, B]]
                where = {"b_ext": b_ext, "b": b, "db": dbn, "sb": sbn}
                for part, (ta, tb) in BODY_RESISTORS.items():
                    nodes[part + "_ext"], nodes[part + "_int"] = where[ta], where[tb]
                    series[part] = float(1.0 / self.gbody[part][i])
            dev = DeviceOP(
                name=e.name, type=typ, model=self.models[i], region=_region(float((vgs[i] if f else vgs[i] - vds[i]) - ch.vth[i]), vds_e[i], ch.vdsat[i],
                               float(p["vtm"][i])),
                current=float(t * (ch.ids.v[i] if f else -ch.ids.v[i])),
                bias={"vgs": float(t * vgs[i]), "vds": float(t * vds[i]), "vbs": float(t * vbs[i]),
                      "vth": float(t * ch.vth[i]), "vov": float((vgs[i] if f else vgs[i] - vds[i]) - ch.vth[i]),
                      "vdsat": float(ch.vdsat[i]), "margin": float(vds_e[i] - ch.vdsat[i])},
                values={"gm": float(gm[i]), "gds": float(gds[i]), "gmb": float(gmb[i]), "gbd": float(gbd[i]),
                        "gbs": float(gbs[i]), **{k: float(v[i]) for k, v in sub.items()},
                        **{k: float(v[i]) for k, v in currents.items()}},
                caps={}, nodes=nodes, series=series, file=e.file, line=e.line, family=MODEL.name,
                cmatrix=(order, cm),
            )
            dev.caps = _pair_caps(order, cm, CAPS_BODY if body else CAPS_PLAIN)
            out.append(dev)
        return out

    def _junction_cap(self, side: str, v: np.ndarray) -> np.ndarray:
        """Junction capacitance: bottom, sidewall and gate-edge sidewall parts, each
        Cz (1 - V/PB)^-MJ in reverse bias (a part with Cz <= 0 left out) and, at zero and
        forward bias, the sum of the parts' tangent lines Cz (1 + MJ V/PB)."""
        p = self.p
        total = np.zeros_like(v)
        for part in ("", "sw", "swg"):
            cz = p[f"cz{part}_{side}"]
            pb = p[f"pb{part}_{side}"]
            mj = p[f"mj{part}_{side}"]
            rev = np.where(cz > 0, cz * np.power(np.maximum(1.0 - v / pb, 1e-12), -mj), 0.0)
            total += np.where(v < 0, rev, cz * (1.0 + mj * v / pb))
        return total * p["m"]


#: below this overdrive, in thermal voltages, a device is reported cut off rather than in weak
#: inversion: its current is e^(-10/n) (about 1e-3 to 1e-4) of the current at threshold (our own
#: line between an amplifying weak-inversion device and an idle one)
CUTOFF_VT = 10.0


def _region(vov: float, vds_e: float, vdsat: float, vt: float) -> str:
    """Cut off far below threshold, in weak inversion (``subthreshold``) below it, else
    saturation when VDS reaches VDSAT, else triode."""
    if vov < -CUTOFF_VT * vt:
        return "cutoff"
    if vov < 0.0:
        return "subthreshold"
    return "saturation" if vds_e >= vdsat else "triode"


def _stamp(cur, jac, t, current: Dual, a: int, b: int) -> None:
    """A current entering terminal ``a`` and leaving at ``b`` (normalized; its derivatives over
    vgs, vds, vbs of the channel): its terminal currents and Jacobian columns."""
    dg, dd, db = current.d
    ds = -(dg + dd + db)
    i = t * current.v
    for term, sign in ((a, 1.0), (b, -1.0)):
        cur[:, term] += sign * i
        row = jac[:, term]
        if sign > 0:
            row[:, G] += dg
            row[:, D] += dd
            row[:, B] += db
            row[:, S] += ds
        else:
            row[:, G] -= dg
            row[:, D] -= dd
            row[:, B] -= db
            row[:, S] -= ds


#: the report's pair names over the matrix's terminals (the split of a charge-based matrix)
CAPS_PLAIN = {"cgd": ("g", "d_phys"), "cgs": ("g", "s_phys"), "cgb": ("g", "b"), "cdb": ("d_phys", "b"),
              "csb": ("s_phys", "b"), "cds": ("d_phys", "s_phys")}
CAPS_BODY = {"cgd": ("g", "d_phys"), "cgs": ("g", "s_phys"), "cgb": ("g", "b"), "cdb": ("d_phys", "db"),
             "csb": ("s_phys", "sb"), "cds": ("d_phys", "s_phys"), "cdbi": ("d_phys", "b"), "csbi": ("s_phys", "b")}


def _pair_caps(order: tuple[str, ...], cm: np.ndarray, names: dict[str, tuple[str, str]]) -> dict[str, float]:
    """Each named pair's capacitance of the symmetric part, c_ij = -(C_ij + C_ji)/2."""
    out = {}
    for part, (a, b) in names.items():
        if a in order and b in order:
            i, j = order.index(a), order.index(b)
            out[part] = float(-0.5 * (cm[i, j] + cm[j, i]))
    return out


def stamps(dev: DeviceOP) -> SmallSignal:
    """gm, gmb and gds between the effective drain and source, the impact-ionization current's
    transconductances from the effective drain into the body, the junction conductances, the
    terminal capacitance matrix (stamped whole), the series and body resistances."""
    out = SmallSignal()
    n, v = dev.nodes, dev.values
    d, g, s, b = n["d"], n["g"], n["s"], n["b"]
    stamp_helpers.mos_channel(dev, out)
    for part, control in (("gsub_g", g), ("gsub_d", d), ("gsub_b", b)):
        out.vccs.append((part, d, b, control, s, v.get(part, 0.0)))
    dp, sp = n["d_phys"], n["s_phys"]
    for leak, source in (("ggidl", dp), ("ggisl", sp)):
        for part, control in (("g", g), ("d", dp), ("b", b)):
            out.vccs.append((f"{leak}_{part}", source, b, control, sp, v.get(f"{leak}_{part}", 0.0)))
    out.conductances.append(("gbd", n["db"], n["d_phys"], v.get("gbd", 0.0)))
    out.conductances.append(("gbs", n["sb"], n["s_phys"], v.get("gbs", 0.0)))
    body = dev.cmatrix is not None and "db" in dev.cmatrix[0]
    stamp_helpers.capacitors(dev, out, CAPS_BODY if body else CAPS_PLAIN)
    stamp_helpers.series(dev, out)
    return out


MODEL = register(DeviceModel(
    name="bsim4", letter="m", model_types=frozenset({"nmos", "pmos"}), levels=frozenset({54, 14}),
    terminals=("d", "g", "s", "b"),
    quantities=frozenset({"gm", "gds", "gmb", "id"}) | frozenset(CAPS_PLAIN), capacitances=frozenset(CAPS_PLAIN),
    regions=("saturation", "subthreshold", "triode", "cutoff"), poor_regions=frozenset({"triode", "cutoff"}),
    json_values=("gm", "gds", "gmb"), json_bias=("vov", "vgs", "vds", "vth", "vdsat", "margin"),
    json_caps=tuple(CAPS_PLAIN), table_bias=("vth", "vov", "vds", "vdsat", "margin"), output_conductance="gds",
    group=Bsim4Group, stamps=stamps,
))
