"""Screening statistics checked against published examples and reference libraries."""

from __future__ import annotations

import json
import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import stats
from sklearn.metrics import cohen_kappa_score

from core.codebook import Code, Codebook, Variable
from core.errors import CodebookError, UsageError
from core.passdata import PassData
from core.screening import (
    cohen_kappa,
    cronbach_alpha,
    describe,
    item_analysis,
    kappa_pairs_from_passes,
    kurtosis_g2,
    scale_scores,
    screen,
    sensitivity,
    skewness_g1,
    spearman_brown,
    split_half,
    text_histogram,
    tukey_fences,
)
from core.screening_rules import BlankItemsRule, ZRule, parse_rule

DATA = Path(__file__).parent / "data"


def likert(name, scale="", reverse=False, **kw):
    return Variable(name, "integer", min=1, max=5, scale=scale, reverse=reverse, **kw)


# ---------------------------------------------------------------- Cronbach's alpha


def test_alpha_on_denis_worked_example():
    # Source: D. J. Denis, "Applied Univariate, Bivariate, and Multivariate
    # Statistics" (Wiley; 1st ed. 2016 — year from memory, edition not
    # checked), Cronbach's alpha example, its "Reliability Statistics" output table:
    # alpha = 0.633 for these 10 cases x 5 items; "Item Statistics" table:
    # SDs 2.71006, 5.05085, 4.74810, 2.71621, 3.80058 (checked below with pandas,
    # so the re-keyed data is known to be the book's).
    items = pd.read_csv(DATA / "denis_alpha_items.csv").drop(columns="case")
    assert items.std(ddof=1).round(5).tolist() == [2.71006, 5.05085, 4.74810, 2.71621, 3.80058]
    result = cronbach_alpha(items)
    assert round(result.alpha, 3) == 0.633
    assert (result.n_used, result.k) == (10, 5)


def test_item_analysis_on_denis_worked_example():
    # Same source, "Item-Total Statistics" table: Item_1's corrected
    # item-total correlation is 0.712. Its inter-item correlation matrix shows
    # Item_5 correlating negatively with most other items (-0.463, -0.129,
    # -0.011), so it is the item the negative flag should catch.
    items = pd.read_csv(DATA / "denis_alpha_items.csv").drop(columns="case")
    table = item_analysis(items).set_index("item")
    assert round(table.loc["Item_1", "item_total_r"], 3) == 0.712
    assert table["negative"].tolist() == [False, False, False, False, True]
    # Alpha if deleted against pingouin on the same columns (reference library).
    for name in items.columns:
        expected, _ = pg.cronbach_alpha(items.drop(columns=name))
        assert table.loc[name, "alpha_if_deleted"] == pytest.approx(expected, abs=1e-12)
        # Corrected item-total r against scipy's Pearson r (reference library).
        r = stats.pearsonr(items[name], items.drop(columns=name).sum(axis=1)).statistic
        assert table.loc[name, "item_total_r"] == pytest.approx(r, abs=1e-12)


def test_alpha_listwise_matches_pingouin_documented_binary_example():
    # pingouin's documentation for cronbach_alpha: its bundled 12 x 11 binary
    # data set with missing values gives 0.8017 with nan_policy="listwise",
    # stated there to agree with R's psych::alpha(use="complete.obs").
    data = pg.read_dataset("cronbach_wide_missing")
    result = cronbach_alpha(data)
    assert round(result.alpha, 4) == 0.8017
    assert result.k == 11
    assert result.n_used == len(data.dropna())


def test_alpha_matches_pingouin_documented_likert_example():
    # pingouin's documentation: its bundled "cronbach_alpha" data set
    # (credited there to www.real-statistics.com) gives 0.5917.
    long = pg.read_dataset("cronbach_alpha")
    wide = long.pivot(index="Subj", columns="Items", values="Scores")
    assert round(cronbach_alpha(wide).alpha, 4) == 0.5917


def test_alpha_on_random_data_matches_pingouin():
    # Reference library computed in the same test: pingouin.cronbach_alpha, listwise.
    rng = np.random.default_rng(7)
    trait = rng.normal(size=60)
    items = pd.DataFrame({f"q{i}": trait + rng.normal(size=60) for i in range(6)}).round()
    items.iloc[[3, 17, 40], [1, 4, 2]] = np.nan
    expected, _ = pg.cronbach_alpha(items, nan_policy="listwise")
    result = cronbach_alpha(items)
    assert result.alpha == pytest.approx(expected, abs=1e-12)
    assert result.n_used == 57


