"""Definitions -> a flat :class:`~tauscan.circuit.Circuit`, every value evaluated.

Instances are expanded with an explicit stack (no Python recursion), so the
depth of a hierarchy is limited only by :data:`MAX_DEPTH`.  Recursive
definitions are found beforehand on the static graph of which subcircuit
places which.
"""

from __future__ import annotations

import math
from itertools import repeat
from operator import attrgetter, itemgetter, methodcaller

from tauscan.circuit import GROUND, Circuit, Element, Model
from tauscan.errors import HierarchyError, NetlistSyntaxError, SettingsError, TauscanError, did_you_mean
from tauscan.reader.elements import RULES, check_passive_value
from tauscan.reader.fields import Field, Group, Param, Word, card_fields, show
from tauscan.reader.lines import Card, DeviceLine, PlainRun, PlainValueCard
from tauscan.reader.loader import Definition, Netlist
from tauscan.reader.scope import ParamScope, field_value
from tauscan.units import parse_number

#: Numbers already met as plain words (text -> a finite float); bounded like parse_number's memo.
_NUMBERS: dict[str, float] = {}
_NUMBERS_MAX = 200_000

#: Deepest chain of nested subcircuit instances.
MAX_DEPTH = 1000

GROUND_NAMES = frozenset(["0", "gnd", "gnd!"])
_GROUND_OF = {name: GROUND for name in GROUND_NAMES}


#: The first six words of a line and the rest (see :meth:`Flattener._device_elements`).
_SEVEN = methodcaller("split", None, 6)


def _plain_number(text: str) -> float | None:
    """The finite number a word writes (lower case), remembered; None when it is not one."""
    value = _NUMBERS.get(text)
    if value is None:
        value = parse_number(text)
        if value is None or not math.isfinite(value):
            return None
        if len(_NUMBERS) < _NUMBERS_MAX:
            _NUMBERS[text] = value
    return value


def _numeric_params(pairs: list[str]) -> dict[str, float] | None:
    """``key=value`` words (lower case) as a dictionary when every value is a plain number;
    None otherwise."""
    params: dict[str, float] = {}
    for word in pairs:
        key, _, text = word.partition("=")
        value = _plain_number(text)
        if value is None:
            return None
        params[key] = value
    return params


class Frame:
    """One instance being expanded: its definition, name prefix, pins and parameters."""

    __slots__ = ("definition", "prefix", "pins", "scope", "parent", "flattener", "depth", "_models", "_nodes")

    def __init__(self, definition: Definition, prefix: str, pins: dict[str, str], scope: ParamScope, parent: "Frame | None", flattener: "Flattener", depth: int) -> None:
        self.definition = definition
        self.prefix = prefix
        self.pins = pins
        self.scope = scope
        self.parent = parent
        self.flattener = flattener
        self.depth = depth
        self._models: dict[str, str | None] = {}
        self._nodes: dict[str, str] = {}

    def node(self, raw: str) -> str:
        try:
            return self._nodes[raw]
        except KeyError:
            pass
        mapped = self._map_node(raw)
        self._nodes[raw] = mapped
        return mapped

    def nodes(self, raws: list[str], ground_names: bool = True) -> list[str]:
        """:meth:`node` of every name of a column (lower case already); ``ground_names``: whether
        a name of ground other than "0" may be among them."""
        if self.parent is None:  # the top level: only the names of ground change
            return list(map(_GROUND_OF.get, raws, raws)) if ground_names else raws
        known = self._nodes
        for raw in set(raws).difference(known):
            self.node(raw)
        return list(map(known.__getitem__, raws))

    def _map_node(self, raw: str) -> str:
        name = raw.lower()
        if name in GROUND_NAMES:
            return GROUND
        mapped = self.pins.get(name)
        if mapped is not None:
            return mapped
        if name in self.flattener.global_nodes:
            return name
        return self.prefix + name

    def value(self, f: Field, card: Card) -> float:
        if type(f) is Word:  # most values are plain numbers, and few distinct ones
            number = _plain_number(f.text)
            if number is not None:
                return number
        return field_value(f, card, self.scope)

    def model(self, raw: str) -> str | None:
        key = raw.lower()
        if key not in self._models:
            self._models[key] = self.flattener.model_for(self, key)
        return self._models[key]


