"""Decisions, staleness, set-asides, independence and the verified table."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from demo_resolved import FIXTURES, settle_with_paper

from core.codebook import Code, Codebook, Variable
from core.errors import DecisionError, OpenWorkError
from core.resolution import (
    DEFAULT_REASONS,
    confirm_one_pass,
    counts_by_kind,
    drop_duplicate,
    independence_warning,
    join_decisions,
    keep_value,
    keyed_by,
    keyed_by_resolver,
    mark_blank,
    neighbours,
    next_open,
    pair_forms,
    position_of,
    reasons,
    reopen,
    restore,
    set_aside,
    set_aside_list,
    set_missing_code,
    set_paper_value,
    set_reasons,
    settle_shift,
    settle_spelling,
    take_pass,
    verified_table,
    worklist,
)
from core.store import Study

CODEBOOK = Codebook(
    (
        Variable("pid", "integer", is_id=True, required=True),
        Variable("age", "integer", min=16, max=99, required=True),
        Variable("q1", "integer", codes=(Code("1"), Code("2"), Code("3")), missing=(Code("9", "no answer"),)),
        Variable("q2", "integer", min=1, max=5),
        Variable("q3", "integer", min=1, max=5),
        Variable("q4", "integer", min=1, max=5),
        Variable("size", "number", min=0, max=400),
        Variable("joined", "date"),
        Variable("note", "string"),
    )
)
COLUMNS = CODEBOOK.names

# (pid, age, q1, q2, q3, q4, size, joined, note) as keyed by each pass.
PASS1 = [
    ["1", "34", "2", "1", "2", "3", "5.5", "2020-01-31", "fine"],
    ["2", "38", "1", "4", "4", "4", "12.0", "2019-05-02", ""],
    ["3", "50", "3", "1", "2", "3", "7.25", "2021-11-11", "x"],
]
PASS2 = [
    ["1", "34", "2", "1", "2", "3", "5.5", "2020-01-31", "fine"],
    ["2", "83", "1", "4", "4", "4", "12", "2019-05-02", ""],
    ["3", "50", "3", "2", "3", "", "7.25", "2021-11-11", "x"],
]


def _frame(rows):
    return pd.DataFrame(rows, columns=COLUMNS, dtype=object)


@pytest.fixture
def study(tmp_path):
    s = Study.create(tmp_path / "s.sqlite", CODEBOOK, "lead")
    s.import_pass(1, "AB", _frame(PASS1))
    s.import_pass(2, "JM", _frame(PASS2))
    yield s
    s.close()


def _form(study, pass_no, pid):
    return study.find_forms(pass_no, pid)[0]


def _row(study, pid, variable, kind="mismatch", cause="other"):
    """A comparison row as the engine shows it, built from the keyed input itself."""
    i = int(pid) - 1
    j = COLUMNS.index(variable)
    return {
        "participant": pid, "variable": variable, "kind": kind,
        "pass1": PASS1[i][j], "pass2": PASS2[i][j], "cause": cause, "detail": "",
        "_form1": _form(study, 1, pid), "_form2": _form(study, 2, pid), "_order": j,
    }  # fmt: skip


def _table(rows):
    return pd.DataFrame(rows)


def _last_decision(study):
    return study.decisions().iloc[-1]


def _last_journal(study):
    return study.journal().iloc[-1]


# ------------------------------------------------------------------ staleness


def test_a_decision_settles_its_row_and_a_later_change_of_a_pass_reopens_it(study):
    row = _row(study, "2", "age")
    take_pass(study, row, 1, "checked against paper: pass 1 right", "LM")
    assert worklist(study, _table([row]))["_status"].tolist() == ["settled"]

    # Pass 2 is re-keyed after the decision: the decision saw "83", now it is "81".
    study.set_value(row["_form2"], "age", "81", "keyed", "JM")
    now = dict(row, pass2="81")
    rows = worklist(study, _table([now]))
    assert rows["_status"].tolist() == ["stale"]
    # The old decision is still shown, so the resolver sees what was decided.
    assert rows.loc[0, "_decision_value"] == "38"
    assert rows.loc[0, "_decided_by"] == "LM"


def test_reopen_is_a_newer_decision_that_leaves_the_row_open(study):
    row = _row(study, "2", "age")
    take_pass(study, row, 2, "checked against paper: pass 2 right", "LM")
    reopen(study, row, "decided on the wrong form", "LM")
    assert worklist(study, _table([row]))["_status"].tolist() == ["open"]
    assert len(study.decisions()) == 2  # never deleted, only superseded


def test_form_level_rows_come_first_and_the_engine_order_is_kept():
    table = pd.DataFrame(
        {
            "participant": ["1", "1", "2", "5"],
            "variable": ["q2", "q1", "age", ""],
            "kind": ["mismatch", "mismatch", "blank", "only_in_pass2"],
            "pass1": ["1", "2", "", ""],
            "pass2": ["2", "3", "", ""],
        }
    )
    rows = join_decisions(table, pd.DataFrame())
    assert rows["participant"].tolist() == ["5", "1", "1", "2"]
    assert rows["variable"].tolist() == ["", "q2", "q1", "age"]
    assert set(rows["_status"]) == {"open"}


# ------------------------------------------------------------------ decisions are journaled


@pytest.mark.parametrize(
    "act, value, state, action",
    [
        (lambda s, r: take_pass(s, r, 1, "checked against paper: pass 1 right", "LM"), "38", "keyed", "value"),
        (lambda s, r: take_pass(s, r, 2, "checked against paper: pass 2 right", "LM"), "83", "keyed", "value"),
        (lambda s, r: set_paper_value(s, r, "39", "checked against paper: both wrong", "LM"), "39", "keyed", "value"),
        (lambda s, r: mark_blank(s, r, "paper blank", "LM"), "", "blank", "value"),
        (lambda s, r: mark_blank(s, r, "paper illegible", "LM", illegible=True), "", "illegible", "value"),
        (lambda s, r: keep_value(s, r, "104", "paper value outside the rule, kept", "LM"), "104", "keyed", "keep"),
    ],
)
def test_each_cell_decision_is_journaled_with_both_pass_values(study, act, value, state, action):
    row = _row(study, "2", "age")
    before = len(study.journal())
    act(study, row)
    d = _last_decision(study)
    # Both values the resolver saw are those keyed in the input (PASS1/PASS2 above).
    assert (d["pass1"], d["pass2"]) == ("38", "83")
    assert (d["value"], d["state"], d["action"], d["keyer"]) == (value, state, action, "LM")
    journal = study.journal()
    assert len(journal) == before + 1
    entry = journal.iloc[-1]
    assert entry["who"] == "LM" and entry["action"] == "decision"
    detail = json.loads(entry["detail"])
    assert (detail["pass1"], detail["pass2"]) == ("38", "83")
    assert entry["new_text"] == value


def test_a_missing_code_must_be_declared(study):
    row = _row(study, "2", "q1", kind="not_in_codes")
    set_missing_code(study, row, "9", "paper blank", "LM")
    assert _last_decision(study)["value"] == "9"
    with pytest.raises(DecisionError, match='"8" is not a declared missing code of q1'):
        set_missing_code(study, row, "8", "paper blank", "LM")


def test_a_value_outside_the_rule_needs_keep_and_a_wrong_type_never_stands(study):
    row = _row(study, "2", "age")
    with pytest.raises(DecisionError, match="outside age's rule"):
        set_paper_value(study, row, "104", "checked against paper: both wrong", "LM")
    with pytest.raises(DecisionError, match="cannot stand in age"):
        set_paper_value(study, row, "38.5", "checked against paper: both wrong", "LM", keep=True)
    with pytest.raises(DecisionError, match="needs a reason"):
        take_pass(study, row, 1, "  ", "LM")
    assert study.decisions().empty


def test_settle_shift_settles_the_whole_run_in_one_transaction(study):
    # Participant 3: pass 2 skipped q2, so q2..q4 are shifted by one field.
    rows = _table([_row(study, "3", v, cause="field_shift") for v in ("q2", "q3", "q4")])
    assert settle_shift(study, "3", 1, "checked against paper: pass 1 right", "LM", rows=worklist(study, rows)) == 3
    d = study.decisions()
    assert d["variable"].tolist() == ["q2", "q3", "q4"]
    assert d["value"].tolist() == ["1", "2", "3"]  # PASS1's values of the run
    assert worklist(study, rows)["_status"].tolist() == ["settled"] * 3


def test_settle_shift_is_all_or_nothing(study):
    rows = [_row(study, "3", v, cause="field_shift") for v in ("q2", "q3")]
    # A cell name the codebook lacks makes the second decision fail.
    rows.append(dict(_row(study, "3", "q4", cause="field_shift"), variable="nope"))
    head = study.journal_head()
    with pytest.raises(DecisionError):
        settle_shift(study, "3", 1, "checked against paper: pass 1 right", "LM",
                     rows=worklist(study, _table(rows)))  # fmt: skip
    assert study.decisions().empty
    assert study.journal_head() == head


# ------------------------------------------------------------------ form level


def test_pair_forms_corrects_the_mistyped_id_in_the_other_pass(tmp_path):
    s = Study.create(tmp_path / "p.sqlite", CODEBOOK, "lead")
    s.import_pass(1, "AB", _frame([PASS1[0], ["12", *PASS1[1][1:]]]))
    s.import_pass(2, "JM", _frame([PASS2[0], ["21", *PASS1[1][1:]]]))
    f1, f2 = s.find_forms(1, "12")[0], s.find_forms(2, "21")[0]
    row = {"participant": "12", "variable": "", "kind": "only_in_pass1", "pass1": "", "pass2": "",
           "_form1": f1, "_form2": pd.NA, "_partner": f2}  # fmt: skip
    pair_forms(s, row, 1, "form number mistyped in one pass", "LM")
    assert s.form(f2).texts["pid"] == "12"
    assert s.find_forms(2, "21") == []
    d = _last_decision(s)
    assert (d["action"], d["form1"], d["form2"], d["value"]) == ("pair", f1, f2, "12")
    # The ID change itself is a keyed change by the resolver, in the journal.
    changes = s.journal()
    changes = changes[(changes["form_id"] == f2) & (changes["variable"] == "pid")]
    assert changes.iloc[-1]["who"] == "LM" and changes.iloc[-1]["new_text"] == "12"
    # Re-keying the wrong ID brings the row back: the pairing no longer holds.
    s.set_value(f2, "pid", "21", "keyed", "JM")
    assert worklist(s, _table([row]))["_status"].tolist() == ["stale"]
    s.close()


def test_drop_duplicate_marks_the_form_dropped_and_never_deletes_it(tmp_path):
    s = Study.create(tmp_path / "d.sqlite", CODEBOOK, "lead")
    s.import_pass(1, "AB", _frame([PASS1[0], PASS1[0]]))
    s.import_pass(2, "JM", _frame([PASS2[0]]))
    first, second = s.find_forms(1, "1")
    drop_duplicate(s, second, "same form keyed twice", "LM")
    assert s.find_forms(1, "1") == [first]
    assert s.find_forms(1, "1", include_dropped=True) == [first, second]
    assert _last_decision(s)["action"] == "drop"
    assert "drop_form" in set(s.journal()["action"])
    with pytest.raises(DecisionError, match="only form of participant 1 in pass 1"):
        drop_duplicate(s, first, "same form keyed twice", "LM")
    s.close()


def test_confirm_one_pass_stays_open_until_the_other_pass_keys_it(study):
    row = {"participant": "3", "variable": "", "kind": "only_in_pass1", "pass1": "", "pass2": "",
           "_form1": _form(study, 1, "3"), "_form2": pd.NA}  # fmt: skip
    confirm_one_pass(study, row, "paper found, not yet keyed in pass 2", "LM")
    rows = worklist(study, _table([row]))
    assert rows["_status"].tolist() == ["open"]
    assert rows["_decision_action"].tolist() == ["one_pass_only"]


# ------------------------------------------------------------------ reasons, independence, set-aside


def test_reasons_default_then_the_study_list(study):
    assert reasons(study) == list(DEFAULT_REASONS)
    assert set_reasons(study, ["paper torn", " paper torn ", "", "ink smudged"], "LM") == [
        "paper torn",
        "ink smudged",
    ]
    assert reasons(study) == ["paper torn", "ink smudged"]
    with pytest.raises(DecisionError):
        set_reasons(study, ["  "], "LM")


def test_independence_warning_when_the_resolver_keyed_a_pass(study):
    assert keyed_by(study, "2") == {"AB", "JM"}
    # Barchard, Freeman, Ochoa & Stephens (2020, Behavior Research Methods):
    # resolving against the paper, ideally by another person.
    warning = independence_warning(study, "2", "AB")
    assert warning is not None and "AB" in warning and "paper" in warning
    assert independence_warning(study, "2", "LM") is None
    # AB keyed pass 1 of every form (the fixture above); natural ID order.
    assert keyed_by_resolver(study, "AB") == ["1", "2", "3"]
    assert keyed_by_resolver(study, "AB", ["03", "2"]) == ["2", "3"]
    assert keyed_by_resolver(study, "LM") == []


def test_set_aside_and_its_undo_are_journaled_and_leave_the_verified_table(study):
    rows = _settle_all(study)
    assert "2" in _ids(verified_table(study, rows=worklist(study, rows)))
    set_aside(study, "2", "answered a different version", "LM", rule="wrong version")
    assert _last_journal(study)["action"] == "set_aside"
    v = verified_table(study, rows=worklist(study, rows))
    assert "2" not in _ids(v)
    assert v.set_aside["participant"].tolist() == ["2"]
    assert v.set_aside["rule"].tolist() == ["wrong version"]
    assert set_aside_list(study)["reason"].tolist() == ["answered a different version"]
    restore(study, "2", "set aside by mistake", "LM")
    assert _last_journal(study)["action"] == "restore_participant"
    assert "2" in _ids(verified_table(study, rows=worklist(study, rows)))
    with pytest.raises(DecisionError, match="no form in this study"):
        set_aside(study, "77", "no such form", "LM")


def test_verified_table_refuses_while_open_and_a_draft_lists_open_cells(study):
    rows = _table(_differing_rows(study))
    with pytest.raises(OpenWorkError) as caught:
        verified_table(study, rows=worklist(study, rows))
    assert caught.value.counts == {"mismatch": 4}
    assert caught.value.exit_status == 1
    draft = verified_table(study, draft=True, rows=worklist(study, rows))
    assert draft.draft
    assert set(zip(draft.open_cells["participant"], draft.open_cells["variable"], strict=True)) == {
        ("2", "age"), ("3", "q2"), ("3", "q3"), ("3", "q4"),
    }  # fmt: skip
    data = draft.data.set_index("pid")
    assert data.loc[2, "age"] is pd.NA and data.loc[1, "age"] == 34


def test_verified_table_is_typed_per_codebook_and_holds_the_decided_values(study):
    rows = _settle_all(study)
    v = verified_table(study, rows=worklist(study, rows))
    # The expected table: the keyed lists above, with the decided cells as pass 1
    # has them, typed by pandas itself (the reference).
    expected = pd.DataFrame(PASS1, columns=COLUMNS).replace("", pd.NA)
    for var in CODEBOOK:
        col = expected[var.name]
        if var.type == "integer":
            expected[var.name] = pd.to_numeric(col).astype("Int64")
        elif var.type == "number":
            expected[var.name] = pd.to_numeric(col).astype("Float64")
        elif var.type == "date":
            expected[var.name] = pd.to_datetime(col, format="%Y-%m-%d")
        else:
            expected[var.name] = col.astype("string")
    pd.testing.assert_frame_equal(v.data, expected, check_dtype=True)
    assert not v.draft and v.head == study.journal_head() and v.study == "s.sqlite"
    assert len(v.decisions) == 4


def _ids(verified):
    return [str(x) for x in verified.data["pid"]]


def _differing_rows(study):
    """The four cells where PASS1 and PASS2 differ (read off the lists above)."""
    return [_row(study, "2", "age")] + [_row(study, "3", v, cause="field_shift") for v in ("q2", "q3", "q4")]


def _settle_all(study):
    rows = _table(_differing_rows(study))
    take_pass(study, rows.iloc[0], 1, "checked against paper: pass 1 right", "LM")
    settle_shift(study, "3", 1, "checked against paper: pass 1 right", "LM", rows=worklist(study, rows))
    return rows


# ------------------------------------------------------------------ end to end: the demo study



def _paper_typed_by_pandas(codebook):
    """The paper truth typed by pandas' own parsers (the reference), in ID order."""
    frame = pd.read_csv(FIXTURES / "paper.csv", dtype=str, keep_default_na=False)
    frame = frame.replace("", pd.NA)
    for var in codebook:
        col = frame[var.name]
        if var.type == "integer":
            frame[var.name] = pd.to_numeric(col).astype("Int64")
        elif var.type == "number":
            frame[var.name] = pd.to_numeric(col).astype("Float64")
        elif var.type == "date":
            frame[var.name] = pd.to_datetime(col, format=var.format or "%Y-%m-%d")
        else:
            frame[var.name] = col.str.strip().astype("string")
    id_name = codebook.id_variable.name
    return frame.sort_values(id_name).reset_index(drop=True)[codebook.names]


