"""DC operating point: device models evaluated by a sparse Newton solver, or values from a file."""

from tauscan.op.result import OperatingPoint
from tauscan.op.solver import SolverSettings, solve_dc

__all__ = ["OperatingPoint", "SolverSettings", "operating_point", "solve_dc"]


def operating_point(circuit, temp_c: float | None = None, op_file: str | None = None) -> OperatingPoint:
    """The operating point of ``circuit``: solved, with any values from ``op_file`` applied."""
    from tauscan.op.opfile import apply_device_values, check_nodes, read_op_file

    if op_file is None:
        return solve_dc(circuit, temp_c)
    given = read_op_file(op_file)
    known = set(circuit.nodes()) - {"0"}
    pinned = check_nodes(given, known)
    result = solve_dc(circuit, temp_c, pinned=pinned)
    apply_device_values(given, result.devices)
    if pinned:
        result.source = "file"
    return result
