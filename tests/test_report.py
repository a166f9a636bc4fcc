"""The verification report: intervals, error attribution, and what the pages say."""

from __future__ import annotations

import math
from datetime import UTC, datetime

import pandas as pd
import pytest
from statsmodels.stats.proportion import proportion_confint

from core.codebook import Codebook, Variable
from core.report import (
    assemble_report,
    attribute_errors,
    rate_plot_svg,
    render_html,
    render_markdown,
    wilson_interval,
)

# --- Wilson interval against the reference library -------------------------


@pytest.mark.parametrize("errors,n", [(0, 10), (1, 10), (10, 10), (3, 1000), (17, 250),
                                      (0, 60_000), (41, 52_300), (5, 7)])
@pytest.mark.parametrize("level", [0.90, 0.95, 0.99])
def test_wilson_interval_equals_statsmodels(errors, n, level):
    # statsmodels' proportion_confint(method="wilson") is the reference implementation.
    low, high = proportion_confint(errors, n, alpha=1 - level, method="wilson")
    ours = wilson_interval(errors, n, level)
    assert ours == pytest.approx((low, high), abs=1e-12)


def test_wilson_interval_without_fields_is_undefined():
    assert all(math.isnan(x) for x in wilson_interval(0, 0))


# --- a hand-worked study ----------------------------------------------------
#
# Codebook: pid (ID), q1..q4 integers 0..10. Variables compared per form: 4.
# Forms (form_id: pass, participant, keyer):
#   1: pass 1, "1", AB     4: pass 2, "1", CD
#   2: pass 1, "2", AB     5: pass 2, "2", CD
#   3: pass 1, "3", AB     6: pass 2, "3", AB   <- same person keyed both passes
#   8: pass 1, "4", AB     (no pass 2 form: not compared)
#   7: pass 2, "2", EF     dropped as keyed twice (not compared)
# Paired participants: 1, 2, 3 -> fields compared 3 x 4 = 12.
# Fields keyed in compared forms: AB 4 forms x 4 = 16; CD 2 x 4 = 8.
#
# Settled decisions and who erred (the pass whose value the paper contradicts):
#   1 q1: pass1 "3", pass2 "4", paper 3           -> CD (pass 2)
#   2 q2: pass1 "07", pass2 "8", paper 7          -> CD (07 and 7 are the same integer)
#   3 q3: pass1 "12", pass2 "12", paper 4         -> AB (pass 1) and AB (pass 2)
#   1 q4: pass1 "" (blank), pass2 "2", paper blank -> CD
#   1 q2: pass1 "12", pass2 "21", paper 12, kept  -> CD (and listed as kept)
# Not counted: 2 q1 (open), 2 q3 (stale), 4 (form-level, open).
#
# AB: 2 errors / 16 fields = 1,250 per 10,000; CD: 4 / 8 = 5,000 per 10,000.
# Pass 1: 1 error / 12 fields; pass 2: 5 errors / 12 fields.
# Unseen estimate: 12 x (1/12) x (5/12) = 5/12 = 0.4167 (0.42 rounded).

CODEBOOK = Codebook((
    Variable("pid", "string", is_id=True),
    *(Variable(f"q{i}", "integer", min=0, max=10, section="page 1" if i < 3 else "page 2")
      for i in range(1, 5)),
))

FORMS = pd.DataFrame({
    "form_id": [1, 2, 3, 8, 4, 5, 6, 7],
    "pass": [1, 1, 1, 1, 2, 2, 2, 2],
    "serial": [1, 2, 3, 4, 1, 2, 3, 4],
    "participant": ["1", "2", "3", "4", "1", "2", "3", "2"],
    "keyer": ["AB", "AB", "AB", "AB", "CD", "CD", "AB", "EF"],
    "finished_at": ["t"] * 7 + [None],
    "dropped": [False] * 7 + [True],
})


def _row(participant, variable, kind, p1, p2, status, action=None, value=None, state="keyed",
         reason=None, form1=None, form2=None, cause=""):
    decided = action is not None
    return {
        "participant": participant, "variable": variable, "kind": kind, "pass1": p1,
        "pass2": p2, "cause": cause, "detail": "", "_form1": form1, "_form2": form2,
        "_status": status, "_decision_id": 1 if decided else pd.NA,
        "_decision_action": action if decided else pd.NA,
        "_decision_value": value if decided else pd.NA,
        "_decision_state": state if decided else pd.NA,
        "_decision_reason": reason if decided else pd.NA,
    }


PASS1_RIGHT = "checked against paper: pass 1 right"
ROWS = pd.DataFrame([
    _row("4", "", "only_in_pass1", "", "", "open", form1=8),
    _row("1", "q1", "mismatch", "3", "4", "settled", "value", "3", reason=PASS1_RIGHT,
         form1=1, form2=4, cause="neighbour_key"),
    _row("1", "q2", "mismatch", "12", "21", "settled", "keep", "12",
         reason="paper value outside the rule, kept", form1=1, form2=4, cause="transposed"),
    _row("1", "q4", "mismatch", "", "2", "settled", "value", "", state="blank",
         reason="paper blank", form1=1, form2=4, cause="other"),
    _row("2", "q1", "mismatch", "5", "2", "open", form1=2, form2=5, cause="other"),
    _row("2", "q2", "mismatch", "07", "8", "settled", "value", "7", reason=PASS1_RIGHT,
         form1=2, form2=5, cause="other"),
    _row("2", "q3", "mismatch", "1", "2", "stale", "value", "1", reason=PASS1_RIGHT,
         form1=2, form2=5, cause="neighbour_key"),
    _row("3", "q3", "out_of_range", "12", "12", "settled", "value", "4",
         reason="checked against paper: both wrong", form1=3, form2=6),
])

