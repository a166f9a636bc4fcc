"""The app's screening view, driven with Pilot on the demo study resolved with its paper.

Expected numbers come from outside the view: pingouin's ``cronbach_alpha``
and scipy's ``zscore``/``skew`` computed in the test on the demo's paper
truth (fixtures/demo/paper.csv) and its codebook, and the store read back
through its own connection after the app is done.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from demo_resolved import copy_study, paper, resolved_demo
from pilot_helpers import settle, sync, type_text
from scipy import stats

from core.screening import screen
from core.store import Study
from tui.app import make_app
from tui.screens.rule_dialog import RuleDialog
from tui.screens.screening import ScreeningScreen

SIZE = (130, 44)


@pytest.fixture(scope="module")
def resolved(tmp_path_factory):
    return resolved_demo(tmp_path_factory.mktemp("screening") / "demo")


@pytest.fixture
def study_path(resolved, tmp_path):
    return copy_study(resolved, tmp_path / "study")


def page(app) -> str:
    return str(app.screen.query_one("#screening-page").content)


async def open_screening(app, pilot) -> ScreeningScreen:
    await settle(app, pilot)
    await pilot.press("s")  # the home screen's key for screening
    await settle(app, pilot)
    assert isinstance(app.screen, ScreeningScreen)
    return app.screen


async def show(app, pilot, page_id: str) -> None:
    """Highlight ``page_id`` in the menu: arrow keys for a step or two, as a user would;
    farther away the highlight is moved directly (Pilot spends ~40 ms a key)."""
    menu = app.screen.query_one("#screening-menu")
    ids = [menu.get_option_at_index(i).id for i in range(menu.option_count)]
    steps = ids.index(page_id) - (menu.highlighted or 0)
    if abs(steps) <= 3:
        for _ in range(abs(steps)):
            await pilot.press("down" if steps > 0 else "up")
    else:
        menu.highlighted = ids.index(page_id)
    await pilot.pause()


def paper_items(codebook, scale: str) -> pd.DataFrame:
    """A scale's items from the paper truth: missing codes out, reverse-keyed items reversed."""
    truth = paper()
    cols = {}
    for var in codebook.scales[scale]:
        x = pd.to_numeric(truth[var.name].replace("", np.nan)).astype(float)
        x = x.mask(x.isin([float(c) for c in var.missing_values]))
        cols[var.name] = (var.min + var.max - x) if var.reverse else x
    return pd.DataFrame(cols)


@sync
async def test_scale_and_variable_pages_agree_with_pingouin_scipy_and_pandas(study_path):
    app = make_app(study_path)
    async with app.run_test(size=SIZE) as pilot:
        view_screen = await open_screening(app, pilot)
        codebook = app.study.codebook
        assert codebook.scales, "the demo codebook has scales"
        for scale in codebook.scales:
            items = paper_items(codebook, scale)
            # pingouin: reference implementation of Cronbach's alpha (listwise here,
            # as keyproof states); n used is the number of complete rows.
            alpha, _ = pg.cronbach_alpha(data=items, nan_policy="listwise")
            n_used = len(items.dropna())
            core_alpha = screen(view_screen.view.data, codebook).scales[scale].alpha
            assert core_alpha.alpha == pytest.approx(alpha, abs=1e-9)
            await show(app, pilot, f"scale:{scale}")
            text = page(app)
            assert f"Cronbach's alpha {alpha:.3f} (listwise, n used {n_used})" in text
            assert "Spearman-Brown" in text and "alpha if deleted" in text
        await show(app, pilot, "overview")
        for scale in codebook.scales:
            assert scale in page(app)
        # One app for both checks: each app start costs a comparison and a screening.
        await check_variable_pages(app, pilot)


async def check_variable_pages(app, pilot):
    """The plot_m2 and main_crop pages against numpy, scipy and pandas on the paper."""
    x = pd.to_numeric(paper()["plot_m2"].replace("", np.nan)).dropna().to_numpy(float)
    await show(app, pilot, "var:plot_m2")
    text = page(app)
    # numpy: mean and SD with n - 1; scipy: adjusted skewness (bias=False, G1) and
    # kurtosis (bias=False, excess: G2). The page rounds to 2 decimals.
    shown = {k: float(v) for k, v in re.findall(r"(mean|SD|skewness|kurtosis) (-?[\d.]+)", text)}
    assert f"n {len(x)}; mean" in text
    assert shown["mean"] == pytest.approx(x.mean(), abs=0.0051)
    assert shown["SD"] == pytest.approx(x.std(ddof=1), abs=0.0051)
    assert shown["skewness"] == pytest.approx(stats.skew(x, bias=False), abs=0.0051)
    assert shown["kurtosis"] == pytest.approx(stats.kurtosis(x, bias=False), abs=0.0051)
    assert "Distribution" in text and "#" in text
    await show(app, pilot, "var:main_crop")
    text = page(app)
    # pandas' value_counts on the paper; percent of the answers that are codes
    # (the declared missing code 9 and blanks left out).
    crop = paper()["main_crop"]
    answered = crop[~crop.isin(["", "9"])]
    code, label, count, percent = next(
        ln.split() for ln in text.splitlines() if ln.split()[:2] == ["1", "vegetables"])
    assert int(count) == int((answered == "1").sum())
    assert float(percent) == pytest.approx(100 * (answered == "1").mean(), abs=0.051)


