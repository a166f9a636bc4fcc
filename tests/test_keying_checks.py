"""The keying screen's quick check agrees with ``core.values.parse``, the rule comparison uses.

The reference is ``core.values.parse`` computed in the same test on texts
that hypothesis generates, for integer, number and coded variables.
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from core.codebook import Code, Variable
from core.values import parse
from tui.screens.keying_checks import QuickCheck

VARIABLES = [
    Variable("n", "integer"),
    Variable("age", "integer", min=16, max=99, missing=(Code("-9"), Code("999"))),
    Variable("q", "integer", codes=(Code("1"), Code("2"), Code("03")), missing=(Code("9"),)),
    Variable("plot", "number", min=0, max=500.5, missing=(Code("-1"),)),
    Variable("x", "number", codes=(Code("1.5"), Code("2,0"))),
    Variable("s", "string", codes=(Code("m"), Code("f"))),
    Variable("free", "string"),
    Variable("when", "date"),
]

texts = st.one_of(
    st.text(alphabet="0123456789+-.,", max_size=8),
    st.text(alphabet="0123456789 +-.,mfa\u00e9", max_size=6),
    st.integers(-2000, 2000).map(str),
    st.floats(-1000, 1000, allow_nan=False).map(lambda x: f"{x:.3f}"),
)


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(range(len(VARIABLES))), texts)
def test_quick_allowed_means_parse_allows(i, text):
    var = VARIABLES[i]
    quick = QuickCheck(var).allowed(text)
    if quick:  # never claims "allowed" where the rule says otherwise
        assert parse(var, text).ok, (var.name, text)


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(range(7)), texts)
def test_quick_is_sure_of_plain_allowed_values(i, text):
    # Where parse allows a plain ASCII text, the quick check should know it
    # too (else every keystroke would pay for parse); dates are left to parse.
    var = VARIABLES[i]
    if text.isascii() and text.strip() and parse(var, text).ok:
        assert QuickCheck(var).allowed(text), (var.name, text)


DATED = Variable("seen", "date", missing=(Code("1900-01-01", "unknown"),))


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(range(len(VARIABLES) + 1)),
       st.one_of(texts, st.sampled_from(["-9", "0999", " 9 ", "-1.0", "1900-01-01", "1900-1-1"])))
def test_missing_code_means_what_parse_says(i, text):
    # A declared missing code (09 is the code 9) passes where a question does
    # not apply; core.values.parse reads both the text and the codes.
    var = (*VARIABLES, DATED)[i]
    codes = {parse(var, code).canonical for code in var.missing_values}
    expected = bool(text.strip()) and parse(var, text).canonical in codes
    assert QuickCheck(var).is_missing_code(text) == expected, (var.name, text)
