"""`keyproof compare STUDY` lists what is still open: decisions settle, a changed pass reopens.

Issue 5's check: after every discrepancy of the demo is settled against its
paper truth (fixtures/demo/paper.csv, the outside record), compare reports
nothing open and exits 0.
"""

from __future__ import annotations

import pandas as pd
from demo_resolved import copy_study, make_demo_study, resolved_demo

from core.compare import compare_study
from core.resolution import take_pass
from core.store import Study
from tui.cli import main


def listed(path, tmp_path, capsys) -> tuple[int, pd.DataFrame, str]:
    out = tmp_path / "open.csv"
    status = main(["compare", str(path), "--out", str(out)])
    return status, pd.read_csv(out, dtype=str, keep_default_na=False), capsys.readouterr().err


def test_a_decision_takes_its_discrepancy_off_the_list_and_a_changed_pass_reopens(
        tmp_path, capsys):
    path = make_demo_study(tmp_path)
    status, before, _ = listed(path, tmp_path, capsys)
    with Study.open(path, readonly=True) as study:
        found = compare_study(study)
    assert status == 1 and len(before) == len(found)
    row = found[found["kind"] == "mismatch"].iloc[0]
    with Study.open(path) as study:
        take_pass(study, row, 1, "checked against paper: pass 1 right", "LM")
    status, after, err = listed(path, tmp_path, capsys)
    assert status == 1 and len(after) == len(before) - 1
    assert not ((after["participant"] == row["participant"])
                & (after["variable"] == row["variable"])).any()
    assert "settled by decisions: 1" in err
    # The pass-2 form's value changes after the decision: the discrepancy is back.
    with Study.open(path) as study:
        study.set_value(int(row["_form2"]), row["variable"], "0", "keyed", "JM")
    status, reopened, err = listed(path, tmp_path, capsys)
    assert len(reopened) == len(before) and "reopened" in err


def test_a_study_settled_against_its_paper_has_nothing_open(tmp_path, capsys):
    path = copy_study(resolved_demo(tmp_path / "built"), tmp_path)
    status, rows, err = listed(path, tmp_path, capsys)
    assert (status, len(rows)) == (0, 0), rows
    assert "still open: 0" in err
