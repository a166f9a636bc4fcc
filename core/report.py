"""The verification report: what a methods section and an audit need, in numbers.

:func:`build_report` reads a study (forms, the worklist of discrepancies with
their decisions, set-asides) into a :class:`Report` of plain numbers and
small tables; :func:`render_markdown` and :func:`render_html` turn it into a
printable page (the HTML is self-contained: inline CSS and an inline SVG plot,
every text escaped).

How errors are attributed (the keyer error rates): every settled field-level
decision names the value on the paper; a pass whose value differs from it
(compared as typed values, so ``07`` equals ``7``) made one error, charged to
the keyer of that pass's form. The denominator is the fields each keyer keyed
in forms present in both passes (ID field left out). Errors both passes made
identically are invisible to double entry; :func:`unseen_estimate` gives the
usual estimate of how many there might be, under stated assumptions.

The pure steps (:func:`attribute_errors`, :func:`error_rates`,
:func:`wilson_interval`, :func:`assemble_report`) take DataFrames, so they are
tested without a study.

Over the house's ~600 lines: the numbers and the words that present them
(Markdown, HTML, the SVG plot) are read and changed together; the rendering
is the part to split out (it is the larger half), and must be if the app
grows its own report view.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import UTC, datetime
from statistics import NormalDist

import pandas as pd

from .codebook import Codebook
from .values import BLANK, ILLEGIBLE, canonical_series

ILLEGIBLE_SHOWN = "(illegible)"
PER = 10_000
HIDDEN = "(identifying)"


def wilson_interval(errors: int, n: int, level: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for a proportion ``errors / n`` (Wilson 1927).

    Returns ``(low, high)`` as proportions; ``(nan, nan)`` when ``n`` is 0
    (no fields, no information).

    >>> low, high = wilson_interval(3, 1000)   # statsmodels: 0.0010208, 0.0087830
    >>> round(low, 5), round(high, 5)
    (0.00102, 0.00878)
    """
    if n <= 0:
        return (math.nan, math.nan)
    z = NormalDist().inv_cdf(1 - (1 - level) / 2)
    p = errors / n
    z2 = z * z
    centre = (p + z2 / (2 * n)) / (1 + z2 / n)
    half = z / (1 + z2 / n) * math.sqrt(p * (1 - p) / n + z2 / (4 * n * n))
    return (max(0.0, centre - half), min(1.0, centre + half))


def attribute_errors(settled: pd.DataFrame, codebook: Codebook) -> pd.DataFrame:
    """One row per error a pass made, judged by the settled decisions.

    ``settled`` has one row per decided field: ``participant, variable,
    pass1, pass2`` (as the comparison shows them: ``""`` blank,
    ``(illegible)``), ``value`` and ``state`` (what the decision says the
    paper holds: state ``keyed``, ``blank`` or ``illegible``), ``keyer1,
    keyer2``. A pass whose typed value differs from the paper's made the
    error. Returns ``participant, variable, pass, keyer``.

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True), Variable("q", "integer")))
    >>> s = pd.DataFrame({"participant": ["1"], "variable": ["q"], "pass1": ["07"],
    ...     "pass2": ["8"], "value": ["7"], "state": ["keyed"], "keyer1": ["AB"],
    ...     "keyer2": ["CD"]})
    >>> attribute_errors(s, cb)[["pass", "keyer"]].values.tolist()
    [[2, 'CD']]
    """
    columns = ["participant", "variable", "pass", "keyer"]
    if settled.empty:
        return pd.DataFrame(columns=columns)
    paper = settled["value"].astype("string").fillna("").astype(object)
    state = settled["state"].astype("string").fillna("")
    paper = paper.where(state != BLANK, "").where(state != ILLEGIBLE, ILLEGIBLE_SHOWN)
    found = []
    # One vectorised comparison per variable: canonical text equal = same typed value.
    for name, rows in settled.groupby("variable", sort=False):
        if name not in codebook:
            continue
        var = codebook[name]
        truth = canonical_series(var, paper[rows.index])[0].fillna("")
        for pass_no in (1, 2):
            keyed = rows[f"pass{pass_no}"].astype("string").fillna("").astype(object)
            wrong = canonical_series(var, keyed)[0].fillna("") != truth
            hit = rows[wrong]
            found.append(pd.DataFrame({
                "participant": hit["participant"].astype(str),
                "variable": name,
                "pass": pass_no,
                "keyer": hit[f"keyer{pass_no}"].astype("string").fillna("").astype(str),
            }))
    if not found:
        return pd.DataFrame(columns=columns)
    return pd.concat(found, ignore_index=True)[columns]


