"""The fast path for plain element lines must give exactly what the grammar gives."""

from hypothesis import given, settings
from hypothesis import strategies as st

from tauscan.reader.fields import Param, fast_fields, grammar_fields, token_fields
from tauscan.reader.lines import Card

from tests.conftest import examples

LINES = [
    "R1 a b 1k",
    "M1 d g s b nch w=1u l=0.18u",
    "mxa.m1 net<3> g#1 s:2 b nch W=1.5U L=.18u AD=1p",
    "C12 n1 0 .5p",
    "X1 a b c sub w=1u",
    "Q3 c b e qn 2",
    "V1 a 0 dc 1.8",
    "R_par__1 n$1 n$2 12.5",
    "D1 a k dmod area=2",
]

word = st.text(alphabet="abcdefghijklmnopqrstuvwxyzABCDEFXYZ0123456789_.<>#:!$@-+*/", min_size=1, max_size=8)
sep = st.sampled_from([" ", "  ", "\t", " \t "])


@st.composite
def element_lines(draw):
    head = draw(st.sampled_from("rcmqdxvile")) + draw(word)
    parts = [head]
    for _ in range(draw(st.integers(0, 7))):
        if draw(st.booleans()):
            parts.append(draw(word))
        else:
            parts.append(draw(word) + "=" + draw(word))
    seps = [draw(sep) for _ in parts]
    return "".join(p + s for p, s in zip(parts, seps)).rstrip()


def _agree(text: str) -> None:
    fast = fast_fields(text)
    if fast is None:
        return  # the grammar decides; nothing to compare
    kind, slow = grammar_fields(Card(text, "f", 1))
    assert kind == "element"
    # the same records, type and all (tuple equality alone would not tell Word from Braced)
    assert _typed(fast) == _typed(slow), text


def _typed(fields):
    return [(type(f).__name__, _typed([f.value])[0] if type(f) is Param else f) for f in fields]


def test_listed_lines_take_the_fast_path_and_agree():
    for text in LINES:
        assert fast_fields(text) is not None, text
        _agree(text)


@settings(max_examples=examples(400), deadline=None)
@given(element_lines())
def test_fast_path_agrees_with_the_grammar(text):
    _agree(text)


def test_lines_the_fast_path_refuses():
    for text in ["R1 a b {x}", "V1 a 0 pulse(0 1)", "R1 a b r = 1k", "R1 a b .param", "R1 a b 'x'"]:
        assert fast_fields(text) is None


CARDS = [
    ".param  l = 1 w = 1 nf = 1 ad = 0 nrd = {0.14/w} nrs = {0.14/w}",
    ".subckt  sky_like d g s b  w=60u l=2u sa=0 mult=1 ad  = '11.33 * w'",
    "Mdev  d g s b nmodel l = {l} w = {w} ad = {ad} nf = {nf}",
    ".include \"../cells/x.spice\"",
    ".ends sky_like",
    "xm1 d g s b wrapper w=2 l=0.15 nf=2 ad='int(nf/2) * W/nf * 0.29' m=4",
    ".lib \"lib.spice\" tt",
    "R1 a b r = {x*2}",
    ".param a = b",
]

card_word = st.one_of(word, st.builds(lambda w: "{" + w + "}", word), st.builds(lambda w: "'" + w + "'", word),
                      st.builds(lambda w: '"' + w + '"', word), st.just("="))


@st.composite
def token_cards(draw):
    head = draw(st.sampled_from([".param", ".subckt", ".model", ".include", ".lib", ".x1"])) if draw(st.booleans()) \
        else draw(st.sampled_from("rcmqdxvile")) + draw(word)
    parts = [head] + [draw(card_word) for _ in range(draw(st.integers(0, 9)))]
    seps = [draw(sep) for _ in parts]
    return "".join(p + s for p, s in zip(parts, seps)).rstrip()


def _token_agree(text: str) -> bool:
    fast = token_fields(text)
    if fast is None:
        return False  # the grammar decides
    try:
        kind, slow = grammar_fields(Card(text, "f", 1))
    except Exception as exc:  # the grammar refuses what the fast path took: a defect
        raise AssertionError(f"{text!r}: the fast path read it, the grammar says {exc}") from None
    assert fast[0] == kind and _typed(fast[1]) == _typed(slow), text
    return True


def test_listed_cards_take_the_token_path_and_agree():
    for text in CARDS:
        assert _token_agree(text), text


@settings(max_examples=examples(600), deadline=None)
@given(token_cards())
def test_token_path_agrees_with_the_grammar(text):
    _token_agree(text)


def test_token_path_refuses_what_it_cannot_tell():
    for text in ["R1 a b x=", ".param a = = 1", "R1 a {b{c}}", "R1 a b .param", ".5x a b",
                 "R1 a b x=\"s\""]:
        assert token_fields(text) is None, text