def test_alpha_undefined_with_one_item_or_one_row():
    assert math.isnan(cronbach_alpha(pd.DataFrame({"a": [1, 2, 3]})).alpha)
    assert math.isnan(cronbach_alpha(pd.DataFrame({"a": [1], "b": [2]})).alpha)


# ---------------------------------------------------------------- split-half


def test_spearman_brown_textbook_value():
    # Spearman-Brown prophecy formula 2r / (1 + r): a half-test correlation of
    # 0.6 gives 1.2 / 1.6 = 0.75 for the full test (hand-worked).
    assert spearman_brown(0.6) == pytest.approx(0.75)


def test_split_half_odd_even_against_numpy():
    # Reference: numpy's corrcoef on the odd-item and even-item sums, then
    # Spearman-Brown written out here.
    rng = np.random.default_rng(3)
    trait = rng.normal(size=40)
    items = pd.DataFrame({f"q{i}": trait + rng.normal(size=40) for i in range(5)})
    odd = items[["q0", "q2", "q4"]].sum(axis=1)
    even = items[["q1", "q3"]].sum(axis=1)
    r = np.corrcoef(odd, even)[0, 1]
    result = split_half(items)
    assert result.r_halves == pytest.approx(r)
    assert result.spearman_brown == pytest.approx(2 * r / (1 + r))
    assert result.n_used == 40


# ---------------------------------------------------------------- Cohen's kappa


def test_kappa_classic_two_by_two_table():
    # Classic 2 x 2 example (as in Wikipedia's "Cohen's kappa" article, from
    # memory): both say yes 20, A yes/B no 5, A no/B yes 10, both no 15.
    # Hand-worked: po = 35/50 = 0.70, pe = 0.5*0.6 + 0.5*0.4 = 0.50, kappa = 0.40.
    a = pd.Series(["yes"] * 25 + ["no"] * 25)
    b = pd.Series(["yes"] * 20 + ["no"] * 5 + ["yes"] * 10 + ["no"] * 15)
    result = cohen_kappa(a, b)
    assert result.kappa == pytest.approx(0.40)
    assert result.agreement == pytest.approx(0.70)
    assert result.n == 50


def test_kappa_matches_scikit_learn_and_skips_missing_pairs():
    # Reference library computed in the same test: sklearn.metrics.cohen_kappa_score.
    rng = np.random.default_rng(11)
    a = pd.Series(rng.integers(1, 5, size=80))
    b = a.where(rng.random(80) < 0.7, pd.Series(rng.integers(1, 5, size=80)))
    expected = cohen_kappa_score(a, b)
    assert cohen_kappa(a, b).kappa == pytest.approx(expected, abs=1e-12)
    a_missing = a.astype("Float64")
    a_missing.iloc[:5] = pd.NA
    result = cohen_kappa(a_missing, b)
    assert result.n == 75
    assert result.kappa == pytest.approx(cohen_kappa_score(a[5:], b[5:]), abs=1e-12)


def test_kappa_pairs_from_passes_pairs_by_id_and_drops_missing_codes():
    q = Variable("q", "integer", codes=(Code("1", "no"), Code("2", "yes")), missing=(Code("9"),))
    cb = Codebook((Variable("id", is_id=True), q))
    p1 = PassData.from_texts(
        1, pd.DataFrame({"id": ["a", "b", "c", "d"], "q": ["1", "2", "9", "2"]})
    )
    p2 = PassData.from_texts(
        2, pd.DataFrame({"id": ["d", "c", "a", "b"], "q": ["1", "2", "01", ""]})
    )
    a, b = kappa_pairs_from_passes(cb, p1, p2)["q"]

    def plain(s):
        return [None if pd.isna(v) else v for v in s]

    pairs = sorted(zip(plain(a), plain(b), strict=True), key=str)
    # Written out by hand: a 1/1, b 2/blank, c missing-code/2, d 2/1.
    assert pairs == sorted([("1", "1"), ("2", None), (None, "2"), ("2", "1")], key=str)
    assert cohen_kappa(a, b).n == 2


# ---------------------------------------------------------------- descriptives


def test_skewness_and_kurtosis_match_scipy_adjusted():
    # scipy.stats with bias=False gives the adjusted Fisher-Pearson G1 and the
    # adjusted excess kurtosis G2, the same choice as this module.
    x = pd.Series(np.random.default_rng(5).gamma(2.0, size=50))
    assert skewness_g1(x) == pytest.approx(stats.skew(x, bias=False))
    assert kurtosis_g2(x) == pytest.approx(stats.kurtosis(x, fisher=True, bias=False))