def error_rates(errors: pd.DataFrame, fields: pd.DataFrame, by: str = "keyer",
                level: float = 0.95) -> pd.DataFrame:
    """Errors per 10,000 fields with a Wilson interval, per ``by`` (keyer or pass).

    ``fields`` has columns ``by`` and ``fields`` (fields keyed); ``errors`` one
    row per error with a ``by`` column. Returns ``by, fields, errors,
    per_10000, low, high`` (the interval also per 10,000 fields).

    >>> f = pd.DataFrame({"keyer": ["AB"], "fields": [1000]})
    >>> e = pd.DataFrame({"keyer": ["AB"] * 3})
    >>> error_rates(e, f)["per_10000"].tolist()
    [30.0]
    """
    counts = errors[by].value_counts() if len(errors) else pd.Series(dtype=int)
    out = fields[[by, "fields"]].copy().reset_index(drop=True)
    out["errors"] = out[by].map(counts).fillna(0).astype(int)
    n = out["fields"].astype(int)
    out["per_10000"] = (out["errors"] / n.where(n > 0)) * PER
    bounds = [wilson_interval(e, f, level) for e, f in zip(out["errors"], n, strict=True)]
    out["low"] = [b[0] * PER for b in bounds]
    out["high"] = [b[1] * PER for b in bounds]
    return out


@dataclass(frozen=True)
class Unseen:
    """Errors double entry cannot see: both passes wrong in the same field.

    An estimate, not a count: under the assumption that the two passes err
    independently and every field is equally likely to be mistyped, about
    ``fields * p1 * p2`` fields are wrong in both passes. Only those where
    both wrote the same wrong value go unnoticed, so this is an upper figure
    for the errors left in the verified file.
    """

    fields: int
    p1: float
    p2: float

    @property
    def expected(self) -> float:
        return self.fields * self.p1 * self.p2


def unseen_estimate(fields: int, errors1: int, errors2: int) -> Unseen:
    """Estimate the fields both passes got wrong (see :class:`Unseen`).

    >>> round(unseen_estimate(10_000, 20, 10).expected, 3)
    0.02
    """
    p1 = errors1 / fields if fields else 0.0
    p2 = errors2 / fields if fields else 0.0
    return Unseen(fields, p1, p2)


@dataclass
class Report:
    """Everything the verification report shows; tables are small DataFrames."""

    study: str
    journal_head: str
    generated_at: str
    keyproof_version: str
    variables: int
    """Variables compared per form (the ID field left out)."""
    forms: pd.DataFrame
    """pass, forms, finished, dropped, keyers."""
    paired: int
    """Participants with a form in both passes."""
    one_pass: int
    """Participants with a form in one pass only (dropped forms left out)."""
    imported: dict[int, int]
    """Per pass, forms imported from a spreadsheet rather than keyed on screen (dropped left out)."""
    fields_compared: int
    status: dict[str, int]
    """Discrepancies open, settled, stale."""
    by_kind: pd.DataFrame
    by_cause: pd.DataFrame
    by_variable: pd.DataFrame
    by_section: pd.DataFrame
    by_keyer: pd.DataFrame
    keyer_rates: pd.DataFrame
    pass_rates: pd.DataFrame
    unseen: Unseen
    same_keyer: pd.DataFrame
    """participant, keyer: forms whose two passes the same person keyed."""
    by_reason: pd.DataFrame
    set_aside: pd.DataFrame
    set_aside_by_reason: pd.DataFrame
    kept: pd.DataFrame
    """Values kept outside the codebook's rule because the paper says so."""
    screening: pd.DataFrame | None = None
    """Scale reliability from core.screening, when available (see screening_section)."""
    set_aside_rules: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame(columns=list(RULE_COLUMNS)))
    """rule, text, participants: how many each screening rule set aside (see set_aside_rules)."""
    notes: list[str] = field(default_factory=list)


