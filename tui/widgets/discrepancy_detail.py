"""The resolution screen's detail pane: what the resolver needs to decide one item.

The text is built by :func:`detail_text`, a plain function over the codebook,
one worklist row and the neighbouring fields (``core.resolution.neighbours``),
so it is tested without a terminal; the widget only shows it.
"""

from __future__ import annotations

import pandas as pd
from textual.widgets import Static

from core.resolution import FORM_KINDS, cell_text
from core.values import allowed_text

CAUSE_WORDS = {
    "transposed": "two characters swapped",
    "neighbour_key": "a neighbouring key",
    "dropped_char": "a character left out",
    "extra_char": "a character too many",
    "decimal_shift": "the decimal point moved",
    "sign": "the sign lost or added",
    "field_shift": "field shift: values slid by one field (settle the run with 8)",
    "case_space": "only case or spaces differ (in free text, s settles all such at once)",
    "omitted": "one pass left it empty",
    "other": "no simple slip explains it",
}

# Worklist cells mix None and NA; core's reading of them is the one the decisions use.
_s = cell_text


def _shown(text: str) -> str:
    return "(blank)" if text == "" else text


def detail_text(codebook, row, around: pd.DataFrame | None = None,
                warning: str | None = None, partner_id: str | None = None) -> str:
    """The detail of worklist ``row`` as lines of plain text.

    ``around`` is ``core.resolution.neighbours(...)`` (None for form-level
    rows); ``warning`` the independence notice, shown first when given;
    ``partner_id`` the participant ID the suggested partner form was keyed
    with in the other pass (the resolver finds paper by ID, not by form serial).
    """
    lines = []
    if warning:
        lines.append(f"NOTE  {warning}")
    participant, name, kind = _s(row["participant"]), _s(row["variable"]), _s(row["kind"])
    status = _s(row.get("_status"))
    if kind in FORM_KINDS:
        lines.append(f"form {participant}  ·  {kind.replace('_', ' ')}")
        lines.append(_s(row.get("detail")))
        partner = _s(row.get("_partner"))
        if kind == "duplicate_id":
            lines.append("keys: d drop the selected pass's second form (keyed twice)")
        else:
            other = 2 if kind == "only_in_pass1" else 1
            if not partner:
                hint = "no likely partner found"
            elif partner_id is None:  # the partner's ID was not looked up
                hint = f"suggested partner: a pass {other} form  ·  p pair with it"
            else:
                hint = f"suggested partner: pass {other} form with ID {_shown(partner_id)}  ·  p pair with it"
            lines.append(f"{hint}  ·  c confirm it exists in one pass only")
    else:
        var = codebook[name] if name in codebook else None
        label = f" — {var.label}" if var is not None and var.label else ""
        lines.append(f"form {participant}  ·  {name}{label}")
        if var is not None:
            rule = f"rule: {allowed_text(var)}"
            if var.required:
                rule += "  ·  required"
            if var.applies_if:
                rule += f"  ·  applies if {var.applies_if}"
            lines.append(rule)
        lines.append(f"pass 1: {_shown(_s(row.get('pass1')))}   pass 2: {_shown(_s(row.get('pass2')))}")
        # The comparison's detail already says which pass breaks the rule, and how.
        what = kind.replace("_", " ")
        if _s(row.get("detail")):
            what += f"  ·  {_s(row.get('detail'))}"
        lines.append(what)
        cause = _s(row.get("cause"))
        if cause:
            lines.append(f"likely cause: {CAUSE_WORDS.get(cause, cause)}")
    if _s(row.get("_decision_action")):
        word = {"stale": "REOPENED — a pass value changed after this decision:",
                "settled": "decided:"}.get(status, "last decision:")
        value = _s(row.get("_decision_value"))
        state = _s(row.get("_decision_state"))
        stood = value if value else (state or "—")
        lines.append(f"{word} {_s(row.get('_decision_action'))} {stood!r} by "
                     f"{_s(row.get('_decided_by'))} at {_s(row.get('_decided_at'))[:16]} "
                     f"({_s(row.get('_decision_reason'))})")
    if around is not None and len(around):
        lines.append("")
        lines.append(f"  {'field':<16}{'pass 1':<16}{'pass 2':<16}")
        for r in around.itertuples(index=False):
            p1 = "—" if r.pass1 is None else _shown(str(r.pass1))
            p2 = "—" if r.pass2 is None else _shown(str(r.pass2))
            mark = "›" if r.here else " "
            differs = "≠" if p1 != p2 else " "
            lines.append(f"{mark} {_cell(str(r.variable)):<16}{_cell(p1):<16}{_cell(p2):<16}"
                         f"{differs}")
    return "\n".join(lines)


def _cell(text: str, width: int = 15) -> str:
    """A neighbour table cell: a text too long for its column ends in "…", never cut silently."""
    return text if len(text) <= width else text[: width - 1] + "…"


class DiscrepancyDetail(Static):
    """Shows :func:`detail_text` for the item under the cursor."""

    def __init__(self, **kwargs):
        super().__init__("", markup=False, **kwargs)

    def show(self, text: str) -> None:
        self.update(text)
