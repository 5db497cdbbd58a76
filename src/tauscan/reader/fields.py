"""A card's text -> its fields: small typed records, by the Lark grammar
(``grammar/netlist.lark``) through a :class:`lark.Transformer`, or by a fast path.

==================  ===================================================
:class:`Word`       a word (node, model, number, keyword)
:class:`Param`      ``key=value``; ``value`` is a Word, Braced or Quoted
:class:`Braced`     ``{expression}``; ``text`` is inside the braces
:class:`Quoted`     ``'expression'``; ``text`` is inside the quotes
:class:`Text`       ``"string"``; ``text`` is inside the quotes
:class:`Group`      ``( ... )``; ``items`` are fields
==================  ===================================================

Each record has ``offset``, the column in the card's text where it starts (inside the
braces or quotes for those).  Stages dispatch on the record's type, never on a tag.

Most element lines of a large extracted netlist are plain words and ``k=v``
pairs.  :func:`fast_fields` splits those with ``str.split`` and gives exactly
what the grammar gives, record types included; a test holds the two together line by
line.  Anything else goes through the grammar.
"""

from __future__ import annotations

import re
from functools import partial
from itertools import accumulate, repeat
from operator import add
from typing import NamedTuple, Union

from lark import Transformer
from lark.exceptions import UnexpectedCharacters, UnexpectedInput, UnexpectedToken

from tauscan.errors import NetlistSyntaxError
from tauscan.reader.grammar import card_parser
from tauscan.reader.lines import Card


class Word(NamedTuple):
    """A word: a node, a model, a number or a keyword, as written."""

    text: str
    offset: int


class Param(NamedTuple):
    """``key=value``: the key in lower case, the value a :data:`Value` field."""

    key: str
    value: "Word | Braced | Quoted"
    offset: int


class Braced(NamedTuple):
    """``{expression}``: the text inside the braces."""

    text: str
    offset: int


class Quoted(NamedTuple):
    """``'expression'``: the text inside the quotes."""

    text: str
    offset: int


class Text(NamedTuple):
    """``"string"`` (a file name, say): the text inside the quotes."""

    text: str
    offset: int


class Group(NamedTuple):
    """``( ... )``: the fields inside, commas dropped."""

    items: list
    offset: int


Field = Union[Word, Param, Braced, Quoted, Text, Group]
#: the fields that can stand for a number (a word or an expression)
VALUE_TYPES = (Word, Braced, Quoted)

_NOT_FAST = re.compile(r"[{}'\"(),]")
_TOKEN = re.compile(r"\S+")
# records made in C (``tuple.__new__`` bound by partial): no Python call per word
_words = partial(map, partial(tuple.__new__, Word))


def fast_fields(text: str) -> list[Field] | None:
    """Fields of a plain element line, or None when the grammar must decide."""
    if not text or _NOT_FAST.search(text) is not None:
        return None
    if "  " in text or "\t" in text or text[0] == " " or text[-1] == " ":
        return _fields_of_words([(m.group(), m.start()) for m in _TOKEN.finditer(text)])
    # single spaces: the words, their offsets and the records are all made by C loops
    words = text.split(" ")
    if not words[0][0].isalpha() or "=" in words[0]:
        return None
    out: list[Field] = list(_words(zip(words, accumulate(map(add, map(len, words), repeat(1)), initial=0))))
    if " ." in text and any(w[0] == "." and _directive_like(w) for w in words):
        return None
    if "=" in text:
        for i, (word, pos) in enumerate(out):
            if "=" in word:
                field = _param(word, pos)
                if field is None:
                    return None
                out[i] = field
    return out


def _param(word: str, pos: int) -> Param | None:
    eq = word.find("=")
    key, value = word[:eq], word[eq + 1 :]
    if not key or not value or "=" in value or _directive_like(key) or _directive_like(value):
        return None
    return Param(key.lower(), Word(value, pos + eq + 1), pos)


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
            append(Word(word, pos))
    if not out or type(out[0]) is not Word or not out[0].text[0].isalpha():
        return None
    return out