def test_describe_excludes_declared_missing_codes_and_counts_them():
    var = Variable(
        "age", "integer", min=18, max=99, missing=(Code("-9", "refused"), Code("-8", "unknown"))
    )
    s = pd.Series([20, 30, -9, 40, None, -9, -8, 50], dtype="Int64")
    d = describe(s, var)
    clean = np.array([20.0, 30, 40, 50])
    # Reference: numpy on the values left once the codes are taken out by hand.
    assert (d.n, d.blank, d.missing) == (4, 1, {"-9": 2, "-8": 1})
    assert d.mean == pytest.approx(clean.mean())
    assert d.sd == pytest.approx(clean.std(ddof=1))
    assert (d.median, d.min, d.max) == (35.0, 20.0, 50.0)


def test_tukey_fences_match_numpy_linear_percentiles():
    # numpy.percentile's default method "linear" (Hyndman & Fan type 7) is the
    # quartile method this module states.
    x = pd.Series([1.0, 2, 3, 4, 5, 6, 7, 8, 9, 60])
    q1, q3 = np.percentile(x, [25, 75], method="linear")
    f = tukey_fences(x)
    assert (f.q1, f.q3) == (q1, q3)
    assert f.low == pytest.approx(q1 - 1.5 * (q3 - q1))
    assert f.high == pytest.approx(q3 + 1.5 * (q3 - q1))
    d = describe(x, Variable("x", "number"), pd.Series([f"p{i}" for i in range(10)]))
    assert d.outliers_tukey == ("p9",)


def test_z_outliers_use_threshold_3_29():
    # 3.29 is the common-practice cut-off (two-sided p < .001). 30 ordinary
    # values and one far one; z computed here with numpy (ddof=1) as reference.
    x = pd.Series([10.0] * 15 + [11.0] * 15 + [40.0])
    z = (x - x.mean()) / x.std(ddof=1)
    expected = tuple(f"p{i}" for i in np.flatnonzero(np.abs(z) > 3.29))
    d = describe(x, Variable("x", "number"), pd.Series([f"p{i}" for i in range(31)]))
    assert d.outliers_z == expected == ("p30",)


def test_frequencies_carry_labels_and_exclude_missing_codes():
    var = Variable(
        "pet", "integer", codes=(Code("1", "none"), Code("2", "cat")), missing=(Code("9"),)
    )
    d = describe(pd.Series([1, 2, 2, 9, None], dtype="Int64"), var)
    table = d.frequencies
    assert table[["value", "label", "count"]].values.tolist() == [["1", "none", 1], ["2", "cat", 2]]
    assert table["percent"].tolist() == pytest.approx([100 / 3, 200 / 3])


def test_text_histogram_is_plain_text_with_counts():
    var = Variable("pet", "integer", codes=(Code("1", "none"), Code("2", "cat")))
    lines = text_histogram(pd.Series([1, 2, 2], dtype="Int64"), var, width=10)
    assert lines == ["1 none  #####       1", "2 cat   ##########  2"]
    numeric = text_histogram(pd.Series(range(100), dtype="float64"), bins=4, width=8)
    # numpy.histogram with 4 bins over 0..99 puts 25 values in each bin.
    assert [line.split()[-1] for line in numeric] == ["25"] * 4


# ---------------------------------------------------------------- scale scores


def test_reverse_scoring_and_mean_score_hand_worked():
    cb = Codebook(
        (
            Variable("id", is_id=True),
            likert("a1", "A"),
            likert("a2", "A", reverse=True),
            likert("a3", "A"),
        )
    )
    df = pd.DataFrame({"id": ["p1", "p2"], "a1": [5, 2], "a2": [1, 4], "a3": [4, 3]})
    out = scale_scores(df, cb)
    # Hand-worked: p1 reversed a2 = 1 + 5 - 1 = 5, mean (5 + 5 + 4) / 3 = 14/3;
    #              p2 reversed a2 = 1 + 5 - 4 = 2, mean (2 + 2 + 3) / 3 = 7/3.
    assert out.items["A"]["a2"].tolist() == [5.0, 2.0]
    assert out.scores["A"].tolist() == pytest.approx([14 / 3, 7 / 3])
    assert out.method["A"] == "mean"


