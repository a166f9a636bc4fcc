"""The study's reasons edited from the resolution screen, and the partner line of one-pass forms.

Expected values come from outside the screen: the list each test builds by
hand from the list the study started with, the demo's slip record
(``fixtures/demo/slips.csv``: pass 2 keyed form 951's ID as 915), and the
study read back through its own connection after the app is closed.
"""

from __future__ import annotations

import json

import pandas as pd
from demo_resolved import FIXTURES
from pilot_helpers import settle, sync, type_text
from test_resolve_screen import SIZE, small_study

from core.demo import make_demo_study
from core.resolution import reasons, set_reasons
from core.store import Study
from tui.app import make_app
from tui.screens.reason_dialog import ReasonDialog, ValueDialog
from tui.screens.reasons_editor import MAX_REASONS, ReasonsEditor
from tui.screens.resolve import ResolveScreen


def reason_rows(study) -> pd.DataFrame:
    journal = study.journal()
    setting = journal[journal["action"] == "setting"]
    return setting[setting["detail"].map(lambda d: json.loads(d).get("key") == "reasons")]


def from_json(text: str):
    # set_reasons stores the list as JSON text inside the JSON setting, so the
    # journal's text may need decoding twice (reported to the lead).
    value = json.loads(text)
    return json.loads(value) if isinstance(value, str) else value


@sync
async def test_edit_the_list_save_and_pick_the_new_reason_by_digit(tmp_path):
    path = small_study(tmp_path)
    with Study.open(path, readonly=True) as study:
        start = reasons(study)
        journaled_before = len(reason_rows(study))
    # The list this test expects, built by hand: drop the 2nd, add "paper torn"
    # at the end, move it up to first place, move the (old) 4th down one.
    expected = [start[0], *start[2:], "paper torn"]
    expected.insert(0, expected.pop())
    i = expected.index(start[3])
    expected[i], expected[i + 1] = expected[i + 1], expected[i]

    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("e")
        editor = app.screen
        assert isinstance(editor, ReasonsEditor) and editor.items == start
        await pilot.press("down", "x")  # remove the second
        await pilot.press("a")
        assert isinstance(app.screen, ValueDialog)
        await type_text(pilot, "paper torn")
        await pilot.press("enter")
        assert app.screen is editor and editor.items[-1] == "paper torn"
        await pilot.press(*["k"] * (len(editor.items) - 1))  # marked on the new one: up to the top
        await pilot.press("up")  # wraps round to the last; walk to the old 4th
        while editor.items[editor.marked] != start[3]:
            await pilot.press("down")
        await pilot.press("j")
        assert editor.items == expected  # nothing saved yet
        with Study.open(path, readonly=True) as study:
            assert reasons(study) == start
        await pilot.press("s")
        assert isinstance(app.screen, ResolveScreen)
        # The reason dialog offers the list in the saved order: 1 is the new reason.
        await pilot.press("1")  # take pass 1 for 2/q1
        dialog = app.screen
        assert isinstance(dialog, ReasonDialog) and dialog.items == expected
        await pilot.press("1")
        await settle(app, pilot)
    with Study.open(path, readonly=True) as study:
        assert reasons(study) == expected
        rows = reason_rows(study)
        decisions = study.decisions()
    assert len(rows) == journaled_before + 1  # one journal row for the whole edit
    assert rows["who"].iloc[-1] == "LM"
    assert from_json(rows["new_text"].iloc[-1]) == expected
    assert decisions[["participant", "variable", "reason", "keyer"]].values.tolist() == [
        ["2", "q1", "paper torn", "LM"]]


@sync
async def test_escape_leaves_the_list_as_it_was(tmp_path):
    path = small_study(tmp_path)
    with Study.open(path, readonly=True) as study:
        start, before = reasons(study), len(study.journal())
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("e", "x", "x", "escape")
        assert isinstance(app.screen, ResolveScreen)
        assert app.screen.reasons == start
    with Study.open(path, readonly=True) as study:
        assert reasons(study) == start and len(study.journal()) == before


