"""The pages of the screening view as plain text: an overview, one page per scale,
one per variable.

Plain functions over ``core.screening`` results, so the screen only picks a
page and shows it, and the tests can read a page without a terminal. Tables
are laid out by the same ``text_table`` the ``screen`` command prints with,
so the app and the command line agree to the digit.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass, field

import pandas as pd

from core.codebook import Codebook
from core.screening import Descriptives, Screening, text_histogram
from tui.commands.screen import (
    FOOTNOTE,
    ITEM_COLUMNS,
    KAPPA_COLUMNS,
    SENSITIVITY_COLUMNS,
    fmt,
    text_table,
)

BAR_WIDTH = 30
#: Prose lines are wrapped to this width; tables keep their own (the page scrolls).
PROSE_WIDTH = 88

#: Overview of the scales: fewer columns than the command line, to fit beside the menu.
SCALE_OVERVIEW = {
    "name": "scale", "k": "items", "alpha": "alpha", "alpha_n": "n used",
    "spearman_brown": "split-half SB", "prorated": "prorated", "too_few": "too few",
}  # fmt: skip


@dataclass(frozen=True)
class ScreeningData:
    """What the screening view shows, gathered in one go from a study.

    ``data``: the verified table screened (set-aside participants left out,
    open cells NA); ``result``: ``core.screening.screen`` of it; ``notes``:
    sentences a person should read first (draft, set-asides); ``open_cells``:
    cells still open (participant, variable, kind), NA in ``data``;
    ``set_aside``: who is set aside now (participant, reason, rule, ...).
    """

    result: Screening
    data: pd.DataFrame
    codebook: Codebook
    study: str
    notes: tuple[str, ...] = ()
    open_cells: pd.DataFrame = field(default_factory=pd.DataFrame)
    set_aside: pd.DataFrame = field(default_factory=pd.DataFrame)


def page_ids(view: ScreeningData) -> list[tuple[str, str]]:
    """(page id, menu text) for every page: the overview, each scale, each variable."""
    pages = [("overview", "overview")]
    pages += [(f"scale:{name}", f"scale  {name}") for name in view.result.scales]
    pages += [(f"var:{name}", name) for name in view.result.variables]
    return pages


def page_text(view: ScreeningData, page: str) -> str:
    """The text of one page (see :func:`page_ids`)."""
    if page.startswith("scale:"):
        return scale_text(view, page[len("scale:"):])
    if page.startswith("var:"):
        return variable_text(view, page[len("var:"):])
    return overview_text(view)


def overview_text(view: ScreeningData) -> str:
    r = view.result
    n = len(view.data)
    lines = [f"Screening of {view.study}: {n} participant{'s' if n != 1 else ''}."]
    for note in view.notes:
        lines += _prose(note)
    summary = r.tables()["summary"]
    scales = summary[summary["kind"] == "scale"]
    if len(scales):
        lines += ["", "Scales", *text_table(scales, SCALE_OVERVIEW, 3)]
        negatives = [
            f"{row.item} ({name})"
            for name, s in r.scales.items()
            for row in s.item_table.itertuples()
            if bool(row.negative)
        ]
        if negatives:
            lines += _prose("Negative item-rest r (a missed reverse key?): " + ", ".join(negatives))
    kappa = summary[(summary["kind"] == "variable") & summary["kappa_n"].notna()]
    if len(kappa):
        lines += ["", "Agreement of the two passes (Cohen's kappa)",
                  *text_table(kappa, KAPPA_COLUMNS, 3)]  # fmt: skip
    flagged = [
        (name, d) for name, d in {**{k: s.score for k, s in r.scales.items()},
                                  **r.variables}.items()
        if d.outliers_z or d.outliers_tukey
    ]  # fmt: skip
    lines += ["", "Outlier candidates"]
    if flagged:
        for name, d in flagged:
            lines += _prose(f"{name}: |z| > 3.29: {_ids(d.outliers_z)}; "
                            f"beyond fences: {_ids(d.outliers_tukey)}", "  ")  # fmt: skip
    else:
        lines.append("  none by |z| > 3.29 or Tukey's fences")
    if r.sensitivity is not None and len(r.sensitivity):
        lines += ["", "With and without set-aside participants",
                  *text_table(r.sensitivity, SENSITIVITY_COLUMNS)]  # fmt: skip
    if len(view.set_aside):
        lines += ["", "Set aside now"]
        for row in view.set_aside.itertuples():
            rule = f" (rule {row.rule})" if str(row.rule or "") else ""
            lines += [f"  {row.participant}{rule}", *_prose(str(row.reason), "    ")]
    lines += ["", *_prose(FOOTNOTE)]
    return "\n".join(lines)


def scale_text(view: ScreeningData, name: str) -> str:
    s = view.result.scales[name]
    a = s.alpha
    lines = [
        *_prose(f"Scale {name}: {a.k} items ({', '.join(s.items)}), scored as the {s.method}"),
        f"Cronbach's alpha {fmt(a.alpha, 3) or 'not defined'} (listwise, n used {a.n_used})",
        f"Split-half (odd/even items): r {fmt(s.split.r_halves, 3) or '—'}, "
        f"Spearman-Brown {fmt(s.split.spearman_brown, 3) or '—'} (n {s.split.n_used})",
        f"Score missing below {s.min_answered:.0%} of items answered: {s.too_few}; "
        f"prorated sums: {s.prorated}",
        "",
        "Items",
        *text_table(s.item_table, ITEM_COLUMNS, 3),
    ]
    flagged = s.item_table.loc[s.item_table["negative"].astype(bool), "item"].tolist()
    if flagged:
        lines += _prose(f"Negative item-rest r: {', '.join(flagged)} — check for a missed "
                        "reverse key.")  # fmt: skip
    lines += ["", f"Score of {name}", *_numbers(s.score)]
    lines += _sensitivity_lines(view, name)
    if view.result.scores is not None and name in view.result.scores:
        bars = text_histogram(view.result.scores[name], bins=8, width=BAR_WIDTH)
        if bars:
            lines += ["", "Distribution", *bars]
    return "\n".join(lines)


def variable_text(view: ScreeningData, name: str) -> str:
    d = view.result.variables[name]
    var = view.codebook[name]
    head = f"{name}: {var.label}" if getattr(var, "label", "") else name
    # Measured numbers give n with their moments, below.
    counts = f"blank {d.blank}" if d.measured else f"n {d.n}; blank {d.blank}"
    lines = [head, f"type {var.type}; {counts}"]
    if d.missing:
        codes = {c.value: c.label for c in var.missing}
        lines.append("missing codes: " + "; ".join(
            f"{code} {codes.get(code, '')}".strip() + f" × {count}"
            for code, count in d.missing.items()))  # fmt: skip
    if d.measured:
        lines += _numbers(d)
    if d.frequencies is not None:
        lines += ["", "Codes", *text_table(
            d.frequencies, {"value": "code", "label": "label", "count": "count",
                            "percent": "percent"}, 1)]  # fmt: skip
    kappa = view.result.kappas.get(name)
    if kappa is not None:
        lines += ["", f"Two passes: Cohen's kappa {fmt(kappa.kappa, 3) or '—'}, "
                      f"agreement {fmt(100 * kappa.agreement, 1) or '—'} % of {kappa.n} pairs"]  # fmt: skip
    lines += _sensitivity_lines(view, name)
    if name in view.data and (d.measured or d.frequencies is not None):
        bars = text_histogram(view.data[name], var, bins=8, width=BAR_WIDTH)
        if bars:
            lines += ["", "Distribution", *bars]
    return "\n".join(lines)


def _numbers(d: Descriptives) -> list[str]:
    def num(x) -> str:
        return fmt(x) or "—"  # undefined (too few values)

    f = d.fences
    return [
        f"n {d.n}; mean {num(d.mean)}; SD {num(d.sd)}; median {num(d.median)}; "
        f"min {num(d.min)}; max {num(d.max)}",
        f"skewness {num(d.skewness)}; kurtosis {num(d.kurtosis)} (adjusted G1, G2)",
        f"Tukey's fences {num(f.low)} to {num(f.high)} (1.5 × IQR, quartiles type 7)",
        f"outlier candidates: |z| > 3.29: {_ids(d.outliers_z)}; "
        f"beyond fences: {_ids(d.outliers_tukey)}",
    ]


def _sensitivity_lines(view: ScreeningData, name: str) -> list[str]:
    sens = view.result.sensitivity
    if sens is None or not len(sens) or name not in set(sens["name"]):
        return []
    return ["", "With and without set-aside participants",
            *text_table(sens[sens["name"] == name], SENSITIVITY_COLUMNS)]  # fmt: skip


def _prose(text: str, indent: str = "") -> list[str]:
    return textwrap.wrap(text, PROSE_WIDTH, initial_indent=indent,
                         subsequent_indent=indent + "  ") or [""]


def _ids(ids: tuple[str, ...], shown: int = 8) -> str:
    if not ids:
        return "none"
    more = len(ids) - shown
    return ", ".join(ids[:shown]) + (f" (+{more} more)" if more > 0 else "")
