"""The keying screen, driven with Pilot: the keys a keyer presses, and what the study then holds.

The reference in these tests is the keyer's own key sequence: every
expected text below is what the test typed, never something the screen
produced. Small forms keep Pilot (about 40 ms per key) quick.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest
from pilot_helpers import sync
from textual import events

from core.codebook import Code, Codebook, Variable
from core.store import Study
from tui.app import make_app
from tui.screens.keying_model import AUTO_ADVANCE_SETTING, FIELD_MODE, ID_MODE, REVIEW_MODE

YES_NO = (Code("1", "yes"), Code("2", "no"))
CROPS = (Code("1", "vegetables"), Code("2", "fruit"), Code("3", "herbs"))

# A small form shaped like the demo's: ID, identifying initials, a range, a
# decimal number, a date, scale items, a coded item with a missing code, a
# conditional item and free text.
DEMO_LIKE = Codebook((
    Variable("member_id", "integer", is_id=True, section="page 1"),
    Variable("initials", "string", identifying=True, section="page 1"),
    Variable("age", "integer", min=16, max=99, section="page 1"),
    Variable("plot_m2", "number", min=0, max=500, section="page 1"),
    Variable("joined", "date", section="page 1"),
    Variable("belong1", "integer", min=1, max=5, section="page 2"),
    Variable("belong2", "integer", min=1, max=5, section="page 2"),
    Variable("crop", "integer", codes=CROPS, missing=(Code("9", "no answer"),), section="page 2"),
    Variable("has_children", "integer", codes=YES_NO, section="page 2"),
    Variable("children_visit", "integer", min=0, max=7, applies_if="has_children = 1",
             section="page 2"),
    Variable("comment", "string", section="page 3"),
))  # fmt: skip

SIZE = (110, 34)


def make_study(tmp_path, codebook=DEMO_LIKE, auto_advance=False) -> str:
    path = tmp_path / "study.sqlite"
    with Study.create(path, codebook, "LM") as study:
        study.set_setting(AUTO_ADVANCE_SETTING, "on" if auto_advance else "off", "LM")
    return str(path)


def keys_for(text: str) -> list[str]:
    """The key names Pilot needs to type ``text``."""
    return [c if c.isalnum() else {"-": "minus", ".": "full_stop", " ": "space",
                                   "*": "asterisk", ",": "comma"}[c] for c in text]


def field_keys(values: list[str]) -> list[str]:
    """Keys for a run of fields: each value then Enter ("" = Enter alone = blank)."""
    out = []
    for v in values:
        out += keys_for(v) + ["enter"]
    return out


def stored(path, pass_no=1) -> list[dict]:
    with Study.open(path, readonly=True) as study:
        forms = study.forms(pass_no)
        return [study.form(int(f)) for f in forms["form_id"]]


def burst(app, keys: list[str]) -> None:
    """Queue every key at once, the way a terminal delivers a fast typist's burst."""
    for key in keys:
        char = {"enter": "\r", "minus": "-", "full_stop": ".", "space": " ",
                "asterisk": "*", "comma": ",", "tab": "\t"}.get(key, key if len(key) == 1 else None)
        event = events.Key(key, char)
        event.set_sender(app)
        app._driver.send_message(event)


async def settle(pilot, rounds=30):
    for _ in range(rounds):
        await pilot.pause()


