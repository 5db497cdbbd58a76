"""Checks of the definitions as read, before anything is expanded: subcircuits that place
themselves (on the static graph of which subcircuit places which), and device lines whose
model nobody defines (for the subcircuits that no instance places, which expansion never
reaches)."""

from __future__ import annotations

from tauscan.errors import HierarchyError, NetlistSyntaxError, TauscanError
from tauscan.reader.fields import Param, Word
from tauscan.reader.lines import Card, DeviceLine, PlainRun
from tauscan.reader.loader import Definition


#: Where an element line names its model, by letter: the index of the model among the words
#: after the name (a Q line may name a substrate node first).
_MODEL_AT = {"m": (4,), "d": (2,), "q": (3, 4)}


def _defines(definition: Definition, name: str) -> bool:
    scope: Definition | None = definition
    while scope is not None:
        if name in scope.models or name in scope.bins:
            return True
        scope = scope.parent
    return False


def undefined_models(definition: Definition) -> list[TauscanError]:
    """Located errors for the device lines of a definition whose model nobody defines."""
    out: list[TauscanError] = []
    for item in definition.elements:
        if type(item) is PlainRun:
            lines = [item.device(k) for k in range(len(item.devices or ()))]
        elif type(item) is DeviceLine:
            lines = [item]
        else:
            lines = [item]
        for line in lines:
            if type(line) is DeviceLine:
                card = line.card()
                words = [Word(w, card.text.index(w)) for w in card.text.split()[1:]]
                letter = "m"
            else:
                name, fields, card = line
                letter = name[0]
                words = [f for f in fields[1:] if type(f) is not Param]
            spots = _MODEL_AT.get(letter)
            if spots is None:
                continue
            candidates = [words[k] for k in spots if k < len(words) and type(words[k]) is Word]
            if not candidates or any(_defines(definition, w.text.lower()) for w in candidates):
                continue
            model = candidates[-1] if letter == "q" and len(words) > 4 else candidates[0]
            out.append(card.error(NetlistSyntaxError, f"model {model.text!r} is not defined (in subcircuit "
                                  f"{definition.name!r}, which no instance places)", model.offset))
    return out


def placed(definition: Definition) -> list[tuple[Definition, Card, int]]:
    """The definitions that ``definition``'s instance lines place (unknown names skipped)."""
    out = []
    for item in definition.elements:
        if type(item) is not tuple or item[0][0] != "x":
            continue
        name, fields, card = item
        pos = [f for f in fields[1:] if type(f) is not Param]
        if pos and type(pos[-1]) is Word:
            target = definition.find_subckt(pos[-1].text.lower())
            if target is not None:
                out.append((target, card, pos[-1].offset))
    return out


def check_recursion(top: Definition) -> None:
    """Raise when a subcircuit places itself, directly or through others (reachable from the top)."""
    state: dict[int, int] = {}  # id -> 1 on the path, 2 done
    path: list[Definition] = [top]
    stack = [(top, iter(placed(top)))]
    state[id(top)] = 1
    while stack:
        definition, children = stack[-1]
        for child, card, offset in children:
            mark = state.get(id(child))
            if mark == 1:
                names = [d.name for d in path[path.index(child):]] + [child.name]
                raise card.error(
                    HierarchyError, "subcircuit instantiates itself: " + " -> ".join(names), offset
                )
            if mark is None:
                state[id(child)] = 1
                path.append(child)
                stack.append((child, iter(placed(child))))
                break
        else:
            state[id(definition)] = 2
            path.pop()
            stack.pop()
