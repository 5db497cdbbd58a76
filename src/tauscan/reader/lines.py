"""The line pre-pass: raw text -> logical lines ("cards") with their origin.

It decodes the file, drops comment lines, strips inline comments (kept aside,
because waivers live there), joins ``+`` continuation lines (comment and blank
lines may stand between them) and remembers, for every character of the joined
text, the original line and column, so that errors point into the real file.

Plain two-terminal lines (:data:`PLAIN_LINE`) get no card: a chunk's plain lines are
split into columns at once (:class:`PlainColumns`) and handed on as runs
(:class:`PlainRun`) between the cards, in file order.
"""

from __future__ import annotations

import bisect
import os
import re
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from itertools import chain, compress
from operator import itemgetter, not_

from tauscan.errors import IncludeError, NetlistSyntaxError

#: Longest physical line we accept; anything longer is almost certainly not a netlist.
MAX_LINE_CHARS = 1_000_000
#: Largest netlist file we read (bytes).
MAX_FILE_BYTES = 2_000_000_000


@dataclass(slots=True)
class Card:
    """One logical line: the joined text of a card and where each part came from."""

    text: str
    file: str
    line: int
    comment: str = ""
    raw: str = ""
    # For cards joined from '+' lines: (offset in text, physical line, column of that
    # offset in the physical line) per piece, and the physical lines; None for one line.
    segments: list[tuple[int, int, int]] | None = None
    physical: list[str] | None = None

    def locate(self, offset: int) -> tuple[int, int, str]:
        """Physical (line, 1-based column, source line text) of a text offset."""
        if not self.segments or not self.physical:
            return self.line, offset + 1, self.raw
        starts = [s[0] for s in self.segments]
        k = max(bisect.bisect_right(starts, offset) - 1, 0)
        start, line, col0 = self.segments[k]
        return line, col0 + (offset - start) + 1, self.physical[k]

    def error(self, cls: type, message: str, offset: int = 0):
        """An error of class ``cls`` located at ``offset`` in this card."""
        line, col, src = self.locate(offset)
        return cls(message, self.file, line, col, src)


#: A word of a plain line: the grammar's WORD (grammar/netlist.lark) without ';' and '$'
#: (which may start comments).  A test holds lines this matches to what the grammar reads.
_PLAIN_WORD = r"""(?:[^\s=(){}'",.;$][^\s=(){}'",;$]*|\.[^\sA-Za-z_=(){}'",;$][^\s=(){}'",;$]*)"""
#: A plain two-terminal line: an R or C name, two nodes and a value, and nothing else
#: (matched on the line in lower case: every word of a plain line is case-insensitive).
PLAIN_LINE = re.compile(
    rf"""([rc][^\s=(){{}}'",;$]*)[ \t]+({_PLAIN_WORD})[ \t]+({_PLAIN_WORD})[ \t]+({_PLAIN_WORD})[ \t]*""")
_GROUPS = re.Match.groups
#: A plain MOSFET line (in lower case): a name, four nodes, a model, then only ``key=value``
#: pairs of plain words.  Such a line is handed on as a :class:`DeviceLine`, not a card.
PLAIN_DEVICE = re.compile(
    rf"""m[^\s=(){{}}'",;$]*(?:[ \t]+{_PLAIN_WORD}){{5}}(?:[ \t]+{_PLAIN_WORD}={_PLAIN_WORD})*[ \t]*""")


@dataclass(slots=True)
class DeviceLine:
    """A plain MOSFET line (:data:`PLAIN_DEVICE`), kept as written: the flattener splits it
    itself, and makes it a card (:meth:`card`) only for an error or anything unusual."""

    raw: str
    file: str
    line: int

    def card(self) -> Card:
        return Card(self.raw, self.file, self.line, "", self.raw)

    def error(self, cls: type, message: str, offset: int = 0):
        return self.card().error(cls, message, offset)