def test_the_demo_study_resolved_with_its_paper_equals_the_paper(tmp_path):
    from core.demo import make_demo_study

    path = make_demo_study(tmp_path)
    with Study.open(path) as study:
        with pytest.raises(OpenWorkError):
            verified_table(study)
        rows = settle_with_paper(study)  # the resolver holding the paper (tests/demo_resolved.py)
        verified = verified_table(study, rows=rows)
        kept = verified.kept
        journal = study.journal()
    pd.testing.assert_frame_equal(verified.data, _paper_typed_by_pandas(verified.codebook))
    # The out-of-range value written on the paper (fixtures/demo/slips.csv) is kept, and listed.
    slips = pd.read_csv(FIXTURES / "slips.csv", dtype=str, keep_default_na=False)
    on_paper = slips[slips["kind"] == "out_of_range"]
    assert set(zip(kept["participant"], kept["variable"], strict=True)) == set(
        zip(on_paper["participant"], on_paper["variable"], strict=True)
    )
    # Every decision is a journal row: UTC time, resolver, both pass values it saw, value, reason.
    rows = journal[journal["action"] == "decision"]
    assert len(rows) == len(verified.decisions)
    details = [json.loads(d) for d in rows["detail"]]
    decided = verified.decisions
    assert [(d["pass1"] or "", d["pass2"] or "") for d in details] == list(
        zip(decided["pass1"], decided["pass2"], strict=True)
    )
    assert rows["at"].str.endswith("Z").all() and set(rows["who"]) == {"LM"}
    assert rows["reason"].tolist() == decided["reason"].tolist()


