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
import sys
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from itertools import chain
from operator import itemgetter

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
#: The name of a plain line: R or C, then what a grammar WORD may hold.
_PLAIN_NAME = r"""[rRcC][^\s=(){}'",;$]*"""
#: A plain two-terminal line: an R or C name, two nodes and a value, and nothing else.
PLAIN_LINE = re.compile(
    rf"""({_PLAIN_NAME})[ \t]+({_PLAIN_WORD})[ \t]+({_PLAIN_WORD})[ \t]+({_PLAIN_WORD})[ \t]*""")
#: The body of a plain MOSFET line: a name, four nodes, a model, then only ``key=value`` pairs
#: of plain words.  Such a line is handed on as a :class:`DeviceLine`, not a card.
_PLAIN_DEVICE = (rf"""[mM][^\s=(){{}}'",;$]*(?:[ \t]+{_PLAIN_WORD}){{5}}"""
                 rf"""(?:[ \t]+{_PLAIN_WORD}={_PLAIN_WORD})*[ \t]*""")
PLAIN_DEVICE = re.compile(_PLAIN_DEVICE)
#: A block of plain lines (group 1, perhaps empty), then the line after it (group 2 set when
#: that is a plain MOSFET line, :data:`PLAIN_DEVICE`) or the end of the text.  The search of a
#: chunk's text goes block by block: plain lines take no Python step.  On Python 3.11 and
#: later the repetition is possessive (a block is never given back; it would never have to
#: be), which spares the regular-expression engine its backtracking records.
PLAIN_BLOCK = re.compile(
    rf"""^((?:{_PLAIN_NAME}[ \t]+{_PLAIN_WORD}[ \t]+{_PLAIN_WORD}[ \t]+{_PLAIN_WORD}[ \t]*\n)*"""
    + ("+" if sys.version_info >= (3, 11) else "")
    + rf""")(?:({_PLAIN_DEVICE})\n|[^\n]*\n|\Z)""", re.M)
#: Line ends other than LF that :meth:`str.splitlines` knows (a chunk holding one is rejoined).
_OTHER_LINE_ENDS = "\r\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029"


def _other_line_ends(text: str) -> bool:
    """Whether ``text`` holds a line end other than LF (one scan of the text per character:
    much quicker than a search for a class of characters)."""
    return any(end in text for end in _OTHER_LINE_ENDS)


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

    def __init__(self) -> None:
        self.kinds: list[str] = []
        self.names: list[str] = []
        self.a: list[str] = []
        self.b: list[str] = []
        self.values: list[str] = []
        self.lines: list[int] = []

    def fill(self, pieces: list[str], numbers: list[int]) -> None:
        """Take the text of the plain lines (every line ends with a line feed): four words a
        line, split at once."""
        words = "".join(pieces).lower().split()
        self.names = words[0::4]
        self.kinds = list(map(itemgetter(0), self.names))
        self.a = words[1::4]
        self.b = words[2::4]
        self.values = words[3::4]
        self.lines = numbers


@dataclass(slots=True)
class PlainRun:
    """Consecutive plain lines of one file (rows ``lo`` to ``hi`` of a chunk's columns), and
    the plain MOSFET lines among them (:data:`PLAIN_DEVICE`): ``devices[k]``, the text of line
    ``device_lines[k]``, stands before row ``at[k]``."""

    columns: PlainColumns
    lo: int
    hi: int
    file: str
    devices: list[str] | None = None
    device_lines: list[int] | None = None
    at: list[int] | None = None

    def device(self, k: int) -> DeviceLine:
        return DeviceLine(self.devices[k], self.file, self.device_lines[k])

    def card(self, i: int) -> Card:
        """Row ``i`` of the columns as a card, for an error or a warning about it: the line is
        read again from the file (plain lines keep only their words)."""
        c = self.columns
        number = c.lines[i]
        raw = _physical_line(self.file, number)
        if raw is None:
            raw = " ".join((c.names[i], c.a[i], c.b[i], c.values[i]))
        return Card(raw, self.file, number, "", raw)


class PlainValueCard:
    """Stands for the card of a plain line's value while it is evaluated or checked: the line
    is read again only when an error must show it (a netlist may hold thousands of plain lines
    whose values name parameters).  Offsets given to :meth:`error` count from the value's start."""

    __slots__ = ("run", "i", "word")

    def __init__(self, run: PlainRun, i: int, word: str) -> None:
        self.run, self.i, self.word = run, i, word  # row ``i`` of the run's columns

    def error(self, cls: type, message: str, offset: int = 0):
        card = self.run.card(self.i)
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
CHUNK_BYTES = 1 << 20


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
    return chain.from_iterable(map(str.splitlines, read_chunks(path, shown, progress)))


