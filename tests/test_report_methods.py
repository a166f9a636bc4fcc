"""The methods paragraph of the verification report, on the demo study.

Expected numbers come from outside the code under test: the demo's record of
planted slips (``fixtures/demo/slips.csv``: which pass made each keying
error, which form pass 2 never keyed, which values the paper itself breaks)
and the paper truth (``fixtures/demo/paper.csv``); Wilson intervals from
statsmodels (``proportion_confint``, method "wilson"), computed in the test.
"""

from __future__ import annotations

import re

import pandas as pd
from demo_resolved import FIXTURES, resolved_demo
from statsmodels.stats.proportion import proportion_confint

from core.codebook_io import load_codebook
from core.demo import make_demo_study
from core.report import build_report
from core.report_methods import methods_paragraph
from core.setaside import set_aside
from core.store import Study

SLIPS = pd.read_csv(FIXTURES / "slips.csv", dtype=str, keep_default_na=False)
PAPER = pd.read_csv(FIXTURES / "paper.csv", dtype=str, keep_default_na=False)
CODEBOOK = load_codebook(FIXTURES / "codebook.csv")


def _paragraph(path) -> str:
    with Study.open(path, readonly=True) as study:
        return methods_paragraph(build_report(study))


def test_open_study_gives_a_draft_that_says_so_first(tmp_path):
    text = _paragraph(make_demo_study(tmp_path))
    assert text.startswith("DRAFT")
    assert "Every flagged field was settled" not in text
    # Read from the keyed files themselves: IDs keyed in both passes, or in one.
    ids = [set(pd.read_csv(FIXTURES / f"pass{p}.csv", dtype=str)[CODEBOOK.id_variable.name])
           for p in (1, 2)]
    assert f"{len(ids[0] & ids[1])} questionnaires were keyed twice" in text
    assert f"{len(ids[0] ^ ids[1])} further questionnaires were keyed in one pass only" in text
    # The demo imports both keyed files whole.
    assert "Both passes were keyed in spreadsheets and imported" in text


def test_resolved_demo_paragraph_states_the_slips_record(tmp_path):
    path = resolved_demo(tmp_path)
    with Study.open(path) as study:
        set_aside(study, "409", "consent withdrawn after the visit", "LM")
    text = _paragraph(path)
    assert not text.startswith("DRAFT")

    # The resolver keyed the form pass 2 never keyed from its paper: every paper twice.
    paired = len(PAPER)
    variables = len(CODEBOOK) - 1  # the ID pairs the forms
    assert f"{paired} questionnaires were keyed twice" in text
    assert "one pass only" not in text
    # The resolver keyed the missing form on screen; every other form came from the files.
    rows = [len(pd.read_csv(FIXTURES / f"pass{p}.csv", dtype=str)) for p in (1, 2)]
    assert (f"{rows[0]} forms of pass 1 and {rows[1]} forms of pass 2 were keyed in a "
            "spreadsheet and imported") in text
    assert "no one keyed both passes" in text

    field_slips = SLIPS[~SLIPS["variable"].isin(["", CODEBOOK.id_variable.name])]
    fields = paired * variables
    assert f"{variables} variables per questionnaire, {fields:,} fields" in text
    rate = 10_000 * len(field_slips) / fields
    assert f"{len(field_slips)} fields were flagged" in text and f"({rate:.1f} per 10,000" in text
    assert "Every flagged field was settled against the paper" in text

    keying = SLIPS[SLIPS["kind"] == "mismatch"]
    for pass_no in (1, 2):
        errors = int((keying["pass"] == str(pass_no)).sum())
        # statsmodels: the reference Wilson score interval.
        low, high = proportion_confint(errors, fields, alpha=0.05, method="wilson")
        assert (f"pass {pass_no} made {errors} errors ({10_000 * errors / fields:.1f} per "
                f"10,000 fields; 95 % Wilson interval {10_000 * low:.1f} to "
                f"{10_000 * high:.1f})") in text

    assert "1 participant was set aside" in text
    assert "consent withdrawn after the visit: 1" in text
    for scale in CODEBOOK.scales:
        assert re.search(rf"{scale} \.\d\d \(\d+ items, n = \d+\)", text)
    # No participant ID in a paragraph meant for a paper.
    for pid in PAPER[CODEBOOK.id_variable.name]:
        assert not re.search(rf"(?<![\d.,]){pid}(?![\d.,])", text), pid
