"""A paragraph for the methods section, written from the verification report's numbers.

The report's tables are for checking; a research team also needs the few
sentences a paper's methods section says about data entry: how the forms
were keyed, how the passes were compared and settled, how often each pass
erred, what double entry cannot see, who was left out and why, and the
scales' reliability. :func:`methods_paragraph` writes them from a
:class:`core.report.Report`, stating only what the study holds (a same-person
pair of passes is said, not hidden) and no participant ID. While anything is
open it says first that it is a draft not to be quoted, since rates are then
lower bounds.

The wording is a starting point to edit, not a template to paste unread;
numbers are rounded as a methods section prints them (rates to one decimal,
alpha to two).
"""

from __future__ import annotations

import math

import pandas as pd

from .compare import FORM_KINDS
from .report import Report, shown_number


def methods_paragraph(report: Report) -> str:
    """Sentences on data entry and verification for a methods section, from ``report``.

    Example (needs a study file, so not run as a doctest)::

        with Study.open("garden.sqlite", readonly=True) as study:
            print(methods_paragraph(build_report(study)))
    """
    open_n = report.status.get("open", 0) + report.status.get("stale", 0)
    parts: list[str] = []
    if open_n:
        parts.append(f"DRAFT — {_n(open_n, 'discrepancy', 'discrepancies')} still open: "
                     "settle them before quoting this paragraph; until then the error rates "
                     "are lower bounds.")
    parts.append(_keying(report))
    parts.append(_comparison(report, open_n))
    rates = _rates(report)
    if rates:
        parts.append(rates)
    parts.append(_unseen(report))
    parts.append(_set_aside(report))
    if len(report.kept):
        parts.append(f"{_n(len(report.kept), 'value', 'values')} outside the codebook's "
                     "ranges or codes stand because the paper questionnaire shows them.")
    scales = _scales(report)
    if scales:
        parts.append(scales)
    return " ".join(p for p in parts if p)


def _n(count: int, one: str, many: str) -> str:
    return f"{count:,} {one if count == 1 else many}"


def _keying(report: Report) -> str:
    keyers = {int(r["pass"]): str(r["keyers"]) for _, r in report.forms.iterrows()}
    everyone = sorted({k.strip() for ks in keyers.values() for k in ks.split(",") if k.strip()})
    text = (f"{_n(report.paired, 'questionnaire was', 'questionnaires were')} keyed twice, "
            f"in two separate passes, by {_n(len(everyone), 'keyer', 'keyers')}")
    same = len(report.same_keyer)
    if same:
        text += (f"; for {_n(same, 'questionnaire', 'questionnaires')} the same person "
                 "keyed both passes, so those passes are not independent")
    elif report.paired:
        text += "; no one keyed both passes of the same questionnaire"
    text += "."
    text += " " + _where_keyed(report)
    if report.one_pass:
        text += (f" {_n(report.one_pass, 'further questionnaire was', 'further questionnaires were')}"
                 " keyed in one pass only.")
    return text


def _where_keyed(report: Report) -> str:
    imported = {p: n for p, n in report.imported.items() if n}
    if not imported:
        return ("Both passes were keyed on keyproof's keying screen, which never shows "
                "one pass's values while the other is keyed.")
    forms = dict(zip(report.forms["pass"].astype(int), report.forms["forms"].astype(int),
                     strict=True))
    if all(imported.get(p, 0) == forms.get(p, 0) for p in (1, 2)):
        return ("Both passes were keyed in spreadsheets and imported; keyproof cannot keep "
                "one pass from seeing the other there.")
    said = " and ".join(f"{_n(n, 'form', 'forms')} of pass {p}" for p, n in imported.items())
    return (f"{said} {'was' if sum(imported.values()) == 1 else 'were'} keyed in a "
            "spreadsheet and imported, where keyproof cannot keep one pass from seeing "
            "the other; the rest were keyed on its keying screen, which can.")


def _comparison(report: Report, open_n: int) -> str:
    kinds = dict(zip(report.by_kind["kind"], report.by_kind["discrepancies"], strict=True)) \
        if len(report.by_kind) else {}
    fields = sum(int(n) for k, n in kinds.items() if k not in FORM_KINDS)
    forms = sum(int(n) for k, n in kinds.items() if k in FORM_KINDS)
    rate = 10_000 * fields / report.fields_compared if report.fields_compared else math.nan
    text = (f"The two passes were compared field by field on typed values with keyproof "
            f"{report.keyproof_version} ({report.variables:,} variables per questionnaire, "
            f"{report.fields_compared:,} fields): "
            f"{_n(fields, 'field was', 'fields were')} flagged because the passes disagreed "
            "or a value broke the codebook's rules")
    text += f" ({shown_number(rate)} per 10,000 fields)" if fields else ""
    if forms:
        text += (f", and {_n(forms, 'questionnaire', 'questionnaires')} because the "
                 "participant ID was found in one pass only or twice in one pass")
    text += "."
    if not open_n and (fields or forms):
        text += (" Every flagged field was settled against the paper questionnaire, "
                 "with the reason recorded in the study's journal.")
    return text


def _rates(report: Report) -> str:
    rates = report.pass_rates
    if rates.empty or not int(rates["fields"].sum()):
        return ""
    said = []
    for _, r in rates.iterrows():
        errors = int(r["errors"])
        said.append(f"pass {int(r['pass'])} made {_n(errors, 'error', 'errors')} "
                    f"({shown_number(r['per_10000'])} per 10,000 fields; 95 % Wilson interval "
                    f"{shown_number(r['low'])} to {shown_number(r['high'])})")
    return "Judged against the paper, " + ", and ".join(said) + "."


def _unseen(report: Report) -> str:
    u = report.unseen
    if not u.fields:
        return ""
    return (f"Assuming the passes err independently, about {u.expected:.2f} fields may hold "
            "the same wrong value in both passes, which double entry cannot detect.")


def _set_aside(report: Report) -> str:
    n = len(report.set_aside)
    if not n:
        return "No participant was set aside."
    table = report.set_aside_by_reason
    reasons = []
    for _, r in table.iterrows():
        rule = str(r["rule"]) if not pd.isna(r["rule"]) else ""
        why = str(r["reason"]) + (f" (rule {rule})" if rule.strip() else "")
        reasons.append(f"{why}: {int(r['participants']):,}")
    return (f"{_n(n, 'participant was', 'participants were')} set aside before analysis "
            f"(kept in the study, left out of the analysis file): " + "; ".join(reasons) + ".")


def _scales(report: Report) -> str:
    table = report.screening
    if table is None or table.empty:
        return ""
    said = []
    for _, r in table.iterrows():
        alpha = r["alpha"]
        if alpha is None or pd.isna(alpha):
            continue
        said.append(f"{r['scale']} {_alpha(float(alpha))} ({int(r['items'])} items, "
                    f"n = {int(r['n']):,})")
    if not said:
        return ""
    return "Cronbach's alpha of the scale scores: " + "; ".join(said) + "."


def _alpha(a: float) -> str:
    # A methods section prints alpha to two decimals without the leading zero.
    text = f"{a:.2f}"
    return text[1:] if text.startswith("0.") else text.replace("-0.", "-.")
