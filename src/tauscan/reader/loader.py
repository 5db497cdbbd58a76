"""Files -> a tree of definitions (the top level and its ``.subckt`` blocks).

This stage follows ``.include`` and ``.lib``, sorts every card into the
definition it belongs to and keeps the control cards' settings.  Nothing is
evaluated yet: parameters may be defined after their use, so values wait for
:mod:`tauscan.reader.flatten`.
"""

from __future__ import annotations

import os
import re
from bisect import insort
from dataclasses import dataclass, field

from tauscan.circuit import ELEMENT_KINDS
from tauscan.errors import HierarchyError, IncludeError, NetlistSyntaxError
from tauscan.reader.fields import Braced, Field, Param, Quoted, Text, Word, assignments, card_fields
from tauscan.reader.lines import Card, DeviceLine, PlainRun, logical_items, read_chunks
from tauscan.reader.options import ReadOptions

#: A '.param' card's directive (and the white space after it).
_PARAM_CARD = re.compile(r"\s*\.params?\b\s*", re.I)

#: The head of a model card (``.model NAME TYPE``): a library's model cards (in a file that the
#: netlist includes) are kept as cards and parsed when an element uses them, since a PDK
#: library holds hundreds of cards of hundreds of parameters each, few of them used.
_MODEL_HEAD = re.compile(r"\s*\.model\s+([^\s=(){}'\",]+)\s+[A-Za-z_]\w*(?=[\s(]|\Z)", re.I)

#: A binned model card's name: ``base.N`` (the bins of one device, chosen by L and W).
_BIN_NAME = re.compile(r"(.+)\.(\d+)\Z")

def _bin_number(name: str) -> int:
    return int(name.rsplit(".", 1)[1])


#: Deepest chain of nested ``.include`` files.
MAX_INCLUDE_DEPTH = 64

#: Control cards that are recognised and skipped (analysis and output requests, etc.).
SKIPPED_CARDS = frozenset(
    "op ac dc tran noise pz tf sens disto four print plot probe meas measure save "
    "ic nodeset width data enddata csparam func net save step".split()
)
#: A control card's directive, read off its text (skipped cards are never parsed: their
#: expressions, ``v(a,b)=0`` say, are another language).
_DIRECTIVE = re.compile(r"\s*\.([A-Za-z_]\w*)")
#: ``.temp 25`` and ``.temp=25``: the value's text after the directive.
_TEMP_CARD = re.compile(r"\s*\.temp\b\s*=?\s*", re.I)
#: A path written for Windows: a drive letter, or back slashes.
_WINDOWS_PATH = re.compile(r"\A[A-Za-z]:[\\/]|\\")


@dataclass
class Definition:
    """The top level or one ``.subckt``: its pins, parameters, models, elements."""

    name: str
    pins: list[str]
    card: Card | None
    parent: "Definition | None"
    defaults: dict[str, tuple[Field, Card]] = field(default_factory=dict)
    params: dict[str, tuple[Field, Card]] = field(default_factory=dict)
    #: model cards by name: their fields after the name (None until first use for a library's
    #: cards: :meth:`model_fields` gives them) and the card
    models: dict[str, tuple[list[Field] | None, Card]] = field(default_factory=dict)
    subckts: dict[str, "Definition"] = field(default_factory=dict)
    #: binned models: a base name -> the names of its ``base.N`` cards, in N order
    bins: dict[str, list[str]] = field(default_factory=dict)
    #: element cards as ``(name, fields, card)``, runs of plain lines and plain MOSFET lines,
    #: in file order
    elements: list[tuple[str, list[Field], Card] | PlainRun | DeviceLine] = field(default_factory=list)

    def model_fields(self, name: str) -> tuple[list[Field], Card]:
        """The fields of model card ``name`` after its name (its type first), parsed on first
        use for the cards of a library (see :data:`_MODEL_HEAD`)."""
        fields, card = self.models[name]
        if fields is None:
            fields = card_fields(card)[1][2:]
            if not fields or type(fields[0]) is not Word:
                raise card.error(NetlistSyntaxError, "'.model' needs a name and a type", 0)
            self.models[name] = (fields, card)
        return fields, card

    def find_subckt(self, name: str) -> "Definition | None":
        scope: Definition | None = self
        while scope is not None:
            found = scope.subckts.get(name)
            if found is not None:
                return found
            scope = scope.parent
        return None


@dataclass
class Netlist:
    """Everything read from the files, before evaluation."""

    title: str
    file: str
    top: Definition
    options: dict[str, tuple[Field, Card] | str] = field(default_factory=dict)
    temp: tuple[Field, Card] | None = None
    global_nodes: set[str] = field(default_factory=set)
    warnings: list[str] = field(default_factory=list)


