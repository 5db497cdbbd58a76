"""Definitions -> a flat :class:`~tauscan.circuit.Circuit`, every value evaluated.

Instances are expanded with an explicit stack (no Python recursion), so the
depth of a hierarchy is limited only by :data:`MAX_DEPTH`.  Recursive
definitions are found beforehand on the static graph of which subcircuit
places which.
"""

from __future__ import annotations

import math
import re
from itertools import repeat
from operator import attrgetter, itemgetter, methodcaller

from tauscan.circuit import DEFAULT_MOS_LENGTH, DEFAULT_MOS_WIDTH, GROUND, Circuit, Element, Model
from tauscan.errors import ExpressionError, HierarchyError, NetlistSyntaxError, SettingsError, TauscanError, did_you_mean
from tauscan.reader.checks import check_recursion, placed, undefined_models
from tauscan.reader.elements import RULES, check_passive_value
from tauscan.reader.fields import Field, Group, Param, Word, card_fields, show
from tauscan.reader.lines import Card, DeviceLine, PlainRun, PlainValueCard
from tauscan.reader.loader import Definition, Netlist
from tauscan.reader.options import ReadOptions
from tauscan.reader.scope import ParamScope, ReadContext, field_value
from tauscan.units import eng, parse_number, unknown_suffix

#: Numbers already met as plain words (text -> a finite float); bounded like parse_number's memo.
_NUMBERS: dict[str, float] = {}
_NUMBERS_MAX = 200_000

_MISSING = object()

#: A bin limit written ``key = number`` on a model card (for choosing a bin without parsing it).
#: an identifier in a card's text (parameter names may hold dots)
_IDENT = re.compile(r"[A-Za-z_][\w.]*")
_BIN_LIMIT = re.compile(r"(?<![\w.])(lmin|lmax|wmin|wmax)\s*=\s*([^\s=(){}'\",]*)", re.I)

#: Deepest chain of nested subcircuit instances.
MAX_DEPTH = 1000

GROUND_NAMES = frozenset(["0", "gnd", "gnd!"])
_GROUND_OF = {name: GROUND for name in GROUND_NAMES}


#: The first six words of a line and the rest (see :meth:`Flattener._device_elements`).
_SEVEN = methodcaller("split", None, 6)


def _within(value: float, lo: float, hi: float) -> bool:
    """``lo <= value < hi``, both ends with a relative tolerance of 1e-9 (a geometry written
    in microns and scaled is not exactly the card's number)."""
    tol = 1e-9 * abs(value)
    return lo - tol <= value < hi - tol


def _plain_number(text: str) -> float | None:
    """The finite number a word writes (lower case), remembered; None when it is not one, or
    when letters follow it that are no scale suffix and no unit (the caller's slower path reads
    it in the netlist's dialect and says so)."""
    value = _NUMBERS.get(text)
    if value is None:
        value = parse_number(text)
        if value is None or not math.isfinite(value) or (text[-1].isalpha() and unknown_suffix(text) is not None):
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

    __slots__ = ("definition", "prefix", "pins", "scope", "parent", "flattener", "depth", "_models", "_nodes",
                 "mult", "solo", "origin")

    def __init__(self, definition: Definition, prefix: str, pins: dict[str, str], scope: ParamScope, parent: "Frame | None",
                 flattener: "Flattener", depth: int, mult: float = 1.0, solo: str | None = None,
                 origin: Card | None = None) -> None:
        self.definition = definition
        self.prefix = prefix
        self.pins = pins
        self.scope = scope
        self.parent = parent
        self.flattener = flattener
        self.depth = depth
        self._models: dict[str, str | None] = {}
        self._nodes: dict[str, str] = {}
        #: how many copies of this instance stand in parallel (``m=`` on the X lines above it)
        self.mult = mult
        #: the instance's name when its definition holds one element only (a device wrapper,
        #: as PDK libraries write): that element is reported under it
        self.solo = solo
        #: the X line of a device wrapper: its device is placed there (file, line and the
        #: comment, where a designer writes an inline waiver), not on the library's line
        self.origin = origin

    def element_name(self, name: str) -> str:
        """The flat name of an element written ``name`` in this instance."""
        return self.solo or self.prefix + name

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

    def model(self, raw: str, instance: dict[str, float] | None = None) -> str | None:
        """Flat name of the model an element names, None when there is none.  A binned model
        (``name.1``, ``name.2``, ...) is chosen by the element's geometry, ``instance``; without
        it a binned name gives None."""
        key = raw.lower()
        found = self._models.get(key, _MISSING)
        if found is _MISSING:
            found, binned = self.flattener.model_for(self, key, instance)
            if not binned:
                self._models[key] = found
        return found