class PlainColumns:
    """The plain lines of one chunk in columns, lower case (names, nodes, the value's text),
    and their physical line numbers."""

    __slots__ = ("kinds", "names", "a", "b", "values", "lines")

    def __init__(self, matches: list, numbers: list[int]) -> None:
        groups = list(map(_GROUPS, matches))
        self.names: list[str] = list(map(itemgetter(0), groups))
        self.kinds: list[str] = list(map(itemgetter(0), self.names))
        self.a: list[str] = list(map(itemgetter(1), groups))
        self.b: list[str] = list(map(itemgetter(2), groups))
        self.values: list[str] = list(map(itemgetter(3), groups))
        self.lines: list[int] = numbers


@dataclass(slots=True)
class PlainRun:
    """Consecutive plain lines of one file (rows ``lo`` to ``hi`` of a chunk's columns)."""

    columns: PlainColumns
    lo: int
    hi: int
    file: str

    def card(self, k: int) -> Card:
        """Row ``k`` of the run as a card, for an error or a warning about it: the line is read
        again from the file (plain lines keep only their words)."""
        number = self.columns.lines[self.lo + k]
        raw = _physical_line(self.file, number)
        if raw is None:
            c = self.columns
            i = self.lo + k
            raw = " ".join((c.names[i], c.a[i], c.b[i], c.values[i]))
        return Card(raw, self.file, number, "", raw)


class PlainValueCard:
    """Stands for the card of a plain line's value while it is evaluated or checked: the line
    is read again only when an error must show it (a netlist may hold thousands of plain lines
    whose values name parameters).  Offsets given to :meth:`error` count from the value's start."""

    __slots__ = ("run", "k", "word")

    def __init__(self, run: PlainRun, k: int, word: str) -> None:
        self.run, self.k, self.word = run, k, word

    def error(self, cls: type, message: str, offset: int = 0):
        card = self.run.card(self.k)
        return card.error(cls, message, card.text.lower().rindex(self.word) + offset)


def _physical_line(path: str, number: int) -> str | None:
    try:
        for k, raw in enumerate(read_lines(path), 1):
            if k == number:
                return raw
    except (IncludeError, NetlistSyntaxError):  # the file changed or vanished since: the caller rebuilds the line
        return None
    return None


#: Bytes read and decoded at a time: the file is never held whole, in bytes or in text.
CHUNK_BYTES = 4 << 20


def decode(data: bytes, file: str, first_line: int = 1) -> str:
    """Text of (a chunk of) a netlist file that starts at ``first_line``: UTF-8 (a BOM at the
    very start is dropped); NUL bytes and anything that is not UTF-8 are errors."""
    pos = data.find(b"\x00")
    if pos >= 0:
        line = first_line + data.count(b"\n", 0, pos)
        raise NetlistSyntaxError("binary content (a NUL byte); this is not a netlist", file, line, None)
    if first_line == 1 and data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = first_line + data.count(b"\n", 0, exc.start)
        start = data.rfind(b"\n", 0, exc.start) + 1
        col = exc.start - start + 1
        end = data.find(b"\n", exc.start)
        shown = data[start : end if end >= 0 else len(data)].decode("utf-8", "replace")
        raise NetlistSyntaxError(
            f"byte 0x{data[exc.start]:02x} is not UTF-8; save the netlist as UTF-8", file, line, col, shown
        ) from None


def read_lines(path: str, shown: str | None = None, progress: Callable[[int, int], None] | None = None) -> Iterator[str]:
    """The lines of one netlist file (see :func:`read_chunks`)."""
    return chain.from_iterable(read_chunks(path, shown, progress))


def read_chunks(path: str, shown: str | None = None, progress: Callable[[int, int], None] | None = None) -> Iterator[list[str]]:
    """The lines of one netlist file, a chunk's list at a time, read and decoded a chunk at
    a time (so that no more than one chunk of the file is ever held besides what the caller
    keeps).  The file is opened at once, so that a missing file is an error of this call;
    ``progress(done, total)`` is told the bytes read after each chunk."""
    shown = shown or path
    try:
        handle = open(path, "rb")
    except FileNotFoundError:
        raise IncludeError("file not found", shown) from None
    except IsADirectoryError:
        raise IncludeError("is a directory, not a netlist file", shown) from None
    except OSError as exc:
        raise IncludeError(f"cannot read the file ({exc.strerror})", shown) from None
    try:
        size = os.fstat(handle.fileno()).st_size
    except OSError:
        size = 0
    if size > MAX_FILE_BYTES:
        handle.close()
        raise IncludeError(f"file larger than {MAX_FILE_BYTES} bytes", shown)
    return _chunked_lines(handle, shown, size, progress)


