"""applies_if conditions (core.conditions): parsing, and both evaluators.

The reference for every evaluation check is a plain-Python reading of the same
rule written by hand in this file (the rule as DESIGN.md and the module
docstring state it), applied row by row to random data.
"""

import math

import hypothesis.strategies as st
import pandas as pd
import pytest
from hypothesis import given, settings

from core.conditions import parse_condition


def blank(v):
    return v is None or (isinstance(v, float) and math.isnan(v)) or (isinstance(v, str) and not v.strip())


# Each rule next to a hand-written Python reading of it (blank compares false).
RULES = [
    ("a = 1", lambda r: not blank(r["a"]) and r["a"] == 1),
    ("a != 1", lambda r: not blank(r["a"]) and r["a"] != 1),
    ("not (a = 1)", lambda r: not (not blank(r["a"]) and r["a"] == 1)),
    ("a >= 2 and b < 0.5", lambda r: not blank(r["a"]) and r["a"] >= 2 and not blank(r["b"]) and r["b"] < 0.5),
    ("a in (1, 3) or s = 'x'",
     lambda r: (not blank(r["a"]) and r["a"] in (1, 3)) or (not blank(r["s"]) and r["s"] == "x")),
    ("a not in (1, 3)", lambda r: not blank(r["a"]) and r["a"] not in (1, 3)),
    ("s is blank", lambda r: blank(r["s"])),
    ("s is not blank and (a <= 0 or b > -1.25)",
     lambda r: not blank(r["s"]) and ((not blank(r["a"]) and r["a"] <= 0) or (not blank(r["b"]) and r["b"] > -1.25))),
    ("NOT a > 2 AND NOT s IN ('y', 'z')",
     lambda r: not (not blank(r["a"]) and r["a"] > 2) and not (not blank(r["s"]) and r["s"] in ("y", "z"))),
    ("s < 'y'", lambda r: not blank(r["s"]) and r["s"] < "y"),
    # A quoted literal compares with the field as text, numbers written as Python's str() writes them.
    ("a = '1' or b = '0.5' or b >= '1'", lambda r: (not blank(r["a"]) and str(r["a"]) == "1")
     or (not blank(r["b"]) and (str(r["b"]) == "0.5" or str(r["b"]) >= "1"))),
    ("a = 1 or a = 2 and b >= 0", lambda r: (not blank(r["a"]) and r["a"] == 1)
     or ((not blank(r["a"]) and r["a"] == 2) and (not blank(r["b"]) and r["b"] >= 0))),
]

rows = st.fixed_dictionaries({
    "a": st.one_of(st.none(), st.integers(-3, 4)),
    "b": st.one_of(st.none(), st.floats(-2, 2, allow_nan=False).map(lambda x: round(x, 2))),
    "s": st.sampled_from([None, "", " ", "x", "y", "z", "X", "xy"]),
})


@settings(max_examples=25, deadline=None)
@given(st.lists(rows, min_size=1, max_size=40))
def test_vectorised_and_one_form_agree_with_hand_written_python(data):
    frame = pd.DataFrame({
        "a": pd.array([r["a"] for r in data], dtype="Int64"),
        "b": pd.array([r["b"] for r in data], dtype="Float64"),
        "s": pd.Series([r["s"] for r in data], dtype=object),
    })
    # The same values as canonical keyed text (what the comparison engine passes in).
    as_text = pd.DataFrame({
        "a": pd.Series([None if r["a"] is None else str(r["a"]) for r in data], dtype=object),
        "b": pd.Series([None if r["b"] is None else repr(r["b"]) for r in data], dtype=object),
        "s": frame["s"],
    })
    for text, reference in RULES:
        cond = parse_condition(text)
        expected = [bool(reference(r)) for r in data]
        assert cond.evaluate(frame).tolist() == expected, text
        assert cond.evaluate(as_text).tolist() == expected, text
        assert cond.evaluate(frame.astype(object)).tolist() == expected, text
        assert [cond.evaluate_one(r) for r in data] == expected, text


def test_text_fields_compare_with_number_literals_as_numbers():
    # A text column (e.g. keyed text) is read as a number with point or comma, as core.values does.
    frame = pd.DataFrame({"x": pd.Series(["07", "3,5", "abc", "", None], dtype=object)})
    cond = parse_condition("x > 3")
    assert cond.evaluate(frame).tolist() == [True, True, False, False, False]
    assert [cond.evaluate_one({"x": v}) for v in frame["x"]] == [True, True, False, False, False]


def test_dates_compare_as_iso_text():
    # ISO 8601 calendar dates sort as text in date order, so a quoted ISO date orders correctly.
    frame = pd.DataFrame({"d": pd.to_datetime(["2023-12-31", "2024-01-01", None])})
    cond = parse_condition('d >= "2024-01-01"')
    assert cond.evaluate(frame).tolist() == [False, True, False]
    assert cond.evaluate_one({"d": pd.Timestamp("2024-02-01").date()}) is True


def test_missing_name_in_one_form_is_blank_and_missing_column_is_an_error():
    cond = parse_condition("pet = 1")
    assert cond.evaluate_one({}) is False
    assert parse_condition("pet is blank").evaluate_one({}) is True
    with pytest.raises(KeyError):
        cond.evaluate(pd.DataFrame({"other": [1]}))


def test_names_in_order_of_first_mention():
    cond = parse_condition("age >= 18 and (smoker in (1, 2) or age < 5) and not pet is blank")
    assert cond.names == ("age", "smoker", "pet")


def test_empty_condition_always_applies():
    cond = parse_condition("  ")
    assert cond.always and cond.names == ()
    assert cond.evaluate(pd.DataFrame({"a": [1, None]})).tolist() == [True, True]
    assert cond.evaluate_one({}) is True


def test_printed_form_parses_back_to_the_same_meaning():
    text = "not a in (1, 2) and (s = 'it''s' or b is not blank)"
    with pytest.raises(ValueError):  # no quote escaping: the first quote closes
        parse_condition(text)
    cond = parse_condition("not a in (1, 2) and (s = \"it's\" or b is not blank) or a = -1.5")
    again = parse_condition(str(cond))
    assert again.tree == cond.tree


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("age >", 'expected a number or quoted text after ">" but found the end'),
        ("age == 1", 'write a single "=" for equality'),
        ("(age = 1", 'expected ")" but found the end'),
        ("age = 1 smoker = 2", "expected \"and\", \"or\" or the end but found 'smoker' at position 9"),
        ("smoker in 1, 2", 'expected "(" to open the list'),
        ("smoker in (1, 2", 'expected "," or ")" in the list'),
        ("name = 'Ann", "the quote at position 8 is never closed"),
        ("age = other", "expected a number or quoted text after \"=\" but found 'other'"),
        ("age + 1 > 2", "unexpected character '+'"),
        ("age -1 > 2", "conditions have no arithmetic"),
        ("age is 3", 'expected "blank" after "is"'),
        ("age", "expected a comparison"),
        ("and age = 1", "expected a variable name but found 'and'"),
        ("age = 1; drop", "unexpected character ';'"),
        ("__import__('os')", "expected a comparison"),
    ],
)
def test_bad_syntax_is_a_clear_value_error(text, words):
    with pytest.raises(ValueError) as info:
        parse_condition(text)
    assert words in str(info.value)


def test_literals_listed_for_type_checks():
    cond = parse_condition("a in (1, 'x') or not b < 2.5 and c not in (-1)")
    assert cond.tests == (("a", "in", (1.0, "x")), ("b", "<", (2.5,)), ("c", "not in", (-1.0,)))