class Flattener:
    def __init__(self, netlist: Netlist, overrides: dict[str, float] | None = None, unknown: str = "error",
                 options: ReadOptions | None = None) -> None:
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
        self.context = ReadContext(x_mega=(options or ReadOptions()).x_mega)
        self.top_scope = ParamScope(top.params, None, overrides or {}, self.context)
        self.circuit.global_nodes = set(self.global_nodes)
        self.circuit.warnings.extend(netlist.warnings)
        #: the name of every element taken so far (in the table or not)
        self.names: set[str] = set()
        #: the parameters of plain MOSFET lines by their text: lines that read the same share
        #: one dictionary (elements' parameters are never changed once read)
        self.param_sets: dict[str, dict[str, float]] = {}
        #: (instance prefix, bin card name) -> its (lmin, lmax, wmin, wmax)
        self.bin_limits: dict[tuple, tuple[float, float, float, float]] = {}
        #: the identifiers a model card's text holds, per (definition, card name)
        self.card_words: dict[tuple[int, str], frozenset[str]] = {}
        #: a card's sharing key -> its flat name; how many flat names a card has
        self.shared_models: dict[tuple, str] = {}
        self.shared_count: dict[tuple[int, str], int] = {}
        #: ``.option scale`` (geometry written in its units), set with the other options
        self.scale = 1.0
        #: MOSFETs whose scaled W or L is below 1 nm: (name, W, L)
        self.tiny_geometry: list[tuple[str, float, float]] = []
        #: id of a definition -> whether it holds one element only (a device wrapper)
        self.solo_definitions: dict[int, bool] = {}

    # -- models ----------------------------------------------------------------
    def model_for(self, frame: Frame, name: str, instance: dict[str, float] | None = None) -> tuple[str | None, bool]:
        """Flat name of model ``name`` as seen from ``frame`` (lexical scope), built on first use,
        and whether it was chosen among bins (by ``instance``'s geometry)."""
        owner: Definition | None = frame.definition
        while owner is not None and name not in owner.models and name not in owner.bins:
            owner = owner.parent
        if owner is None:
            return None, False
        # the frame that instantiated the owning definition gives the name prefix and parameters
        host: Frame | None = frame
        while host is not None and host.definition is not owner:
            host = host.parent
        if host is None:
            host = frame
        binned = name not in owner.models
        if binned:
            if instance is None:
                return None, True
            name = self._bin(owner, host, name, instance)
        # a card inside a subcircuit is the same card in every instance whose parameters it
        # names have the same values: one Model per such set of values, named by its definition
        # (a foundry's device wrapper holds such cards; 10^4 wrapped devices of a few sizes then
        # evaluate each card a few times)
        if host.parent is not None:
            key = self._sharing_key(owner, name, host)
            flat = self.shared_models.get(key)
            if flat is None:
                count = self.shared_count.get(key[:2], 0)
                self.shared_count[key[:2]] = count + 1
                flat = self.shared_models[key] = f"{owner.name}/{name}" + (f"~{count + 1}" if count else "")
        else:
            flat = host.prefix + name
        if flat not in self.circuit.models:
            fields, card = owner.model_fields(name)
            self.circuit.models[flat] = self._model(flat, fields, card, host, name)
        return flat, binned

    def _sharing_key(self, owner: Definition, name: str, host: Frame) -> tuple:
        """``(definition, card, values)``: the values, in ``host``, of the parameters local to the
        instances that model card ``name`` of ``owner`` names (the top level's are the same for
        every instance)."""
        key = (id(owner), name)
        words = self.card_words.get(key)
        if words is None:
            words = self.card_words[key] = frozenset(w.lower() for w in _IDENT.findall(owner.models[name][1].text))
        local: set[str] = set()
        frame: Frame | None = host
        while frame is not None and frame.parent is not None:
            d = frame.definition
            local.update(words.intersection(d.defaults), words.intersection(d.params),
                         words.intersection(frame.scope.values))
            frame = frame.parent
        values = []
        for word in sorted(local):
            try:
                values.append((word, host.scope.get(word)))
            except (KeyError, TauscanError):
                values.append((word, host.prefix))  # not evaluable here: this instance's own card
        return (id(owner), name, tuple(values))

    def _bin(self, owner: Definition, host: Frame, base: str, instance: dict[str, float]) -> str:
        """The bin of model ``base`` for an element's geometry: ``lmin <= L < lmax`` and
        ``wmin <= W/nf < wmax`` (the half-open rule of SPICE binning, with the width per finger
        as SKY130 is binned; common practice, from memory), L and W in metres after
        ``.option scale``.  Raises (unlocated) when no bin fits."""
        s = self.scale
        length = instance["l"] * s if "l" in instance else DEFAULT_MOS_LENGTH
        width = (instance["w"] * s if "w" in instance else DEFAULT_MOS_WIDTH) / max(instance.get("nf", 1.0), 1.0)
        ranges = []
        for name in owner.bins[base]:
            # limits written as plain numbers are the same in every instance of the owner: one
            # entry per card (a netlist of 10^4 wrapped devices reads each bin card's text once)
            limits = self.bin_limits.get((id(owner), name))
            if limits is None:
                key = (host.prefix, name)
                limits = self.bin_limits.get(key)
                if limits is None:
                    limits, plain = self._limits(owner, name, host)
                    self.bin_limits[(id(owner), name) if plain else key] = limits
            lmin, lmax, wmin, wmax = limits
            if _within(length, lmin, lmax) and _within(width, wmin, wmax):
                return name
            ranges.append(limits)
        lo_l = min(r[0] for r in ranges)
        hi_l = max(r[1] for r in ranges)
        lo_w = min(r[2] for r in ranges)
        hi_w = max(r[3] for r in ranges)
        raise NetlistSyntaxError(
            f"no bin of model {base!r} fits L={eng(length, 'm')} and W/nf={eng(width, 'm')} "
            f"(its {len(ranges)} bins span L {eng(lo_l, 'm')} to {eng(hi_l, 'm')}, "
            f"W/nf {eng(lo_w, 'm')} to {eng(hi_w, 'm')})")

    @staticmethod
    def _limits(owner: Definition, name: str, host: Frame) -> tuple[tuple[float, float, float, float], bool]:
        """``(lmin, lmax, wmin, wmax)`` of a bin card, evaluated alone (not the whole card): read
        off its text when they are plain numbers (then also True: the same in every instance),
        else from its parsed fields (False)."""
        card = owner.models[name][1]
        found = {"lmin": 0.0, "lmax": math.inf, "wmin": 0.0, "wmax": math.inf}
        written = {m.group(1).lower(): m.group(2) for m in _BIN_LIMIT.finditer(card.text)}
        numbers = {key: _plain_number(text.lower()) for key, text in written.items()}
        if None not in numbers.values() and len(written) == len(_BIN_LIMIT.findall(card.text)):
            found.update(numbers)
            return (found["lmin"], found["lmax"], found["wmin"], found["wmax"]), True
        fields, card = owner.model_fields(name)
        for f in fields[1:]:
            for item in (f.items if type(f) is Group else (f,)):
                if type(item) is Param and item.key in found:
                    found[item.key] = host.value(item.value, card)
        return (found["lmin"], found["lmax"], found["wmin"], found["wmax"]), False

    def _model(self, flat: str, fields: list[Field], card: Card, frame: Frame, written: str) -> Model:
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
        return Model(flat, mtype, params, card.file, card.line, written)

    # -- expansion ---------------------------------------------------------------
    def run(self) -> Circuit:
        top = self.netlist.top
        check_recursion(top)
        self._check_unplaced(top)
        root = Frame(top, "", {}, self.top_scope, None, self, 0)
        self._settings(root)
        # models that the netlist itself defines at the top are kept even when no element uses
        # them; a library's models are evaluated only when an element uses them (a PDK library
        # holds hundreds, some for parameters that only other corners define)
        for name, (_, card) in top.models.items():
            if card.file == self.netlist.file:
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
                self._add(self._element(frame, name, fields, card), card, frame)
        self.circuit.warnings.extend(self.context.warnings)
        if self.tiny_geometry:
            count, first, width, length = len(self.tiny_geometry), *self.tiny_geometry[0]
            self.circuit.warnings.append(
                f"{count} MOSFET(s) have W or L below 1 nm after '.option scale={self.scale:g}' (first: {first}, "
                f"W={eng(width, 'm')}, L={eng(length, 'm')}): a value written with a micro suffix (w=2u) is "
                "scaled again; with that option write w=2 l=0.15")
        return self.circuit

    def _finish(self, element: Element, mult: float) -> None:
        """``.option scale`` on a MOSFET's geometry (W, L and the diffusion lengths SA, SB, SD times
        the scale, areas times its square, perimeters times it, as SPICE simulators apply it), and ``mult`` parallel
        copies of an instance (``m=`` on the X lines above the element)."""
        kind = element.kind
        params = dict(element.params)  # (shared between elements: never changed in place)
        if kind == "m" and self.scale != 1.0:
            s = self.scale
            # (the diffusion lengths SA, SB, SD of BSIM4's stress effect are lengths too)
            for key, power in (("w", 1), ("l", 1), ("ad", 2), ("as", 2), ("pd", 1), ("ps", 1), ("sa", 1), ("sb", 1),
                               ("sd", 1)):
                if key in params:
                    params[key] *= s**power
            width, length = params.get("w", DEFAULT_MOS_WIDTH), params.get("l", DEFAULT_MOS_LENGTH)
            if min(width, length) < 1e-9:
                self.tiny_geometry.append((element.name, width, length))
        if mult != 1.0:
            if kind in "rcmqd":
                params["m"] = params.get("m", 1.0) * mult
            elif kind == "l":
                element.value = element.value / mult
            elif kind in "igf":
                element.value = element.value * mult
                spec = element.source
                if spec is not None:
                    spec.dc *= mult
                    spec.ac_mag *= mult
        element.params = params

    def _check_unplaced(self, top: Definition) -> None:
        """The subcircuits of the netlist's own files that no instance places are checked too:
        a model their devices name and nobody defines is a warning (file:line), so a library
        is not taken on trust.  A netlist of subcircuits only (a library) is an error that says
        so, and names the first such model if there is one."""
        reached = {id(top)}
        stack = [top]
        while stack:
            for child, _, _ in placed(stack.pop()):
                if id(child) not in reached:
                    reached.add(id(child))
                    stack.append(child)
        own = self.netlist.file
        unplaced: list[Definition] = []
        stack = list(top.subckts.values())
        while stack:
            d = stack.pop()
            if d.card is not None and d.card.file == own and id(d) not in reached:
                unplaced.append(d)
            stack.extend(d.subckts.values())
        unplaced.sort(key=lambda d: d.card.line)
        problems: list[TauscanError] = []
        for d in unplaced:
            problems.extend(undefined_models(d))
        for exc in problems:
            self.circuit.warnings.append(f"{exc.where()}: {exc.message}")
        if not top.elements and top.subckts:
            names = sorted(top.subckts)
            shown = ", ".join(names[:6]) + (", ..." if len(names) > 6 else "")
            if problems:
                first = problems[0]
                raise type(first)(f"{first.message}; and the netlist holds only subcircuit definitions ({shown})",
                                  first.file, first.line, first.col, first.text)
            raise HierarchyError(f"the netlist holds only subcircuit definitions ({len(names)}: {shown}) and places none: "
                                 "it is a library; scan a testbench that instantiates one of them",
                                 own, 1, 1, self.netlist.title)

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
        scale = self.circuit.options.get("scale")
        if scale is not None:
            f, card = net.options["scale"]  # (the loader refuses a bare 'scale')
            if not isinstance(scale, float) or not scale > 0:
                raise card.error(NetlistSyntaxError, f"'.option scale' must be a positive number, not {show(f)!r}", f.offset)
            self.scale = scale

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
        if frame.mult != 1.0 or self.scale != 1.0:
            for element in elements:
                self._finish(element, frame.mult)
        if frame.origin is not None:
            for element in elements:
                _place_at(element, frame.origin)
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
        models = list(map(known.get, map(itemgetter(5), parts)))
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
        if frame.solo:
            names = [frame.solo] * len(names)
        elif frame.prefix:
            names = list(map(frame.prefix.__add__, names))
        count = len(parts)
        return list(map(Element, names, repeat("m", count), nodes, repeat(None, count), models, params,
                        repeat(run.file, count), run.device_lines))

    def _rows(self, frame: Frame, run: PlainRun, lo: int, hi: int) -> tuple:
        """Rows ``lo`` to ``hi`` of a run's columns evaluated and checked, not yet taken:
        ``(frame, lo, hi, names, kinds, values, warnings)``."""
        columns = run.columns
        names = columns.names[lo:hi]
        if frame.solo:
            names = [frame.solo] * len(names)
        elif frame.prefix:
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
        if frame.mult != 1.0:  # copies in parallel: resistors divide, capacitors add
            mult = frame.mult
            values = [v / mult if kind == "r" else v * mult for kind, v in zip(kinds, values)]
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
            self._add(self._element(frame, fields[0].text.lower(), fields, card), card, frame)
            return
        self._add(element, item, frame)

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
        return Element(frame.element_name(words[0]), "m", nodes, None, model, params, item.file, item.line)

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
        if name[0] in "vi":  # a source reads its fields in order: 'AC=0.5 90' is a magnitude and a phase
            pos = fields[1:]
        else:
            for f in fields[1:]:
                (params if type(f) is Param else pos).append(f)
        return RULES[name[0]](name[0], frame.element_name(name), pos, params, card, frame)

    def _add(self, element: Element, card: Card | DeviceLine, frame: Frame) -> None:
        if frame.mult != 1.0 or (self.scale != 1.0 and element.kind == "m"):
            self._finish(element, frame.mult)
        if frame.origin is not None:
            _place_at(element, frame.origin)
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
        raw = dict(definition.params)
        raw.update(definition.defaults)
        given = {f.key: f for f in params}
        mult = frame.mult
        for key in ("m", "mult"):
            f = given.get(key)
            if f is not None and key not in raw:  # not a parameter of the subcircuit: copies in parallel
                del given[key]
                copies = frame.value(f.value, card)
                if not copies > 0:
                    raise card.error(NetlistSyntaxError, f"'{key}=' must be positive, not {copies:g}", f.value.offset)
                mult *= copies
        for key, f in given.items():
            if key not in raw:
                raise card.error(HierarchyError, f"subcircuit {definition.name!r} has no parameter {key!r}"
                                 + did_you_mean(key, raw), f.offset)
        scope = ParamScope(raw, frame.scope)
        _InstanceValues(given, card, frame.scope, scope, scope.values).run()
        pins = {pin: frame.node(f.text) for pin, f in zip(definition.pins, nodes)}
        prefix = frame.prefix + name + "."
        solo = frame.prefix + name if self._single_element(definition) else None
        return Frame(definition, prefix, pins, scope, frame, self, frame.depth + 1, mult, solo, card if solo else None)

    def _single_element(self, definition: Definition) -> bool:
        """Whether a definition holds exactly one element, a semiconductor device (M, Q or D), and
        nothing else: a device wrapper, as PDK libraries write them (a lone R or C keeps its own
        name under the instance's)."""
        known = self.solo_definitions.get(id(definition))
        if known is None:
            items = definition.elements
            first = items[0] if len(items) == 1 else None
            known = (type(first) is DeviceLine
                     or (type(first) is tuple and first[0][0] in "mqd")
                     or (type(first) is PlainRun and first.hi == first.lo and len(first.devices or ()) == 1))
            self.solo_definitions[id(definition)] = known
        return known


