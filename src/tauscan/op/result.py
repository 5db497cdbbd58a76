"""The DC operating point: node voltages and every device's bias, small-signal values and capacitances."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tauscan.circuit import Circuit
from tauscan.devices.base import DeviceOP
from tauscan.network import Network


@dataclass
class OperatingPoint:
    circuit: Circuit
    network: Network
    x: np.ndarray  # full solution vector, ground (index 0) included
    temp_c: float
    devices: list[DeviceOP]
    warnings: list[str] = field(default_factory=list)
    floating: list[str] = field(default_factory=list)
    iterations: int = 0
    strategy: str = "newton"
    source: str = "solved"  # or "file" when node voltages came from --op

    def voltage(self, node: str) -> float:
        return float(self.x[self.network.node(node)])

    def node_voltages(self, internal: bool = False) -> dict[str, float]:
        net = self.network
        return {
            name: float(self.x[i])
            for i, name in enumerate(net.nodes)
            if i > 0 and (internal or name not in net.internal)
        }

    def device(self, name: str) -> DeviceOP:
        for d in self.devices:
            if d.name == name:
                return d
        raise KeyError(name)

    def branch_current(self, element: str) -> float:
        return float(self.x[self.network.branch_of[element]])

    def to_json(self) -> dict:
        devices = []
        for d in self.devices:
            record = {
                "name": d.name,
                "type": d.type,
                "model": d.model,
                "region": d.region,
                "id": d.current,
            }
            if d.type in ("nmos", "pmos"):
                record.update(gm=d.values["gm"], gds=d.values["gds"], gmb=d.values["gmb"], vov=d.bias.get("vov"), vgs=d.bias.get("vgs"), vds=d.bias.get("vds"))
                caps = {k: d.caps.get(k, 0.0) for k in ("cgs", "cgd", "cgb", "cbd", "cbs")}
            elif d.type in ("npn", "pnp"):
                record.update(gm=d.values["gm"], gpi=d.values["gpi"], go=d.values["go"], gmu=d.values["gmu"], vbe=d.bias.get("vbe"), vce=d.bias.get("vce"))
                caps = {k: d.caps.get(k, 0.0) for k in ("cbe", "cbc", "ccs")}
                if "cbx" in d.caps:
                    caps["cbx"] = d.caps["cbx"]
            else:
                record.update(gd=d.values["gd"], vd=d.bias.get("vd"))
                caps = {"cj": d.caps.get("cj", 0.0)}
            record["caps"] = caps
            if d.overridden:
                record["given"] = sorted(d.overridden)
            devices.append(record)
        return {
            "nodes": self.node_voltages(),
            "devices": devices,
            "temp": self.temp_c,
            "iterations": self.iterations,
            "strategy": self.strategy,
            "warnings": list(self.warnings),
        }
