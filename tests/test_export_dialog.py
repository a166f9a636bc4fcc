"""Export and report from the app's home screen, driven with Pilot.

Outside references: the frictionless library validates the Data Package
(the reference implementation of that open standard); pandas reads the CSV
back and it must equal the demo's paper truth (fixtures/demo/paper.csv);
what is open is counted by ``core.resolution`` through its own connection.
"""

from __future__ import annotations

import asyncio
import importlib
import threading

import pandas as pd
import pytest
from demo_resolved import FIXTURES, copy_study, resolved_demo
from frictionless import validate
from pilot_helpers import settle, sync

from core.demo import make_demo_study
from core.resolution import counts_by_kind, open_rows, worklist
from core.store import Study
from tui.app import make_app
from tui.screens.export_dialog import ExportDialog
from tui.screens.home import HomeScreen
from tui.screens.report_dialog import ReportDialog

SIZE = (120, 40)
# The module itself: ``core.export`` as an attribute is the function core re-exports.
EXPORT_MODULE = importlib.import_module("core.export")


@pytest.fixture(scope="module")
def resolved(tmp_path_factory):
    return resolved_demo(tmp_path_factory.mktemp("export") / "demo")


async def open_dialog(app, pilot, key: str, kind):
    await settle(app, pilot)
    assert isinstance(app.screen, HomeScreen)
    await pilot.press(key)
    await pilot.pause()
    assert isinstance(app.screen, kind)
    return app.screen


def shown(dialog, wid: str) -> str:
    return str(dialog.query_one(wid).content)


def paper_frame() -> pd.DataFrame:
    # pandas' own CSV type inference on the paper truth is the reference; the
    # identifying variable (initials) never goes into the analysis file.
    paper = pd.read_csv(FIXTURES / "paper.csv")
    return paper.drop(columns=["initials"]).sort_values("member_id").reset_index(drop=True)


def same_as_paper(got: pd.DataFrame) -> None:
    """The paper's columns equal the paper; the only others are the scale scores."""
    expected = paper_frame()
    scales = {"belonging", "workdays", "sharing"}  # the demo codebook's scale column
    assert set(got.columns) - set(expected.columns) == scales
    pd.testing.assert_frame_equal(got[list(expected.columns)], expected, check_dtype=False)


@sync
async def test_export_to_a_data_package_from_home_validates(resolved, tmp_path):
    study = copy_study(resolved, tmp_path / "study")
    target = tmp_path / "out" / "package"
    target.parent.mkdir()
    app = make_app(study)
    async with app.run_test(size=SIZE) as pilot:
        dialog = await open_dialog(app, pilot, "e", ExportDialog)
        dialog.query_one("#export-path").value = str(target)
        await pilot.press("enter")
        await settle(app, pilot)
        assert dialog.result is not None, shown(dialog, "#export-problem")
        bar = dialog.query_one("#export-progress")
        assert bar.total == bar.progress == 60  # the 60 paper forms, every row written
        assert "Wrote" in shown(dialog, "#export-done")
        await pilot.press("escape")
        await pilot.pause()
        assert isinstance(app.screen, HomeScreen)
    # frictionless: the reference implementation of the Data Package standard.
    report = validate(target / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    same_as_paper(pd.read_csv(target / "data.csv"))


@sync
async def test_export_to_csv_shows_progress_and_the_app_answers_meanwhile(
        resolved, tmp_path, monkeypatch):
    study = copy_study(resolved, tmp_path / "study")
    target = tmp_path / "verified.csv"
    reached, release = threading.Event(), threading.Event()
    real_export = EXPORT_MODULE.export

    def held_export(*args, **kwargs):
        # Hold the worker between building the table and writing the file, so the
        # test can press keys while an export is under way (no sleeping).
        reached.set()
        assert release.wait(30)
        return real_export(*args, **kwargs)

    monkeypatch.setattr(EXPORT_MODULE, "export", held_export)
    app = make_app(study)
    async with app.run_test(size=SIZE) as pilot:
        dialog = await open_dialog(app, pilot, "e", ExportDialog)
        dialog.query_one("#export-path").value = str(target)
        await pilot.press("enter")
        assert await asyncio.to_thread(reached.wait, 30)
        await pilot.pause()
        # Variables typed so far are on the bar: all of the codebook's 35 by now.
        assert shown(dialog, "#export-phase") == "reading variables: 35 of 35"
        assert dialog.query_one("#export-progress").total == 35
        await pilot.press("escape")  # answered at once: the dialog stays while writing
        await pilot.press("tab", "x")  # and typing still reaches the fields
        await pilot.pause()
        assert app.screen is dialog and dialog.running
        assert dialog.query_one("#export-identifying").value == "x"
        assert not target.exists()
        release.set()
        await settle(app, pilot)
        assert not dialog.running and dialog.result is not None
        assert shown(dialog, "#export-phase") == "done"
    same_as_paper(pd.read_csv(target))


@sync
async def test_a_refused_export_shows_the_open_counts_and_writes_nothing(tmp_path):
    """Also: a bad target is explained, and a draft is one tick away."""
    study = make_demo_study(tmp_path / "study")
    with Study.open(study, readonly=True) as s:
        expected = counts_by_kind(open_rows(worklist(s)))
    assert expected, "the demo as keyed has open discrepancies"
    out = tmp_path / "out"
    out.mkdir()
    app = make_app(study)
    async with app.run_test(size=SIZE) as pilot:
        dialog = await open_dialog(app, pilot, "e", ExportDialog)
        # A target no export writes: explained in the dialog, the app carries on.
        dialog.query_one("#export-path").value = str(out / "verified.json")
        await pilot.press("enter")
        await settle(app, pilot)
        assert "cannot export to a .json file" in shown(dialog, "#export-problem")
        assert app.screen is dialog and not dialog.running
        dialog.query_one("#export-path").value = str(out / "verified.xlsx")
        await pilot.press("enter")
        await settle(app, pilot)
        problem = shown(dialog, "#export-problem")
        assert problem.startswith(f"Refused: {sum(expected.values())} discrepancies are still open")
        for kind, n in expected.items():
            assert f"{kind} {n}" in problem
        assert "nothing was written" in problem
        assert dialog.result is None and not dialog.running
        # A draft is one tick away: Tab, Tab, space, then Enter right there (Enter
        # on the box exports; it must not untick it).
        await pilot.press("tab", "tab", "space")
        assert dialog.query_one("#export-draft").value
        await pilot.press("enter")
        await settle(app, pilot)
        assert dialog.result is not None and dialog.result.path.name == "verified.DRAFT.xlsx"
    assert sorted(p.name for p in out.iterdir()) == ["verified.DRAFT.open.csv",
                                                      "verified.DRAFT.xlsx"]


@sync
async def test_report_from_home_writes_markdown_and_refuses_a_bad_ending(resolved, tmp_path):
    study = copy_study(resolved, tmp_path / "study")
    app = make_app(study)
    async with app.run_test(size=SIZE) as pilot:
        dialog = await open_dialog(app, pilot, "p", ReportDialog)
        path = dialog.query_one("#report-path")
        path.value = str(tmp_path / "report.txt")
        await pilot.press("enter")
        await settle(app, pilot)
        assert "choose a .html or .md file" in shown(dialog, "#report-problem")
        path.value = str(tmp_path / "report.md")
        await pilot.press("enter")
        await settle(app, pilot)
        assert dialog.written == tmp_path / "report.md"
        assert "(0 still open)" in shown(dialog, "#report-done")
    assert not (tmp_path / "report.txt").exists()
    text = (tmp_path / "report.md").read_text()
    assert text.startswith("#")
