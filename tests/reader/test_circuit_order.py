"""The flat circuit's one ordered interface: elements in netlist order whatever path the
reader took for each line (plain rows in columns, plain MOSFET runs, cards), indexing that
agrees with iteration, look-up by name and the first use of a node."""

from hypothesis import given, settings
from hypothesis import strategies as st

from tauscan.reader import read_netlist

#: line makers: a plain row (table), a MOSFET line (fast run), a card with an expression,
#: a source and a subcircuit instance (objects)
KINDS = ("r", "c", "m", "rexpr", "v", "x")


def _line(kind: str, k: int) -> list[str]:
    a, b = f"n{k}", f"n{k + 1}"
    if kind == "r":
        return [f"R{k} {a} {b} 1k"]
    if kind == "c":
        return [f"C{k} {a} {b} 1p"]
    if kind == "m":
        return [f"M{k} {b} {a} 0 0 nch w=1u l=1u"]
    if kind == "rexpr":
        return [f"R{k} {a} {b} {{2*rv}}"]
    if kind == "v":
        return [f"V{k} {a} 0 1"]
    return [f"X{k} {a} {b} half"]


def _netlist(kinds: list[str]) -> tuple[str, list[str]]:
    lines = ["order", ".param rv=1k", ".model nch nmos (vto=0.4 kp=1e-4)",
             ".subckt half p q", "Rh p q 2k", ".ends"]
    names = []
    for k, kind in enumerate(kinds):
        lines += _line(kind, k)
        names.append(f"x{k}.rh" if kind == "x" else f"{'r' if kind == 'rexpr' else kind}{k}")
    return "\n".join(lines + [".end", ""]), names


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sampled_from(KINDS), min_size=1, max_size=30))
def test_order_index_and_lookup_agree(tmp_path_factory, kinds):
    text, names = _netlist(kinds)
    path = tmp_path_factory.mktemp("order") / "o.sp"
    path.write_text(text)
    circuit = read_netlist(str(path))
    listed = list(circuit.elements)
    # the netlist's order, as written (oracle: the generator's own list of names)
    assert [e.name for e in listed] == names
    view = circuit.elements
    assert len(view) == len(names)
    assert [view[i].name for i in range(len(view))] == names
    assert [view[-i].name for i in range(1, len(view) + 1)] == names[::-1]
    assert [e.name for e in view[1::2]] == names[1::2]
    for e in listed:
        assert circuit.element(e.name).line == e.line
    # first use of a node: the first listed element touching it
    for node in {n for e in listed for n in e.nodes}:
        first = next(e for e in listed if node in e.nodes)
        assert circuit.first_use(node).name == first.name
    assert circuit.first_use("nowhere") is None