@sync
async def test_whole_form_lands_exactly_as_keyed(tmp_path):
    path = make_study(tmp_path)
    # A keyer's keys: Enter alone = blank on paper, * = illegible.
    typed = ["1042", "AK", "34", "12,5", "2019-04-01", "4", "", "2", "1", "3", "weeds everywhere"]
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        # belong2 (7th field) is marked illegible with * instead of its lone Enter.
        keys = field_keys(typed[:6]) + ["asterisk"] + field_keys(typed[7:])
        await pilot.press(*keys)
        assert app.screen.model.mode == REVIEW_MODE
        await pilot.press("enter")  # one key finishes the form
        assert app.screen.model.mode == ID_MODE
    (form,) = stored(path)
    expected = dict(zip(DEMO_LIKE.names, typed, strict=True))
    expected_states = {n: ("keyed" if t else "blank") for n, t in expected.items()}
    expected_states["belong2"] = "illegible"
    assert form.texts == expected
    assert form.states == expected_states
    assert form.finished_at is not None
    with Study.open(path, readonly=True) as study:
        journal = study.journal()
    writes = journal[journal["action"] == "set_value"]
    assert set(writes["who"]) == {"AB"}  # every field attributed to its keyer
    assert list(writes["variable"]) == DEMO_LIKE.names  # one row per field, in paper order


@sync
async def test_warning_needs_a_second_enter(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["7", "AK"]), *keys_for("150"), "enter")
        model = app.screen.model
        assert model.names[model.cursor] == "age"  # not moved on
        assert "outside" in model.message  # age allows 16..99 (the codebook above)
        assert model.states["age"] is None  # nothing written yet
        await pilot.press("enter")
        assert model.names[model.cursor] == "plot_m2"
    (form,) = stored(path)
    assert (form.texts["age"], form.states["age"]) == ("150", "keyed")


@sync
async def test_required_blank_and_wrong_type_ask_twice(tmp_path):
    cb = Codebook((Variable("pid", "integer", is_id=True),
                   Variable("sex", "integer", codes=YES_NO, required=True),
                   Variable("n", "integer")))
    path = make_study(tmp_path, cb)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["5", ""]))
        assert app.screen.model.names[app.screen.model.cursor] == "sex"
        await pilot.press("enter", *keys_for("7.5"), "enter")
        assert app.screen.model.names[app.screen.model.cursor] == "n"  # 7.5 is not an integer
        await pilot.press("enter")
    (form,) = stored(path)
    assert form.states["sex"] == "blank"
    assert (form.texts["n"], form.states["n"]) == ("7.5", "keyed")


@sync
async def test_auto_advance_at_width_and_its_switch(tmp_path):
    path = make_study(tmp_path, auto_advance=True)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        # age 16..99 implies 2 characters; belong1 1..5 implies 1; no Enter after them.
        await pilot.press(*field_keys(["8", "AK"]), *keys_for("34"))
        model = app.screen.model
        assert model.names[model.cursor] == "plot_m2"
        await pilot.press(*field_keys(["3", "2020-01-31"]), "4", "5")
        assert model.names[model.cursor] == "crop"
        await pilot.press("f6")  # switch it off for this study
        assert model.auto_advance is False
        await pilot.press("2")
        assert model.names[model.cursor] == "crop"
    (form,) = stored(path)
    assert [form.texts[n] for n in ("age", "belong1", "belong2")] == ["34", "4", "5"]
    with Study.open(path, readonly=True) as study:
        assert study.get_setting(AUTO_ADVANCE_SETTING) == "off"


@sync
async def test_the_issue_burst_lands_the_same_with_auto_advance_on(tmp_path):
    # Issue 4: "12⏎34⏎⏎5" must land 12, 34, blank, 5 in consecutive fields, exactly
    # as if typed slowly, even when each of those fields fills up at two characters.
    cb = Codebook((Variable("pid", "integer", is_id=True),
                   *(Variable(f"q{i}", "integer", min=10, max=99) for i in range(1, 5))))
    path = make_study(tmp_path, cb, auto_advance=True)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("7", "enter")
        burst(app, ["1", "2", "enter", "3", "4", "enter", "enter", "5"])
        await settle(pilot)
        assert app.screen.editor.value == "5"  # being typed in q4, not yet confirmed
    (form,) = stored(path)
    assert [(form.texts[f"q{i}"], form.states[f"q{i}"]) for i in (1, 2, 3)] == [
        ("12", "keyed"), ("34", "keyed"), ("", "blank")]


