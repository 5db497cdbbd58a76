"""The DC operating point: node voltages and every device's bias, small-signal values and capacitances."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tauscan.circuit import Circuit
from tauscan.devices import registry
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
            model = registry.by_name(d.family)
            record.update((k, d.values[k]) for k in model.json_values)
            record.update((k, d.bias.get(k)) for k in model.json_bias)
            gm = d.values.get("gm")
            record["gm_id"] = gm / abs(d.current) if gm is not None and d.current else None
            for label, num, den in model.table_ratios:
                a = d.current if num == "current" else d.values.get(num, d.bias.get(num))
                b = d.current if den == "current" else d.values.get(den, d.bias.get(den))
                record[label.replace("/", "_")] = a / b if a is not None and b else None
            caps = {k: d.caps.get(k, 0.0) for k in model.json_caps}
            caps.update((k, v) for k, v in d.caps.items() if k not in caps)
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
