"""``decide --from``: every row checked first, all or nothing."""

from __future__ import annotations

import argparse

import pandas as pd
import pytest
from openpyxl import Workbook

from core.codebook import Code, Codebook, Variable
from core.errors import DecisionError
from core.resolution import apply_decisions_file, worklist
from core.store import Study
from tui.commands import decide

CODEBOOK = Codebook(
    (
        Variable("pid", "integer", is_id=True, required=True),
        Variable("age", "integer", min=16, max=99, required=True),
        Variable("q1", "integer", codes=(Code("1"), Code("2"), Code("3")), missing=(Code("9", "no answer"),)),
        Variable("size", "number", min=0, max=400),
        Variable("note", "string"),
    )
)
# Where the passes differ: pid 2 age (38 / 83), pid 3 q1 (2 / 3), pid 3 note ("" / "x").
PASS1 = [["1", "34", "2", "5.5", "fine"], ["2", "38", "1", "12.0", ""], ["3", "50", "2", "7.25", ""]]
PASS2 = [["1", "34", "2", "5.5", "fine"], ["2", "83", "1", "12", ""], ["3", "50", "3", "7.25", "x"]]
HEADER = "participant,variable,value,reason\n"


@pytest.fixture
def study(tmp_path):
    s = Study.create(tmp_path / "s.sqlite", CODEBOOK, "lead")
    s.import_pass(1, "AB", pd.DataFrame(PASS1, columns=CODEBOOK.names, dtype=object))
    s.import_pass(2, "JM", pd.DataFrame(PASS2, columns=CODEBOOK.names, dtype=object))
    yield s
    s.close()


def _write(tmp_path, body, name="decisions.csv"):
    path = tmp_path / name
    path.write_text(HEADER + body, encoding="utf-8")
    return path


PREFIX = "3,note,,paper blank\n"  # a good row before the bad one
GOOD = "3,q1,9,paper blank\n" + PREFIX + "2,age,38,checked against paper: pass 1 right\n"


def test_the_demo_table_has_the_three_cells_the_good_file_settles(study):
    rows = worklist(study)
    cells = set(zip(rows["participant"], rows["variable"], strict=True))
    assert cells == {("2", "age"), ("3", "q1"), ("3", "note")}


@pytest.mark.parametrize(
    "body, line, column, words",
    [
        ("2,age,38,checked\n77,age,38,checked\n", 3, "participant", '"77" has no form'),
        (",age,38,checked\n", 2, "participant", "participant ID is empty"),
        ("2,agee,38,checked\n", 2, "variable", '"agee" is not a variable'),
        ("2,age,38,checked\n1,age,34,checked\n", 3, "variable", "nothing open in age"),
        ("2,age,abc,checked\n", 2, "value", "cannot stand in age, which takes integer 16 to 99"),
        ("2,age,104,checked against paper\n", 2, "value", "outside age's rule"),
        ("3,q1,4,checked\n", 2, "value", "outside q1's rule"),
        ("2,age,38,\n", 2, "reason", "reason is empty"),
        ("2,age,38,checked\n2,age,83,checked\n", 3, "variable", "already decided in row 3"),
    ],
)
def test_a_bad_row_refuses_the_whole_file_with_its_row_number(study, tmp_path, body, line, column, words):
    path = _write(tmp_path, PREFIX + body)
    line += PREFIX.count("\n")
    head = study.journal_head()
    with pytest.raises(DecisionError) as caught:
        apply_decisions_file(study, path, "LM")
    message = str(caught.value)
    assert message.startswith(f'decisions.csv row {line}, column "{column}": ')
    assert words in message
    assert message.count(". ") == 0 and message.endswith(".")  # one sentence
    assert study.journal_head() == head  # nothing applied
    assert study.decisions().empty


def test_a_good_file_settles_every_row(study, tmp_path):
    assert apply_decisions_file(study, _write(tmp_path, GOOD), "LM") == 3
    rows = worklist(study)
    assert set(rows["_status"]) == {"settled"}
    d = study.decisions().set_index("variable")
    assert (d.loc["age", "value"], d.loc["age", "pass1"], d.loc["age", "pass2"]) == ("38", "38", "83")
    assert (d.loc["note", "value"], d.loc["note", "state"]) == ("", "blank")
    assert d.loc["q1", "value"] == "9"  # a declared missing code, written as itself
    assert set(d["keyer"]) == {"LM"}


def test_paper_says_keeps_an_out_of_rule_value(study, tmp_path):
    path = _write(tmp_path, '2,age,104,"Paper says: 104, written clearly"\n')
    assert apply_decisions_file(study, path, "LM") == 1
    d = study.decisions().iloc[-1]
    assert (d["action"], d["value"]) == ("keep", "104")