@sync
async def test_the_participant_id_waits_for_enter_even_at_its_width(tmp_path):
    # The prompt says "then Enter": an ID that moved on by itself would turn the
    # keyer's Enter into a blank first field.
    cb = Codebook((Variable("pid", "integer", is_id=True, min=100, max=999),
                   Variable("initials", "string", width=3)))
    path = make_study(tmp_path, cb, auto_advance=True)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("7", "9", "6")
        assert app.screen.model.mode == ID_MODE
        await pilot.press("enter", "Q", "Z", "X")
        assert app.screen.model.mode == REVIEW_MODE
    (form,) = stored(path)
    assert (form.texts["pid"], form.texts["initials"], form.states["initials"]) == (
        "796", "QZX", "keyed")


@sync
async def test_going_back_to_correct_journals_old_and_new(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["9", "AK", "43", "10"]))
        await pilot.press("up", "shift+tab")  # back over plot_m2 to age
        assert app.screen.model.names[app.screen.model.cursor] == "age"
        assert app.screen.editor.value == "43"  # the field's own value, to correct
        await pilot.press("backspace", "backspace", *keys_for("34"), "enter")
        assert app.screen.model.names[app.screen.model.cursor] == "plot_m2"
    with Study.open(path, readonly=True) as study:
        j = study.journal()
    age = j[(j["action"] == "set_value") & (j["variable"] == "age")]
    assert list(zip(age["old_text"], age["new_text"], strict=True)) == [(None, "43"), ("43", "34")]


@sync
async def test_resume_after_the_app_closed_mid_form(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["1042", "AK", "34"]), *keys_for("12"))  # 12 never confirmed
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["1042"]))
        model = app.screen.model
        assert model.mode != FIELD_MODE  # the ID is known: continue it, or a second form?
        await pilot.press("1")  # continue it
        assert model.names[model.cursor] == "plot_m2"  # the first unkeyed field
        await pilot.press(*field_keys(["12"]))
    (form,) = stored(path)
    assert [form.texts.get(n) for n in ("member_id", "initials", "age", "plot_m2")] == [
        "1042", "AK", "34", "12"]
    assert "joined" not in form.texts


@sync
async def test_second_form_with_the_same_number(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["77", "AK"]), "escape")
        await pilot.press(*field_keys(["77"]), "0", *field_keys(["BB"]))
    forms = stored(path)
    assert [(f.participant, f.texts["initials"]) for f in forms] == [("77", "AK"), ("77", "BB")]


# Member 5's paper up to children_visit: has_children is 2 (no), so that question
# does not apply; its box on the paper is empty.
NO_CHILDREN = ["5", "AK", "30", "1", "2020-02-02", "1", "1", "1", "2"]


@sync
async def test_a_field_that_does_not_apply_is_visited_and_enter_records_it_blank(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(NO_CHILDREN))
        model = app.screen.model
        assert model.names[model.cursor] == "children_visit"
        assert "does not apply here (has_children = 1 is false)" in str(app.screen.detail.content)
        await pilot.press("enter")  # the empty box on the paper
        assert model.names[model.cursor] == "comment"
        # The next value lands in its own field (the screen once skipped the box,
        # so that Enter blanked the comment and shifted every later value).
        await pilot.press(*field_keys(["fine"]))
    (form,) = stored(path)
    assert (form.texts["children_visit"], form.states["children_visit"]) == ("", "blank")
    assert (form.texts["comment"], form.states["comment"]) == ("fine", "keyed")


@sync
async def test_a_value_where_the_question_does_not_apply_needs_a_second_enter(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(NO_CHILDREN))
        model = app.screen.model
        await pilot.press("3", "enter")
        assert model.names[model.cursor] == "children_visit"  # warned, not moved
        assert "does not apply" in model.message
        await pilot.press("enter")  # the paper says 3 all the same: kept
        assert model.names[model.cursor] == "comment"
    (form,) = stored(path)
    assert (form.texts["children_visit"], form.states["children_visit"]) == ("3", "keyed")