def _place_at(element: Element, card: Card) -> None:
    """A wrapped device placed at its instance line: that line's file, line and comment."""
    element.file, element.line = card.file, card.line
    element.comment = card.comment


class _InstanceValues:
    """The parameters an instance line gives, evaluated: a name in one of them is another
    parameter of the same line (``ad='int((nf+1)/2) * W/nf * 0.29'``, as schematic tools write
    for PDK devices), else a parameter of the scope of the line (so ``w={w}`` passes the
    caller's ``w`` down), else a default of the subcircuit."""

    __slots__ = ("given", "card", "outer", "inner", "values", "busy", "context")

    def __init__(self, given: dict[str, Param], card: Card, outer: ParamScope, inner: ParamScope,
                 values: dict[str, float]) -> None:
        self.given, self.card, self.outer, self.inner, self.values = given, card, outer, inner, values
        self.busy: list[str] = []
        self.context = outer.context

    def run(self) -> None:
        for key in self.given:
            self.value(key)

    def value(self, key: str) -> float:
        found = self.values.get(key)
        if found is not None:
            return found
        f = self.given[key]
        if key in self.busy:
            raise self.card.error(ExpressionError, f"instance parameter {key!r} depends on itself (a parameter cycle)",
                                  f.value.offset)
        self.busy.append(key)
        try:
            found = field_value(f.value, self.card, self)
        finally:
            self.busy.pop()
        self.values[key] = found
        return found

    def get(self, name: str) -> float:
        """The value of a name in the expression of parameter ``self.busy[-1]``."""
        if name != self.busy[-1] and name in self.given:
            return self.value(name)
        try:
            return self.outer.get(name)
        except KeyError:
            if name == self.busy[-1] or name not in self.inner.raw:
                raise
            return self.inner.get(name)


def flatten(netlist: Netlist, overrides: dict[str, float] | None = None, unknown: str = "error",
            options: ReadOptions | None = None) -> Circuit:
    """Expand the hierarchy and evaluate every value; an override naming no global
    ``.param`` is an error (``unknown="error"``) or recorded in ``circuit.unknown_params``
    (``"record"``: a batch decides, as one netlist of several may not use a corner's parameter)."""
    return Flattener(netlist, overrides, unknown, options).run()
