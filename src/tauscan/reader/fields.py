"""A card's text -> its fields, by the Lark grammar (``grammar/netlist.lark``).

A field is a small tuple ``(kind, payload, offset)``:

==========  =====================================================
``"w"``     a word (node, model, number, keyword); payload is text
``"p"``     ``key=value``; payload is ``(key, value_field)``
``"b"``     ``{expression}``; payload is the text inside the braces
``"q"``     ``'expression'``; payload is the text inside the quotes
``"s"``     ``"string"``; payload is the text inside the quotes
``"g"``     ``( ... )``; payload is a list of fields
==========  =====================================================

Most element lines of a large extracted netlist are plain words and ``k=v``
pairs.  :func:`fast_fields` splits those with ``str.split`` and gives exactly
what the grammar gives; a test holds the two together line by line.  Anything
else goes through the grammar.
"""

from __future__ import annotations

import re
from itertools import accumulate, repeat
from operator import add

from lark import Token, Tree
from lark.exceptions import UnexpectedCharacters, UnexpectedInput, UnexpectedToken

from tauscan.errors import NetlistSyntaxError
from tauscan.reader.grammar import card_parser
from tauscan.reader.lines import Card

Field = tuple

_NOT_FAST = re.compile(r"[{}'\"(),]")
_TOKEN = re.compile(r"\S+")


def fast_fields(text: str) -> list[Field] | None:
    """Fields of a plain element line, or None when the grammar must decide."""
    if not text or _NOT_FAST.search(text) is not None:
        return None
    if "  " in text or "\t" in text or text[0] == " " or text[-1] == " ":
        return _fields_of_words([(m.group(), m.start()) for m in _TOKEN.finditer(text)])
    # single spaces: the words, their offsets and the tuples are all made by C loops
    words = text.split(" ")
    if not words[0][0].isalpha() or "=" in words[0]:
        return None
    out: list[Field] = list(zip(repeat("w"), words, accumulate(map(add, map(len, words), repeat(1)), initial=0)))
    if " ." in text and any(w[0] == "." and _directive_like(w) for w in words):
        return None
    if "=" in text:
        for i, (_, word, pos) in enumerate(out):
            if "=" in word:
                field = _param(word, pos)
                if field is None:
                    return None
                out[i] = field
    return out


def _param(word: str, pos: int) -> Field | None:
    eq = word.find("=")
    key, value = word[:eq], word[eq + 1 :]
    if not key or not value or "=" in value or _directive_like(key) or _directive_like(value):
        return None
    return ("p", (key.lower(), ("w", value, pos + eq + 1)), pos)


def _fields_of_words(words: list[tuple[str, int]]) -> list[Field] | None:
    out: list[Field] = []
    append = out.append
    for word, pos in words:
        if "=" in word:
            field = _param(word, pos)
            if field is None:
                return None
            append(field)
        elif word[0] == "." and _directive_like(word):
            return None
        else:
            append(("w", word, pos))
    if not out or out[0][0] != "w" or not out[0][1][0].isalpha():
        return None
    return out


def _directive_like(word: str) -> bool:
    """A word the grammar would not read as a WORD: '.' then a letter, '_' or nothing."""
    return word[0] == "." and (len(word) < 2 or word[1].isalpha() or word[1] == "_")


def grammar_fields(card: Card) -> tuple[str, list[Field]]:
    """``("element"|"control", fields)`` of a card, parsed by the grammar."""
    try:
        tree = card_parser().parse(card.text)
    except UnexpectedInput as exc:
        raise _syntax_error(card, exc) from None
    fields = [_field(child) for child in tree.children]
    fields = [f for f in fields if f[0] != "c"]
    return tree.data, fields


def card_fields(card: Card) -> tuple[str, list[Field]]:
    """Fields of a card, by the fast path where it applies, else by the grammar."""
    if card.text.lstrip()[:1] != ".":
        fast = fast_fields(card.text)
        if fast is not None:
            return "element", fast
    return grammar_fields(card)


def _field(node) -> Field:
    if isinstance(node, Token):  # the card's first word or directive
        return ("w", str(node), node.start_pos)
    kind = node.data
    children = node.children
    if kind == "word":
        tok = children[0]
        return ("w", str(tok), tok.start_pos)
    if kind == "param":
        key, value = children
        return ("p", (str(key).lower(), _field(value)), key.start_pos)
    if kind in ("braced", "quoted", "string"):
        tok = children[0]
        return (kind[0], str(tok)[1:-1], tok.start_pos + 1)
    if kind == "group":
        inner = [_field(c) for c in children if not (isinstance(c, Tree) and c.data == "comma")]
        pos = inner[0][2] - 1 if inner else 0
        return ("g", inner, pos)
    if kind == "comma":
        return ("c", ",", 0)
    raise AssertionError(f"unexpected rule {kind}")


def _syntax_error(card: Card, exc: UnexpectedInput) -> NetlistSyntaxError:
    offset = getattr(exc, "pos_in_stream", None)
    if offset is None:
        offset = 0
    if isinstance(exc, UnexpectedCharacters):
        char = card.text[offset] if offset < len(card.text) else ""
        if char in "{'\"":
            message = f"unclosed {char} in this card"
        else:
            message = f"unexpected character {char!r}"
    elif isinstance(exc, UnexpectedToken):
        token = exc.token
        if token.type == "$END":
            message = "the card ends too early (an unclosed '(' ?)"
            offset = max(len(card.text.rstrip()) - 1, 0)
        else:
            message = f"unexpected {str(token)!r} here"
    else:
        message = "this card cannot be read"
    return card.error(NetlistSyntaxError, message, offset)
