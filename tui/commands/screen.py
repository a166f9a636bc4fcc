"""``keyproof screen STUDY``: what a researcher checks before the planned analysis.

Screens the verified table as it stands (a draft: open cells are left out
and said so), adds Cohen's kappa between the two passes for coded
variables, and, when participants are set aside, the same numbers with
them kept in. ``--rule`` previews who a rule catches; ``--apply --keyer``
sets them all aside under the rule's name. The maths is ``core.screening``;
this module only gathers the inputs and prints.
"""

from __future__ import annotations

import argparse
import math
import sys


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    parser.add_argument(
        "--out", metavar="FILE", help="also write the tables to FILE.csv or FILE.md"
    )
    parser.add_argument("--json", action="store_true", help="print one JSON object for scripts")
    parser.add_argument(
        "--rule",
        action="append",
        default=[],
        metavar="RULE",
        help="z:VARIABLE[:THRESHOLD] (|z| above, default 3.29) or blank:SCALE:K "
        "(more than K items blank); shows who it catches (repeatable)",
    )
    parser.add_argument(
        "--apply", action="store_true", help="set aside everyone the rules catch (needs --keyer)"
    )
    parser.add_argument(
        "--keyer", metavar="NAME", help="your initials, recorded with the set-asides"
    )


def run(args: argparse.Namespace) -> int:
    from core.errors import UsageError
    from core.resolution import everyone_kept, set_aside, verified_table
    from core.screening import kappa_pairs_from_passes, screen
    from core.screening_rules import parse_rule
    from core.store import Study

    rules = [parse_rule(text) for text in args.rule]
    if args.apply and not rules:
        raise UsageError("--apply needs at least one --rule — say which rule to apply.")
    if args.apply and not str(args.keyer or "").strip():
        raise UsageError("--apply needs --keyer NAME — give your initials for the journal.")
    out = _check_out(args.out)
    with Study.open(args.study, readonly=not args.apply) as study:
        codebook = study.codebook
        verified = verified_table(study, draft=True)
        data = verified.data
        catches = {rule: rule.catches(data, codebook) for rule in rules}
        if args.apply:
            _refuse_open(verified.open_cells, rules, codebook)
            for rule, who in catches.items():
                for participant in who:
                    set_aside(study, participant, rule.text, args.keyer, rule=rule.name)
            if any(catches.values()):
                verified = verified_table(study, draft=True)
                data = verified.data
        data_all = None
        if len(verified.set_aside):
            data_all = verified_table(everyone_kept(study), draft=True).data
        pairs = kappa_pairs_from_passes(codebook, study.load_pass(1), study.load_pass(2))
    result = screen(data, codebook, data_all=data_all, kappa_pairs=pairs)
    open_cells = len(verified.open_cells)
    notes = _notes(verified, open_cells)
    if args.json:
        print(result.to_json())
        # stdout stays one JSON object; what a person should know goes to stderr.
        for note in notes + _rule_lines(catches, args.apply):
            print(note, file=sys.stderr)
    else:
        print(render_text(result, verified.study, len(data), notes, catches, args.apply))
    if out is not None:
        _write(out, result, verified.study, notes)
    return 1 if open_cells else 0


def _refuse_open(open_cells, rules, codebook) -> None:
    """A rule must not catch anyone because of a cell still open (it reads as blank)."""
    from core.errors import OpenWorkError

    if open_cells is None or open_cells.empty:
        return
    names = set()
    for rule in rules:
        variable = getattr(rule, "variable", None)
        names |= {variable} if variable else {v.name for v in codebook.scales.get(rule.scale, ())}
    # Form-level problems (variable empty) leave a participant with only an ID.
    variables = open_cells["variable"].astype("string").fillna("")
    hit = open_cells[variables.isin(names) | (variables == "")]
    if len(hit):
        raise OpenWorkError(
            f"{len(hit)} open discrepanc{'y' if len(hit) == 1 else 'ies'} touch the rule's "
            "variables, so a rule could catch someone for a cell not yet settled — settle them "
            "with keyproof resolve or decide, then apply the rule.",
            {str(k): int(v) for k, v in hit["kind"].value_counts().items()},
        )