def _directive_like(word: str) -> bool:
    """A word the grammar would not read as a WORD: '.' then a letter, '_' or nothing."""
    return word[0] == "." and (len(word) < 2 or word[1].isalpha() or word[1] == "_")


_COMMA = object()


class _ToFields(Transformer):
    """The grammar's tree -> typed field records (rule names as in ``netlist.lark``)."""

    def word(self, children) -> Word:
        tok = children[0]
        return Word(str(tok), tok.start_pos)

    def param(self, children) -> Param:
        key, value = children
        return Param(str(key).lower(), value, key.start_pos)

    def braced(self, children) -> Braced:
        tok = children[0]
        return Braced(str(tok)[1:-1], tok.start_pos + 1)

    def quoted(self, children) -> Quoted:
        tok = children[0]
        return Quoted(str(tok)[1:-1], tok.start_pos + 1)

    def string(self, children) -> Text:
        tok = children[0]
        return Text(str(tok)[1:-1], tok.start_pos + 1)

    def group(self, children) -> Group:
        inner = [c for c in children if c is not _COMMA]
        return Group(inner, inner[0].offset - 1 if inner else 0)

    def comma(self, children):
        return _COMMA

    def _card(self, children) -> list[Field]:
        first, *rest = children  # the card's first word or directive: a token
        return [Word(str(first), first.start_pos)] + [c for c in rest if c is not _COMMA]

    element = control = _card


_TO_FIELDS = _ToFields()


def grammar_fields(card: Card) -> tuple[str, list[Field]]:
    """``("element"|"control", fields)`` of a card, parsed by the grammar."""
    try:
        tree = card_parser().parse(card.text)
    except UnexpectedInput as exc:
        raise _syntax_error(card, exc) from None
    return tree.data, _TO_FIELDS.transform(tree)


#: One token of a card without parentheses or commas (see :func:`token_fields`): a braced
#: expression, a quoted one, a string, '=', or a run of word characters.
_CARD_TOKEN = re.compile(r"""[ \t]*(?:(\{[^{}]*\})|('[^']*')|("[^"]*")|(=)|([^\s=(){}'",]+))""")
_DIRECTIVE_WORD = re.compile(r"\.[A-Za-z_][A-Za-z0-9_]*\Z")


def token_fields(text: str) -> tuple[str, list[Field]] | None:
    """``(kind, fields)`` of a card holding words, ``key = value`` pairs (white space around
    '=' allowed), braced and quoted expressions and strings, but no parentheses or commas:
    what the grammar gives for it, found by one regular expression (a PDK library's '.param',
    '.subckt' and device lines).  None when the grammar must decide; a test holds the two
    together."""
    tokens = []
    pos, end = 0, len(text)
    match = _CARD_TOKEN.match
    while pos < end:
        m = match(text, pos)
        if m is None:
            if text[pos:].strip():
                return None
            break
        tokens.append((m.lastindex, m.group(m.lastindex), m.start(m.lastindex)))
        pos = m.end()
    if not tokens or tokens[0][0] != 5:
        return None
    first = tokens[0][1]
    if first[0] == ".":
        if _DIRECTIVE_WORD.match(first) is None:
            return None
        kind = "control"
    elif first[0].isalpha():
        kind = "element"
    else:
        return None
    out: list[Field] = [Word(first, tokens[0][2])]
    i, count = 1, len(tokens)
    while i < count:
        tag, tok, at = tokens[i]
        if tag == 5:
            if tok[0] == "." and _directive_like(tok):
                return None
            if i + 1 < count and tokens[i + 1][0] == 4:  # key = value
                if i + 2 >= count:
                    return None
                vtag, vtok, vat = tokens[i + 2]
                if vtag == 5:
                    if vtok[0] == "." and _directive_like(vtok):
                        return None
                    value: Field = Word(vtok, vat)
                elif vtag == 1:
                    value = Braced(vtok[1:-1], vat + 1)
                elif vtag == 2:
                    value = Quoted(vtok[1:-1], vat + 1)
                else:
                    return None
                out.append(Param(tok.lower(), value, at))
                i += 3
                continue
            out.append(Word(tok, at))
        elif tag == 1:
            out.append(Braced(tok[1:-1], at + 1))
        elif tag == 2:
            out.append(Quoted(tok[1:-1], at + 1))
        elif tag == 3:
            out.append(Text(tok[1:-1], at + 1))
        else:  # '=' with no key before it
            return None
        i += 1
    return kind, out