class Flattener:
    def __init__(self, netlist: Netlist, overrides: dict[str, float] | None = None, unknown: str = "error") -> None:
        self.netlist = netlist
        self.global_nodes = {n for n in netlist.global_nodes if n not in GROUND_NAMES}
        top = netlist.top
        self.circuit = Circuit(netlist.title, netlist.file)
        for key in overrides or {}:
            if key not in top.params:
                hint = did_you_mean(key, top.params)
                if not hint:
                    names = sorted(top.params)
                    hint = (f" (its parameters: {', '.join(names[:12])}{', ...' if len(names) > 12 else ''})"
                            if names else " (it has none)")
                message = f"parameter {key!r} is not a .param of {netlist.file}{hint}"
                if unknown == "error":
                    raise SettingsError(message, netlist.file)
                self.circuit.unknown_params[key] = message
                self.circuit.warnings.append(f"{message}: the override does not apply to this netlist")
        self.top_scope = ParamScope(top.params, None, overrides or {})
        self.circuit.global_nodes = set(self.global_nodes)
        self.circuit.warnings.extend(netlist.warnings)
        #: the name of every element taken so far (in the table or not)
        self.names: set[str] = set()
        #: the parameters of plain MOSFET lines by their text: lines that read the same share
        #: one dictionary (elements' parameters are never changed once read)
        self.param_sets: dict[str, dict[str, float]] = {}

    # -- models ----------------------------------------------------------------
    def model_for(self, frame: Frame, name: str) -> str | None:
        """Flat name of model ``name`` as seen from ``frame`` (lexical scope), built on first use."""
        owner: Definition | None = frame.definition
        while owner is not None and name not in owner.models:
            owner = owner.parent
        if owner is None:
            return None
        # the frame that instantiated the owning definition gives the name prefix and parameters
        host: Frame | None = frame
        while host is not None and host.definition is not owner:
            host = host.parent
        if host is None:
            host = frame
        flat = host.prefix + name
        if flat not in self.circuit.models:
            fields, card = owner.models[name]
            self.circuit.models[flat] = self._model(flat, fields, card, host)
        return flat

    def _model(self, flat: str, fields: list[Field], card: Card, frame: Frame) -> Model:
        mtype = fields[0].text.lower()
        params: dict[str, float] = {}
        items: list[Field] = []
        for f in fields[1:]:
            items.extend(f.items if type(f) is Group else [f])
        for f in items:
            if type(f) is Param:
                params[f.key] = frame.value(f.value, card)
            elif type(f) is Group:
                raise card.error(NetlistSyntaxError, "nested parentheses in '.model'", f.offset)
        return Model(flat, mtype, params, card.file, card.line)

    # -- expansion ---------------------------------------------------------------
    def run(self) -> Circuit:
        top = self.netlist.top
        check_recursion(top)
        root = Frame(top, "", {}, self.top_scope, None, self, 0)
        self._settings(root)
        # models defined at the top are kept even when no element uses them
        for name in top.models:
            root.model(name)
        stack: list[tuple[Frame, int]] = [(root, 0)]
        while stack:
            frame, index = stack.pop()
            cards = frame.definition.elements
            once = frame is root  # the top level is expanded once: what it held is let go as
            # it is taken (a chunk's columns are freed with its last run, for the table to grow into)
            while index < len(cards):
                item = cards[index]
                if once:
                    cards[index] = None
                index += 1
                if type(item) is PlainRun:
                    self._plain_run(frame, item)
                    continue
                if type(item) is DeviceLine:
                    self._device_line(frame, item)
                    continue
                name, fields, card = item
                if name[0] == "x":
                    child = self._instance(frame, name, fields, card)
                    stack.append((frame, index))
                    stack.append((child, 0))
                    break
                self._add(self._element(frame, name, fields, card), card)
        return self.circuit

    def _settings(self, root: Frame) -> None:
        net = self.netlist
        if net.temp is not None:
            f, card = net.temp
            self.circuit.temp_c = root.value(f, card)
        for key, item in net.options.items():
            if isinstance(item, str):
                self.circuit.options[key] = item
            else:
                f, card = item
                try:
                    self.circuit.options[key] = root.value(f, card)
                except TauscanError:
                    self.circuit.options[key] = show(f)

    def _plain_run(self, frame: Frame, run: PlainRun) -> None:
        """A run of plain R and C lines, column by column, into the circuit's table (the checks
        of :func:`~tauscan.reader.elements.passive`, without an object per line), and the plain
        MOSFET lines among them."""
        if not run.devices:
            self._commit_rows(run, *self._rows(frame, run, run.lo, run.hi))
            return
        if self._run_at_once(frame, run):
            return
        # one piece at a time, in order: an error is then the one of the first line at fault
        lo = run.lo
        for k, at in enumerate(run.at):
            if at > lo:
                self._commit_rows(run, *self._rows(frame, run, lo, at))
                lo = at
            self._device_line(frame, run.device(k))
        if run.hi > lo:
            self._commit_rows(run, *self._rows(frame, run, lo, run.hi))

    def _run_at_once(self, frame: Frame, run: PlainRun) -> bool:
        """The rows and the MOSFETs of a run taken together; False, with nothing taken, when
        anything is amiss (a MOSFET line needing the card path, a value in error, a name met
        before)."""
        base = len(self.circuit.passives) - run.lo  # rows before the run's first
        try:  # (a model card in error, or a value: the piecewise path says which comes first)
            elements = self._device_elements(frame, run)
            if elements is None:
                return False
            rows = self._rows(frame, run, run.lo, run.hi)
        except TauscanError:
            return False
        row_names = rows[3]
        names = self.names
        before = len(names)
        names.update(row_names)
        names.update(map(attrgetter("name"), elements))
        if len(names) != before + len(row_names) + len(elements):
            self._rebuild_names()
            return False
        self._commit_rows(run, *rows, checked=True)
        self.circuit.add_many(elements, map(base.__add__, run.at))
        return True

    def _rebuild_names(self) -> None:
        """The set of names again from what was taken (after a failed batch added to it)."""
        self.names = set(self.circuit.passives.names)
        self.names.update(e.name for e in self.circuit.general)

    def _first_at(self, name: str) -> str:
        """``file:line`` of the element of that name taken before."""
        element = self.circuit.element(name)
        return f"{element.file}:{element.line}"

    def _device_elements(self, frame: Frame, run: PlainRun) -> list[Element] | None:
        """:meth:`_device_element` of every plain MOSFET line of a run, word columns at a time;
        None when one of them needs the card path.  Lines whose parameters read the same share one dictionary of them."""
        # a last word '.' on every line: the seventh part is then the parameters' text and it
        text = " .\n".join(run.devices).lower() + " ."
        parts = list(map(_SEVEN, text.split("\n")))
        known = frame._models
        for name in dict.fromkeys(map(itemgetter(5), parts)):  # first met first: the models' order
            if name not in known:
                frame.model(name)
        models = list(map(known.__getitem__, map(itemgetter(5), parts)))
        if None in models:
            return None
        shared = self.param_sets
        rests = list(map(itemgetter(6), parts))
        params = list(map(shared.get, rests))
        if None in params:
            for k, rest in enumerate(rests):
                if params[k] is None:
                    found = shared.get(rest)
                    if found is None:
                        found = _numeric_params(rest.split()[:-1])  # (the last word is '.')
                        if found is None:
                            return None
                        if len(shared) < _NUMBERS_MAX:
                            shared[rest] = found
                    params[k] = found
        ground_names = "gnd" in text
        nodes = list(zip(*(frame.nodes(list(map(itemgetter(k), parts)), ground_names) for k in (1, 2, 3, 4))))
        names = list(map(itemgetter(0), parts))
        if frame.prefix:
            names = list(map(frame.prefix.__add__, names))
        count = len(parts)
        return list(map(Element, names, repeat("m", count), nodes, repeat(None, count), models, params,
                        repeat(run.file, count), run.device_lines))

    def _rows(self, frame: Frame, run: PlainRun, lo: int, hi: int) -> tuple:
        """Rows ``lo`` to ``hi`` of a run's columns evaluated and checked, not yet taken:
        ``(frame, lo, hi, names, kinds, values, warnings)``."""
        columns = run.columns
        names = columns.names[lo:hi]
        if frame.prefix:
            names = list(map(frame.prefix.__add__, names))
        words = columns.values[lo:hi]
        values = list(map(_NUMBERS.get, words))
        if None in values:
            self._plain_values(frame, run, lo, words, values)
        kinds = columns.kinds[lo:hi]
        warnings = []
        if values and min(values) <= 0.0:  # (every value is finite)
            for k, (kind, value) in enumerate(zip(kinds, values)):
                if kind == "c" and value == 0.0:
                    warnings.append(f"{run.file}:{columns.lines[lo + k]}: capacitor {names[k]} has zero value")
                else:
                    check_passive_value(kind, value, PlainValueCard(run, lo + k, words[k]), 0)
        return frame, lo, hi, names, kinds, values, warnings

    def _commit_rows(self, run: PlainRun, frame: Frame, lo: int, hi: int, names: list[str], kinds: list[str],
                     values: list[float], warnings: list[str], checked: bool = False) -> None:
        """Take rows that :meth:`_rows` made into the table (``checked``: their names are known
        to be new)."""
        count = hi - lo
        if not count:
            return
        if not checked:
            known = self.names
            before = len(known)
            known.update(names)
            if len(known) != before + count:
                self._rebuild_names()
                self._duplicate_in_run(run, lo, names)
        columns = run.columns
        table = self.circuit.passives
        table.kinds += kinds
        table.names += names
        table.a += frame.nodes(columns.a[lo:hi], columns.ground_names)
        table.b += frame.nodes(columns.b[lo:hi], columns.ground_names)
        table.values += values
        table.files += repeat(run.file, count)
        table.lines += columns.lines[lo:hi]
        if warnings:
            self.circuit.warnings += warnings

    def _device_line(self, frame: Frame, item: DeviceLine) -> None:
        """A plain MOSFET line (see :meth:`_device_element`); anything unusual (an unknown
        model, a parameter that is not a number) goes through the card path, which says what
        is wrong or evaluates it."""
        element = self._device_element(frame, item)
        if element is None:
            card = item.card()
            fields = card_fields(card)[1]
            self._add(self._element(frame, fields[0].text.lower(), fields, card), card)
            return
        self._add(element, item)

    @staticmethod
    def _device_element(frame: Frame, item: DeviceLine) -> Element | None:
        """What :func:`~tauscan.reader.elements.mosfet` makes of a plain MOSFET line, split
        here directly; None when the model is unknown or a value is not a plain number."""
        words = item.raw.lower().split()
        model = frame.model(words[5])
        if model is None:
            return None
        params = _numeric_params(words[6:])
        if params is None:
            return None
        node = frame.node
        nodes = (node(words[1]), node(words[2]), node(words[3]), node(words[4]))
        return Element(frame.prefix + words[0], "m", nodes, None, model, params, item.file, item.line)

    @staticmethod
    def _plain_values(frame: Frame, run: PlainRun, lo: int, words: list[str], values: list) -> None:
        """Fill in the values not met before (rows from ``lo``): new numbers, and names of
        parameters."""
        for k, word in enumerate(words):
            if values[k] is not None:
                continue
            value = _plain_number(word)
            if value is None:  # a parameter's name, or out of range
                value = field_value(Word(word, 0), PlainValueCard(run, lo + k, word), frame.scope)
            values[k] = value

    def _duplicate_in_run(self, run: PlainRun, lo: int, names: list[str]) -> None:
        """Raise for the first name of rows from ``lo`` met before (among them or earlier)."""
        for k, name in enumerate(names):
            if name in self.names:
                where = self._first_at(name)
            elif name in names[:k]:
                where = f"{run.file}:{run.columns.lines[lo + names.index(name)]}"
            else:
                continue
            raise run.card(lo + k).error(NetlistSyntaxError, f"element {name!r} is defined twice (first at {where})", 0)

    def _element(self, frame: Frame, name: str, fields: list[Field], card: Card) -> Element:
        pos: list[Field] = []
        params: list[Field] = []
        for f in fields[1:]:
            (params if type(f) is Param else pos).append(f)
        return RULES[name[0]](name[0], frame.prefix + name, pos, params, card, frame)

    def _add(self, element: Element, card: Card | DeviceLine) -> None:
        if element.name in self.names:
            where = self._first_at(element.name)
            raise card.error(NetlistSyntaxError, f"element {element.name!r} is defined twice (first at {where})", 0)
        self.names.add(element.name)
        if element.kind == "c" and element.value == 0:
            self.circuit.warnings.append(f"{card.file}:{card.line}: capacitor {element.name} has zero value")
        self.circuit.add(element)

    def _instance(self, frame: Frame, name: str, fields: list[Field], card: Card) -> Frame:
        pos = [f for f in fields[1:] if type(f) is not Param]
        params = [f for f in fields[1:] if type(f) is Param]
        if not pos or type(pos[-1]) is not Word:
            raise card.error(HierarchyError, "an instance needs its nodes and a subcircuit name", 0)
        sub_field = pos[-1]
        definition = frame.definition.find_subckt(sub_field.text.lower())
        if definition is None:
            known = []
            scope = frame.definition
            while scope is not None:
                known.extend(scope.subckts)
                scope = scope.parent
            raise card.error(HierarchyError, f"unknown subcircuit {sub_field.text!r}" + did_you_mean(sub_field.text, known),
                             sub_field.offset)
        nodes = pos[:-1]
        for f in nodes:
            if type(f) is not Word:
                raise card.error(NetlistSyntaxError, "expected a node name here", f.offset)
        if len(nodes) != len(definition.pins):
            raise card.error(
                HierarchyError,
                f"subcircuit {definition.name!r} has {len(definition.pins)} pins, the instance gives {len(nodes)}",
                sub_field.offset,
            )
        if frame.depth + 1 > MAX_DEPTH:
            raise card.error(HierarchyError, f"subcircuit instances nested deeper than {MAX_DEPTH}", 0)
        values: dict[str, float] = {}
        for f in params:
            key = f.key
            if key not in definition.defaults and key not in definition.params:
                raise card.error(HierarchyError, f"subcircuit {definition.name!r} has no parameter {key!r}", f.offset)
            values[key] = frame.value(f.value, card)
        raw = dict(definition.params)
        raw.update(definition.defaults)
        scope = ParamScope(raw, frame.scope, values)
        pins = {pin: frame.node(f.text) for pin, f in zip(definition.pins, nodes)}
        prefix = frame.prefix + name + "."
        return Frame(definition, prefix, pins, scope, frame, self, frame.depth + 1)


def _placed(definition: Definition) -> list[tuple[Definition, Card, int]]:
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
    stack = [(top, iter(_placed(top)))]
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
                stack.append((child, iter(_placed(child))))
                break
        else:
            state[id(definition)] = 2
            path.pop()
            stack.pop()


def flatten(netlist: Netlist, overrides: dict[str, float] | None = None, unknown: str = "error") -> Circuit:
    """Expand the hierarchy and evaluate every value; an override naming no global
    ``.param`` is an error (``unknown="error"``) or recorded in ``circuit.unknown_params``
    (``"record"``: a batch decides, as one netlist of several may not use a corner's parameter)."""
    return Flattener(netlist, overrides, unknown).run()
