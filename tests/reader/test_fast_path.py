"""The fast path for plain element lines must give exactly what the grammar gives."""

from hypothesis import given, settings
from hypothesis import strategies as st

from tauscan.reader.fields import Param, fast_fields, grammar_fields
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
