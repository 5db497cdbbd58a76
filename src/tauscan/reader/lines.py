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
from array import array
from itertools import accumulate, chain, compress, repeat
from operator import itemgetter

import numpy as np

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


#: White space as :meth:`str.isspace` (and ``\\s`` in a pattern) has it, written out (a test
#: holds the two to each other): a class holding ``\\s`` checks every character with a call,
#: a class of listed characters with a bit table.
_SPACE = "\\t\\n\\x0b\\x0c\\r\\x1c-\\x1f \\x85\\xa0\\u1680\\u2000-\\u200a\\u2028\\u2029\\u202f\\u205f\\u3000"
#: What a word of a plain line never holds.
_NOT_WORD = _SPACE + """=(){}'",;$"""
#: Possessive repetition where Python has it (3.11): no repetition here ever has to give back
#: what it took (each is followed by what it cannot take), so the engine may skip its records.
_Q = "+" if sys.version_info >= (3, 11) else ""
#: A word of a plain line: the grammar's WORD (grammar/netlist.lark) without ';' and '$'
#: (which may start comments).  A test holds lines this matches to what the grammar reads.
_PLAIN_WORD = rf"""(?:[^{_NOT_WORD}.][^{_NOT_WORD}]*{_Q}|\.[^{_NOT_WORD}A-Za-z_][^{_NOT_WORD}]*{_Q})"""
#: The name of a plain line: R or C, then what a grammar WORD may hold.
_PLAIN_NAME = rf"""[rRcC][^{_NOT_WORD}]*{_Q}"""
_GAP = rf"[ \t]+{_Q}"
#: A plain two-terminal line: an R or C name, two nodes and a value, and nothing else.
PLAIN_LINE = re.compile(
    rf"""({_PLAIN_NAME}){_GAP}({_PLAIN_WORD}){_GAP}({_PLAIN_WORD}){_GAP}({_PLAIN_WORD})[ \t]*{_Q}""")
#: The body of a plain MOSFET line: a name, four nodes, a model, then only ``key=value`` pairs
#: of plain words.  Such a line is handed on as a :class:`DeviceLine`, not a card.
_PLAIN_DEVICE = (rf"""[mM][^{_NOT_WORD}]*{_Q}""" + f"{_GAP}{_PLAIN_WORD}" * 5
                 + rf"""(?:{_GAP}{_PLAIN_WORD}={_PLAIN_WORD})*{_Q}[ \t]*{_Q}""")
PLAIN_DEVICE = re.compile(_PLAIN_DEVICE)
#: A block of plain lines (group 1, perhaps empty), then the line after it (group 2 when that
#: is a plain MOSFET line, :data:`PLAIN_DEVICE`, else group 3) or the end of the text.  The
#: search of a chunk's text goes block by block: plain lines take no Python step.
PLAIN_BLOCK = re.compile(
    rf"""^((?:{_PLAIN_NAME}{_GAP}{_PLAIN_WORD}{_GAP}{_PLAIN_WORD}{_GAP}{_PLAIN_WORD}[ \t]*{_Q}\n)*{_Q})"""
    rf"""(?:({_PLAIN_DEVICE})\n|([^\n]*{_Q})\n|\Z)""", re.M)
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
    and their physical line numbers; ``blocks`` keeps their text, block by block (for a
    line that turns out to stand apart)."""

    __slots__ = ("kinds", "names", "a", "b", "values", "lines", "blocks", "ground_names")

    def __init__(self, blocks: tuple[str, ...], counts: list[int], start: list[int], row: list[int]) -> None:
        """``blocks``: the text of the plain lines, every line ending with a line feed;
        ``counts[k]`` lines in block ``k``, the first of them line ``start[k]`` and row
        ``row[k]``."""
        text = "".join(blocks).lower()
        #: whether a node may be named as ground otherwise than "0" (see the flattener)
        self.ground_names = "gnd" in text
        words = text.split()  # four words a line
        del text
        self.names: list[str] = words[0::4]
        self.kinds: list[str] = list(map(itemgetter(0), self.names))
        self.a: list[str] = words[1::4]
        self.b: list[str] = words[2::4]
        self.values: list[str] = words[3::4]
        # line numbers: row i of block k is line start[k] + i - row[k] (machine integers)
        numbers = np.arange(len(self.names), dtype=np.int64)
        numbers += np.repeat(np.subtract(start[:-1], row[:-1], dtype=np.int64), counts)
        self.lines = array("q", numbers.tobytes())
        self.blocks = blocks


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
    """The text of one netlist file, a chunk of whole lines at a time (each line ending in one
    LF: :func:`normalized`), read and decoded a chunk at a time (so that no more than one
    chunk of the file is ever held besides what the caller keeps).  The file is opened at once, so that a missing file is an error of this call;
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
                    yield normalized(decode(pending, shown, line))
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
            text = normalized(decode(data[:cut] if pending else data, shown, line))
            del data, chunk
            line += text.count("\n")
            yield text
            del text
            if progress is not None:
                progress(done, size)