SET_ASIDE = pd.DataFrame({
    "participant": ["9"], "reason": ["consent <withdrawn> | by phone"], "rule": [""],
    "keyer": ["RS"], "at": ["2024-07-01T10:00:00Z"],
})

NOW = datetime(2024, 7, 2, 9, 30, tzinfo=UTC)


def _report():
    return assemble_report(CODEBOOK, ROWS, FORMS, SET_ASIDE, study="trial.sqlite",
                           head="7:" + "c" * 64, now=NOW, version="9.9")


def test_error_attribution_matches_the_hand_worked_example():
    report = _report()
    rates = report.keyer_rates.set_index("keyer")
    assert rates.loc["AB", ["fields", "errors"]].tolist() == [16, 2]
    assert rates.loc["CD", ["fields", "errors"]].tolist() == [8, 4]
    assert "EF" not in rates.index  # a dropped form's keyer keyed no compared field
    assert rates.loc["AB", "per_10000"] == pytest.approx(1250.0)
    assert rates.loc["CD", "per_10000"] == pytest.approx(5000.0)
    # Interval per 10,000 fields: statsmodels' Wilson interval scaled (reference library).
    low, high = proportion_confint(2, 16, alpha=0.05, method="wilson")
    assert rates.loc["AB", ["low", "high"]].tolist() == pytest.approx([low * 1e4, high * 1e4])
    passes = report.pass_rates.set_index("pass")
    assert passes.loc[1, ["fields", "errors"]].tolist() == [12, 1]
    assert passes.loc[2, ["fields", "errors"]].tolist() == [12, 5]
    assert report.fields_compared == 12 and report.paired == 3 and report.variables == 4
    assert report.unseen.expected == pytest.approx(12 * (1 / 12) * (5 / 12))
    assert report.same_keyer.to_dict("records") == [{"participant": "3", "keyer": "AB"}]
    assert report.status == {"open": 2, "settled": 5, "stale": 1}


def test_report_counts_by_kind_cause_section_and_reason():
    report = _report()
    assert dict(report.by_kind.values.tolist()) == {"mismatch": 6, "only_in_pass1": 1,
                                                    "out_of_range": 1}
    assert dict(report.by_cause.values.tolist()) == {"other": 3, "neighbour_key": 2,
                                                     "transposed": 1}
    assert dict(report.by_section.values.tolist()) == {"page 1": 4, "page 2": 3}
    assert dict(report.by_reason.values.tolist()) == {
        PASS1_RIGHT: 2, "paper value outside the rule, kept": 1, "paper blank": 1,
        "checked against paper: both wrong": 1}
    keyers = report.by_keyer.set_index("keyer")
    assert keyers.loc["AB", "as pass 1"] == 7 and keyers.loc["CD", "as pass 2"] == 6
    assert report.kept[["participant", "variable", "value"]].values.tolist() == [["1", "q2", "12"]]
    assert report.forms[["pass", "forms", "dropped"]].values.tolist() == [[1, 4, 0], [2, 3, 1]]


def test_attribution_compares_typed_values():
    cb = Codebook((Variable("pid", is_id=True), Variable("x", "number"), Variable("d", "date")))
    settled = pd.DataFrame({
        "participant": ["1", "2", "3"], "variable": ["x", "x", "d"],
        "pass1": ["3,50", "1", "2024-01-02"], "pass2": ["3.5", "(illegible)", "2024-02-01"],
        "value": ["3.5", "", "2024-01-02"], "state": ["keyed", "illegible", "keyed"],
        "keyer1": ["A", "A", "A"], "keyer2": ["B", "B", "B"],
    })
    # By hand: 3,50 = 3.5 (no error); the paper is illegible, so pass 1's "1" is
    # the slip; pass 2's date differs from the paper's.
    got = attribute_errors(settled, cb)
    assert got[["participant", "pass"]].values.tolist() == [["2", 1], ["3", 2]]


def test_markdown_and_html_contain_the_numbers():
    report = _report()
    md = render_markdown(report)
    html = render_html(report)
    for page in (md, html):
        assert "1,250.0" in page and "5,000.0" in page
        assert "0.42" in page  # the unseen-error estimate, 5/12
        assert "estimate" in page and "independently" in page
        assert "trial.sqlite" in page and "c" * 64 in page and "2024-07-02T09:30:00Z" in page
        lo, hi = (round(v * 1e4, 1) for v in proportion_confint(4, 8, method="wilson"))
        assert f"{lo:,.1f} to {hi:,.1f}" in page
    assert md.startswith("# Verification report: trial.sqlite")
    # Text from people is escaped: in Markdown the pipe cannot break the table,
    # in HTML the angle brackets cannot open a tag.
    assert r"consent \<withdrawn\> \| by phone" in md
    assert "consent &lt;withdrawn&gt; | by phone" in html and "<withdrawn>" not in html
    assert html.count("<svg") == 1 and "http" not in html.replace("http://www.w3.org/2000/svg", "")


def test_plot_places_each_interval_inside_the_axis():
    rates = _report().keyer_rates
    svg = rate_plot_svg(rates, width=560)
    # The SVG must parse as XML (standard library parser as the reference).
    import xml.etree.ElementTree as ET

    root = ET.fromstring(svg)
    ns = "{http://www.w3.org/2000/svg}"
    dots = root.findall(f"{ns}circle")
    assert len(dots) == 2
    xs = [float(d.get("cx")) for d in dots]
    assert all(90 <= x <= 530 for x in xs)
    assert xs[0] < xs[1]  # AB's 1,250 sits left of CD's 5,000


def test_open_work_is_said_to_make_rates_lower_bounds():
    # The hand-worked study has 2 open and 1 stale discrepancy (see above).
    assert "3 discrepancies are still open" in render_markdown(_report())