RULE_COLUMNS = ("rule", "text", "participants")
ONE_BY_ONE = "(none: set aside one by one)"


def set_aside_rules(set_asides: pd.DataFrame) -> pd.DataFrame:
    """Participants set aside per rule: ``rule, text, participants``, rules first by name.

    ``set_asides`` is the store's table (participant, reason, rule, ...). A
    rule's text is the reason it recorded with each participant it caught;
    set-asides without a rule are counted together under their reasons.

    >>> t = pd.DataFrame({"participant": ["1", "2", "3"], "rule": ["z>3:age", "z>3:age", ""],
    ...                   "reason": ["|z| above 3 on age"] * 2 + ["consent withdrawn"]})
    >>> set_aside_rules(t)["participants"].tolist()
    [2, 1]
    """
    if set_asides is None or set_asides.empty:
        return pd.DataFrame(columns=list(RULE_COLUMNS))
    table = pd.DataFrame({
        "rule": set_asides["rule"].astype("string").fillna("").str.strip(),
        "text": set_asides["reason"].astype("string").fillna("").str.strip(),
        "participant": set_asides["participant"].astype(str),
    })
    by_rule = table["rule"] != ""
    table["rule"] = table["rule"].where(by_rule, ONE_BY_ONE)
    counts = (table.assign(one_by_one=~by_rule)
              .groupby(["one_by_one", "rule", "text"], sort=True)["participant"].nunique()
              .rename("participants").reset_index())
    return counts[list(RULE_COLUMNS)].reset_index(drop=True)


def scale_reliability(data: pd.DataFrame, codebook: Codebook) -> pd.DataFrame:
    """One row per scale of ``codebook`` screened on the verified ``data`` (from core.screening).

    Columns: scale, items, alpha (Cronbach's, listwise), n (rows alpha used),
    split-half (Spearman-Brown), score (sum or mean), from fewer items (scores
    standing with some items unanswered), prorated (those of a sum), too few
    answered, negative items (items whose corrected item-total correlation
    is below zero; a missed reverse key is the usual cause).

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("id", is_id=True),
    ...                *(Variable(n, "integer", scale="S") for n in "abcd")))
    >>> df = pd.DataFrame({"id": list("12345"), "a": [1, 2, 3, 4, 5], "b": [1, 3, 2, 4, 5],
    ...                    "c": [5, 4, 3, 2, 1], "d": [2, 1, 3, 5, 4]})
    >>> scale_reliability(df, cb)["negative items"].tolist()
    ['c']
    """
    from .export import partial_scores
    from .screening import cronbach_alpha, item_analysis, scale_scores, split_half

    scored = scale_scores(data, codebook)
    rows = []
    for name, items in scored.items.items():
        alpha, table = cronbach_alpha(items), item_analysis(items)
        rows.append({
            "scale": name, "items": alpha.k, "alpha": alpha.alpha, "n": alpha.n_used,
            "split-half (Spearman-Brown)": split_half(items).spearman_brown,
            "score": scored.method[name],
            "from fewer items": partial_scores(items, scored.scores[name]),
            "prorated": scored.prorated[name],
            "too few answered": scored.too_few[name],
            "negative items": ", ".join(table.loc[table["negative"].astype(bool), "item"]),
        })
    return pd.DataFrame(rows, columns=SCALE_COLUMNS)


SCALE_COLUMNS = ["scale", "items", "alpha", "n", "split-half (Spearman-Brown)", "score",
                 "from fewer items", "prorated", "too few answered", "negative items"]


def _count(table: pd.DataFrame, column: str, name: str = "discrepancies") -> pd.DataFrame:
    if table.empty or column not in table:
        return pd.DataFrame(columns=[column, name])
    values = table[column].astype("string").fillna("")
    counts = values[values != ""].value_counts()
    return counts.rename_axis(column).reset_index(name=name)