def _check_out(path):
    from pathlib import Path

    from core.errors import UsageError

    if path is None:
        return None
    out = Path(path)
    if out.suffix.lower() not in (".csv", ".md"):
        raise UsageError(f"{out.name}: --out writes .csv or .md — pick one of those endings.")
    if not out.parent.is_dir():
        raise UsageError(f"{out}: the folder {out.parent} does not exist — create it first.")
    return out


def _notes(verified, open_cells: int) -> list[str]:
    notes = []
    if verified.data.empty:
        notes.append("No participant in the verified table yet — key or import the passes first.")
    if open_cells:
        notes.append(
            f"Draft: {open_cells} open cell{'s' if open_cells != 1 else ''} left out of every "
            "statistic — settle them with keyproof resolve or decide."
        )
    aside = len(verified.set_aside)
    if aside:
        notes.append(
            f"{aside} participant{'s' if aside != 1 else ''} set aside and left out "
            "(the sensitivity table shows them kept in)."
        )
    return notes


# ---------------------------------------------------------------- plain text


#: Columns that hold counts: printed without decimals.
COUNTS = {"n", "blank", "missing", "k", "alpha_n", "prorated", "too_few", "kappa_n", "count",
          "n_all", "n_kept"}  # fmt: skip


def fmt(value, digits: int = 2) -> str:
    """A cell for a printed table: NaN/None as an empty cell, floats rounded.

    >>> fmt(float("nan")), fmt(0.12345), fmt(3.0, 0), fmt(True)
    ('', '0.12', '3', 'yes')
    """
    import pandas as pd  # already loaded by then; kept lazy so --help stays fast

    if value is None or value is pd.NA or (isinstance(value, float) and math.isnan(value)):
        return ""
    if isinstance(value, bool):
        return "yes" if value else ""
    if isinstance(value, float):
        return f"{value:.{digits}f}"
    return str(value)


def _cells(frame, columns: dict[str, str], digits: int = 2) -> list[list[str]]:
    names = list(columns)
    return [
        [fmt(v, 0 if name in COUNTS else digits) for name, v in zip(names, row, strict=True)]
        for row in frame[names].itertuples(index=False)
    ]


def text_table(frame, columns: dict[str, str], digits: int = 2) -> list[str]:
    """Columns (frame column -> heading) as aligned plain-text lines."""
    rows = _cells(frame, columns, digits)
    heads = list(columns.values())
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(heads)]

    def line(cells):
        return "  ".join(
            c.ljust(w) if i == 0 else c.rjust(w)
            for i, (c, w) in enumerate(zip(cells, widths, strict=True))
        ).rstrip()

    return [line(heads), line(["-" * w for w in widths])] + [line(r) for r in rows]


SCALE_COLUMNS = {
    "name": "scale", "k": "items", "score": "score", "n": "n", "mean": "mean", "sd": "sd",
    "alpha": "alpha", "alpha_n": "alpha n", "spearman_brown": "split-half SB",
    "prorated": "prorated", "too_few": "too few answered",
}  # fmt: skip
ITEM_COLUMNS = {
    "item": "item", "alpha_if_deleted": "alpha if deleted", "item_total_r": "item-rest r",
    "negative": "negative",
}  # fmt: skip
VARIABLE_COLUMNS = {
    "name": "variable", "n": "n", "blank": "blank", "missing": "missing codes", "mean": "mean",
    "sd": "sd", "median": "median", "min": "min", "max": "max", "skewness": "skew",
    "kurtosis": "kurtosis", "outliers_z": "|z| > 3.29", "outliers_tukey": "beyond fences",
}  # fmt: skip
KAPPA_COLUMNS = {"name": "variable", "kappa_n": "pairs", "agreement": "agreement", "kappa": "kappa"}
SENSITIVITY_COLUMNS = {
    "name": "variable", "n_all": "n all", "n_kept": "n kept", "mean_all": "mean all",
    "mean_kept": "mean kept", "sd_all": "sd all", "sd_kept": "sd kept",
    "median_all": "median all", "median_kept": "median kept",
}  # fmt: skip
FOOTNOTE = (
    "SD with n - 1; skewness and kurtosis are the adjusted G1 and G2; alpha is listwise; "
    "split-half is odd/even items with the Spearman-Brown correction; |z| above 3.29 and "
    "Tukey's fences (1.5 x IQR, quartiles by linear interpolation, type 7) mark outlier "
    "candidates; declared missing codes are left out of every statistic."
)