def test_sum_score_prorated_and_too_few_answered_hand_worked():
    items = [likert(f"b{i}", "B", score="sum", min_answered=0.75) for i in range(1, 5)]
    cb = Codebook((Variable("id", is_id=True), *items))
    df = pd.DataFrame(
        {
            "id": ["full", "one_blank", "two_blank"],
            "b1": [1, 2, 3],
            "b2": [2, 4, None],
            "b3": [3, None, None],
            "b4": [4, 3, 5],
        }
    )
    out = scale_scores(df, cb)
    # Hand-worked: full = 1+2+3+4 = 10; one_blank answers 3 of 4 (0.75, enough):
    # (2+4+3) x 4/3 = 12, prorated; two_blank answers 2 of 4 (< 0.75): missing.
    assert out.scores["B"].iloc[:2].tolist() == pytest.approx([10.0, 12.0])
    assert math.isnan(out.scores["B"].iloc[2])
    assert (out.prorated["B"], out.too_few["B"]) == (1, 1)


def test_declared_missing_code_is_not_an_answer():
    items = [
        Variable(f"c{i}", "integer", min=1, max=5, scale="C", missing=(Code("9", "refused"),))
        for i in range(1, 6)
    ]
    cb = Codebook((Variable("id", is_id=True), *items))
    df = pd.DataFrame({"id": ["p"], **{f"c{i}": [v] for i, v in enumerate([2, 4, 9, 4, 5], 1)}})
    # Hand-worked: 9 is a missing code, so 4 of 5 answered (0.8, the default
    # minimum, common practice): mean (2 + 4 + 4 + 5) / 4 = 3.75.
    assert scale_scores(df, cb).scores["C"].tolist() == [3.75]


def test_reverse_item_without_bounds_is_a_codebook_error():
    cb = Codebook(
        (Variable("id", is_id=True), Variable("r", "integer", scale="R", reverse=True, row=4))
    )
    with pytest.raises(CodebookError, match=r"codebook row 4.*add them"):
        scale_scores(pd.DataFrame({"id": ["p"], "r": [1]}), cb)


# ---------------------------------------------------------------- rules, sensitivity, screen


def study_codebook():
    return Codebook(
        (
            Variable("id", is_id=True),
            Variable("name", identifying=True),
            Variable("age", "integer", min=0, max=120, missing=(Code("-9", "refused"),)),
            likert("a1", "A"),
            likert("a2", "A", reverse=True),
            likert("a3", "A"),
        )
    )


def study_data():
    ages = [30, 31, 29, 32, 30, 31, 28, 30, 33, 29, 30, 31, 30, 29, 31, 95, -9]
    n = len(ages)
    rng = np.random.default_rng(2)
    a1 = rng.integers(1, 6, size=n)
    return pd.DataFrame(
        {
            "id": [f"P{i:02d}" for i in range(n)],
            "name": ["x"] * n,
            "age": pd.array(ages, dtype="Int64"),
            "a1": pd.array(a1, dtype="Int64"),
            "a2": pd.array(6 - a1, dtype="Int64"),
            "a3": pd.array([None, None] + list(a1[2:]), dtype="Int64"),
        }
    )


def test_rules_catch_participants_and_read_well():
    data, cb = study_data(), study_codebook()
    # z of age = 95 among these values, computed with numpy as reference.
    ages = np.array([a for a in data["age"].astype(float) if a != -9])
    z95 = (95 - ages.mean()) / ages.std(ddof=1)
    assert z95 > 3.29
    assert ZRule("age").catches(data, cb) == ["P15"]
    assert "3.29" in ZRule("age").text and "age" in ZRule("age").text
    assert BlankItemsRule("A", 0).catches(data, cb) == ["P00", "P01"]
    assert BlankItemsRule("A", 1).catches(data, cb) == []
    assert parse_rule("blank:A:0") == BlankItemsRule("A", 0)
    with pytest.raises(UsageError, match="z:VARIABLE"):
        parse_rule("age>3")
    with pytest.raises(UsageError, match="no scale 'Z'"):
        BlankItemsRule("Z", 1).catches(data, cb)


def test_sensitivity_side_by_side():
    data, cb = study_data(), study_codebook()
    kept = data[data["id"] != "P15"]
    table = sensitivity(data, kept, cb).set_index("name")
    clean_all = data["age"][data["age"] != -9].astype(float)
    clean_kept = kept["age"][kept["age"] != -9].astype(float)
    assert table.loc["age", "n_all"] == 16 and table.loc["age", "n_kept"] == 15
    assert table.loc["age", "mean_all"] == pytest.approx(clean_all.mean())
    assert table.loc["age", "mean_kept"] == pytest.approx(clean_kept.mean())
    assert "A" in table.index