def assemble_report(
    codebook: Codebook,
    rows: pd.DataFrame,
    forms: pd.DataFrame,
    set_asides: pd.DataFrame,
    *,
    study: str = "",
    head: str = "",
    now: datetime | None = None,
    version: str = "",
) -> Report:
    """Build a :class:`Report` from plain tables (the pure half of :func:`build_report`).

    ``rows``: the worklist (``core.resolution.worklist``); ``forms``: the
    store's forms table; ``set_asides``: the store's set-aside table.
    """
    id_var = codebook.id_variable
    compared = [v.name for v in codebook if not v.is_id]
    kept_forms = forms[~forms["dropped"].astype(bool)].copy()
    kept_forms["pid"] = canonical_series(id_var, kept_forms["participant"].astype(object))[0]
    kept_forms = kept_forms[kept_forms["pid"].notna() & (kept_forms["pid"] != "")]
    firsts = kept_forms.drop_duplicates(["pass", "pid"])
    in1, in2 = (set(firsts.loc[firsts["pass"] == p, "pid"]) for p in (1, 2))
    both = in1 & in2
    paired = firsts[firsts["pid"].isin(both)]
    source = kept_forms["source"].fillna("").astype(str) if "source" in kept_forms \
        else pd.Series("", index=kept_forms.index)
    keyer_of = forms.set_index("form_id")["keyer"].astype(str)
    rows = rows.copy()
    for p in (1, 2):
        ids = pd.to_numeric(rows.get(f"_form{p}", pd.Series(pd.NA, index=rows.index)),
                            errors="coerce")
        rows[f"keyer{p}"] = ids.map(keyer_of).fillna("")

    field_rows = rows[rows["variable"].astype("string").fillna("") != ""]
    settled = field_rows[(field_rows["_status"] == "settled")
                         & field_rows["_decision_action"].isin(["value", "keep"])
                         & field_rows["variable"].isin(compared)]
    settled = settled.drop_duplicates(["participant", "variable"], keep="last").rename(
        columns={"_decision_value": "value", "_decision_state": "state"})
    errors = attribute_errors(settled, codebook)

    per_keyer = paired.groupby("keyer").size().rename("forms").reset_index()
    per_keyer["fields"] = per_keyer["forms"] * len(compared)
    per_pass = paired.groupby("pass").size().reindex([1, 2], fill_value=0)
    pass_fields = pd.DataFrame({"pass": [1, 2], "fields": (per_pass * len(compared)).tolist()})
    keyers = paired.groupby("pass")["keyer"].agg(lambda s: ", ".join(sorted(set(s))))
    pass_rates = error_rates(errors, pass_fields, by="pass")
    pass_rates.insert(1, "keyers", pass_rates["pass"].map(keyers).fillna(""))

    fields_compared = len(both) * len(compared)
    e1, e2 = (int((errors["pass"] == p).sum()) for p in (1, 2))

    pairs = paired.pivot_table(index="pid", columns="pass", values="keyer", aggfunc="first")
    same = pairs[pairs[1].str.strip().str.casefold() == pairs[2].str.strip().str.casefold()]
    same_keyer = pd.DataFrame({"participant": same.index.astype(str), "keyer": same[1].tolist()})

    counted = rows[rows["_decision_id"].notna() & (rows["_status"] == "settled")]
    by_keyer = pd.concat([
        _count(field_rows, "keyer1").rename(columns={"keyer1": "keyer", "discrepancies": "as pass 1"}),
        _count(field_rows, "keyer2").rename(columns={"keyer2": "keyer", "discrepancies": "as pass 2"}),
    ]).groupby("keyer", as_index=False).sum(numeric_only=True)
    sections = {v.name: v.section or "(no section)" for v in codebook}
    with_section = field_rows.assign(section=field_rows["variable"].map(sections))
    hidden = set(codebook.identifying_names) - {id_var.name}
    kept = settled[settled["_decision_action"] == "keep"][
        ["participant", "variable", "value", "_decision_reason"]
    ].rename(columns={"_decision_reason": "reason"}).reset_index(drop=True)
    kept["value"] = kept["value"].where(~kept["variable"].isin(hidden), HIDDEN)
    aside = set_asides.reset_index(drop=True)
    aside_reasons = (
        aside.groupby(["reason", "rule"], dropna=False).size().reset_index(name="participants")
        if len(aside) else pd.DataFrame(columns=["reason", "rule", "participants"])
    )
    rows_by_pass = []
    for p in (1, 2):
        part = forms[forms["pass"] == p]
        dropped = part["dropped"].astype(bool)
        rows_by_pass.append({
            "pass": p,
            "forms": int((~dropped).sum()),
            "finished": int((part["finished_at"].notna() & ~dropped).sum()),
            "dropped": int(dropped.sum()),
            "keyers": ", ".join(sorted(set(part["keyer"].astype(str)))),
        })
    forms_table = pd.DataFrame(rows_by_pass)
    stamp = (now or datetime.now(UTC)).astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    statuses = rows["_status"].value_counts() if len(rows) else pd.Series(dtype=int)
    return Report(
        study=study,
        journal_head=head,
        generated_at=stamp,
        keyproof_version=version,
        variables=len(compared),
        forms=forms_table,
        paired=len(both),
        one_pass=len(in1 ^ in2),
        imported={p: int(((kept_forms["pass"] == p) & (source != "")).sum()) for p in (1, 2)},
        fields_compared=fields_compared,
        status={s: int(statuses.get(s, 0)) for s in ("open", "settled", "stale")},
        by_kind=_count(rows, "kind"),
        by_cause=_count(field_rows, "cause"),
        by_variable=_count(field_rows, "variable"),
        by_section=_count(with_section, "section"),
        by_keyer=by_keyer,
        keyer_rates=error_rates(errors, per_keyer[["keyer", "fields"]]),
        pass_rates=pass_rates,
        unseen=unseen_estimate(fields_compared, e1, e2),
        same_keyer=same_keyer,
        by_reason=_count(counted, "_decision_reason", "decisions").rename(
            columns={"_decision_reason": "reason"}),
        set_aside=aside,
        set_aside_by_reason=aside_reasons,
        kept=kept,
        set_aside_rules=set_aside_rules(aside),
    )