def sections(result) -> list[tuple[str, object, dict[str, str]]]:
    """(heading, table, columns) for each part of the screening that has rows."""
    tables = result.tables()
    summary = tables["summary"].copy()
    for column in ("outliers_z", "outliers_tukey"):
        summary[column] = summary[column].map(_few)
    scales = summary[summary["kind"] == "scale"]
    variables = summary[(summary["kind"] == "variable")]
    out = []
    if len(scales):
        out.append(("Scales", scales, SCALE_COLUMNS))
        for name in scales["name"]:
            items = tables["items"][tables["items"]["scale"] == name]
            out.append((f"Items of {name}", items, ITEM_COLUMNS))
    measured = [name for name, d in result.variables.items() if d.measured]
    numeric = variables[variables["name"].isin(measured)]
    if len(numeric):
        out.append(("Variables", numeric, VARIABLE_COLUMNS))
    kappa = variables[variables["kappa_n"].notna()]
    if len(kappa):
        out.append(("Agreement of the two passes (Cohen's kappa)", kappa, KAPPA_COLUMNS))
    if len(tables["frequencies"]):
        freq = tables["frequencies"]
        out.append(("Codes", freq, {"variable": "variable", "value": "code", "label": "label",
                                    "count": "count", "percent": "percent"}))  # fmt: skip
    if len(tables["sensitivity"]):
        out.append(("With and without set-aside participants", tables["sensitivity"],
                    SENSITIVITY_COLUMNS))  # fmt: skip
    return out


def _few(ids: str, shown: int = 4) -> str:
    """A list of IDs short enough for a table cell; --json and --out .csv keep them all.

    >>> _few("1 2 3 4 5 6")
    '1 2 3 4 (+2 more)'
    """
    parts = str(ids or "").split()
    if len(parts) <= shown:
        return " ".join(parts)
    return " ".join(parts[:shown]) + f" (+{len(parts) - shown} more)"


def render_text(result, study_name: str, n: int, notes, catches=None, applied=False) -> str:
    """The whole screening as plain text for a terminal (no colour, no markup)."""
    from core.screening import text_histogram

    lines = [f"Screening of {study_name}: {n} participant{'s' if n != 1 else ''}.", *notes]
    for heading, table, columns in sections(result):
        lines += ["", heading, *text_table(table, columns)]
        if heading.startswith("Items of"):
            flagged = table.loc[table["negative"].astype(bool), "item"].tolist()
            if flagged:
                lines.append(f"Negative item-rest correlation: {', '.join(flagged)} — "
                             "check for a missed reverse key.")  # fmt: skip
    if result.scores is not None:
        for scale in result.scales:
            bars = text_histogram(result.scores[scale], bins=8, width=30)
            if bars:
                lines += ["", f"Distribution of {scale} scores", *bars]
    for line in _rule_lines(catches, applied):
        lines += ["", line] if line.startswith("Rule ") else [line]
    lines += ["", FOOTNOTE]
    return "\n".join(lines)


def _rule_lines(catches, applied: bool) -> list[str]:
    lines = []
    for rule, who in (catches or {}).items():
        verb = "set aside" if applied else "would set aside"
        lines += [f"Rule {rule.name}: {rule.text}",
                  f"It {verb} {len(who)}: {', '.join(who) if who else 'nobody'}."]  # fmt: skip
    return lines


# ---------------------------------------------------------------- files


def _write(out, result, study_name: str, notes) -> None:
    from core.atomic import atomic_text

    if out.suffix.lower() == ".csv":
        atomic_text(out, result.tables()["summary"].to_csv(index=False))
        return
    parts = [f"# Screening of {study_name}", "", *notes]
    for heading, table, columns in sections(result):
        heads = list(columns.values())
        parts += ["", f"## {heading}", "", "| " + " | ".join(heads) + " |",
                  "|" + "|".join(" --- " for _ in heads) + "|"]  # fmt: skip
        for cells in _cells(table, columns):
            parts.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    parts += ["", FOOTNOTE, ""]
    atomic_text(out, "\n".join(parts))