def read_chunks(path: str, shown: str | None = None, progress: Callable[[int, int], None] | None = None) -> Iterator[str]:
    """The text of one netlist file, a chunk of whole lines at a time, read and decoded a
    chunk at a time (so that no more than one chunk of the file is ever held besides what the
    caller keeps).  The file is opened at once, so that a missing file is an error of this call;
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
    return _chunked_text(handle, shown, size, progress)


def _chunked_text(handle, shown: str, size: int, progress) -> Iterator[str]:
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
                    yield decode(pending, shown, line)
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
            line += _line_count(text)
            yield text
            del text
            if progress is not None:
                progress(done, size)


def _line_count(text: str) -> int:
    """Lines in a text that ends with a line end (as :meth:`str.splitlines` counts them)."""
    if not _other_line_ends(text):
        return text.count("\n")
    return len(text.splitlines())


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
    if not isinstance(lines, str):
        lines = "".join(line + "\n" for line in lines)
    return logical_items([lines], file, has_title=has_title)


def logical_items(chunks: Iterable[str], file: str, *, has_title: bool) -> tuple[str, list[Card | PlainRun]]:
    """Cards and runs of plain lines of one file in order, and its title (the first line)
    when ``has_title``.

    ``chunks`` are the file's text, whole lines at a time (as :func:`read_chunks` gives them).
    ``.end`` stops reading; ``.control`` ... ``.endc`` blocks are skipped whole.
    """
    state = _PrePass(file, has_title)
    for text in chunks:
        if not state.chunk(text):
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

    def chunk(self, text: str) -> bool:
        """Take one chunk of whole lines; False once ``.end`` is read.

        The search (:data:`PLAIN_BLOCK`) takes the plain lines a block at a time; those are
        kept as pieces of text and split into columns at the end of the chunk, four words a
        line."""
        if _other_line_ends(text):
            text = "\n".join(text.splitlines()) + "\n"
        elif text[-1:] != "\n":
            text += "\n"
        line = self.number + 1  # the number of the line at ``pos``
        self.number += text.count("\n")
        pos = 0
        if line == 1 and self.has_title:  # the title is never a card
            pos = text.index("\n") + 1
            self.title = text[: pos - 1].strip()
            line = 2
        columns = PlainColumns()
        pieces: list[str] = []  # the text of the plain lines taken, in order
        numbers: list[int] = []  # their line numbers
        rows = 0  # plain lines taken
        lo = 0  # the first plain row not yet taken into a run or a card
        devices: list[str] = []  # plain MOSFET lines since then
        device_lines: list[int] = []  # their line numbers
        at: list[int] = []  # the row each stands before
        try:
            for match in PLAIN_BLOCK.finditer(text, pos):
                start, end = match.span(1)
                if end > start:  # plain lines
                    count = text.count("\n", start, end)
                    if not self.in_control:  # (plain lines inside a .control block are dropped)
                        if end - start > MAX_LINE_CHARS:
                            self._long_plain_line(text[start:end], line)
                        pieces.append(text[start:end])
                        numbers += range(line, line + count)
                        rows += count
                    line += count
                stop = match.end()
                if stop == end:  # the end of the text
                    break
                raw = text[end : stop - 1]
                number = line
                line += 1
                if len(raw) > MAX_LINE_CHARS:
                    raise NetlistSyntaxError(
                        f"line of {len(raw)} characters is longer than the limit of {MAX_LINE_CHARS}", self.file,
                        number, 1, raw[:60])
                if match.lastindex == 2 and not self.in_control:  # a plain MOSFET line: part of the run
                    devices.append(raw)
                    device_lines.append(number)
                    at.append(rows)
                    continue
                stripped = raw.lstrip()
                if not stripped or stripped[0] == "*":
                    continue
                head = stripped[:6].lower()
                if self.in_control:
                    if head.startswith(".endc"):
                        self.in_control = False
                    continue
                # the lines before this one form a run (the last of them is a card of its own
                # when this line continues it)
                if stripped[0] == "+":
                    last = self._close(columns, pieces, numbers, lo, rows, devices, device_lines, at)
                    if last is not None:  # a plain MOSFET line, continued: a card after all
                        self.current = last.card()
                        self.items.append(self.current)
                else:
                    self._run(columns, lo, rows, devices, device_lines, at)
                lo = rows
                devices, device_lines, at = [], [], []
                if head.startswith(".contr"):
                    self.in_control = True
                    continue
                if not self._line(raw, stripped, head, number):
                    return False
            if not self.in_control:
                # the last line stays apart: the next chunk may continue it
                last = self._close(columns, pieces, numbers, lo, rows, devices, device_lines, at)
                if last is not None:
                    self.current = last
                    self.items.append(last)
            return True
        finally:
            if rows:
                columns.fill(pieces, numbers)

    def _close(self, columns: PlainColumns, pieces: list[str], numbers: list[int], lo: int, rows: int,
               devices: list[str], device_lines: list[int], at: list[int]) -> DeviceLine | None:
        """Take the lines since row ``lo`` into a run, all but the last: a plain last line
        becomes a card (the current one), a plain MOSFET line is given back."""
        if rows > lo and (not devices or at[-1] < rows):
            self._run(columns, lo, rows - 1, devices, device_lines, at)
            self.current = self._plain_card(pieces[-1], numbers[rows - 1])
            return None
        if devices:
            self._run(columns, lo, rows, devices[:-1], device_lines[:-1], at[:-1])
            return DeviceLine(devices[-1], self.file, device_lines[-1])
        return None

    def _long_plain_line(self, piece: str, first: int) -> None:
        for k, raw in enumerate(piece.split("\n")):
            if len(raw) > MAX_LINE_CHARS:
                raise NetlistSyntaxError(
                    f"line of {len(raw)} characters is longer than the limit of {MAX_LINE_CHARS}", self.file,
                    first + k, 1, raw[:60])

    def _run(self, columns: PlainColumns, lo: int, hi: int, devices: list[str], device_lines: list[int],
             at: list[int]) -> None:
        if devices:
            self.items.append(PlainRun(columns, lo, hi, self.file, devices, device_lines, at))
        elif hi > lo:
            self.items.append(PlainRun(columns, lo, hi, self.file))

    def _plain_card(self, piece: str, number: int) -> Card:
        """The last line of a piece of plain lines as a card of its own."""
        raw = piece[piece.rfind("\n", 0, len(piece) - 1) + 1 : -1]
        card = Card(raw, self.file, number, "", raw)
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
        self.current = Card(body, file, number, comment, raw)
        self.items.append(self.current)
        return True