def build_report(study, now: datetime | None = None) -> Report:
    """Read ``study`` (a :class:`core.store.Study`) into a :class:`Report`.

    Example (needs a study file, so not run as a doctest)::

        with Study.open("garden.sqlite", readonly=True) as study:
            page = render_html(build_report(study))
    """
    from .export import keyproof_version
    from .resolution import worklist

    rows = worklist(study)
    report = assemble_report(
        study.codebook,
        rows,
        study.forms(),
        study.set_asides(),
        study=str(getattr(study, "name", "")),
        head=study.journal_head(),
        now=now,
        version=keyproof_version(),
    )
    report.screening, note = screening_section(study, rows)
    if note:
        report.notes.append(note)
    return report


def screening_section(study, rows: pd.DataFrame | None = None) -> tuple[pd.DataFrame | None, str]:
    """The screening section: scale reliability of the verified table (set-asides left out).

    Returns ``(table, note)``: :func:`scale_reliability` of the verified
    table, or None and a note saying why it is missing. Built on the draft
    verified table, so it works before every discrepancy is settled (the
    note then says so). ``rows`` is the worklist when already computed, so
    the comparison runs once.
    """
    try:
        from .resolution import verified_table
    except ImportError:
        return None, "screening is not available in this version."
    from .errors import KeyproofError

    try:
        verified = verified_table(study, draft=True, rows=rows)
        table = scale_reliability(verified.data, study.codebook)
    except KeyproofError as exc:
        return None, f"screening left out: {exc}"
    note = ("screening uses a draft: cells still open are left out."
            if verified.draft else "")
    return table, note


# --- rendering --------------------------------------------------------------