@sync
async def test_illegible_key_needs_an_empty_field_and_never_marks_the_id(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("asterisk")
        assert app.screen.model.mode == ID_MODE
        await pilot.press(*field_keys(["3", "A*"]))  # * inside text is text
        await pilot.press("asterisk")
    (form,) = stored(path)
    assert (form.texts["initials"], form.states["initials"]) == ("A*", "keyed")
    assert form.states["age"] == "illegible"


FORTY = Codebook(tuple(
    [Variable("pid", "integer", is_id=True)]
    + [Variable(f"v{i:02d}", "integer", section=f"page {1 + i // 10}") for i in range(1, 40)]
))


@sync
async def test_type_ahead_burst_lands_every_value_in_its_own_field(tmp_path):
    path = make_study(tmp_path, FORTY)
    # Distinct values of varying length, some blanks and an illegible mark,
    # so a value landing one field off would be seen.
    values = ["501"] + [("" if i % 7 == 0 else str(i * 37 % 1000)) for i in range(1, 40)]
    values[13] = ""
    keys = field_keys(values[:13]) + ["asterisk"] + field_keys(values[14:])  # v13 illegible
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        burst(app, keys)  # 12⏎34⏎⏎5 style: everything queued before anything is handled
        await settle(pilot)
        assert app.screen.model.mode == REVIEW_MODE
    (form,) = stored(path)
    expected_states = ["keyed" if v else "blank" for v in values]
    expected_states[13] = "illegible"
    assert [form.texts[n] for n in FORTY.names] == [
        "" if i == 13 else v for i, v in enumerate(values)]
    assert [form.states[n] for n in FORTY.names] == expected_states


def _screen_text(app) -> str:
    # The SVG screenshot holds the rendered characters; drop tags and entities' spacing.
    svg = app.export_screenshot()
    text = re.sub(r"<[^>]+>", "", svg).replace("&#160;", " ")
    return re.sub(r"\s+", " ", text)


@sync
async def test_pass_two_never_shows_pass_one_values(tmp_path):
    path = make_study(tmp_path)
    pass1 = pd.DataFrame([{
        "member_id": "31", "initials": "QZX", "age": "8765", "plot_m2": "433,7",
        "joined": "1999-12-25", "belong1": "5", "belong2": "5", "crop": "9",
        "has_children": "1", "children_visit": "6", "comment": "Zanzibarfoo",
    }])
    with Study.open(path) as study:
        study.import_pass(1, "AB", pass1)
    secret = ["QZX", "8765", "433,7", "1999-12-25", "Zanzibarfoo"]
    typed = ["31", "MN", "42", "10", "2020-03-03", "2", "3", "1", "2", "", "ok"]
    app = make_app(path, mode="key", pass_no=2, keyer="JM")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()  # the keying screen's first paint
        seen = [_screen_text(app)]
        for key in field_keys(typed):
            await pilot.press(key)
            seen.append(_screen_text(app))
        assert app.screen.model.mode == REVIEW_MODE
        assert "the other pass has 1 forms" in seen[-1]  # a count of the other pass only
    assert any("MN" in screen for screen in seen)  # the reading of the screen does see values
    for screen in seen:
        for value in secret:
            assert value not in screen, value


@pytest.mark.parametrize("bad", ["x", "0"])
@sync
async def test_only_listed_choices_are_taken(tmp_path, bad):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["8", "AK"]), "escape", *field_keys(["8"]))
        await pilot.press("5" if bad == "0" else bad)  # 5 is not in the list of one form
        assert "choose" == app.screen.model.mode
        await pilot.press("escape")
        assert app.screen.model.mode == ID_MODE
    assert len(stored(path)) == 1


@sync
async def test_an_id_keyed_with_a_leading_zero_finds_the_form(tmp_path):
    # DESIGN.md: "07" and "7" are the same integer, so they are the same participant.
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["7", "AK"]), "escape", *field_keys(["07"]))
        assert app.screen.model.mode == "choose"