def _chunked_lines(handle, shown: str, size: int, progress) -> Iterator[list[str]]:
    line = 1
    done = 0
    pending = b""
    with handle:
        while True:
            try:
                chunk = handle.read(CHUNK_BYTES)
            except OSError as exc:
                raise IncludeError(f"cannot read the file ({exc.strerror})", shown) from None
            done += len(chunk)
            if done > MAX_FILE_BYTES:
                raise IncludeError(f"file larger than {MAX_FILE_BYTES} bytes", shown)
            if not chunk:
                if pending:
                    yield decode(pending, shown, line).splitlines()
                return
            data = pending + chunk if pending else chunk
            cut = data.rfind(b"\n") + 1
            if cut == 0:  # old-style CR line ends: a CR that cannot be half of a CR LF
                cut = data.rfind(b"\r", 0, len(data) - 1) + 1
            if cut == 0:  # no end of line yet: one very long line
                if len(data) > 4 * MAX_LINE_CHARS + 4:
                    raise NetlistSyntaxError(
                        f"line longer than the limit of {MAX_LINE_CHARS} characters", shown, line, 1,
                        data[:60].decode("utf-8", "replace"))
                pending = data
                continue
            pending = data[cut:]
            text = decode(data[:cut] if pending else data, shown, line)
            del data, chunk
            lines = text.splitlines()  # the chunk ends with a line end: one entry per line
            del text
            line += len(lines)
            yield lines
            del lines
            if progress is not None:
                progress(done, size)


def _split_comment(raw: str) -> tuple[str, str]:
    """Split off an inline comment: ``;`` anywhere, ``$`` at the start or after white space.

    Quotes and braces protect their contents, so ``{a;b}`` is never cut.
    """
    if ";" not in raw and "$" not in raw:
        return raw, ""
    depth = 0
    quote = ""
    prev = " "
    for i, ch in enumerate(raw):
        if quote:
            if ch == quote:
                quote = ""
        elif ch in "'\"":
            quote = ch
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth = max(depth - 1, 0)
        elif depth == 0 and (ch == ";" or (ch == "$" and prev in " \t")):
            return raw[:i], raw[i + 1 :].strip()
        prev = ch
    return raw, ""


def logical_lines(lines: str | list[str], file: str, *, has_title: bool) -> tuple[str, list[Card | PlainRun]]:
    """Cards and plain runs of one file's text (or list of lines), and its title
    (see :func:`logical_items`)."""
    if isinstance(lines, str):
        lines = lines.splitlines()
    return logical_items([lines], file, has_title=has_title)


def logical_items(chunks: Iterable[list[str]], file: str, *, has_title: bool) -> tuple[str, list[Card | PlainRun]]:
    """Cards and runs of plain lines of one file in order, and its title (the first line)
    when ``has_title``.

    ``chunks`` are the file's lines, a list at a time (as :func:`read_chunks` gives them).
    ``.end`` stops reading; ``.control`` ... ``.endc`` blocks are skipped whole.
    """
    state = _PrePass(file, has_title)
    for lines in chunks:
        if not state.chunk(lines):
            break
    return state.title, state.items