def shown_number(x, digits: int = 1) -> str:
    """A number as the report prints it: thousands separated, ``—`` when missing."""
    if x is None or (isinstance(x, float) and math.isnan(x)) or x is pd.NA:
        return "—"
    if isinstance(x, int) or (isinstance(x, float) and x.is_integer() and digits == 0):
        return f"{int(x):,}"
    return f"{float(x):,.{digits}f}"


def _rates_table(rates: pd.DataFrame, by: str) -> pd.DataFrame:
    table = pd.DataFrame({
        by: rates[by].astype(str),
        "fields": [shown_number(int(v)) for v in rates["fields"]],
        "errors": [shown_number(int(v)) for v in rates["errors"]],
        "per 10,000 fields": [shown_number(v) for v in rates["per_10000"]],
        "95 % Wilson interval": [f"{shown_number(lo)} to {shown_number(hi)}"
                                 for lo, hi in zip(rates["low"], rates["high"], strict=True)],
    })
    if "keyers" in rates:
        table.insert(1, "keyers", rates["keyers"].astype(str))
    return table


def _sections(report: Report) -> list[tuple[str, list]]:
    """The report as (title, parts); a part is a paragraph (str) or a table."""
    from .report_methods import methods_paragraph

    u = report.unseen
    open_n, settled_n, stale_n = (report.status[s] for s in ("open", "settled", "stale"))
    sections: list[tuple[str, list]] = [
        ("For the methods section", [methods_paragraph(report)]),
        ("Forms and fields", [
            report.forms.astype(str),
            f"Participants keyed in both passes: {report.paired:,}. Variables compared per "
            f"form (the ID field aside): {report.variables:,}. Fields compared: "
            f"{report.fields_compared:,}.",
        ]),
        ("Discrepancies", [
            f"Open: {open_n:,}. Settled: {settled_n:,}. Reopened because a pass changed "
            f"after its decision: {stale_n:,}.",
            ("By kind", report.by_kind), ("By cause", report.by_cause),
            ("By variable", report.by_variable), ("By section", report.by_section),
            ("By keyer (discrepancies in forms each person keyed)", report.by_keyer),
        ]),
        ("Keyer error rates", [
            "Errors per 10,000 fields keyed, attributed through the decisions: where a "
            "decision says what the paper holds, the pass whose value differs from it made "
            "the error. Intervals are 95 % Wilson score intervals.",
            *([f"{open_n + stale_n:,} discrepancies are still open; errors behind them are "
               "not counted yet, so these rates are lower bounds until everything is settled."]
              if open_n + stale_n else []),
            _rates_table(report.keyer_rates, "keyer"),
            ("By pass", _rates_table(report.pass_rates, "pass")),
            "PLOT",
        ]),
        ("Errors double entry cannot see (an estimate)", [
            f"About {shown_number(u.expected, 2)} of {u.fields:,} fields may be wrong in both passes "
            f"(N × p1 × p2 = {u.fields:,} × {u.p1:.5f} × {u.p2:.5f}). This is an estimate, "
            "not a count: it assumes the two passes err independently of each other and "
            "that every field is equally likely to be mistyped. Only fields where both "
            "passes wrote the same wrong value stay unnoticed, so at most about this many "
            "errors remain in the verified file.",
        ]),
        ("Forms keyed twice by the same person", [
            f"{len(report.same_keyer):,} participant(s) had both passes keyed by the same "
            "person; their passes are not independent.",
            report.same_keyer,
        ]),
        ("Decisions by reason", [report.by_reason]),
        ("Participants set aside", [
            f"{len(report.set_aside):,} participant(s) set aside (kept in the study, left out "
            "of the analysis file).",
            report.set_aside_by_reason,
            ("Each participant", report.set_aside[[c for c in ("participant", "reason", "rule")
                                                   if c in report.set_aside]]),
        ]),
        ("Values kept outside the codebook", [
            f"{len(report.kept):,} value(s) stand outside the codebook's rule because the "
            "paper really shows them.",
            report.kept,
        ]),
    ]
    sections.append(("Screening", _screening_parts(report)))
    notes = [f"Note: {n}" for n in report.notes]
    sections.append(("Provenance", [
        f"Study: {report.study}. Journal head: {report.journal_head}. Written "
        f"{report.generated_at} (UTC) by keyproof {report.keyproof_version}.", *notes,
    ]))
    return sections


