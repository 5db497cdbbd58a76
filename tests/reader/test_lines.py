"""The line pre-pass: comments, continuations, .end, .control blocks, encodings."""

import pytest

from tauscan.errors import NetlistSyntaxError
from tauscan.reader.lines import PlainRun, decode, logical_lines


def _words(items) -> list[list[str]]:
    """The words of each card, and of each row of a run of plain lines (lower case there)."""
    out = []
    for item in items:
        if isinstance(item, PlainRun):
            c = item.columns
            out += [[c.names[k], c.a[k], c.b[k], c.values[k]] for k in range(item.lo, item.hi)]
        else:
            out.append(item.text.split())
    return out


def test_title_comments_continuations_and_inline_comments():
    text = (
        "my title\n"
        "* a comment line\n"
        "R1 a b 1k ; trailing comment\n"
        "M1 d g s b nch\n"
        "* a comment between continuation lines\n"
        "\n"
        "+ w=1u $ hspice style comment\n"
        "+ l=2u\n"
        "C1 a 0 {x;y}\n"
    )
    title, cards = logical_lines(text, "f.sp", has_title=True)
    assert title == "my title"
    assert [c.text.split() for c in cards] == [
        ["R1", "a", "b", "1k"],
        ["M1", "d", "g", "s", "b", "nch", "w=1u", "l=2u"],
        ["C1", "a", "0", "{x;y}"],  # braces protect their contents
    ]
    assert cards[0].comment == "trailing comment"
    assert cards[1].line == 4
    # a column in the joined text maps back to the physical line it came from
    offset = cards[1].text.index("l=2u")
    line, col, src = cards[1].locate(offset)
    assert (line, col, src) == (8, 3, "+ l=2u")


def test_end_stops_reading_and_control_blocks_are_skipped():
    text = "t\nR1 a b 1\n.control\nrun\nplot v(a)\n.endc\nR2 a b 2\n.end\nR3 a b 3\n"
    _, cards = logical_lines(text, "f", has_title=True)
    assert [w[0].lower() for w in _words(cards)] == ["r1", "r2"]


def test_dollar_inside_a_name_is_not_a_comment():
    _, cards = logical_lines("t\nR1 a$b c 1 x=1\n", "f", has_title=True)
    assert cards[0].text.split() == ["R1", "a$b", "c", "1", "x=1"]


def test_crlf_and_bom_are_accepted():
    text = decode(b"\xef\xbb\xbftitle\r\nR1 a b 1k\r\n", "f")
    title, cards = logical_lines(text, "f", has_title=True)
    assert title == "title"
    assert _words(cards) == [["R1", "a", "b", "1k"]]


def test_binary_and_non_utf8_are_errors_with_a_location():
    with pytest.raises(NetlistSyntaxError, match="NUL"):
        decode(b"t\nR1 a b\x00 1\n", "f")
    with pytest.raises(NetlistSyntaxError, match="not UTF-8") as info:
        decode("t\nR1 a b 1k\nC1 \xe9 0 1p\n".encode("latin-1"), "f")
    assert (info.value.line, info.value.col) == (3, 4)


def test_continuation_without_a_card_is_an_error():
    with pytest.raises(NetlistSyntaxError, match="continuation"):
        logical_lines("t\n+ w=1u\n", "f", has_title=True)