def _word(f: Field) -> str | None:
    return f.text if type(f) is Word else None


def _filename(f: Field) -> str | None:
    if type(f) in (Text, Quoted, Word):
        return f.text
    return None


class Loader:
    """Reads a netlist and the files it includes into a :class:`Netlist`."""

    def __init__(self, path: str, progress=None, lib_section: str | None = None,
                 options: ReadOptions | None = None) -> None:
        self.path = path
        self.options = options or ReadOptions()
        #: the '.alter' card that ended the reading, if any
        self.altered: Card | None = None
        self.progress = progress
        #: a corner's section: replaces the section of every ``.lib FILE SECTION`` card whose
        #: file has a section of that name
        self.lib_section = lib_section.lower() if lib_section else None
        self.lib_cards = 0
        self.lib_used = False
        self.lib_depth = 0  # how many '.lib' sections the current card is inside
        self.stack: list[Definition] = []
        # (real path, section or None) of every file being read: a library's sections may
        # select other sections of the same file, but never themselves
        self.include_chain: list[tuple[str, str | None]] = []
        self.netlist: Netlist | None = None

    def load(self) -> Netlist:
        title, cards = logical_items(read_chunks(self.path, progress=self.progress), self.path, has_title=True)
        if not title and not cards:
            raise NetlistSyntaxError("the netlist is empty", self.path, 1, 1, "")
        top = Definition("", [], None, None)
        self.netlist = Netlist(title, self.path, top)
        self.stack = [top]
        self.include_chain = [(os.path.realpath(self.path), None)]
        self._cards(cards)
        if len(self.stack) > 1:
            open_def = self.stack[-1]
            assert open_def.card is not None
            raise open_def.card.error(HierarchyError, f"'.subckt {open_def.name}' is never closed by '.ends'", 0)
        if not top.elements and not top.subckts and not top.models:
            raise NetlistSyntaxError("the netlist has no elements", self.path, 1, 1, title)
        if self.lib_section and not self.lib_used:
            where = (f"none of its {self.lib_cards} '.lib FILE SECTION' cards reads a file with that section"
                     if self.lib_cards else "it has no '.lib FILE SECTION' card")
            raise IncludeError(f"the corner selects .lib section {self.lib_section!r}, but {where}", self.path)
        return self.netlist

    # -- card dispatch ---------------------------------------------------------
    def _cards(self, cards: list[Card | PlainRun | DeviceLine]) -> None:
        skip_section: Card | None = None
        for card in cards:
            if self.altered is not None:
                return
            if type(card) is not Card:  # a run of plain lines, or a plain MOSFET line
                if skip_section is None:
                    self.stack[-1].elements.append(card)
                continue
            text = card.text.lstrip()
            if skip_section is not None:
                if text[:5].lower() == ".endl":
                    skip_section = None
                continue
            if text[:1] == ".":
                head = _DIRECTIVE.match(text)
                name = head.group(1).lower() if head else ""
                if name in SKIPPED_CARDS:
                    continue
                if name in ("alter", "title", "temp"):
                    self._special(card, name)
                    continue
            if len(self.include_chain) > 1 and text[:6].lower() == ".model":
                head = _MODEL_HEAD.match(text)
                if head is not None:  # a library's model card: parsed when an element uses it
                    self._model(card, head.group(1).lower(), None)
                    continue
            try:
                kind, fields = card_fields(card)
            except NetlistSyntaxError:
                if not _PARAM_CARD.match(text):
                    raise
                # a '.param' card the card grammar cannot split (an expression with white
                # space and '=' or quotes inside): its assignments are found on the text
                self._params(card, None)
                continue
            if kind == "element":
                self._element(card, fields)
                continue
            directive = fields[0].text.lower()
            if directive == ".lib" and len(fields) == 2 and type(fields[1]) is Word:
                # a section definition inside a file read whole: not selected, skip it
                skip_section = card
                continue
            self._control(card, directive, fields[1:])

    def _element(self, card: Card, fields: list[Field]) -> None:
        name = fields[0].text.lower()
        letter = name[0]
        if letter not in ELEMENT_KINDS:
            raise card.error(NetlistSyntaxError, f"unknown element letter {letter!r} (element {fields[0].text!r})", fields[0].offset)
        self.stack[-1].elements.append((name, fields, card))

    def _control(self, card: Card, directive: str, args: list[Field]) -> None:
        net = self.netlist
        assert net is not None
        name = directive[1:]
        if name == "subckt":
            self._subckt(card, args)
        elif name == "ends":
            if len(self.stack) == 1:
                raise card.error(HierarchyError, "'.ends' with no open '.subckt'", 0)
            closing = self.stack[-1]
            if args and _word(args[0]) is not None and args[0].text.lower() != closing.name:
                raise card.error(
                    HierarchyError, f"'.ends {args[0].text}' closes '.subckt {closing.name}'", args[0].offset
                )
            self.stack.pop()
        elif name == "model":
            if len(args) < 2 or _word(args[0]) is None or _word(args[1]) is None:
                raise card.error(NetlistSyntaxError, "'.model' needs a name and a type", 0)
            self._model(card, args[0].text.lower(), args[1:])
        elif name == "param" or name == "params":
            if not args:
                raise card.error(NetlistSyntaxError, "'.param' with no assignment", 0)
            self._params(card, args)
        elif name in ("include", "inc"):
            if not args or _filename(args[0]) is None:
                raise card.error(IncludeError, "'.include' needs a file name", 0)
            self._include(card, args[0], None)
        elif name == "lib":
            if len(args) < 2 or _filename(args[0]) is None or _word(args[1]) is None:
                raise card.error(IncludeError, "'.lib' needs a file name and a section name", 0)
            self._include(card, args[0], args[1].text.lower())
        elif name == "endl":
            pass
        elif name == "global":
            for f in args:
                if type(f) is Word:
                    net.global_nodes.add(f.text.lower())
        elif name in ("option", "options", "opt"):
            for f in args:
                if type(f) is Param:
                    net.options[f.key] = (f.value, card)
                elif type(f) is Word:
                    if f.text.lower() == "scale":
                        raise card.error(NetlistSyntaxError, "'.option scale' needs a value (scale=1u)", f.offset)
                    net.options[f.text.lower()] = "on"
        elif name in SKIPPED_CARDS:
            pass
        else:
            net.warnings.append(f"{card.file}:{card.line}: '{directive}' is not understood and was skipped")

    def _special(self, card: Card, name: str) -> None:
        """'.alter' (the reading ends: the netlist is analysed as it stands before it), '.title'
        and '.temp' (which may be written '.temp=25')."""
        net = self.netlist
        assert net is not None
        text = card.text
        if name == "alter":
            self.altered = card
            net.warnings.append(f"{card.file}:{card.line}: '.alter' and everything after it are ignored: the netlist is "
                                "analysed as it stands before the first '.alter' (scan each alteration as its own netlist, "
                                "or as a corner)")
        elif name == "title":
            net.title = text.strip()[len(".title"):].strip()
        else:
            match = _TEMP_CARD.match(text)
            assert match is not None
            value = text[match.end():].strip()
            if not value:
                raise card.error(NetlistSyntaxError, "'.temp' needs a value", 0)
            first = value.split()[0]
            net.temp = (Braced(first, match.end()), card)

    def _model(self, card: Card, name: str, fields: list[Field] | None) -> None:
        current = self.stack[-1]
        if name not in current.models:
            binned = _BIN_NAME.match(name)
            if binned is not None:
                insort(current.bins.setdefault(binned.group(1), []), name, key=_bin_number)
        current.models[name] = (fields, card)

    def _params(self, card: Card, args: list[Field] | None) -> None:
        """The assignments of a '.param' card (``args``: its fields after the directive, or None
        when the grammar could not split it)."""
        current = self.stack[-1]
        if args is None or any(type(f) is not Param for f in args):
            match = _PARAM_CARD.match(card.text)
            assert match is not None
            args = assignments(card, match.end())
        for f in args:
            current.params[f.key] = (f.value, card)

    def _subckt(self, card: Card, args: list[Field]) -> None:
        if not args or _word(args[0]) is None:
            raise card.error(HierarchyError, "'.subckt' needs a name", 0)
        name = args[0].text.lower()
        pins: list[str] = []
        defaults: dict[str, tuple[Field, Card]] = {}
        first = next((k for k, f in enumerate(args) if type(f) is Param), len(args))
        if any(type(f) is not Param for f in args[first:]):
            # defaults written as expressions with white space: found on the text
            args = args[:first] + assignments(card, args[first].offset)
        for f in args[1:]:
            if type(f) is Word:
                word = f.text.lower()
                if word in ("params:", "param:"):
                    continue
                if defaults:
                    raise card.error(HierarchyError, f"pin {f.text!r} after the parameters", f.offset)
                pins.append(word)
            elif type(f) is Param:
                defaults[f.key] = (f.value, card)
            else:
                raise card.error(NetlistSyntaxError, "unexpected field in '.subckt'", f.offset)
        parent = self.stack[-1]
        definition = Definition(name, pins, card, parent, defaults)
        if name in parent.subckts:
            previous = parent.subckts[name].card
            assert previous is not None
            raise card.error(
                HierarchyError, f"subcircuit {name!r} is defined twice (first at {previous.file}:{previous.line})", args[0].offset
            )
        parent.subckts[name] = definition
        self.stack.append(definition)

    def _include(self, card: Card, name_field: Field, section: str | None) -> None:
        what = "'.lib'" if section else "'.include'"
        path = self._find(card, name_field, what)
        real = os.path.realpath(path)
        if section is None and any(r == real for r, _ in self.include_chain):
            raise card.error(IncludeError, f"{what} of {path} includes itself (an include cycle)", name_field.offset)
        if len(self.include_chain) >= MAX_INCLUDE_DEPTH:
            raise card.error(IncludeError, f"includes nested deeper than {MAX_INCLUDE_DEPTH}", name_field.offset)
        try:
            chunks = read_chunks(path)
        except IncludeError as exc:
            raise card.error(IncludeError, f"{what} of {path}: {exc.message}", name_field.offset) from None
        _, cards = logical_items(chunks, path, has_title=False)
        if section is not None:
            # only the netlist's own '.lib' cards: a library's sections select each other
            if self.lib_depth == 0:
                self.lib_cards += 1
                if self.lib_section and self.lib_section in _section_names(cards):
                    section = self.lib_section
                    self.lib_used = True
            if (real, section) in self.include_chain:
                raise card.error(IncludeError, f"{what} section {section!r} of {path} selects itself (an include cycle)",
                                 name_field.offset)
            cards = self._section(cards, section, card, name_field, path)
        self.include_chain.append((real, section))
        self.lib_depth += section is not None
        try:
            self._cards(cards)
        finally:
            self.include_chain.pop()
            self.lib_depth -= section is not None

    def _find(self, card: Card, name_field: Field, what: str) -> str:
        """The file an include names: beside the file that names it, else in the include
        folders, in order.  Back slashes are read as folder separators; the message shows the
        name as written."""
        raw = name_field.text
        if not raw.strip():
            raise card.error(IncludeError, f"{what} needs a file name, not an empty one", name_field.offset)
        written = os.path.expanduser(raw.replace("\\", "/") if "\\" in raw else raw)
        folders = [os.path.dirname(card.file), *self.options.include_dirs]
        for folder in folders:
            path = os.path.normpath(os.path.join(folder, written))
            if os.path.isfile(path):
                return path
        first = os.path.normpath(os.path.join(folders[0], written))
        where = f"as {first}" if not self.options.include_dirs else \
            f"as {first} and in {', '.join(self.options.include_dirs)}"
        windows = " (a Windows path: give the folder that holds the file on this machine)" \
            if _WINDOWS_PATH.search(raw) else ""
        raise card.error(IncludeError, f"{what} file not found: {raw!r}, looked {where}{windows}; add its folder with "
                         "-I DIR (or include-dirs in the settings), or give the operating point with --op and "
                         "leave the file out", name_field.offset)

    @staticmethod
    def _section(cards: list, section: str, card: Card, name_field: Field, path: str) -> list:
        chosen: list = []
        inside = False
        found = False
        sections: list[str] = []
        for c in cards:
            if type(c) is not Card:
                if inside:
                    chosen.append(c)
                continue
            words = c.text.split()
            head = words[0].lower() if words else ""
            if not inside and head == ".lib" and len(words) == 2:
                sections.append(words[1].lower())
                if words[1].lower() == section:
                    inside = found = True
                continue
            if inside and head == ".endl":
                inside = False
                continue
            if inside:
                chosen.append(c)
        if not found:
            known = ", ".join(sections) or "none"
            raise card.error(
                IncludeError, f"section {section!r} not found in {path} (sections there: {known})", name_field.offset
            )
        return chosen


def _section_names(cards: list) -> set[str]:
    names = set()
    for c in cards:
        if type(c) is not Card:
            continue
        words = c.text.split()
        if len(words) == 2 and words[0].lower() == ".lib":
            names.add(words[1].lower())
    return names


def load(path: str, progress=None, lib_section: str | None = None, options: ReadOptions | None = None) -> Netlist:
    """Read ``path`` and its includes into a :class:`Netlist` (``progress(done, total)``:
    bytes of the top file read so far; ``lib_section``: a corner's ``.lib`` section;
    ``options``: the include folders)."""
    return Loader(path, progress, lib_section, options).load()
