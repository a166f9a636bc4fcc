"""Scale scores in the verified file: computed columns after the codebook's variables.

The outside record is the demo's paper truth and codebook as plain CSV
(fixtures/demo/paper.csv, fixtures/demo/codebook.csv): each score is
recomputed here with plain pandas from the exported items, following the
rule the codebook states, written out below; frictionless (the reference
implementation of the Data Package standard) validates the package. Small
hand-worked cases cover proration and too few answers, which the demo's
paper hardly has.
"""

from __future__ import annotations

import json
import math

import numpy as np
import openpyxl
import pandas as pd
import pytest
from demo_resolved import FIXTURES, resolved_demo
from frictionless import validate

from core.codebook import Code, Codebook, Variable
from core.export import export, score_names
from core.resolution import verified_table
from core.store import Study
from core.verified import Verified

SCALES = ["belonging", "workdays", "sharing"]  # paper order of the demo codebook


def _codebook_rows() -> pd.DataFrame:
    return pd.read_csv(FIXTURES / "codebook.csv", dtype=str, keep_default_na=False)


def _scores_by_hand(items: pd.DataFrame, book: pd.DataFrame) -> pd.DataFrame:
    """The codebook's scoring rule, written out with plain pandas (not keyproof's code).

    For each scale: an item's declared missing codes (the ``missing`` column,
    ``9=no answer``) count as unanswered; a reverse-keyed item scores
    min + max - x; the score is missing when fewer than ceil(min_answered x k)
    of the k items are answered; a ``mean`` score is the mean of the answered
    items; a ``sum`` score is the sum of the answered items x k / answered
    (prorated to the full length).
    """
    out = {}
    for scale, rows in book[book["scale"] != ""].groupby("scale", sort=False):
        cols = {}
        for row in rows.itertuples(index=False):
            x = pd.to_numeric(items[row.name], errors="coerce").astype("float64")
            codes = [float(c.split("=")[0]) for c in row.missing.split(";") if c.strip()]
            x = x.mask(x.isin(codes))
            if row.reverse == "yes":
                x = float(row.min) + float(row.max) - x
            cols[row.name] = x
        table = pd.DataFrame(cols)
        k = table.shape[1]
        answered = table.notna().sum(axis=1)
        need = math.ceil(float(rows["min_answered"].iloc[0]) * k - 1e-9)
        if rows["score"].iloc[0] == "sum":
            score = table.sum(axis=1) * k / answered
        else:
            score = table.sum(axis=1) / answered
        out[scale] = score.where(answered >= need)
    return pd.DataFrame(out)


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    """The demo resolved with its paper, exported to CSV, XLSX and a Data Package."""
    folder = tmp_path_factory.mktemp("scores")
    study_path = resolved_demo(folder / "study")
    with Study.open(study_path, readonly=True) as study:
        verified = verified_table(study)
    out = folder / "out"
    out.mkdir()
    results = {kind: export(verified, out / name)
               for kind, name in (("csv", "v.csv"), ("xlsx", "v.xlsx"), ("pkg", "pkg"))}
    return out, results


def test_demo_scores_follow_the_codebook_rule(exported):
    out, results = exported
    data = pd.read_csv(out / "v.csv")
    assert results["csv"].computed == tuple(SCALES)
    # The scores come after every variable of the codebook (identifying ones left out).
    variables = [n for n in _codebook_rows()["name"] if n != "initials"]
    assert list(data.columns) == variables + SCALES
    expected = _scores_by_hand(data, _codebook_rows())
    pd.testing.assert_frame_equal(data[SCALES], expected[SCALES], check_exact=False, rtol=1e-12)
    # The exported items are the paper's (outside record), so the scores are the paper's too.
    paper = pd.read_csv(FIXTURES / "paper.csv").sort_values("member_id").reset_index(drop=True)
    from_paper = _scores_by_hand(paper, _codebook_rows())
    pd.testing.assert_frame_equal(data[SCALES], from_paper[SCALES], check_exact=False,
                                  rtol=1e-12)
    # The paper's one declared missing code in a scale still leaves a score (4 of 5 answered).
    assert data[SCALES].notna().all().all()


def test_xlsx_carries_the_scores_and_marks_them_computed(exported):
    out, _ = exported
    csv = pd.read_csv(out / "v.csv")
    sheet = pd.read_excel(out / "v.xlsx", sheet_name="data")
    pd.testing.assert_frame_equal(sheet[SCALES], csv[SCALES], check_dtype=False)
    # openpyxl (reference reader) without pandas' type guessing: cells as written.
    wb = openpyxl.load_workbook(out / "v.xlsx")
    rows = list(wb["codebook"].iter_rows(values_only=True))
    book = {r[0]: dict(zip(rows[0], r, strict=True)) for r in rows[1:]}
    assert book["belong1"]["origin"] == "keyed" and not book["belong1"]["rule"]
    for scale in SCALES:
        assert book[scale]["origin"] == "computed" and book[scale]["type"] == "number"
    rule = book["belonging"]["rule"]
    assert "mean" in rule and "belong1, belong2, belong3, belong4, belong5" in rule
    assert "belong3 (1 + 5 - x)" in rule and "80%" in rule and "4 of 5" in rule
    # Means standing on fewer items, counted from the paper (9 = no answer) by hand.
    paper = pd.read_csv(FIXTURES / "paper.csv")
    partial = int(((paper[[f"belong{i}" for i in range(1, 6)]] == 9).sum(axis=1) == 1).sum())
    assert f"{partial} score(s) from fewer than all items" in rule
    assert "sum" in book["sharing"]["rule"] and "prorated" in book["sharing"]["rule"]
    assert "75%" in book["sharing"]["rule"] and "3 of 4" in book["sharing"]["rule"]


