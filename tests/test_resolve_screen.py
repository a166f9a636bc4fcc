"""The resolution screen, driven with Pilot by the keys a resolver presses.

Expected values come from outside the screen: the demo's paper truth
(``fixtures/demo/paper.csv``, written by ``fixtures/make_demo.py``), the
values this file keys into small studies, and ``core.resolution`` read
through its own connection after the screen is done.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from demo_resolved import paper
from pilot_helpers import settle, sync, type_text

from core.codebook import Code, Codebook, Variable
from core.demo import make_demo_study
from core.resolution import set_aside_list, worklist
from core.store import Study
from core.values import parse
from tui.app import make_app
from tui.screens.reason_dialog import ChoiceDialog, ReasonDialog, ValueDialog
from tui.screens.resolve import ResolveScreen
from tui.screens.setaside_view import SetAsideDialog, SetAsideView
from tui.widgets.discrepancy_detail import detail_text

SIZE = (120, 44)
# ------------------------------------------------------------------ the demo, settled by keys


async def press_decision(app, pilot, screen, truth: pd.DataFrame):
    """Press what a resolver holding the paper presses for the item under the cursor."""
    row = screen.row()
    p, var, kind = str(row["participant"]), str(row["variable"]), str(row["kind"])
    if kind in ("only_in_pass1", "only_in_pass2"):
        here = 1 if kind == "only_in_pass1" else 2
        if p not in truth.index:  # this pass mistyped the ID: the other pass's ID is on the paper
            await pilot.press("p", str(3 - here), "enter")
            return "pair"
        partner = row["_partner"]
        if not pd.isna(partner):
            other = app.study.form(int(partner)).texts[app.study.codebook.id_variable.name]
            if other not in truth.index:
                await pilot.press("p", str(here), "enter")
                return "pair"
        # A real form the other pass never keyed: confirm, with a typed reason.
        await pilot.press("c", "t")
        await type_text(pilot, "found")  # a free-text reason
        await pilot.press("enter")
        return "confirm"
    value = truth.loc[p, var]
    codebook_var = app.study.codebook[var]
    if row["cause"] == "field_shift":
        right = 1 if row["pass1"] == value else 2
        await pilot.press("8", str(right), "enter")
    elif value == "":
        await pilot.press("0", "enter")
    elif value in codebook_var.missing_values:
        await pilot.press("7", str(codebook_var.missing_values.index(value) + 1), "enter")
    elif not parse(codebook_var, value).ok:
        await pilot.press("9")
        assert isinstance(app.screen, ValueDialog)
        await pilot.press("enter", "enter")  # the dialog offers the pass value the paper shows
    elif row["pass1"] == value:
        await pilot.press("1", "enter")
    elif row["pass2"] == value:
        await pilot.press("2", "enter")
    else:
        await pilot.press("5")
        await type_text(pilot, value)
        await pilot.press("enter", "enter")
    return "cell"


def key_other_pass(study, participant: str, truth: pd.DataFrame, pass_no: int):
    """The other keyer keys the confirmed form from the paper (as the keying screen would)."""
    form = study.start_form(pass_no, "JM")
    id_name = study.codebook.id_variable.name
    study.set_value(form, id_name, participant, "keyed", "JM")
    for name, text in truth.loc[participant].items():
        study.set_value(form, name, text, "keyed" if text else "blank", "JM")
    study.finish_form(form, "JM")


@sync
async def test_demo_resolved_by_keys_matches_the_paper(tmp_path):
    path = make_demo_study(tmp_path)
    truth = paper()
    with Study.open(path, readonly=True) as study:
        before = worklist(study)
    cells = before[before["variable"] != ""]
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        screen = app.screen
        assert isinstance(screen, ResolveScreen)
        confirmed = set()
        for _step in range(60):
            row = screen.row()
            if row is None or screen.statuses[screen.current_pos] == "settled":
                break
            p = str(row["participant"])
            if p in confirmed:  # confirmed and keyed since: the reload shows it settled
                break
            done = await press_decision(app, pilot, screen, truth)
            if done != "cell":  # a form-level decision recomputes the worklist in a worker
                await settle(app, pilot)
            assert app.screen is screen, "every decision returns to the worklist"
            if done == "confirm":
                confirmed.add(p)
                key_other_pass(app.study, p, truth, 2 if row["kind"] == "only_in_pass1" else 1)
                await pilot.press("r")
                await settle(app, pilot)
        shown_open = int((screen.statuses != "settled").sum())

    with Study.open(path, readonly=True) as study:
        after = worklist(study)
        decisions = study.decisions()
        journal = study.journal()
    assert int((after["_status"] != "settled").sum()) == 0
    assert shown_open == 0
    # Every cell decision stands at the paper's value (or blank where the paper is blank).
    newest = decisions.sort_values("decision_id").drop_duplicates(
        ["participant", "variable", "kind"], keep="last")
    cell_decisions = newest[newest["variable"] != ""]
    for r in cell_decisions.itertuples(index=False):
        assert (r.value or "") == truth.loc[r.participant, r.variable], (r.participant, r.variable)
        assert r.keyer == "LM" and r.reason
    # One decision per cell the comparison listed (the shift run counts cell by cell),
    # plus the confirmed one-pass form (796) and the pairing of 951/915.
    assert set(zip(cell_decisions["participant"], cell_decisions["variable"], strict=True)) >= set(
        zip(cells["participant"], cells["variable"], strict=True))
    form_actions = sorted(newest.loc[newest["variable"] == "", "action"])
    assert form_actions == ["one_pass_only", "pair"]
    # The journal holds one "decision" row per decision recorded.
    assert int((journal["action"] == "decision").sum()) == len(decisions)
    # Each cell decision saw both pass values the comparison showed.
    seen = before.set_index(["participant", "variable"])[["pass1", "pass2"]]
    for r in cell_decisions.itertuples(index=False):
        if (r.participant, r.variable) in seen.index:
            assert (r.pass1, r.pass2) == tuple(seen.loc[(r.participant, r.variable)])


# ------------------------------------------------------------------ small studies

CB = Codebook((
    Variable("pid", "integer", is_id=True),
    Variable("q1", "integer", label="Mood today", min=1, max=5,
             missing=(Code("9", "no answer"),)),
    Variable("q2", "integer", min=1, max=5),
    Variable("q3", "integer", min=1, max=5),
))  # fmt: skip


def small_study(tmp_path, keyer2="JM") -> Path:
    path = tmp_path / "small.sqlite"
    pass1 = pd.DataFrame({"pid": ["1", "2", "3"], "q1": ["4", "2", "5"], "q2": ["1", "1", "3"],
                          "q3": ["2", "2", "2"]})
    # Pass 2 disagrees at 2/q1 (3 vs 2) and 3/q2 (4 vs 3).
    pass2 = pd.DataFrame({"pid": ["1", "2", "3"], "q1": ["4", "3", "5"], "q2": ["1", "1", "4"],
                          "q3": ["2", "2", "2"]})
    with Study.create(path, CB, "LM") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, keyer2, pass2)
    return path


@sync
async def test_stale_decision_reopens_and_shows_the_old_decision(tmp_path):
    path = small_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        screen = app.screen
        assert (str(screen.row()["participant"]), str(screen.row()["variable"])) == ("2", "q1")
        await pilot.press("1")
        assert isinstance(app.screen, ReasonDialog)
        await pilot.press("1")  # the first reason, picked with its digit
        await settle(app, pilot)
        # Pass 2 is corrected after the decision: 2/q1 now reads 4 in pass 2.
        form2 = app.study.find_forms(2, "2")[0]
        app.study.set_value(form2, "q1", "4", "keyed", "JM")
        await pilot.press("r")
        await settle(app, pilot)
        at = screen._position_of(("2", "q1", "mismatch"))
        assert screen.statuses[at] == "stale"
        screen.worklist.set_view(screen.worklist.view, at=at)
        screen.show_current()
        detail = str(screen.query_one("#resolve-detail").content)
        assert "REOPENED" in detail and "'2'" in detail and "pass 1 right" in detail
        assert "pass 2: 4" in detail
    with Study.open(path, readonly=True) as study:
        rows = worklist(study)
    assert rows.loc[(rows["participant"] == "2") & (rows["variable"] == "q1"), "_status"].item() == "stale"


@sync
async def test_set_aside_and_undo_from_the_screen(tmp_path):
    path = small_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("a")
        assert isinstance(app.screen, SetAsideDialog)  # participant 2 is offered, reason focused
        await type_text(pilot, "torn")
        await pilot.press("enter")
        await type_text(pilot, "r2")
        await pilot.press("enter")
        await pilot.pause()
        aside = set_aside_list(app.study)
        assert aside[["participant", "reason", "rule"]].values.tolist() == [["2", "torn", "r2"]]
        await pilot.press("v")
        assert isinstance(app.screen, SetAsideView)
        assert "set aside: 1" in str(app.screen.query_one("#aside-heading").content)
        await pilot.press("u")
        await type_text(pilot, "oops")
        await pilot.press("enter")
        await pilot.pause()
        assert set_aside_list(app.study).empty
        assert "No participant" in str(app.screen.query_one("#aside-heading").content)
        await pilot.press("escape")
        assert isinstance(app.screen, ResolveScreen)
    with Study.open(path, readonly=True) as study:
        journal = study.journal()
    # Both the set-aside and its undo are journal rows, the undo the newer one.
    actions = journal.loc[journal["action"].isin(["set_aside", "restore_participant"]), "action"].tolist()
    assert actions == ["set_aside", "restore_participant"]


@sync
async def test_independence_warning_is_a_notice_not_a_block(tmp_path):
    # Barchard, Freeman, Ochoa & Stephens (2020): resolving one's own keying
    # invites matching the entries instead of the paper; warn, never block.
    path = small_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="AB")  # AB keyed pass 1
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        detail = str(app.screen.query_one("#resolve-detail").content)
        assert detail.startswith("NOTE") and "AB" in detail
        await pilot.press("2", "enter")
        await settle(app, pilot)
    with Study.open(path, readonly=True) as study:
        d = study.decisions()
    assert d[["participant", "variable", "value", "keyer"]].values.tolist() == [["2", "q1", "3", "AB"]]


@sync
async def test_missing_code_typed_value_filter_and_jump(tmp_path):
    path = small_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        screen = app.screen
        await pilot.press("7")
        assert isinstance(app.screen, ChoiceDialog) and app.screen.items == ["9 = no answer"]
        await pilot.press("1", "enter")
        await settle(app, pilot)
        # Next open item is 3/q2; the paper says 5, which neither pass keyed.
        assert (str(screen.row()["participant"]), str(screen.row()["variable"])) == ("3", "q2")
        await pilot.press("5")
        await type_text(pilot, "5")
        await pilot.press("enter", "3")  # reason 3: both wrong
        await settle(app, pilot)
        assert int((screen.statuses != "settled").sum()) == 0
        # Jump to a form by its ID, then open the filter list and leave it.
        await pilot.press("j")
        await type_text(pilot, "3")
        await pilot.press("enter")
        assert str(screen.row()["participant"]) == "3"
        await pilot.press("f")
        assert isinstance(app.screen, ChoiceDialog)
        assert app.screen.items == ["everything", "one field…"]  # nothing open: no kind to offer
        await pilot.press("2", "q", "2", "enter")
        shown = screen.rows.iloc[screen.worklist.view]
        assert shown["variable"].tolist() == ["q2"] and "filter: variable = q2" in screen.header_text()
    with Study.open(path, readonly=True) as study:
        d = study.decisions()
    assert d[["participant", "variable", "value"]].values.tolist() == [["2", "q1", "9"], ["3", "q2", "5"]]
    assert d["reason"].tolist()[1] == "checked against paper: both wrong"


@sync
async def test_value_outside_the_rule_is_refused_on_screen(tmp_path):
    path = small_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("5")
        await type_text(pilot, "7")  # q1 allows 1 to 5
        await pilot.press("enter", "1")
        await settle(app, pilot)
        assert isinstance(app.screen, ResolveScreen)
        assert "outside q1's rule" in str(app.screen.query_one("#resolve-message").content)
        assert app.screen.statuses[app.screen.current_pos] == "open"
    with Study.open(path, readonly=True) as study:
        assert study.decisions().empty


def test_detail_text_shows_rule_breaker_and_shift():
    # Pure: a row and neighbours built here; the rule words come from core.values.allowed_text.
    row = pd.Series({"participant": "7", "variable": "q2", "kind": "mismatch", "pass1": "8",
                     "pass2": "3", "cause": "field_shift", "_status": "open",
                     "detail": "pass 1 is out of range (integer 1 to 5); pass 2 fits"})
    around = pd.DataFrame({"variable": ["q1", "q2", "q3"], "pass1": ["4", "8", "3"],
                           "pass2": ["4", "3", ""], "here": [False, True, False]})
    text = detail_text(CB, row, around)
    assert "pass 1: 8   pass 2: 3\n" in text and "pass 1 is out of range" in text
    assert "integer 1 to 5" in text and "field shift" in text
    lines = text.splitlines()
    assert any(line.startswith("› q2") and line.endswith("≠") for line in lines)
    assert any(line.startswith("  q1") and not line.endswith("≠") for line in lines)


def test_detail_marks_a_neighbour_text_cut_to_its_column():
    row = pd.Series({"participant": "7", "variable": "q2", "kind": "mismatch",
                     "pass1": "Could we have a seed swap?", "pass2": "could we have a seed swap?",
                     "cause": "case_space", "_status": "open", "detail": ""})
    around = pd.DataFrame({"variable": ["q2"], "pass1": [row["pass1"]], "pass2": [row["pass2"]],
                           "here": [True]})
    (line,) = [x for x in detail_text(CB, row, around).splitlines() if x.startswith("›")]
    assert line == "› q2              Could we have … could we have … ≠"


@sync
async def test_form_keyed_twice_is_dropped_from_the_screen(tmp_path):
    path = tmp_path / "twice.sqlite"
    # Pass 1 keyed the paper of participant 2 twice; pass 2 once.
    pass1 = pd.DataFrame({"pid": ["1", "2", "2"], "q1": ["4", "2", "2"], "q2": ["1", "1", "1"],
                          "q3": ["2", "2", "2"]})
    pass2 = pd.DataFrame({"pid": ["1", "2"], "q1": ["4", "2"], "q2": ["1", "1"], "q3": ["2", "2"]})
    with Study.create(path, CB, "LM") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, "JM", pass2)
        second = study.find_forms(1, "2")[1]
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        assert str(app.screen.row()["kind"]) == "duplicate_id"
        await pilot.press("d")
        assert isinstance(app.screen, ChoiceDialog) and len(app.screen.items) == 2
        await pilot.press("2", "enter")  # the second form; the marked reason: keyed twice
        await settle(app, pilot)
        assert app.screen.rows is not None and len(app.screen.rows) == 0
    with Study.open(path, readonly=True) as study:
        forms = study.forms()
        d = study.decisions()
        assert int(study.forms().loc[forms["form_id"] == second, "dropped"].item()) == 1
        assert (worklist(study)["_status"] != "settled").sum() == 0
    assert d[["action", "reason"]].values.tolist() == [["drop", "same form keyed twice"]]


@sync
async def test_home_opens_the_resolution_screen_and_esc_goes_back(tmp_path):
    from tui.screens.home import HomeScreen

    path = small_study(tmp_path)
    app = make_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("r")
        assert isinstance(app.screen, ValueDialog)
        await pilot.press("L", "M", "enter")
        await settle(app, pilot)
        assert isinstance(app.screen, ResolveScreen) and app.screen.keyer == "LM"
        assert int((app.screen.statuses != "settled").sum()) == 2  # the two cells this file keyed apart
        await pilot.press("escape")
        assert isinstance(app.screen, HomeScreen)


def test_resolve_command_refuses_bad_input(tmp_path, capsys):
    from tui import cli

    assert cli.main(["resolve", str(small_study(tmp_path)), "--keyer", " "]) == 2
    assert "--keyer is empty" in capsys.readouterr().err
    assert cli.main(["resolve", str(tmp_path / "none.sqlite"), "--keyer", "LM"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("keyproof resolve: ") and "none.sqlite" in err and "Traceback" not in err


@sync
async def test_keys_typed_in_a_burst_land_in_their_dialogs(tmp_path):
    # Keys queued faster than dialogs open (as a quick typist or a terminal's
    # paste delivers them): each still reaches the dialog it was meant for.
    from textual import events

    path = small_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        for key in ["5", "1", "enter", "3", "2", "enter"]:  # 2/q1: paper 1; 3/q2: pass 2
            app.post_message(events.Key(key, "\r" if key == "enter" else key))
        await pilot.pause()
        await pilot.pause()
        assert isinstance(app.screen, ResolveScreen)
    with Study.open(path, readonly=True) as study:
        d = study.decisions()
    assert d[["participant", "variable", "value", "reason"]].values.tolist() == [
        ["2", "q1", "1", "checked against paper: both wrong"],
        ["3", "q2", "4", "checked against paper: pass 2 right"],
    ]


# ------------------------------------------------------------------ case or spaces, at once

SPELLING_CB = Codebook((
    Variable("pid", "integer", is_id=True),
    Variable("note", "string"),
    Variable("sex", "string", codes=(Code("m"), Code("f"))),
    Variable("visits", "integer"),
))  # fmt: skip


@sync
async def test_free_text_differing_only_in_case_or_spaces_is_settled_at_once(tmp_path):
    # Built here: two free-text cells that differ only in case or spaces (settled at
    # once), and the same kind of difference in a coded answer and in a number,
    # which stay open for the paper.
    path = tmp_path / "spelling.sqlite"
    pass1 = pd.DataFrame({"pid": ["1", "2"], "note": ["Thanks a lot", "ok"],
                          "sex": ["m", "f"], "visits": ["12", "3"]})
    pass2 = pd.DataFrame({"pid": ["1", "2"], "note": ["thanks  a lot", "OK"],
                          "sex": ["M", "f"], "visits": ["1 2", "3"]})
    with Study.create(path, SPELLING_CB, "LM") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, "JM", pass2)
        before = worklist(study)
    assert sorted(before.loc[before["cause"] == "case_space", "variable"]) == [
        "note", "note", "sex", "visits"]
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("s")
        assert isinstance(app.screen, ChoiceDialog)
        assert app.screen.title_text.startswith("2 free-text differences, open,")
        await pilot.press("2")  # pass 2's spelling stands
        assert isinstance(app.screen, ReasonDialog)
        await pilot.press("t")
        await type_text(pilot, "case or spaces only")
        await pilot.press("enter")
        await settle(app, pilot)
        assert isinstance(app.screen, ResolveScreen)
    with Study.open(path, readonly=True) as study:
        decisions = study.decisions()
        left = worklist(study)
    assert sorted(decisions[["participant", "variable", "value", "reason"]].values.tolist()) == [
        ["1", "note", "thanks  a lot", "case or spaces only"],
        ["2", "note", "OK", "case or spaces only"]]
    still = left[left["_status"] != "settled"]
    assert sorted(still["variable"]) == ["sex", "visits"]  # for the paper, one by one
