"""The home screen and the ``home``/``key`` commands.

Expected counts come from the forms this test puts into the study, never
from what the screen computed.
"""

from __future__ import annotations

import argparse

import pandas as pd
from pilot_helpers import sync

from core.codebook import Codebook, Variable
from core.store import Study
from tui import cli
from tui.app import make_app
from tui.commands import home as home_command
from tui.screens.home import HomeScreen
from tui.screens.keyer_prompt import KeyerPrompt
from tui.screens.keying import KeyingScreen

CB = Codebook((
    Variable("pid", "integer", is_id=True),
    Variable("q1", "integer", min=1, max=5),
    Variable("q2", "integer", min=1, max=5),
))  # fmt: skip
SIZE = (110, 34)


def make_study(tmp_path) -> str:
    path = tmp_path / "home.sqlite"
    pass1 = pd.DataFrame({"pid": ["1", "2", "3"], "q1": ["4", "2", "5"], "q2": ["1", "1", "3"]})
    # Pass 2 disagrees once (participant 2, q1) and lacks participant 3.
    pass2 = pd.DataFrame({"pid": ["1", "2"], "q1": ["4", "3"], "q2": ["1", "1"]})
    with Study.create(path, CB, "LM") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, "JM", pass2)
    return str(path)


@sync
async def test_home_shows_progress_and_discrepancies(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert isinstance(app.screen, HomeScreen)
        progress = str(app.screen.query_one("#home-progress").content)
        found = str(app.screen.query_one("#home-discrepancies").content)
    assert "pass 1: 3 forms" in progress and "keyers AB" in progress
    assert "pass 2: 2 forms" in progress and "keyers JM" in progress
    # Planted above: one disagreement (2, q1) and one form in pass 1 only.
    assert "mismatch 1" in found and "only_in_pass1 1" in found
    assert "counting" not in found


@sync
async def test_keying_from_home_asks_initials_and_comes_back(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("2")
        assert isinstance(app.screen, KeyerPrompt)
        await pilot.press("enter")  # no initials: asked again, not let through
        assert isinstance(app.screen, KeyerPrompt)
        await pilot.press("J", "M", "enter")
        assert isinstance(app.screen, KeyingScreen)
        assert (app.screen.model.pass_no, app.screen.model.keyer) == (2, "JM")
        await pilot.press("escape")  # at the participant-ID prompt: back home
        assert isinstance(app.screen, HomeScreen)


@sync
async def test_every_way_on_opens_its_screen_and_esc_comes_back(tmp_path):
    path = make_study(tmp_path)
    app = make_app(path)
    async with app.run_test(size=SIZE) as pilot:
        for key in ("r", "e", "p", "s"):
            await pilot.press(key)
            for _ in range(3):
                await pilot.pause()
            assert not isinstance(app.screen, HomeScreen), key
            for _ in range(4):  # back home from whatever opened (dialogs first)
                if isinstance(app.screen, HomeScreen):
                    break
                await pilot.press("escape")
            assert isinstance(app.screen, HomeScreen), key


def test_no_study_prints_how_to_start(capsys):
    assert home_command.run(None) == 2
    err = capsys.readouterr().err
    assert "keyproof demo" in err and "\n" == err[-1] and err.count("\n") == 1


def test_home_command_refuses_a_missing_study(tmp_path):
    args = argparse.Namespace(study=str(tmp_path / "nope.sqlite"))
    try:
        home_command.run(args)
    except Exception as exc:  # the CLI turns KeyproofError into exit 2
        from core.errors import KeyproofError

        assert isinstance(exc, KeyproofError) and "nope.sqlite" in str(exc)
    else:
        raise AssertionError("a missing study must be refused")


def test_key_command_errors_exit_2_with_one_line(tmp_path, capsys):
    missing = str(tmp_path / "missing.sqlite")
    assert cli.main(["key", missing, "--pass", "1", "--keyer", "AB"]) == 2
    err = capsys.readouterr().err
    assert "missing.sqlite" in err and err.count("\n") == 1 and "Traceback" not in err
    path = make_study(tmp_path)
    assert cli.main(["key", path, "--pass", "1", "--keyer", " "]) == 2
    assert "--keyer" in capsys.readouterr().err
