"""The line pre-pass: raw text -> logical lines ("cards") with their origin.

It decodes the file, drops comment lines, strips inline comments (kept aside,
because waivers live there), joins ``+`` continuation lines (comment and blank
lines may stand between them) and remembers, for every character of the joined
text, the original line and column, so that errors point into the real file.
"""

from __future__ import annotations

import bisect
import os
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass

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
    """The lines of one netlist file, read and decoded a chunk at a time (so that no more
    than one chunk of the file is ever held besides what the caller keeps).  The file is
    opened at once, so that a missing file is an error of this call; ``progress(done,
    total)`` is told the bytes read after each chunk."""
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


def _chunked_lines(handle, shown: str, size: int, progress) -> Iterator[str]:
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
                    yield from decode(pending, shown, line).splitlines()
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
            yield from lines
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


def logical_lines(lines: str | Iterable[str], file: str, *, has_title: bool) -> tuple[str, list[Card]]:
    """Cards of one file in order, and its title (the first line) when ``has_title``.

    ``lines`` is the file's text or its lines (as :func:`read_lines` gives them).
    ``.end`` stops reading; ``.control`` ... ``.endc`` blocks are skipped whole.
    """
    title = ""
    cards: list[Card] = []
    if isinstance(lines, str):
        lines = lines.splitlines()
    current: Card | None = None
    in_control = False
    first = 1 if has_title else 0
    for number, raw in enumerate(lines, 1):
        if number == first:
            title = raw.strip()
            continue
        # the bulk of a netlist: an element line with no comment, taken as it is
        if raw[:1].isalpha() and not in_control and ";" not in raw and "$" not in raw and len(raw) <= MAX_LINE_CHARS:
            current = Card(raw, file, number, "", raw)
            cards.append(current)
            continue
        if len(raw) > MAX_LINE_CHARS:
            raise NetlistSyntaxError(
                f"line of {len(raw)} characters is longer than the limit of {MAX_LINE_CHARS}",
                file,
                number,
                1,
                raw[:60],
            )
        stripped = raw.lstrip()
        if not stripped or stripped[0] == "*":
            continue
        head = stripped[:6].lower()
        if in_control:
            if head.startswith(".endc"):
                in_control = False
            continue
        if head.startswith(".contr"):
            in_control = True
            continue
        body, comment = _split_comment(raw)
        if stripped[0] == "+":
            plus = raw.index("+")
            if current is None:
                raise NetlistSyntaxError(
                    "continuation line '+' with no card before it", file, number, plus + 1, raw
                )
            piece = body[plus + 1 :]
            if current.segments is None or current.physical is None:
                current.segments = [(0, current.line, 0)]
                current.physical = [current.raw]
            current.segments.append((len(current.text) + 1, number, plus + 1))
            current.physical.append(raw)
            current.text += " " + piece
            if comment:
                current.comment = (current.comment + " " + comment).strip()
            continue
        if not body.strip():
            # a line holding only an inline comment
            continue
        if head.startswith(".end") and (len(head) == 4 or not head[4].isalnum()):
            current = None
            break
        current = Card(body, file, number, comment, raw)
        cards.append(current)
    return title, cards