def test_setaside_command_sets_aside_lists_and_undoes(study, capsys):
    from tui.cli import main

    path = str(study.path)
    study.close()
    assert main(["setaside", path, "--participant", "2", "--reason", "consent withdrawn",
                 "--keyer", "LM", "--rule", "consent"]) == 0  # fmt: skip
    assert main(["setaside", path, "--list"]) == 0
    out = capsys.readouterr().out
    assert "2\tconsent withdrawn [rule: consent]\t(LM" in out and "1 participant set aside." in out
    assert main(["setaside", path, "--participant", "2", "--reason", "mistake", "--keyer", "LM",
                 "--undo"]) == 0  # fmt: skip
    assert main(["setaside", path, "--list"]) == 0
    assert "No participant is set aside." in capsys.readouterr().out
    assert main(["setaside", path, "--participant", "77", "--reason", "x", "--keyer", "LM"]) == 2
    assert capsys.readouterr().err.strip() == (
        'keyproof setaside: participant "77" has no form in this study — check the ID.'
    )
    assert main(["setaside", path, "--participant", "2", "--keyer", "LM"]) == 2
    with Study.open(path) as again:
        actions = again.journal()["action"].tolist()
    assert actions[-2:] == ["set_aside", "restore_participant"]


def test_a_shift_with_a_value_outside_its_rule_is_refused_whole(study):
    rows = [_row(study, "3", v, cause="field_shift") for v in ("q2", "q3")]
    rows.append(dict(_row(study, "3", "age", cause="field_shift"), pass1="104"))
    study.set_value(rows[-1]["_form1"], "age", "104", "keyed", "AB")
    with pytest.raises(DecisionError, match="outside age's rule"):
        settle_shift(study, "3", 1, "checked against paper: pass 1 right", "LM",
                     rows=worklist(study, _table(rows)))  # fmt: skip
    assert study.decisions().empty


