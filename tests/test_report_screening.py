"""The report's screening section: reliability per scale and the set-aside rules with counts.

Outside references: pingouin's ``cronbach_alpha`` (reference library) on the
demo's paper truth (fixtures/demo/paper.csv) scored by hand here; scipy's
``zscore`` for who a |z| rule should catch; pandas' ``corr`` for the
corrected item-total correlation behind a negative-item flag.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from demo_resolved import FIXTURES, copy_study, resolved_demo
from scipy import stats

import core.compare
from core.codebook import Codebook, Variable
from core.report import (
    ONE_BY_ONE,
    build_report,
    render_html,
    render_markdown,
    scale_reliability,
    set_aside_rules,
)
from core.resolution import set_aside
from core.screening_rules import ZRule
from core.store import Study

RESOLVER = "LM"


@pytest.fixture(scope="module")
def resolved(tmp_path_factory):
    return resolved_demo(tmp_path_factory.mktemp("resolved"))


def _paper() -> pd.DataFrame:
    return pd.read_csv(FIXTURES / "paper.csv", dtype={"member_id": str})


def _belonging_items(paper: pd.DataFrame) -> pd.DataFrame:
    """The demo codebook's belonging items as scored: 9 = no answer, belong3 reversed (1 + 5 - x)."""
    items = paper[[f"belong{i}" for i in range(1, 6)]].astype("float64").mask(lambda t: t == 9)
    items["belong3"] = 1 + 5 - items["belong3"]
    return items


def test_set_aside_rules_counts_each_rule_and_the_ones_set_aside_by_hand():
    # Hand-built set-aside table: two rules and two participants set aside one by one.
    table = pd.DataFrame({
        "participant": ["4", "7", "9", "2", "5"],
        "reason": ["|z| above 3 on age", "|z| above 3 on age", "more than 1 item blank",
                   "consent withdrawn", "consent withdrawn"],
        "rule": ["z>3:age", "z>3:age", "blank>1:S", "", None],
    })
    got = set_aside_rules(table)
    assert got.values.tolist() == [
        ["blank>1:S", "more than 1 item blank", 1],
        ["z>3:age", "|z| above 3 on age", 2],
        [ONE_BY_ONE, "consent withdrawn", 2],
    ]
    assert set_aside_rules(table.iloc[0:0]).empty


def test_negative_item_flag_matches_the_corrected_item_total_correlation():
    rng = np.random.default_rng(7)
    trait = rng.normal(size=40)
    items = pd.DataFrame({f"i{k}": np.clip(np.round(3 + trait + rng.normal(scale=0.8, size=40)),
                                           1, 5) for k in range(1, 5)})
    items["i3"] = 6 - items["i3"]  # a reverse-worded item the codebook forgot to reverse
    cb = Codebook((Variable("id", is_id=True),
                   *(Variable(n, "integer", min=1, max=5, scale="S") for n in items)))
    data = items.astype("Int64").assign(id=[str(i) for i in range(40)])
    row = scale_reliability(data, cb).iloc[0]
    # pandas' Pearson r of each item with the sum of the others (corrected item-total).
    negative = [n for n in items if items[n].corr(items.drop(columns=n).sum(axis=1)) < 0]
    assert negative == ["i3"] and row["negative items"] == "i3"
    # pingouin (reference library) for alpha on the same four items.
    assert row["alpha"] == pytest.approx(pg.cronbach_alpha(items)[0], rel=1e-9)
    assert row["n"] == 40 and row["items"] == 4


def test_report_shows_a_rules_count_after_setting_participants_aside(resolved, tmp_path,
                                                                     monkeypatch):
    path = copy_study(resolved, tmp_path / "study")
    paper = _paper()
    # scipy (reference): |z| of visits last month above 1.5, z from the mean and SD with n - 1.
    z = stats.zscore(paper["visits_month"].astype(float), ddof=1)
    caught = sorted(paper.loc[np.abs(z) > 1.5, "member_id"])
    assert 1 <= len(caught) <= 5  # the rule must catch someone for the check to mean anything
    rule = ZRule("visits_month", 1.5)
    by_hand = next(p for p in paper["member_id"] if p not in caught)
    with Study.open(path) as study:
        for participant in caught:
            set_aside(study, participant, rule.text, RESOLVER, rule=rule.name)
        set_aside(study, by_hand, "consent withdrawn", RESOLVER)
    calls = []
    real = core.compare.compare_study
    monkeypatch.setattr(core.compare, "compare_study",
                        lambda *a, **k: calls.append(1) or real(*a, **k))
    with Study.open(path, readonly=True) as study:
        report = build_report(study)
    assert len(calls) == 1  # the worklist is built once and shared with the screening section
    rules = report.set_aside_rules.set_index("rule")
    assert rules.loc[rule.name, "participants"] == len(caught)
    assert rules.loc[rule.name, "text"] == rule.text
    assert rules.loc[ONE_BY_ONE, "participants"] == 1
    md = render_markdown(report)
    total = len(caught) + 1
    assert f"{total} participant(s) set aside in total, {len(caught)} of them by a" in md
    # The rule's row of the Markdown table (Markdown escapes > and _ with a backslash).
    row = next(line for line in md.splitlines() if line.startswith("| z\\>1.5:visits\\_month"))
    assert row.endswith(f" | {len(caught)} |") and "above 1.5 on visits" in row
    html = render_html(report)
    assert f"<td>{rule.name.replace('>', '&gt;')}</td>" in html
    assert f'<td class="n">{len(caught)}</td>' in html
    # Alpha leaves the set-aside participants out: pingouin on the paper without them.
    kept = paper[~paper["member_id"].isin([*caught, by_hand])]
    items = _belonging_items(kept)
    alpha, _ = pg.cronbach_alpha(items.dropna())  # listwise, as the report states
    belonging = report.screening.set_index("scale").loc["belonging"]
    assert belonging["alpha"] == pytest.approx(alpha, rel=1e-9)
    assert belonging["n"] == len(items.dropna())
    assert belonging["too few answered"] == 0 and belonging["negative items"] == ""
    # Scores standing on 4 of the 5 items (at least 80 % answered, the codebook's share).
    answered = items.notna().sum(axis=1)
    assert belonging["from fewer items"] == int(((answered >= 4) & (answered < 5)).sum())
    assert "Scale reliability" in md and f"{alpha:.3f}" in md
