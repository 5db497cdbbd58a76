"""The line pre-pass: raw text -> logical lines ("cards") with their origin.

It decodes the file, drops comment lines, strips inline comments (kept aside,
because waivers live there), joins ``+`` continuation lines (comment and blank
lines may stand between them) and remembers, for every character of the joined
text, the original line and column, so that errors point into the real file.
"""

from __future__ import annotations

import bisect
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


def decode(data: bytes, file: str) -> str:
    """Text of a netlist file: UTF-8 (a BOM is dropped); anything else is an error."""
    if b"\x00" in data[:65536] or b"\x00" in data:
        pos = data.index(b"\x00")
        line = data.count(b"\n", 0, pos) + 1
        raise NetlistSyntaxError("binary content (a NUL byte); this is not a netlist", file, line, None)
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        start = data.rfind(b"\n", 0, exc.start) + 1
        col = exc.start - start + 1
        end = data.find(b"\n", exc.start)
        shown = data[start : end if end >= 0 else len(data)].decode("utf-8", "replace")
        raise NetlistSyntaxError(
            f"byte 0x{data[exc.start]:02x} is not UTF-8; save the netlist as UTF-8", file, line, col, shown
        ) from None


def read_file(path: str, shown: str | None = None) -> str:
    """Read and decode one netlist file, turning OS errors into our error family."""
    shown = shown or path
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except FileNotFoundError:
        raise IncludeError("file not found", shown) from None
    except IsADirectoryError:
        raise IncludeError("is a directory, not a netlist file", shown) from None
    except OSError as exc:
        raise IncludeError(f"cannot read the file ({exc.strerror})", shown) from None
    if len(data) > MAX_FILE_BYTES:
        raise IncludeError(f"file larger than {MAX_FILE_BYTES} bytes", shown)
    return decode(data, shown)


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


def logical_lines(text: str, file: str, *, has_title: bool) -> tuple[str, list[Card]]:
    """Cards of one file in order, and its title (the first line) when ``has_title``.

    ``.end`` stops reading; ``.control`` ... ``.endc`` blocks are skipped whole.
    """
    title = ""
    cards: list[Card] = []
    lines = text.splitlines()
    start = 0
    if has_title and lines:
        title = lines[0].strip()
        start = 1
    current: Card | None = None
    in_control = False
    for index in range(start, len(lines)):
        raw = lines[index]
        number = index + 1
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