def test_neighbours_show_both_passes_side_by_side(study):
    v = neighbours(study, _row(study, "3", "q3", cause="field_shift"), width=3)
    # Paper order: pid, age, q1, q2, q3, q4, size, joined, note; three fields either side of q3.
    assert v["variable"].tolist() == COLUMNS[1:8]
    assert v["pass1"].tolist() == PASS1[2][1:8]
    assert v["pass2"].tolist() == PASS2[2][1:8]  # q4 blank in pass 2 shows as ""
    assert v["here"].tolist() == [False, False, False, True, False, False, False]


def test_moving_through_the_worklist(study):
    rows = _table(_differing_rows(study))
    take_pass(study, rows.iloc[0], 1, "checked against paper: pass 1 right", "LM")
    work = worklist(study, rows)
    assert next_open(work) == 1 and next_open(work, 3) == 3 and next_open(work, 4) is None
    assert position_of(work, "3") == 1 and position_of(work, "9") is None
    assert counts_by_kind(work) == {"mismatch": 3}


def test_verified_table_reads_local_dates_and_decimal_commas(tmp_path):
    cb = Codebook((Variable("pid", "integer", is_id=True), Variable("seen", "date", format="%d.%m.%Y"),
                   Variable("kg", "number"), Variable("q", "integer", missing=(Code("-9"),))))  # fmt: skip
    texts = pd.DataFrame({"pid": ["010", "2"], "seen": ["31.01.2020", ""], "kg": ["3,5", "70"],
                          "q": ["-9", "4"]})  # fmt: skip
    with Study.create(tmp_path / "t.sqlite", cb, "lead") as s:
        s.import_pass(1, "AB", texts)
        s.import_pass(2, "JM", texts.assign(pid=["10", "02"], kg=["3.50", "70.0"]))
        data = verified_table(s).data
    # pandas' own parsers are the reference: day-first as the format says, comma read as a point.
    expected = pd.DataFrame({
        "pid": pd.array([2, 10], dtype="Int64"),
        "seen": pd.to_datetime(pd.Series([None, "31.01.2020"]), format="%d.%m.%Y"),
        "kg": pd.array([70.0, 3.5], dtype="Float64"),
        "q": pd.array([4, -9], dtype="Int64"),  # a declared missing code stays as its code
    })  # fmt: skip
    pd.testing.assert_frame_equal(data, expected)


def test_settling_spelling_with_nothing_of_the_kind_open_is_refused(tmp_path):
    path = tmp_path / "none.sqlite"
    cb = Codebook((Variable("pid", "integer", is_id=True), Variable("note", "string")))
    with Study.create(path, cb, "LM") as study:
        study.import_pass(1, "AB", pd.DataFrame({"pid": ["1"], "note": ["fine"]}))
        study.import_pass(2, "JM", pd.DataFrame({"pid": ["1"], "note": ["fine!"]}))
        head = study.journal_head()
        with pytest.raises(DecisionError, match="no open difference of case or spaces"):
            settle_spelling(study, 1, "case or spaces only", "LM")
        assert study.journal_head() == head  # nothing written