@sync
async def test_a_warned_id_stays_in_the_editor_and_a_second_enter_keeps_it(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*keys_for("7b"), "enter")
        assert app.screen.model.mode == ID_MODE
        assert app.screen.editor.value == "7b"  # member_id is an integer: warned, not lost
        await pilot.press("enter")
        assert app.screen.model.mode == FIELD_MODE
    (form,) = stored(path)
    assert form.participant == "7b"


@sync
async def test_review_names_flagged_fields_and_tab_goes_to_the_first(tmp_path):
    path = make_study(tmp_path)
    typed = ["12", "AK", "150", "", "2019-04-01", "4"]  # age 150 is outside 16..99
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        keys = field_keys(typed[:3]) + ["enter"] + field_keys(typed[3:]) + ["asterisk"]
        await pilot.press(*keys, *field_keys(["1", "2", "", ""]))  # children_visit blank
        model = app.screen.model
        assert model.mode == REVIEW_MODE
        detail = str(app.screen.detail.content)
        assert "age (outside its range)" in detail and "belong2 (illegible)" in detail
        assert "plot_m2 (" not in detail  # blank on paper, not required: nothing to flag
        await pilot.press("tab")
        assert (model.mode, model.names[model.cursor]) == (FIELD_MODE, "age")
        await pilot.press("escape", *field_keys(["12"]), "1")  # reopen the same form
        assert (model.mode, model.names[model.cursor]) == (FIELD_MODE, "age")


@pytest.mark.parametrize("auto_advance", [True, False])
@pytest.mark.parametrize("row", [5, 9])  # children keyed; age blank on paper
@sync
async def test_a_demo_form_keyed_from_its_paper_with_auto_advance(tmp_path, row, auto_advance):
    # The demo's codebook and its paper truth (fixtures/demo), keyed as a keyer
    # with the usual habit does, auto-advance on or off: each value then Enter,
    # a second Enter where the value breaks the codebook (core.values decides
    # which), Enter alone for a field whose applies_if is false (its box is empty).
    from core.codebook_io import load_codebook
    from core.conditions import parse_condition
    from core.values import parse

    root = Path(__file__).resolve().parent.parent / "fixtures" / "demo"
    cb = load_codebook(root / "codebook.csv")
    paper = pd.read_csv(root / "paper.csv", dtype=str, keep_default_na=False).iloc[row]
    path = make_study(tmp_path, cb, auto_advance=auto_advance)
    keys, typed, expected = [], {}, {}
    for var in cb:
        value = paper[var.name]
        if var.applies_if and not parse_condition(var.applies_if).evaluate_one(typed):
            assert value == "", "the demo's paper leaves a box that does not apply empty"
            expected[var.name] = ("", "blank")  # blank, as the codebook says
            keys += ["enter"]
            continue
        expected[var.name] = (value, "keyed" if value else "blank")
        if not value:
            keys += ["enter"] * (2 if var.required else 1)
            continue
        parsed = parse(var, value)
        if parsed.value is not None:
            typed[var.name] = parsed.value
        # The same keys whether auto-advance is on or off: the Enter a keyer
        # presses after a field that moved on by itself is taken as that field's.
        keys += list(value) + ["enter"]
        keys += ["enter"] if parsed.problem else []
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*keys)
        assert app.screen.model.mode == REVIEW_MODE
        await pilot.press("enter")
    (form,) = stored(path)
    assert {n: (form.texts[n], form.states[n]) for n in cb.names} == expected
    assert form.finished_at is not None


@sync
async def test_editing_a_warned_value_asks_again(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path, mode="key", pass_no=1, keyer="AB")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press(*field_keys(["4", "AK"]), *keys_for("150"), "enter")
        await pilot.press("backspace", "0", "enter")  # 150 -> 150 again: a new warning
        model = app.screen.model
        assert model.names[model.cursor] == "age" and model.states["age"] is None
        await pilot.press("enter")
        assert model.names[model.cursor] == "plot_m2"