def _screening_parts(report: Report) -> list:
    """The numbers a methods section reports: reliability, proration, set-aside rules."""
    parts: list = []
    if report.screening is not None:
        table = report.screening.copy()
        for col in ("alpha", "split-half (Spearman-Brown)"):
            table[col] = [shown_number(v, 3) for v in table[col]]
        for col in ("items", "n", "from fewer items", "prorated", "too few answered"):
            if col in table:
                table[col] = [shown_number(v, 0) for v in table[col]]
        parts += [
            "Scale scores are computed by keyproof from the verified items (reverse-keyed "
            "items as min + max - x, declared missing codes left out), set-aside participants "
            "left out. Cronbach's alpha is listwise: n is the participants with every item "
            "answered. A negative item correlates below zero with the rest of its scale "
            "(corrected item-total correlation); a missed reverse key is the usual cause.",
            ("Scale reliability", table),
        ]
    rules = report.set_aside_rules
    by_rule = rules.loc[rules["rule"] != ONE_BY_ONE, "participants"].sum() if len(rules) else 0
    parts += [
        f"{len(report.set_aside):,} participant(s) set aside in total, {int(by_rule):,} of "
        "them by a screening rule applied to everyone.",
        ("Set-aside rules", rules),
    ]
    return parts


def _md(text) -> str:
    text = str(text).replace("\\", "\\\\").replace("\n", " ")
    return "".join("\\" + ch if ch in "`*_[]<>|#" else ch for ch in text)


def _md_table(table: pd.DataFrame) -> list[str]:
    if table.empty:
        return ["(none)"]
    head = "| " + " | ".join(_md(c) for c in table.columns) + " |"
    rule = "|" + "|".join(" --- " for _ in table.columns) + "|"
    body = ["| " + " | ".join(_md(_cell(v)) for v in row) + " |"
            for row in table.itertuples(index=False)]
    return [head, rule, *body]


def _cell(v) -> str:
    if v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)):
        return ""
    return str(v)


def render_markdown(report: Report) -> str:
    """The report as Markdown: headings, paragraphs and pipe tables; text escaped.

    Example::

        Path("report.md").write_text(render_markdown(build_report(study)))
    """
    lines = [f"# Verification report: {_md(report.study)}", ""]
    for title, parts in _sections(report):
        lines += [f"## {_md(title)}", ""]
        for part in parts:
            if isinstance(part, str):
                if part != "PLOT":
                    lines += [_md(part), ""]
            elif isinstance(part, tuple):
                lines += [f"### {_md(part[0])}", "", *_md_table(part[1]), ""]
            else:
                lines += [*_md_table(part), ""]
    return "\n".join(lines).rstrip() + "\n"


_CSS = """
body { font-family: Georgia, serif; max-width: 52em; margin: 2em auto; color: #111; }
h1, h2, h3 { font-family: Helvetica, Arial, sans-serif; }
h2 { border-bottom: 1px solid #999; margin-top: 2em; }
table { border-collapse: collapse; margin: 0.5em 0 1em; }
th, td { border: 1px solid #bbb; padding: 0.2em 0.6em; text-align: left; }
td.n { text-align: right; }
figure { margin: 1em 0; }
@media print { body { margin: 0; max-width: none; } h2 { break-after: avoid; } }
"""