def test_screen_json_shape_and_nulls():
    data, cb = study_data(), study_codebook()
    result = screen(data, cb, data_all=data, kappa_pairs={"a1": (data["a1"], data["a1"])})
    doc = json.loads(result.to_json())
    assert set(doc) == {"scales", "variables"}
    scale = doc["scales"]["A"]
    assert {"alpha", "n", "items"} <= set(scale)
    assert [i["name"] for i in scale["items"]] == ["a1", "a2", "a3"]
    # a2 is reversed on scoring, so with a2 = 6 - a1 the items agree perfectly
    # and alpha is 1 (hand-worked: identical items after reverse scoring).
    assert scale["alpha"] == pytest.approx(1.0)
    assert scale["n"] == len(data) - 2
    assert "name" not in doc["variables"] and "id" not in doc["variables"]
    age = doc["variables"]["age"]
    assert {"n", "mean", "sd"} <= set(age)
    assert age["n"] == 16 and age["missing"] == {"-9": 1}
    assert doc["variables"]["a1"]["kappa"]["kappa"] == pytest.approx(1.0)
    # One row: the SD is undefined, written as null (strict JSON, no NaN).
    one = screen(data.iloc[:1], cb).to_json()
    assert json.loads(one)["variables"]["age"]["sd"] is None
    assert "NaN" not in one


def test_z_rule_on_a_scale_score():
    cb = study_codebook()
    data = study_data()
    data[["a1", "a2", "a3"]] = 3
    data.loc[3, ["a1", "a3"]] = 4
    data.loc[5, ["a1", "a2", "a3"]] = [5, 1, 5]
    # Hand-scored here: mean of a1, (1 + 5 - a2) and a3; then z with pandas (ddof=1).
    scores = (data["a1"] + (6 - data["a2"]) + data["a3"]).astype(float) / 3
    z = (scores - scores.mean()) / scores.std(ddof=1)
    expected = data.loc[z.abs() > 3.29, "id"].tolist()
    assert expected == ["P05"]
    assert ZRule("A").catches(data, cb) == expected


# ---------------------------------------------------------------- properties


@settings(max_examples=25, deadline=None)
@given(
    st.lists(
        st.tuples(*(st.one_of(st.none(), st.integers(1, 5)) for _ in range(4))),
        min_size=3,
        max_size=30,
    )
)
def test_alpha_always_matches_pingouin_listwise(rows):
    # Reference library computed in the same test: pingouin.cronbach_alpha.
    items = pd.DataFrame(rows, columns=list("abcd"), dtype="float64")
    complete = items.dropna()
    result = cronbach_alpha(items)
    assert result.n_used == len(complete)
    if len(complete) < 2 or complete.sum(axis=1).var() == 0:
        assert math.isnan(result.alpha)
    else:
        expected, _ = pg.cronbach_alpha(items, nan_policy="listwise")
        assert result.alpha == pytest.approx(expected, rel=1e-9, abs=1e-9)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 3), st.integers(0, 3)), min_size=1, max_size=40))
def test_kappa_always_matches_scikit_learn(pairs):
    # Reference library computed in the same test: sklearn's cohen_kappa_score.
    a = pd.Series([p[0] for p in pairs])
    b = pd.Series([p[1] for p in pairs])
    result = cohen_kappa(a, b)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # sklearn warns when chance agreement is 1
        expected = cohen_kappa_score(a, b)
    if math.isnan(expected):
        assert math.isnan(result.kappa)
    else:
        assert result.kappa == pytest.approx(expected, abs=1e-12)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.floats(-1e3, 1e3, allow_nan=False), min_size=4, max_size=40))
def test_moments_and_fences_always_match_scipy_and_numpy(values):
    x = pd.Series(values)
    # A (nearly) constant column has no skewness to compare: not drawn.
    assume(np.ptp(values) > 1e-6)
    # scipy.stats with bias=False (adjusted G1, G2); numpy's linear percentiles.
    assert skewness_g1(x) == pytest.approx(stats.skew(values, bias=False), rel=1e-6, abs=1e-6)
    assert kurtosis_g2(x) == pytest.approx(
        stats.kurtosis(values, fisher=True, bias=False), rel=1e-6, abs=1e-6
    )
    q1, q3 = np.percentile(values, [25, 75])
    assert (tukey_fences(x).q1, tukey_fences(x).q3) == pytest.approx((q1, q3))