@sync
async def test_a_tenth_reason_is_refused_and_a_longer_list_still_works(tmp_path):
    # Digits 1-9 pick reasons; a list stored longer (not through the editor)
    # keeps working: no digit for the tenth, ↑↓ Enter reaches it.
    path = small_study(tmp_path)
    ten = [f"reason {n}" for n in range(1, MAX_REASONS + 2)]
    with Study.open(path) as study:
        set_reasons(study, ten, "LM")
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("e", "a")
        assert isinstance(app.screen, ReasonsEditor)  # no dialog for a new reason
        assert "remove one" in str(app.screen.query_one("#reasons-message").content)
        await pilot.press("escape", "1")
        assert isinstance(app.screen, ReasonDialog)
        await pilot.press("0")  # not a pick in the reason dialog
        assert isinstance(app.screen, ReasonDialog)
        while app.screen.items[app.screen.marked] != "reason 10":
            await pilot.press("down")
        await pilot.press("enter")
        await settle(app, pilot)
    with Study.open(path, readonly=True) as study:
        assert study.decisions()["reason"].tolist() == ["reason 10"]


@sync
async def test_partner_line_names_the_partner_id_keyed_in_the_other_pass(tmp_path):
    slips = pd.read_csv(FIXTURES / "slips.csv", dtype=str, keep_default_na=False)
    slip = slips[slips["kind"] == "only_in_pass1"].iloc[0]  # pass 2 keyed 951 as 915
    on_paper, keyed = slip["paper"], slip["keyed"]
    path = make_demo_study(tmp_path)
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        screen = app.screen
        rows = screen.rows
        for participant, kind, line in [
            (keyed, "only_in_pass2", f"suggested partner: pass 1 form with ID {on_paper}"),
            (on_paper, "only_in_pass1", f"suggested partner: pass 2 form with ID {keyed}"),
        ]:
            hit = (rows["participant"].astype(str) == participant) & (rows["kind"] == kind)
            at = int(hit.to_numpy().nonzero()[0][0])
            screen.worklist.set_view(screen.worklist.view, at=at)
            screen.show_current()
            detail = str(screen.query_one("#resolve-detail").content)
            assert line in detail, detail
            assert "suggested partner: form" not in detail  # no bare form serial


@sync
async def test_reword_keeps_the_place_and_earlier_decisions_keep_their_words(tmp_path):
    path = small_study(tmp_path)
    with Study.open(path, readonly=True) as study:
        start = reasons(study)
    # Expected by hand: the second reason in new words, in the same place.
    expected = [start[0], "checked against the original form", *start[2:]]
    app = make_app(path, mode="resolve", keyer="LM")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("1", "2")  # take pass 1 for the first item, with reason 2
        await settle(app, pilot)
        await pilot.press("e")
        editor = app.screen
        assert isinstance(editor, ReasonsEditor)
        await pilot.press("down", "r")
        dialog = app.screen
        assert isinstance(dialog, ValueDialog)
        assert dialog.query_one("#value-text").value == start[1]  # starts from the old words
        await pilot.press(*["backspace"] * len(start[1]))
        await type_text(pilot, "checked against the original form")
        await pilot.press("enter")
        assert app.screen is editor and editor.items == expected
        # Rewording into another reason's words would list it twice: refused.
        await pilot.press("down", "r", *["backspace"] * len(start[2]))
        await type_text(pilot, start[0])
        await pilot.press("enter")
        assert editor.items == expected
        assert "already in the list" in str(editor.query_one("#reasons-message").render())
        await pilot.press("s")
        assert isinstance(app.screen, ResolveScreen)
    with Study.open(path, readonly=True) as study:
        assert reasons(study) == expected
        decisions = study.decisions()
    assert decisions["reason"].tolist() == [start[1]]  # taken before the reword