def card_fields(card: Card) -> tuple[str, list[Field]]:
    """Fields of a card, by a fast path where one applies, else by the grammar."""
    text = card.text
    if text.lstrip()[:1] != ".":
        fast = fast_fields(text)
        if fast is not None:
            return "element", fast
    if "(" not in text and ")" not in text and "," not in text:
        found = token_fields(text)
        if found is not None:
            return found
    return grammar_fields(card)


def show(f: Field) -> str:
    """A field as a message shows it."""
    if type(f) is Group:
        return "(...)"
    if type(f) is Param:
        return f"{f.key}=..."
    return f.text


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


#: ``name =`` at the start of an assignment: a name after the start, white space or a comma,
#: then ``=`` that is not ``==`` (``<=``, ``>=`` and ``!=`` never follow a name directly).
_ASSIGNMENT = re.compile(r"(?:^|(?<=[\s,]))([A-Za-z_][\w.]*)\s*=(?!=)")
_OPENERS = {"(": ")", "{": "}"}


def _masked(text: str) -> str | None:
    """``text`` with everything inside parentheses, braces and quotes replaced by ``#`` (same
    length), so that only the top level is searched; None when they do not balance."""
    out = list(text)
    closers: list[str] = []
    quote = ""
    for i, ch in enumerate(text):
        if quote:
            if ch == quote:
                quote = ""
            else:
                out[i] = "#"
        elif ch in "'\"":
            quote = ch
        elif ch in _OPENERS:
            if closers:
                out[i] = "#"
            closers.append(_OPENERS[ch])
        elif ch in ")}":
            if not closers or closers[-1] != ch:
                return None
            closers.pop()
            if closers:
                out[i] = "#"
        elif closers:
            out[i] = "#"
    if quote or closers:
        return None
    return "".join(out)


def assignments(card: Card, start: int) -> list[Param]:
    """``name = expression`` pairs of a card's text from ``start``, where an expression may
    hold white space and mix braced, quoted and bare parts (``a = {1+x} + b*agauss(0,1,1)``,
    as PDK libraries write).  Each value is a :class:`Braced` record whose text is the
    expression with braces and quotes turned into parentheses (same length, so offsets hold).
    Raises a located error for text that is not such a pair."""
    text = card.text
    masked = _masked(text[start:])
    if masked is None:
        raise card.error(NetlistSyntaxError, "unbalanced parentheses, braces or quotes in this card", start)
    found = list(_ASSIGNMENT.finditer(masked))
    if not found:
        raise card.error(NetlistSyntaxError, "expected name=value here", start + len(masked) - len(masked.lstrip()))
    lead = masked[: found[0].start()]
    if lead.strip():
        raise card.error(NetlistSyntaxError, f"expected name=value, not {lead.strip()!r}", start + len(lead) - len(lead.lstrip()))
    out: list[Param] = []
    for k, match in enumerate(found):
        lo = match.end()
        hi = found[k + 1].start() if k + 1 < len(found) else len(masked)
        raw = text[start + lo : start + hi]
        body = raw.strip()
        if not body:
            raise card.error(NetlistSyntaxError, f"'{match.group(1)}=' has no value", start + match.start())
        value_at = start + lo + (len(raw) - len(raw.lstrip()))
        if body.endswith(","):
            body = body[:-1].rstrip()
        out.append(Param(match.group(1).lower(), Braced(body, value_at), start + match.start()))
    return out