def _html_table(table: pd.DataFrame) -> str:
    from html import escape

    if table.empty:
        return "<p>(none)</p>"
    head = "".join(f"<th>{escape(str(c))}</th>" for c in table.columns)
    body = []
    for row in table.itertuples(index=False):
        cells = []
        for v in row:
            text = _cell(v)
            numeric = text.replace(",", "").replace(".", "", 1).lstrip("-").isdigit()
            opening = '<td class="n">' if numeric else "<td>"
            cells.append(f"{opening}{escape(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def rate_plot_svg(rates: pd.DataFrame, width: int = 560) -> str:
    """An inline SVG: each keyer's errors per 10,000 fields, a dot, and its interval as a line.

    >>> rate_plot_svg(pd.DataFrame({"keyer": ["AB"], "per_10000": [12.0], "low": [6.0],
    ...     "high": [20.0], "fields": [5000], "errors": [6]})).startswith("<svg")
    True
    """
    from html import escape

    rates = rates[rates["fields"] > 0].reset_index(drop=True)
    left, right, row_h, top = 90, 30, 28, 20
    height = top + row_h * max(len(rates), 1) + 40
    top_value = float(rates["high"].max()) if len(rates) else 1.0
    top_value = _nice(top_value if top_value > 0 else 1.0)
    span = width - left - right

    def x(v: float) -> float:
        return left + span * (v / top_value)

    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
             f'viewBox="0 0 {width} {height}" role="img" '
             'aria-label="Errors per 10,000 fields per keyer, with 95 % Wilson intervals" '
             'font-family="Helvetica, Arial, sans-serif" font-size="12">']
    axis_y = top + row_h * max(len(rates), 1)
    parts.append(f'<line x1="{left}" y1="{axis_y}" x2="{width - right}" y2="{axis_y}" '
                 'stroke="#333"/>')
    for i in range(5):
        value = top_value * i / 4
        parts.append(f'<line x1="{x(value):.1f}" y1="{axis_y}" x2="{x(value):.1f}" '
                     f'y2="{axis_y + 5}" stroke="#333"/>')
        parts.append(f'<text x="{x(value):.1f}" y="{axis_y + 18}" text-anchor="middle">'
                     f'{value:,.4g}</text>')
    parts.append(f'<text x="{left + span / 2:.1f}" y="{axis_y + 34}" text-anchor="middle">'
                 'errors per 10,000 fields (95 % Wilson interval)</text>')
    for i, r in rates.iterrows():
        y = top + row_h * i + row_h / 2
        parts.append(f'<text x="{left - 8}" y="{y + 4:.1f}" text-anchor="end">'
                     f'{escape(str(r["keyer"]))}</text>')
        parts.append(f'<line x1="{x(r["low"]):.1f}" y1="{y:.1f}" x2="{x(r["high"]):.1f}" '
                     f'y2="{y:.1f}" stroke="#333" stroke-width="2"/>')
        parts.append(f'<circle cx="{x(r["per_10000"]):.1f}" cy="{y:.1f}" r="4" fill="#333">'
                     f'<title>{escape(str(r["keyer"]))}: {escape(shown_number(r["per_10000"]))} '
                     f'({escape(shown_number(r["low"]))} to {escape(shown_number(r["high"]))})</title></circle>')
    parts.append("</svg>")
    return "".join(parts)


def _nice(value: float) -> float:
    """A round axis end at or above ``value`` (1, 2, 2.5 or 5 times a power of ten)."""
    power = 10 ** math.floor(math.log10(value))
    for step in (1, 2, 2.5, 5, 10):
        if step * power >= value:
            return step * power
    return 10 * power  # pragma: no cover


def render_html(report: Report) -> str:
    """The report as one self-contained, printable HTML page (inline CSS and SVG).

    Example::

        Path("report.html").write_text(render_html(build_report(study)))
    """
    from html import escape

    title = f"Verification report: {report.study}"
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           f"<title>{escape(title)}</title><style>{_CSS}</style></head><body>",
           f"<h1>{escape(title)}</h1>"]
    for heading, parts in _sections(report):
        out.append(f"<h2>{escape(heading)}</h2>")
        for part in parts:
            if isinstance(part, str) and part == "PLOT":
                out.append(f"<figure>{rate_plot_svg(report.keyer_rates)}</figure>")
            elif isinstance(part, str):
                out.append(f"<p>{escape(part)}</p>")
            elif isinstance(part, tuple):
                out.append(f"<h3>{escape(part[0])}</h3>{_html_table(part[1])}")
            else:
                out.append(_html_table(part))
    out.append("</body></html>")
    return "\n".join(out) + "\n"