def test_data_package_describes_the_scores_and_validates(exported):
    out, _ = exported
    # frictionless: the reference implementation of the Data Package standard.
    report = validate(out / "pkg" / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    schema = json.loads((out / "pkg" / "schema.json").read_text(encoding="utf-8"))
    fields = {f["name"]: f for f in schema["fields"]}
    assert [f["name"] for f in schema["fields"]][-3:] == SCALES
    work = fields["workdays"]
    assert work["type"] == "number" and "Computed by keyproof" in work["description"]
    assert "work4 (1 + 7 - x)" in work["description"]
    assert work["keyproof:computed"]["items"] == [f"work{i}" for i in range(1, 7)]
    assert work["keyproof:computed"]["min_answered"] == 0.8
    data = pd.read_csv(out / "pkg" / "data.csv")
    pd.testing.assert_frame_equal(data[SCALES], pd.read_csv(out / "v.csv")[SCALES])


# Hand-worked: a 4-item sum scale (1 to 5, item c reverse-keyed, missing code
# 9, at least 75 % = 3 items answered) and a 2-item mean scale.
CB = Codebook((
    Variable("pid", is_id=True),
    *(Variable(n, "integer", min=1, max=5, scale="S", reverse=n == "c", score="sum",
               min_answered=0.75, missing=(Code("9", "no answer"),)) for n in "abcd"),
    Variable("m1", "integer", min=0, max=10, scale="M"),
    Variable("M", "integer"),  # a variable already named like the scale M
))
ROWS = pd.DataFrame({
    "pid": ["1", "2", "3", "4"],
    "a": [1, 2, 9, None], "b": [2, 2, 3, None], "c": [5, None, 1, 9], "d": [4, 3, 9, 5],
    "m1": [7, None, 3, 4], "M": [0, 0, 0, 0],
}).astype({n: "Int64" for n in ["a", "b", "c", "d", "m1", "M"]})
# p1: 1 + 2 + (6 - 5) + 4 = 8, all four answered.
# p2: 2 + 2 + 3 = 7 from three items, prorated 7 x 4 / 3 = 9.333...
# p3: two 9s (missing code) leave b and c: 2 of 4 answered, below 3, so missing.
# p4: d alone answered: missing.
# Scale M (one item, mean, default share 0.8 from the codebook, common practice): 7, -, 3, 4.
WORKED_S = [8.0, 28 / 3, np.nan, np.nan]
WORKED_M = [7.0, np.nan, 3.0, 4.0]


def test_hand_worked_scores_proration_and_too_few(tmp_path):
    assert score_names(CB) == {"S": "S", "M": "M_score"}
    result = export(Verified(CB, ROWS), tmp_path / "v.csv")
    data = pd.read_csv(tmp_path / "v.csv", dtype={"pid": str})
    assert list(data.columns) == ["pid", "a", "b", "c", "d", "m1", "M", "S", "M_score"]
    assert result.computed == ("S", "M_score") and result.columns == 7
    np.testing.assert_allclose(data["S"], WORKED_S, rtol=1e-12)
    np.testing.assert_allclose(data["M_score"], WORKED_M, rtol=1e-12)
    assert (data["M"] == 0).all()  # the keyed variable M is left as keyed
    # Too few answered: an empty cell in the CSV, not a number.
    lines = (tmp_path / "v.csv").read_text().splitlines()
    assert lines[3].endswith(",,3.0") and lines[4].endswith(",,4.0")
    about = json.loads((tmp_path / "v.about.json").read_text())
    assert about["variables"] == 7 and about["computed_columns"] == ["S", "M_score"]
    assert "1 score(s) prorated" in about["computed"]["S"]
    assert "2 participant(s)" in about["computed"]["S"]


def test_hand_worked_package_validates(tmp_path):
    export(Verified(CB, ROWS), tmp_path / "pkg")
    # frictionless: the reference implementation of the Data Package standard.
    report = validate(tmp_path / "pkg" / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    schema = json.loads((tmp_path / "pkg" / "schema.json").read_text())
    s = next(f for f in schema["fields"] if f["name"] == "S")
    assert s["keyproof:computed"]["prorated"] == 1 and s["keyproof:computed"]["too_few"] == 2
    assert s["keyproof:computed"]["partial"] == 1  # p2, three of four items
    assert s["keyproof:computed"]["reversed"] == ["c (1 + 5 - x)"]
    assert "c (1 + 5 - x)" in s["description"] and "sum x 4 / answered" in s["description"]