class _PrePass:
    """The state of the pre-pass across chunks: the card being continued, a ``.control``
    block, the title, and the items so far."""

    def __init__(self, file: str, has_title: bool) -> None:
        self.file = file
        self.has_title = has_title
        self.title = ""
        self.items: list[Card | PlainRun | DeviceLine] = []
        self.current: Card | DeviceLine | None = None
        self.in_control = False
        self.number = 0  # physical lines before the chunk at hand

    def chunk(self, lines: list[str]) -> bool:
        """Take one chunk of lines; False once ``.end`` is read."""
        first = self.number + 1
        self.number += len(lines)
        matches = list(map(PLAIN_LINE.fullmatch, map(str.lower, lines)))
        if first == 1 and self.has_title and matches:
            matches[0] = None  # the title is never a card
        if max(map(len, lines), default=0) > MAX_LINE_CHARS:  # the line-by-line path says which
            matches = [None] * len(lines)
        at = list(compress(range(len(lines)), matches))
        columns = PlainColumns(list(compress(matches, matches)), list(map(first.__add__, at))) if at else None
        lo = 0  # the first plain row not yet taken into a run or a card
        for i in compress(range(len(lines)), map(not_, matches)):
            raw = lines[i]
            number = first + i
            if number == 1 and self.has_title:
                self.title = raw.strip()
                continue
            if len(raw) > MAX_LINE_CHARS:
                raise NetlistSyntaxError(
                    f"line of {len(raw)} characters is longer than the limit of {MAX_LINE_CHARS}", self.file, number, 1,
                    raw[:60])
            stripped = raw.lstrip()
            if not stripped or stripped[0] == "*":
                continue
            head = stripped[:6].lower()
            if self.in_control:
                if head.startswith(".endc"):
                    self.in_control = False
                    lo = bisect.bisect_left(at, i, lo)  # the plain lines inside are dropped
                continue
            # the plain lines before this one form a run (the last of them is a card of its own
            # when this line continues it)
            hi = bisect.bisect_left(at, i, lo)
            if stripped[0] == "+" and hi > lo:
                self._run(columns, lo, hi - 1)
                self.current = self._plain_card(lines, at[hi - 1], first)
            else:
                self._run(columns, lo, hi)
            lo = hi
            if head.startswith(".contr"):
                self.in_control = True
                continue
            if not self._line(raw, stripped, head, number):
                return False
        if not self.in_control:
            # the last plain line stays a card: the next chunk may continue it
            hi = len(at)
            if hi > lo:
                self._run(columns, lo, hi - 1)
                self.current = self._plain_card(lines, at[hi - 1], first)
        return True

    def _run(self, columns: PlainColumns | None, lo: int, hi: int) -> None:
        if hi > lo and columns is not None:
            self.items.append(PlainRun(columns, lo, hi, self.file))

    def _plain_card(self, lines: list[str], i: int, first: int) -> Card:
        card = Card(lines[i], self.file, first + i, "", lines[i])
        self.items.append(card)
        return card

    def _line(self, raw: str, stripped: str, head: str, number: int) -> bool:
        """One line that is not plain, not a comment and not in a ``.control`` block."""
        file = self.file
        body, comment = _split_comment(raw)
        if stripped[0] == "+":
            plus = raw.index("+")
            current = self.current
            if current is None:
                raise NetlistSyntaxError("continuation line '+' with no card before it", file, number, plus + 1, raw)
            if type(current) is DeviceLine:  # continued: a card after all, in its place
                at = len(self.items) - 1
                while self.items[at] is not current:  # it is among the last few items
                    at -= 1
                current = self.current = self.items[at] = current.card()
            piece = body[plus + 1 :]
            if current.segments is None or current.physical is None:
                current.segments = [(0, current.line, 0)]
                current.physical = [current.raw]
            current.segments.append((len(current.text) + 1, number, plus + 1))
            current.physical.append(raw)
            current.text += " " + piece
            if comment:
                current.comment = (current.comment + " " + comment).strip()
            return True
        if not body.strip():
            return True  # a line holding only an inline comment
        if head.startswith(".end") and (len(head) == 4 or not head[4].isalnum()):
            self.current = None
            return False
        if raw[0] in "mM" and not comment and PLAIN_DEVICE.fullmatch(raw.lower()):
            self.current = DeviceLine(raw, file, number)
        else:
            self.current = Card(body, file, number, comment, raw)
        self.items.append(self.current)
        return True