def caught_by_scipy(variable: str, threshold: float) -> list[str]:
    """Members whose |z| on ``variable`` in the paper is above ``threshold`` (scipy, ddof=1)."""
    truth = paper()
    x = pd.to_numeric(truth[variable].replace("", np.nan)).astype(float)
    z = stats.zscore(x.to_numpy(), ddof=1, nan_policy="omit")
    order = sorted(truth.index, key=int)  # the verified table is in natural ID order
    hit = {m for m, zz in zip(truth.index, z, strict=True) if abs(zz) > threshold}
    return [m for m in order if m in hit]


@sync
async def test_a_rule_applied_from_the_view_sets_everyone_it_catches_aside(study_path):
    threshold = 2.0
    variable = next(v for v in ("plot_m2", "distance_km", "visits_month", "age")
                    if caught_by_scipy(v, threshold))
    expected = caught_by_scipy(variable, threshold)
    rule_text = f"z:{variable}:{threshold:g}"
    app = make_app(study_path)
    async with app.run_test(size=SIZE) as pilot:
        await open_screening(app, pilot)
        await pilot.press("a")
        await pilot.pause()
        assert isinstance(app.screen, RuleDialog)
        # A typo first: explained in the dialog, and nothing can be confirmed.
        app.screen.query_one("#rule-text").value = "z:nosuch"
        await pilot.press("enter")
        await pilot.pause()
        problem = str(app.screen.query_one("#rule-problem").content)
        assert "nosuch" in problem and "check the name" in problem
        assert app.screen.query_one("#rule-keyer").disabled
        app.screen.query_one("#rule-text").value = rule_text
        await pilot.press("enter")
        await pilot.pause()
        shown = str(app.screen.query_one("#rule-catches").content)
        assert f"It catches {len(expected)}: {', '.join(expected)}." in shown
        assert app.screen.focused is app.screen.query_one("#rule-reason")
        await pilot.press("enter")  # the rule's own sentence as the reason
        await type_text(pilot, "LM")
        await pilot.press("enter")
        await settle(app, pilot)
        assert isinstance(app.screen, ScreeningScreen)
        overview = page(app)
        assert "With and without set-aside participants" in overview
        for member in expected:
            assert f"  {member} (rule z>2:{variable})" in overview
    with Study.open(study_path, readonly=True) as study:
        aside = study.set_asides()
    assert sorted(aside["participant"], key=int) == expected
    assert set(aside["rule"]) == {f"z>2:{variable}"}
    assert all(f"|z| above 2 on {variable}" in r for r in aside["reason"])


@sync
async def test_an_open_study_is_screened_as_a_draft_and_rules_wait_for_its_open_cells(tmp_path):
    from core.demo import make_demo_study
    from core.resolution import open_rows, worklist

    study_path = make_demo_study(tmp_path / "open")
    with Study.open(study_path, readonly=True) as study:
        still_open = open_rows(worklist(study))
    # Cells on age, plus form-level problems (they leave a participant with only an ID).
    touching = int(still_open["variable"].isin(["age", ""]).sum())
    assert touching, "the demo as keyed has open work touching age"
    app = make_app(study_path)
    async with app.run_test(size=(130, 20)) as pilot:  # short: the overview needs scrolling
        await open_screening(app, pilot)
        assert "Draft:" in page(app) and "open cell(s) left out" in page(app)
        # Space pages down through a long page and b pages back, like a pager.
        scroll = app.screen.query_one("#screening-scroll")
        assert scroll.max_scroll_y > 0 and scroll.scroll_y == 0
        await pilot.press("space")
        await pilot.pause()
        assert scroll.scroll_y > 0
        await pilot.press("b")
        await pilot.pause()
        assert scroll.scroll_y == 0
        await show(app, pilot, "var:age")
        await pilot.press("a")
        await pilot.pause()
        assert app.screen.query_one("#rule-text").value == "z:age:3.29"  # offered from the page
        await pilot.press("enter")
        await pilot.pause()
        problem = str(app.screen.query_one("#rule-problem").content)
        assert problem.startswith(f"{touching} open cell(s) touch this rule's variables")
        assert app.screen.query_one("#rule-keyer").disabled
        await pilot.press("escape")
        await settle(app, pilot)
    with Study.open(study_path, readonly=True) as study:
        assert study.set_asides().empty


@sync
async def test_a_study_with_nothing_keyed_says_so_and_every_page_opens(tmp_path):
    from core.codebook import Code, Codebook, Variable

    codebook = Codebook((
        Variable("pid", "integer", is_id=True),
        Variable("q1", "integer", min=1, max=5, scale="A"),
        Variable("q2", "integer", min=1, max=5, scale="A"),
        Variable("c", "integer", codes=(Code("1", "yes"), Code("2", "no"))),
    ))  # fmt: skip
    path = tmp_path / "empty.sqlite"
    Study.create(path, codebook, "LM").close()
    app = make_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await open_screening(app, pilot)
        assert "Nobody in the verified table yet" in page(app)
        await show(app, pilot, "scale:A")
        assert "Cronbach's alpha not defined (listwise, n used 0)" in page(app)
        await show(app, pilot, "var:q1")
        assert "n 0; mean —; SD —" in page(app)  # undefined, not zero
        await show(app, pilot, "var:c")
        assert "yes" in page(app) and "no" in page(app)  # the code labels, with no counts yet

