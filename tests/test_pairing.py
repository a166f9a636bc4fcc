"""Partner suggestions for forms found in one pass only."""

from __future__ import annotations

import numpy as np
import pandas as pd
from rapidfuzz.distance import Levenshtein

from core.codebook import Codebook, Variable
from core.compare import compare_passes
from core.pairing import field_keys, suggest
from core.passdata import PassData


def test_a_swapped_id_counts_as_one_edit_where_plain_levenshtein_counts_two():
    keys = np.array([["1", "2", "3", "4", "5"]], dtype=object)
    got = suggest(pd.Series(["132"], index=[1]), keys, pd.Series(["123"], index=[8]), keys)
    # Reference: Levenshtein distance (rapidfuzz) counts a swap as two substitutions.
    assert Levenshtein.distance("132", "123") == 2
    assert got[1].id_edits == 1 and got[1].form == 8 and got[1].agreement == 1.0


def test_different_papers_are_not_suggested_even_with_close_ids():
    rng = np.random.default_rng(2)
    a = rng.integers(1, 6, (1, 40)).astype(str).astype(object)
    b = rng.integers(1, 6, (1, 40)).astype(str).astype(object)
    got = suggest(pd.Series(["12"], index=[0]), a, pd.Series(["13"], index=[0]), b)
    assert got == {}


def test_the_best_partner_is_the_one_agreeing_most():
    rng = np.random.default_rng(4)
    paper = rng.integers(1, 6, 40).astype(str)
    near = paper.copy()
    near[:2] = "9"  # 95 % agree
    other = rng.integers(1, 6, 40).astype(str)
    got = suggest(pd.Series(["501"], index=["x"]), paper[None, :].astype(object),
                  pd.Series(["510", "777"], index=["y", "z"]),
                  np.vstack([other, near]).astype(object))
    assert got["x"].form == "z"
    assert round(100 * got["x"].agreement) == 95


def test_field_keys_separate_blank_from_not_keyed():
    text = pd.DataFrame({"q": ["", None, " 3"]}, dtype=object)
    state = pd.DataFrame({"q": ["blank", None, "keyed"]}, dtype=object)
    assert field_keys(text, state)[:, 0].tolist() == ["blank:", "none:", "keyed:3"]


def test_a_skipped_form_gets_no_suggestion_in_the_table():
    cb = Codebook((Variable("pid", "integer", is_id=True), Variable("q", "integer"),
                   Variable("r", "integer")))
    p1 = PassData.from_texts(1, pd.DataFrame({"pid": ["1", "2"], "q": ["1", "2"], "r": ["3", "4"]}))
    p2 = PassData.from_texts(2, pd.DataFrame({"pid": ["1"], "q": ["1"], "r": ["3"]}))
    table = compare_passes(cb, p1, p2)
    assert table["kind"].tolist() == ["only_in_pass1"]
    assert "likely" not in table["detail"].iloc[0] and table["_partner"].isna().all()
