"""Generators of extracted-style netlists for the benchmarks (invented circuits)."""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager

MODELS = """\
.model nch nmos level=1 (vto=0.45 kp=180u gamma=0.4 phi=0.8 lambda=0.08 tox=8n
+ cgso=0.3n cgdo=0.3n cgbo=0.1n cj=0.9m mj=0.45 cjsw=0.25n mjsw=0.3 pb=0.8)
.model pch pmos level=1 (vto=-0.45 kp=70u gamma=0.4 phi=0.8 lambda=0.1 tox=8n
+ cgso=0.3n cgdo=0.3n cgbo=0.1n cj=0.9m mj=0.45 cjsw=0.25n mjsw=0.3 pb=0.8)
"""


def stage_chain(lines_wanted: int, segments: int = 4) -> str:
    """A chain of resistor-loaded common-source stages, each output wired to the next
    gate through an RC ladder of ``segments`` sections (wiring parasitics).

    About ``4 + 2*segments`` lines per stage.
    """
    per_stage = 4 + 2 * segments
    stages = max(1, lines_wanted // per_stage)
    out = ["benchmark: chain of gain stages with RC wiring", MODELS.rstrip()]
    out.append("Vdd vdd 0 dc 1.8")
    out.append("Vin g0 0 dc 0.8 ac 1")
    for k in range(stages):
        gate = f"g{k}"
        drain = f"d{k}"
        out.append(f"M{k} {drain} {gate} 0 0 nch w=4u l=0.5u ad=2p as=2p pd=5u ps=5u")
        out.append(f"Rl{k} vdd {drain} 1.8k")  # a gain of about -0.5: thousands of cascaded stages stay finite
        out.append(f"Cd{k} {drain} 0 2f")
        prev = drain
        for s in range(segments):
            node = f"w{k}_{s}" if s < segments - 1 else f"h{k + 1}"
            out.append(f"Rw{k}_{s} {prev} {node} 25")
            out.append(f"Cw{k}_{s} {node} 0 0.3f")
            prev = node
        # each stage's gate is biased through a large resistor from a divider node, AC coupled
        out.append(f"Cc{k} h{k + 1} g{k + 1} 1p")
        out.append(f"Rb{k} g{k + 1} bias 200k")
    out.append("Rbias1 vdd bias 100k")
    out.append("Rbias2 bias 0 56k")  # gates at about 0.65 V: every stage in saturation
    out.append(".end")
    return "\n".join(out) + "\n"


def stage_mesh(lines_wanted: int, segments: int = 2) -> str:
    """A square grid of common-source stages: each output is wired (RC ladders of
    ``segments`` sections) to the gates of its right and lower neighbours, each gate
    AC-coupled from up to two wires and biased from a shared divider.  The coupling
    capacitors make the capacitance and Z patterns a two-dimensional mesh.

    About ``6 + 4*segments`` lines per stage.
    """
    per_stage = 6 + 4 * segments
    side = max(2, int((lines_wanted / per_stage) ** 0.5))
    out = ["benchmark: mesh of gain stages with RC wiring", MODELS.rstrip()]
    out.append("Vdd vdd 0 dc 1.8")
    out.append("Vin in 0 dc 0 ac 1")
    out.append("Rsrc in x_in 10k")  # the driver's output resistance
    out.append("Cin x_in g0_0 1p")
    for i in range(side):
        for j in range(side):
            k = f"{i}_{j}"
            out.append(f"M{k} d{k} g{k} 0 0 nch w=4u l=0.5u ad=2p as=2p pd=5u ps=5u")
            out.append(f"Rl{k} vdd d{k} 1.8k")  # a gain of about -0.5: thousands of cascaded stages stay finite
            out.append(f"Cd{k} d{k} 0 2f")
            out.append(f"Rb{k} g{k} bias 200k")
            for tag, (ni, nj) in (("r", (i, j + 1)), ("u", (i + 1, j))):
                if ni >= side or nj >= side:
                    continue
                prev = f"d{k}"
                for s in range(segments):
                    node = f"w{tag}{k}_{s}"
                    out.append(f"Rw{tag}{k}_{s} {prev} {node} 25")
                    out.append(f"Cw{tag}{k}_{s} {node} 0 0.3f")
                    prev = node
                out.append(f"Cc{tag}{k} {prev} g{ni}_{nj} 0.5p")
    out.append("Rbias1 vdd bias 100k")
    out.append("Rbias2 bias 0 56k")  # gates at about 0.65 V: every stage in saturation
    out.append(".end")
    return "\n".join(out) + "\n"


def identical_chain(lines_wanted: int) -> str:
    """The chain of identical stages that speed work is measured on: :func:`stage_chain` with
    10-segment RC wiring between stages and a coupling capacitor into every gate (24 lines a
    stage: 8,000 stages in 2e5 lines), whose equal cells give clusters of equal poles."""
    return stage_chain(lines_wanted, segments=10)


GENERATORS = {"chain": stage_chain, "mesh": stage_mesh, "identical": identical_chain}


@contextmanager
def chain_file(lines_wanted: int, kind: str = "chain"):
    """A temporary netlist file of :func:`stage_chain` (or another of :data:`GENERATORS`),
    deleted afterwards; yields its path."""
    with tempfile.NamedTemporaryFile("w", suffix=".sp", delete=False) as handle:
        handle.write(GENERATORS[kind](lines_wanted))
        path = handle.name
    try:
        yield path
    finally:
        os.unlink(path)
