"""Typed reading of keyed text (core.values)."""

import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from core.codebook import Code, Variable
from core.values import INVALID_TYPE, NOT_IN_CODES, OUT_OF_RANGE, canonical_series, parse

AGE = Variable("age", "integer", min=16, max=99, missing=(Code("-9", "refused"),))


@pytest.mark.parametrize(
    ("text", "canonical", "problem"),
    [
        ("07", "7", OUT_OF_RANGE),
        ("  42 ", "42", ""),
        ("+42", "42", ""),
        ("042", "42", ""),
        ("-9", "-9", ""),  # a declared missing code is allowed outside the range
        ("-09", "-9", ""),
        ("7.5", "7.5", INVALID_TYPE),
        ("7.0", "7.0", INVALID_TYPE),
        ("1,000", "1,000", INVALID_TYPE),
        ("", "", INVALID_TYPE),
    ],
)
def test_integer_rules(text, canonical, problem):
    parsed = parse(AGE, text)
    assert (parsed.canonical, parsed.problem) == (canonical, problem)


def test_integer_value_is_python_int_and_matches_int():
    # Python's own int() is the reference for what an integer literal means.
    for text in ["0", "007", "-12", "+5", "123456789012345678901234567890"]:
        assert parse(Variable("n", "integer"), text).value == int(text)


@pytest.mark.parametrize(
    ("text", "value"),
    [("3.50", 3.5), ("3,5", 3.5), ("-0.25", -0.25), (".5", 0.5), ("12", 12.0), ("5.", 5.0)],
)
def test_number_accepts_point_or_comma(text, value):
    parsed = parse(Variable("w", "number"), text)
    assert parsed.ok and parsed.value == value
    assert parsed.canonical == repr(value)


@pytest.mark.parametrize("text", ["1,234.5", "1.234,5", "1.2.3", "3,5,0", "1e3", "abc", "--1"])
def test_number_refuses_ambiguous_or_foreign_text(text):
    assert parse(Variable("w", "number"), text).problem == INVALID_TYPE


def test_dates_follow_the_declared_format_only():
    iso = Variable("d", "date")
    day_first = Variable("d", "date", format="%d.%m.%Y")
    assert parse(iso, "2024-03-05").canonical == "2024-03-05"
    assert parse(iso, "05.03.2024").problem == INVALID_TYPE
    assert parse(day_first, "05.03.2024").canonical == "2024-03-05"
    # No guessing between day-first and month-first: the other order is refused.
    assert parse(day_first, "2024-03-05").problem == INVALID_TYPE
    assert parse(iso, "2023-02-29").problem == INVALID_TYPE  # not a leap year


def test_strings_are_trimmed_nfc_and_keep_case():
    s = Variable("c", "string")
    # U+0065 U+0301 (e + combining acute) is canonically equivalent to U+00E9 (Unicode NFC).
    assert parse(s, " Cafe\u0301  ").canonical == "Caf\u00e9"
    assert parse(s, "ABC").canonical != parse(s, "abc").canonical


def test_codes_compare_by_typed_value():
    q = Variable("q", "integer", codes=(Code("1", "never"), Code("2", "often")))
    assert parse(q, "01").problem == ""
    assert parse(q, "3").problem == NOT_IN_CODES
    m = Variable("m", "string", codes=(Code("f"), Code("m")))
    assert parse(m, "x").problem == NOT_IN_CODES


def test_vectorised_equals_one_by_one():
    texts = pd.Series(["07", None, "x", "-9", "100", " 5 "], dtype=object)
    canon, valid = canonical_series(AGE, texts)
    for i, text in enumerate(texts):
        if text is None:
            assert pd.isna(canon.iloc[i]) and valid.iloc[i]
        else:
            parsed = parse(AGE, text)
            assert canon.iloc[i] == parsed.canonical
            assert bool(valid.iloc[i]) == (parsed.problem != INVALID_TYPE)


# A few texts take a per-text path (codebook codes, one field); a column takes
# pandas string operations. Both must read every text alike.
_KEYED_TEXT = st.text(alphabet=st.sampled_from(list("0123456789+-., aé\u0301٣\t")), max_size=6)


@settings(max_examples=60, deadline=None)
@given(texts=st.lists(st.one_of(st.none(), _KEYED_TEXT), min_size=1, max_size=8),
       type_=st.sampled_from(["integer", "string", "number"]))
def test_few_texts_read_as_in_a_long_column(texts, type_):
    var = Variable("v", type_)
    few, few_ok = canonical_series(var, pd.Series(texts, dtype=object))
    # Padding past the per-text path's limit sends the same texts through pandas.
    many, many_ok = canonical_series(var, pd.Series(texts * 40, dtype=object))
    head = many.iloc[: len(texts)].set_axis(few.index)
    assert few.isna().tolist() == head.isna().tolist()
    assert few.dropna().tolist() == head.dropna().tolist()
    assert few_ok.tolist() == many_ok.tolist()[: len(texts)]
    if type_ == "integer":
        for text, canon, ok in zip(texts, few, few_ok, strict=True):
            if text is not None and ok and text.strip().isascii():
                # Python's int() as the outside reference for what the integer is.
                assert int(canon) == int(text.strip())