def normalized(text: str) -> str:
    """The text with every line ending in one LF: the line ends :meth:`str.splitlines` knows
    (CR LF, CR, form feed, ...) made LF, and one added after a last line without it."""
    if _other_line_ends(text):
        return "\n".join(text.splitlines()) + "\n"
    if text and text[-1] != "\n":
        return text + "\n"
    return text


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
    return logical_items([normalized(lines)], file, has_title=has_title)


def logical_items(chunks: Iterable[str], file: str, *, has_title: bool) -> tuple[str, list[Card | PlainRun]]:
    """Cards and runs of plain lines of one file in order, and its title (the first line)
    when ``has_title``.

    ``chunks`` are the file's text, whole lines at a time, every line ending in one LF (as
    :func:`read_chunks` gives them; see :func:`normalized`).
    ``.end`` stops reading; ``.control`` ... ``.endc`` blocks are skipped whole.
    """
    state = _PrePass(file, has_title)
    for text in chunks:
        if not state.chunk(text):
            break
    return state.title, state.items


class _Stretch:
    """The lines of matches ``lo`` to ``k`` of a chunk's search (the blocks of all of them,
    the MOSFET lines of all but the last): rows ``lo`` to ``hi`` of the columns, and the
    MOSFET lines among them as ``(text, line number, row it stands before)``."""

    __slots__ = ("columns", "row", "lo", "hi", "devices")

    def __init__(self, columns: "PlainColumns", devices: tuple[str, ...], row: list[int], start: list[int],
                 lo: int, k: int) -> None:
        self.columns = columns
        self.row = row
        self.lo = row[lo]
        self.hi = row[k + 1] if k < len(devices) else row[k]
        matches = list(compress(range(lo, k), devices[lo:k]))  # those that end in a MOSFET line
        after = list(map((1).__add__, matches))
        texts = map(devices.__getitem__, matches)
        numbers = map((-1).__add__, map(start.__getitem__, after))  # the line of match j: start[j + 1] - 1
        rows = map(row.__getitem__, after)  # it stands before the next match's block
        self.devices = list(zip(texts, numbers, rows))


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

        One search of the text (:data:`PLAIN_BLOCK`) cuts it into blocks of plain lines, each
        followed by one line: a plain MOSFET line or any other.  Only the other lines that are
        not blank take a Python step each; the blocks, the MOSFET lines between them and
        their line numbers are taken in columns."""
        if not text:
            return True
        first = self.number + 1  # the line number at ``pos``
        self.number += text.count("\n")
        pos = 0
        if first == 1 and self.has_title:  # the title is never a card
            pos = text.index("\n") + 1
            self.title = text[: pos - 1].strip()
            first = 2
        found = PLAIN_BLOCK.findall(text, pos)
        del text
        if not found:
            return True
        blocks, devices, others = zip(*found)
        del found
        counts = list(map(str.count, blocks, repeat("\n")))
        # match k: its block's rows start at row[k] and line start[k]; its own line is
        # start[k + 1] - 1 (the last matches, at the end of the text, have none)
        row = list(accumulate(counts, initial=0))
        start = list(accumulate(map((1).__add__, counts), initial=first))
        columns = PlainColumns(blocks, counts, start, row)
        try:
            return self._matches(columns, blocks, devices, others, row, start)
        finally:
            columns.blocks = ()  # needed no more: the text is let go

    def _matches(self, columns: "PlainColumns", blocks: tuple[str, ...], devices: tuple[str, ...],
                 others: tuple[str, ...], row: list[int], start: list[int]) -> bool:
        """The lines of one chunk's matches (see :meth:`chunk`)."""
        if max(map(len, others)) > MAX_LINE_CHARS or max(map(len, devices)) > MAX_LINE_CHARS:
            self._long_line(others, devices, start)
        if max(map(len, blocks)) > MAX_LINE_CHARS:
            for k, block in enumerate(blocks):
                if len(block) > MAX_LINE_CHARS:
                    self._long_plain_line(block, start[k])
        lo = 0  # the first match whose lines are not yet taken
        for k in compress(range(len(others)), others):  # the lines that are neither plain nor blank
            raw = others[k]
            stripped = raw.lstrip()
            if not stripped or stripped[0] == "*":
                continue
            head = stripped[:6].lower()
            if self.in_control:
                if head.startswith(".endc"):
                    self.in_control = False
                    lo = k + 1  # the plain and MOSFET lines inside are dropped
                continue
            # the lines before this one form a run (the last of them stands apart when this
            # line continues it); none when this line directly follows another such line (a
            # library's model cards: thousands of '+' lines in a row)
            if lo < k or row[k + 1] > row[k]:
                stretch = _Stretch(columns, devices, row, start, lo, k)
                if stripped[0] == "+":
                    last = self._close(stretch)
                    if last is not None:  # a plain MOSFET line, continued: a card after all
                        self.current = last.card()
                        self.items.append(self.current)
                else:
                    self._run(stretch, stretch.hi, stretch.devices)
            lo = k + 1
            if head.startswith(".contr"):
                self.in_control = True
                continue
            if not self._line(raw, stripped, head, start[k + 1] - 1):
                return False
        if not self.in_control:
            # the last line stays apart: the next chunk may continue it
            last = self._close(_Stretch(columns, devices, row, start, lo, len(others)))
            if last is not None:
                self.current = last
                self.items.append(last)
        return True

    def _close(self, stretch: "_Stretch") -> DeviceLine | None:
        """Take a stretch into a run, all but its last line: a plain last line becomes a card
        (the current one), a plain MOSFET line is given back."""
        devices = stretch.devices
        rows = stretch.hi
        if rows > stretch.lo and (not devices or devices[-1][2] < rows):
            self._run(stretch, rows - 1, devices)
            self.current = self._plain_card(stretch, rows - 1)
            return None
        if devices:
            self._run(stretch, rows, devices[:-1])
            raw, number, _ = devices[-1]
            return DeviceLine(raw, self.file, number)
        return None

    def _run(self, stretch: "_Stretch", hi: int, devices: list[tuple[str, int, int]]) -> None:
        if devices:
            raws, numbers, at = map(list, zip(*devices))
            self.items.append(PlainRun(stretch.columns, stretch.lo, hi, self.file, raws, numbers, at))
        elif hi > stretch.lo:
            self.items.append(PlainRun(stretch.columns, stretch.lo, hi, self.file))

    def _plain_card(self, stretch: "_Stretch", i: int) -> Card:
        """Row ``i`` of the columns, a plain line, as a card of its own."""
        columns = stretch.columns
        k = bisect.bisect_right(stretch.row, i) - 1  # the match whose block holds the row
        block = columns.blocks[k]
        lines = block.split("\n")
        raw = lines[i - stretch.row[k]]
        card = Card(raw, self.file, columns.lines[i], "", raw)
        self.items.append(card)
        return card

    def _long_line(self, others: tuple[str, ...], devices: tuple[str, ...], start: list[int]) -> None:
        for k, (other, device) in enumerate(zip(others, devices)):
            raw = other or device
            if len(raw) > MAX_LINE_CHARS:
                raise NetlistSyntaxError(
                    f"line of {len(raw)} characters is longer than the limit of {MAX_LINE_CHARS}", self.file,
                    start[k + 1] - 1, 1, raw[:60])

    def _long_plain_line(self, piece: str, first: int) -> None:
        for k, raw in enumerate(piece.split("\n")):
            if len(raw) > MAX_LINE_CHARS:
                raise NetlistSyntaxError(
                    f"line of {len(raw)} characters is longer than the limit of {MAX_LINE_CHARS}", self.file,
                    first + k, 1, raw[:60])

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