def test_the_file_is_applied_in_one_transaction(study, tmp_path, monkeypatch):
    real = study.add_decision
    calls = []

    def fail_on_third(*args, **kwargs):
        calls.append(args)
        if len(calls) == 3:
            raise DecisionError("disk full — try again.")
        return real(*args, **kwargs)

    monkeypatch.setattr(study, "add_decision", fail_on_third)
    head = study.journal_head()
    with pytest.raises(DecisionError):
        apply_decisions_file(study, _write(tmp_path, GOOD), "LM")
    assert len(calls) == 3
    assert study.journal_head() == head
    assert study.decisions().empty


def test_an_xlsx_file_with_numbers_in_cells(study, tmp_path):
    book = Workbook()
    sheet = book.active
    sheet.append(["participant", "variable", "value", "reason"])
    sheet.append([2, "age", 38, "checked against paper: pass 1 right"])  # numbers, as Excel keeps them
    sheet.append([3.0, "q1", 9.0, "paper blank"])
    sheet.append([3, "note", None, "paper blank"])
    path = tmp_path / "decisions.xlsx"
    book.save(path)
    assert apply_decisions_file(study, path, "LM") == 3
    assert study.decisions()["value"].tolist() == ["38", "9", ""]
    assert study.decisions()["participant"].tolist() == ["2", "3", "3"]


def test_missing_column_is_refused(study, tmp_path):
    path = tmp_path / "decisions.csv"
    path.write_text("participant,variable,value\n2,age,38\n", encoding="utf-8")
    with pytest.raises(DecisionError, match='decisions.csv row 1, column "reason" is missing'):
        apply_decisions_file(study, path, "LM")


def test_command_exit_status_and_message(study, tmp_path, capsys):
    study.close()
    args = argparse.Namespace(study=str(tmp_path / "s.sqlite"), keyer="LM",
                              source=str(_write(tmp_path, "2,agee,38,checked\n")))  # fmt: skip
    from tui.cli import main

    status = main(["decide", args.study, "--keyer", "LM", "--from", args.source])
    err = capsys.readouterr().err
    assert status == 2
    assert err.strip().splitlines() == [
        'keyproof decide: decisions.csv row 2, column "variable": "agee" is not a variable '
        "of this study — check the name."
    ]
    # A good file leaving work open still ran: exit 1 (DESIGN.md: work left open).
    part = _write(tmp_path, "2,age,38,checked against paper: pass 1 right\n", "part.csv")
    assert decide.run(argparse.Namespace(study=args.study, keyer="LM", source=str(part))) == 1
    rest = _write(tmp_path, "3,q1,2,checked\n3,note,x,checked\n", "rest.csv")
    assert decide.run(argparse.Namespace(study=args.study, keyer="LM", source=str(rest))) == 0


def test_semicolons_and_a_broken_xlsx(study, tmp_path):
    path = tmp_path / "semi.csv"
    path.write_text("participant;variable;value;reason\n2;age;38;checked\n", encoding="utf-8")
    assert apply_decisions_file(study, path, "LM") == 1
    broken = tmp_path / "broken.xlsx"
    broken.write_text("participant,variable,value,reason\n", encoding="utf-8")
    with pytest.raises(DecisionError, match=r"^broken.xlsx could not be read as a table"):
        apply_decisions_file(study, broken, "LM")


def test_decide_warns_when_the_resolver_keyed_a_pass(study, tmp_path, capsys):
    study.close()
    path = _write(tmp_path, "2,age,38,checked against paper: pass 1 right\n")
    decide.run(argparse.Namespace(study=str(tmp_path / "s.sqlite"), keyer="AB", source=str(path)))
    err = capsys.readouterr().err
    # Barchard, Freeman, Ochoa & Stephens (2020): resolve against the paper, ideally by another person.
    assert "AB keyed a pass of 1 of these participants (2); check each value against the paper" in err


def test_row_numbers_count_empty_lines_as_a_spreadsheet_shows_them(study, tmp_path):
    path = _write(tmp_path, "3,note,,paper blank\n\n,,,\n2,agee,38,checked\n")
    with pytest.raises(DecisionError, match=r'^decisions.csv row 5, column "variable"'):
        apply_decisions_file(study, path, "LM")
    book = Workbook()
    sheet = book.active
    for line in (["participant", "variable", "value", "reason"], ["3", "note", None, "paper blank"],
                 [None, None, None, None], ["2", "agee", 38, "checked"]):  # fmt: skip
        sheet.append(line)
    book.save(tmp_path / "gaps.xlsx")
    with pytest.raises(DecisionError, match=r'^gaps.xlsx row 4, column "variable"'):
        apply_decisions_file(study, tmp_path / "gaps.xlsx", "LM")
