"""Screening before analysis: scale scores, descriptives, outlier rules, one result object.

Pure functions over the verified table (a DataFrame) and the codebook; no
store. Declared missing codes are data about the paper, not values, so every
statistic here leaves them out (and counts them). The numbers themselves
(alpha, kappa, moments, fences) live in ``core.screening_stats`` and are
re-exported here, so callers need only this module. Choices stated here:

- Scale scores: reverse-keyed items as (min + max - x); a score is missing
  when fewer than ``min_answered`` (share, default 0.8, common practice) of a
  scale's items are answered; a *sum* score with some items missing is
  prorated (sum x k / answered) and counted.
- Outlier candidates: |z| above 3.29 (common practice) and Tukey's fences
  at 1.5 x IQR (quartiles by linear interpolation, type 7).

Small loops run per item, code or variable, never per cell. The rules that
set participants aside (``z:``, ``blank:``) live in ``core.screening_rules``.
Somewhat over the house's ~600 lines: scoring, descriptives and the result's
JSON shape are one vocabulary the command line, the report and the app share.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .codebook import DEFAULT_MIN_ANSWERED, Codebook, Variable
from .errors import CodebookError
from .passdata import PassData
from .screening_stats import (
    TUKEY_K,
    Z_THRESHOLD,
    Alpha,
    Fences,
    Kappa,
    SplitHalf,
    cohen_kappa,
    cronbach_alpha,
    item_analysis,
    kurtosis_g2,
    skewness_g1,
    spearman_brown,
    split_half,
    tukey_fences,
    z_scores,
)
from .values import KEYED, canonical_series

__all__ = [
    "MIN_ANSWERED",
    "TUKEY_K",
    "Z_THRESHOLD",
    "Alpha",
    "Descriptives",
    "Fences",
    "Kappa",
    "ScaleResult",
    "ScaleScores",
    "Screening",
    "SplitHalf",
    "cohen_kappa",
    "cronbach_alpha",
    "describe",
    "item_analysis",
    "kappa_pairs_from_passes",
    "kurtosis_g2",
    "numeric_values",
    "scale_scores",
    "screen",
    "sensitivity",
    "skewness_g1",
    "spearman_brown",
    "split_half",
    "text_histogram",
    "tukey_fences",
    "z_scores",
]

MIN_ANSWERED = DEFAULT_MIN_ANSWERED
"""Default share of a scale's items that must be answered (0.8, common practice)."""
NUMERIC = ("integer", "number")


# ---------------------------------------------------------------- cleaning


def numeric_values(series: pd.Series, var: Variable) -> tuple[pd.Series, dict[str, int]]:
    """``series`` as float64 with declared missing codes and NA as NaN, plus counts per code.

    >>> from core.codebook import Code, Variable
    >>> v = Variable("q", "integer", missing=(Code("-9", "refused"),))
    >>> x, miss = numeric_values(pd.Series([1, -9, None], dtype="Int64"), v)
    >>> x.isna().tolist(), miss
    ([False, True, True], {'-9': 1})
    """
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        values = series.to_numpy(dtype="float64", na_value=np.nan)
    else:
        values = pd.to_numeric(series, errors="coerce").to_numpy(dtype="float64", na_value=np.nan)
    values = values.copy()  # never write into the caller's table
    counts: dict[str, int] = {}
    for code in var.missing_values:
        try:
            hit = values == float(code.replace(",", "."))
        except ValueError:  # a non-numeric missing code cannot appear in a number column
            hit = np.zeros(len(values), dtype=bool)
        counts[code] = int(hit.sum())
        values[hit] = np.nan
    return pd.Series(values, index=series.index, dtype="float64"), counts


def _text_values(series: pd.Series, var: Variable) -> tuple[pd.Series, dict[str, int]]:
    s = series.astype("string")
    counts: dict[str, int] = {}
    for code in var.missing_values:
        hit = (s == code).fillna(False)
        counts[code] = int(hit.sum())
        s = s.mask(hit)
    return s, counts


def participant_ids(data: pd.DataFrame, codebook: Codebook) -> pd.Series:
    """The participant ID of each row of ``data`` as text (the row labels if there is no ID column)."""
    try:
        name = codebook.id_variable.name
    except KeyError:
        name = None
    if name and name in data.columns:
        return data[name].astype("string")
    return pd.Series(data.index.astype(str), index=data.index, dtype="string")


def _score_setting(items: tuple[Variable, ...]) -> tuple[str, float]:
    # The codebook loader checks that every item of a scale agrees; the first speaks for all.
    share = items[0].min_answered
    return items[0].score or "mean", MIN_ANSWERED if share is None else float(share)


def _bounds(var: Variable) -> tuple[float, float]:
    if var.min is not None and var.max is not None:
        return float(var.min), float(var.max)
    codes = pd.to_numeric(pd.Series(var.code_values, dtype=object), errors="coerce").dropna()
    if len(codes):
        return float(codes.min()), float(codes.max())
    where = f"{var.name!r}" + (f" (codebook row {var.row})" if var.row else "")
    raise CodebookError(
        f"codebook variable {where}: a reverse-keyed item needs min and max (or numeric codes)"
        " — add them so the item can be reversed."
    )


# ---------------------------------------------------------------- scale scores


@dataclass(frozen=True)
class ScaleScores:
    """Scale scores per participant and how they came about.

    ``scores``: one row per row of the data (same index), the ID column then
    one float column per scale (NaN where too few items were answered).
    ``items``: scale -> its items as scored (reversed where reverse-keyed,
    missing codes as NaN). ``method``: scale -> "sum" or "mean";
    ``min_answered``: scale -> share; ``prorated``: scale -> how many sum
    scores were scaled up from fewer items; ``too_few``: scale -> how many
    scores are missing because too few items were answered.
    """

    scores: pd.DataFrame
    items: dict[str, pd.DataFrame]
    method: dict[str, str]
    min_answered: dict[str, float]
    prorated: dict[str, int]
    too_few: dict[str, int]


def scale_scores(data: pd.DataFrame, codebook: Codebook) -> ScaleScores:
    """Score every scale of ``codebook`` from the keyed items in ``data``.

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("id", "string", is_id=True),
    ...                Variable("a1", "integer", min=1, max=5, scale="A"),
    ...                Variable("a2", "integer", min=1, max=5, scale="A", reverse=True)))
    >>> df = pd.DataFrame({"id": ["p1"], "a1": [4], "a2": [2]})
    >>> scale_scores(df, cb).scores["A"].tolist()   # (4 + (1 + 5 - 2)) / 2
    [4.0]
    """
    scores = pd.DataFrame({"participant": participant_ids(data, codebook)}, index=data.index)
    items_out, method, share_out, prorated, too_few = {}, {}, {}, {}, {}
    for scale, items in codebook.scales.items():
        how, share = _score_setting(items)
        cols = {}
        for var in items:
            x, _ = numeric_values(data[var.name], var)
            if var.reverse:
                low, high = _bounds(var)
                x = low + high - x
            cols[var.name] = x
        table = pd.DataFrame(cols, index=data.index)
        k = table.shape[1]
        answered = table.notna().sum(axis=1)
        # A tiny tolerance so 4 of 5 items meets a share of 0.8 exactly.
        enough = answered >= share * k - 1e-9
        enough &= answered > 0
        if how == "sum":
            score = table.sum(axis=1) * k / answered.where(answered > 0)
            prorated[scale] = int((enough & (answered < k)).sum())
        else:
            score = table.mean(axis=1)
            prorated[scale] = 0
        scores[scale] = score.where(enough).astype("float64")
        items_out[scale], method[scale], share_out[scale] = table, how, share
        too_few[scale] = int((~enough).sum())
    return ScaleScores(scores, items_out, method, share_out, prorated, too_few)


# ---------------------------------------------------------------- agreement of passes


def kappa_pairs_from_passes(
    codebook: Codebook, pass1: PassData, pass2: PassData
) -> dict[str, tuple[pd.Series, pd.Series]]:
    """For coded variables, the two passes' values paired by participant ID.

    Forms whose ID appears more than once in a pass are left out (their
    pairing is a discrepancy still to resolve). Blank, illegible, invalid
    and declared missing values are NA, so kappa sees only codes.

    >>> from core.codebook import Code, Codebook, Variable
    >>> cb = Codebook((Variable("id", is_id=True), Variable("q", "integer", codes=(Code("1"), Code("2")))))
    >>> p1 = PassData.from_texts(1, pd.DataFrame({"id": ["a", "b"], "q": ["1", "2"]}))
    >>> p2 = PassData.from_texts(2, pd.DataFrame({"id": ["b", "a"], "q": ["2", "01"]}))
    >>> [s.tolist() for s in kappa_pairs_from_passes(cb, p1, p2)["q"]]
    [['1', '2'], ['1', '2']]
    """
    id_var = codebook.id_variable

    def by_id(p: PassData) -> tuple[pd.DataFrame, pd.DataFrame]:
        # Canonical IDs, so "007" in one pass pairs with "7" in the other.
        ids = canonical_series(id_var, p.text[id_var.name].astype(object))[0].astype("string")
        once = ~ids.duplicated(keep=False) & ids.notna() & (ids != "")
        return p.text[once].set_index(ids[once]), p.state[once].set_index(ids[once])

    t1, s1 = by_id(pass1)
    t2, s2 = by_id(pass2)
    common = t1.index.intersection(t2.index)
    out = {}
    for var in codebook:
        if not var.codes or var.is_id:
            continue
        sides = []
        for text, state in ((t1, s1), (t2, s2)):
            col = text.loc[common, var.name].where(state.loc[common, var.name] == KEYED)
            canon, valid = canonical_series(var, col.astype(object))
            missing = set(canonical_series(var, pd.Series(var.missing_values, dtype=object))[0])
            sides.append(
                canon.where(valid & ~canon.isin(missing)).astype("string").reset_index(drop=True)
            )
        out[var.name] = (sides[0], sides[1])
    return out


# ---------------------------------------------------------------- descriptives


@dataclass(frozen=True)
class Descriptives:
    """What a researcher checks for one variable (or scale score) before analysis.

    Numbers are NaN where undefined (no numeric values, n too small).
    ``missing``: declared missing code -> count; ``blank``: NA cells (blank
    on paper, or open in a draft). ``frequencies``: for coded variables,
    columns value, label, count, percent (of n). ``outliers_z`` and
    ``outliers_tukey``: participants flagged, in data order.
    """

    name: str
    n: int
    blank: int
    missing: dict[str, int] = field(default_factory=dict)
    mean: float = math.nan
    sd: float = math.nan
    median: float = math.nan
    min: float = math.nan
    max: float = math.nan
    skewness: float = math.nan
    kurtosis: float = math.nan
    fences: Fences = Fences(math.nan, math.nan, math.nan, math.nan)
    outliers_z: tuple[str, ...] = ()
    outliers_tukey: tuple[str, ...] = ()
    frequencies: pd.DataFrame | None = None
    measured: bool = False
    """True for a number without codes: the moments and outliers apply."""


def describe(
    series: pd.Series,
    var: Variable,
    participants: pd.Series | None = None,
    z_threshold: float = Z_THRESHOLD,
) -> Descriptives:
    """Descriptives of one column: counts, missing by code, then moments and outliers
    for numbers, or frequencies with labels for coded variables.

    ``participants`` (aligned with ``series``) names the flagged outliers;
    without it the index is used.

    >>> from core.codebook import Variable
    >>> d = describe(pd.Series([1, 2, 3, None], dtype="Int64"), Variable("x", "integer"))
    >>> d.n, d.blank, d.mean
    (3, 1, 2.0)
    """
    who = participants if participants is not None else pd.Series(series.index.astype(str))
    who = pd.Series(who.to_numpy(), index=series.index).astype(str)
    if var.type not in NUMERIC or var.codes:
        # Codes name categories: counts with labels, not means (the "for codes").
        if var.type in NUMERIC:
            s, missing = numeric_values(series, var)
        else:
            s, missing = _text_values(series, var)
        n = int(s.notna().sum())
        blank = int(series.isna().sum())
        return Descriptives(var.name, n, blank, missing, frequencies=_frequencies(s, var, n))
    x, missing = numeric_values(series, var)
    arr = x.to_numpy()
    v = arr[~np.isnan(arr)]
    n, blank = len(v), int(series.isna().sum())
    fences = tukey_fences(x, TUKEY_K)
    mean = float(v.mean()) if n else math.nan
    sd = float(v.std(ddof=1)) if n > 1 else math.nan
    with np.errstate(invalid="ignore"):
        z_hit = np.abs(arr - mean) / sd > z_threshold if sd > 0 else np.zeros(len(arr), bool)
        fence_hit = (arr < fences.low) | (arr > fences.high)
    return Descriptives(
        var.name,
        n,
        blank,
        missing,
        mean=mean,
        sd=sd,
        median=float(np.median(v)) if n else math.nan,
        min=float(v.min()) if n else math.nan,
        max=float(v.max()) if n else math.nan,
        skewness=skewness_g1(v),
        kurtosis=kurtosis_g2(v),
        fences=fences,
        outliers_z=tuple(who[z_hit]),
        outliers_tukey=tuple(who[fence_hit]),
        measured=True,
    )


def _frequencies(values: pd.Series, var: Variable, n: int) -> pd.DataFrame | None:
    if not var.codes:
        return None
    if var.type in NUMERIC:
        keys = pd.to_numeric(pd.Series(var.code_values, dtype=object), errors="coerce")
    else:
        keys = pd.Series(var.code_values, dtype="string")
    counts = [int((values == key).sum()) for key in keys]
    coded = sum(counts)
    rows = [(c.value, c.label, cnt) for c, cnt in zip(var.codes, counts, strict=True)]
    if n - coded:  # values outside the codes (kept because the paper says so)
        rows.append(("other", "", n - coded))
    table = pd.DataFrame(rows, columns=["value", "label", "count"])
    table["percent"] = 100.0 * table["count"] / n if n else math.nan
    return table


def text_histogram(
    x: pd.Series, var: Variable | None = None, bins: int = 10, width: int = 40
) -> list[str]:
    """Plain-text bars for a terminal: one line per code (with its label) or per bin.

    Coded variables get one bar per code; other numbers get ``bins`` equal
    bins (numpy's histogram: the last bin includes its right edge).

    >>> text_histogram(pd.Series([1.0, 1.0, 2.0]), bins=2, width=4)
    ['1 – 1.5  ####  2', '1.5 – 2  ##    1']
    """
    if var is not None and var.codes:
        values = numeric_values(x, var)[0] if var.type in NUMERIC else _text_values(x, var)[0]
        table = _frequencies(values.dropna(), var, int(values.notna().sum()))
        labels = [
            f"{v} {lab}".strip() for v, lab in zip(table["value"], table["label"], strict=True)
        ]
        counts = [int(c) for c in table["count"]]
    else:
        values = numeric_values(x, var)[0] if var is not None else pd.Series(x, dtype="float64")
        values = values.dropna()
        if values.empty:
            return []
        hist, edges = np.histogram(values.to_numpy(), bins=bins)
        labels = [f"{short_number(a)} – {short_number(b)}" for a, b in zip(edges[:-1], edges[1:], strict=True)]
        counts = [int(c) for c in hist]
    top = max(max(counts), 1)
    left = max(len(lab) for lab in labels)
    return [
        f"{lab.ljust(left)}  {('#' * round(width * cnt / top)).ljust(width)}  {cnt}"
        for lab, cnt in zip(labels, counts, strict=True)
    ]


def short_number(v: float) -> str:
    """A number as a person writes it in a label: ``3.0`` as ``3``, else up to four figures."""
    return f"{v:.4g}"


# ---------------------------------------------------------------- sensitivity


def sensitivity(
    data_all: pd.DataFrame, data_kept: pd.DataFrame, codebook: Codebook
) -> pd.DataFrame:
    """The same descriptives with and without set-aside participants, side by side.

    One row per numeric (not coded) variable and per scale score: ``name``, then ``n``,
    ``mean``, ``sd`` and ``median`` for all participants (``_all``) and for
    those kept (``_kept``).

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("id", is_id=True), Variable("x", "number")))
    >>> every = pd.DataFrame({"id": ["a", "b", "c"], "x": [1.0, 2.0, 30.0]})
    >>> sensitivity(every, every.iloc[:2], cb)[["name", "mean_all", "mean_kept"]].values.tolist()
    [['x', 11.0, 1.5]]
    """
    columns = ["name"] + [
        f"{s}_{w}" for s in ("n", "mean", "sd", "median") for w in ("all", "kept")
    ]
    frames = {"all": data_all, "kept": data_kept}
    stats = {w: _numeric_table(d, codebook) for w, d in frames.items()}
    rows = []
    for name in stats["all"]:
        row = {"name": name}
        for w in ("all", "kept"):
            x = stats[w].get(name, pd.Series(dtype="float64")).to_numpy()
            v = x[~np.isnan(x)]
            row[f"n_{w}"] = len(v)
            row[f"mean_{w}"] = float(v.mean()) if len(v) else math.nan
            row[f"sd_{w}"] = float(v.std(ddof=1)) if len(v) > 1 else math.nan
            row[f"median_{w}"] = float(np.median(v)) if len(v) else math.nan
        rows.append(row)
    return pd.DataFrame(rows, columns=columns)


def _numeric_table(data: pd.DataFrame, codebook: Codebook) -> dict[str, pd.Series]:
    out = {
        v.name: numeric_values(data[v.name], v)[0]
        for v in codebook
        if v.type in NUMERIC
        and not v.codes
        and not v.is_id
        and not v.identifying
        and v.name in data
    }
    scores = scale_scores(data, codebook).scores
    for scale in codebook.scales:
        out[scale] = scores[scale]
    return out


# ---------------------------------------------------------------- everything at once


@dataclass(frozen=True)
class ScaleResult:
    """Screening of one scale: reliability, items and its score's descriptives."""

    name: str
    items: list[str]
    alpha: Alpha
    item_table: pd.DataFrame
    split: SplitHalf
    method: str
    min_answered: float
    prorated: int
    too_few: int
    score: Descriptives


@dataclass(frozen=True)
class Screening:
    """Everything ``screen`` found; ``to_json`` gives the scripts' shape."""

    scales: dict[str, ScaleResult]
    variables: dict[str, Descriptives]
    kappas: dict[str, Kappa] = field(default_factory=dict)
    sensitivity: pd.DataFrame | None = None
    scores: pd.DataFrame | None = None

    def tables(self) -> dict[str, pd.DataFrame]:
        """The results as plain tables, for printing, CSV/Markdown files and the app.

        ``summary``: one row per scale score and variable (kind, name, n, blank,
        missing, mean, sd, median, min, max, skewness, kurtosis, outliers by
        |z| and Tukey, alpha, alpha_n, k, spearman_brown, prorated, too_few,
        kappa, agreement, kappa_n); ``items``: item analysis of every scale;
        ``frequencies``: coded variables' counts with labels; ``sensitivity``
        (empty without set-aside participants).
        """
        rows = []
        for name, s in self.scales.items():
            row = {"kind": "scale", "name": name, **_desc_row(s.score)}
            row.update(alpha=s.alpha.alpha, alpha_n=s.alpha.n_used, k=s.alpha.k,
                       spearman_brown=s.split.spearman_brown, score=s.method,
                       prorated=s.prorated, too_few=s.too_few)  # fmt: skip
            rows.append(row)
        for name, d in self.variables.items():
            row = {"kind": "variable", "name": name, **_desc_row(d)}
            if name in self.kappas:
                k = self.kappas[name]
                row.update(kappa=k.kappa, agreement=k.agreement, kappa_n=k.n)
            rows.append(row)
        summary = pd.DataFrame(rows, columns=SUMMARY_COLUMNS)
        for name in ("alpha_n", "k", "prorated", "too_few", "kappa_n"):
            summary[name] = summary[name].astype("Int64")
        items = [
            s.item_table.assign(scale=name)[["scale", *s.item_table.columns]]
            for name, s in self.scales.items()
        ]
        freqs = [
            d.frequencies.assign(variable=name)[["variable", *d.frequencies.columns]]
            for name, d in self.variables.items()
            if d.frequencies is not None
        ]
        return {
            "summary": summary,
            "items": pd.concat(items, ignore_index=True) if items else pd.DataFrame(),
            "frequencies": pd.concat(freqs, ignore_index=True) if freqs else pd.DataFrame(),
            "sensitivity": self.sensitivity if self.sensitivity is not None else pd.DataFrame(),
        }

    def to_dict(self) -> dict:
        """A JSON-ready dict: ``{"scales": {...}, "variables": {...}}``; NaN becomes None."""
        scales = {}
        for name, s in self.scales.items():
            scales[name] = {
                "alpha": s.alpha.alpha,
                "n": s.alpha.n_used,
                "k": s.alpha.k,
                "items": [
                    {
                        "name": r.item,
                        "alpha_if_deleted": r.alpha_if_deleted,
                        "item_total_r": r.item_total_r,
                        "negative": bool(r.negative),
                    }
                    for r in s.item_table.itertuples()
                ],
                "split_half_r": s.split.r_halves,
                "spearman_brown": s.split.spearman_brown,
                "score": s.method,
                "min_answered": s.min_answered,
                "prorated": s.prorated,
                "too_few_answered": s.too_few,
                "scores": _desc_dict(s.score),
            }
        variables = {}
        for name, d in self.variables.items():
            out = _desc_dict(d)
            if name in self.kappas:
                k = self.kappas[name]
                out["kappa"] = {"kappa": k.kappa, "agreement": k.agreement, "n": k.n}
            if self.sensitivity is not None and name in set(self.sensitivity["name"]):
                row = self.sensitivity.set_index("name").loc[name]
                out["with_set_aside"] = {s: row[f"{s}_all"] for s in ("n", "mean", "sd", "median")}
            variables[name] = out
        return _jsonable({"scales": scales, "variables": variables})

    def to_json(self) -> str:
        """:meth:`to_dict` as one JSON object (strict JSON: NaN written as null)."""
        return json.dumps(self.to_dict(), ensure_ascii=False, allow_nan=False)


SUMMARY_COLUMNS = [
    "kind", "name", "n", "blank", "missing", "mean", "sd", "median", "min", "max",
    "skewness", "kurtosis", "outliers_z", "outliers_tukey", "alpha", "alpha_n", "k",
    "spearman_brown", "score", "prorated", "too_few", "kappa", "agreement", "kappa_n",
]  # fmt: skip


# The moments and order statistics, named alike in Descriptives, the summary table and the JSON.
_STATS = ("mean", "sd", "median", "min", "max", "skewness", "kurtosis")


def _desc_row(d: Descriptives) -> dict:
    return {
        "n": d.n,
        "blank": d.blank,
        "missing": sum(d.missing.values()),
        **{name: getattr(d, name) for name in _STATS},
        "outliers_z": " ".join(d.outliers_z),
        "outliers_tukey": " ".join(d.outliers_tukey),
    }


def _desc_dict(d: Descriptives) -> dict:
    out = {
        "n": d.n,
        "blank": d.blank,
        "missing": dict(d.missing),
        **{name: getattr(d, name) for name in _STATS},
        "tukey_fences": [d.fences.low, d.fences.high],
        "outliers_z": list(d.outliers_z),
        "outliers_tukey": list(d.outliers_tukey),
    }
    if d.frequencies is not None:
        out["frequencies"] = d.frequencies.to_dict(orient="records")
    return out


def _jsonable(obj):
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, bool | np.bool_):
        return bool(obj)
    if isinstance(obj, int | np.integer):
        return int(obj)
    if isinstance(obj, float | np.floating):
        return None if math.isnan(obj) or math.isinf(obj) else float(obj)
    if obj is pd.NA or obj is None:
        return None
    return obj


def screen(
    data: pd.DataFrame,
    codebook: Codebook,
    data_all: pd.DataFrame | None = None,
    kappa_pairs: dict[str, tuple[pd.Series, pd.Series]] | None = None,
    z_threshold: float = Z_THRESHOLD,
) -> Screening:
    """Screen a verified table: every scale and every variable (not the ID or identifying ones).

    ``data_all`` (the table with set-aside participants still in) adds the
    sensitivity table; ``kappa_pairs`` (variable -> the two passes' values,
    see :func:`kappa_pairs_from_passes`) adds Cohen's kappa per variable.

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("id", is_id=True), Variable("x", "number")))
    >>> screen(pd.DataFrame({"id": ["a", "b"], "x": [1.0, 3.0]}), cb).variables["x"].mean
    2.0
    """
    who = participant_ids(data, codebook)
    scored = scale_scores(data, codebook)
    scales = {}
    for name, items in codebook.scales.items():
        table = scored.items[name]
        score_var = Variable(name, "number")
        scales[name] = ScaleResult(
            name,
            [v.name for v in items],
            cronbach_alpha(table),
            item_analysis(table),
            split_half(table),
            scored.method[name],
            scored.min_answered[name],
            scored.prorated[name],
            scored.too_few[name],
            describe(scored.scores[name], score_var, who, z_threshold),
        )
    variables = {
        v.name: describe(data[v.name], v, who, z_threshold)
        for v in codebook
        if not v.is_id and not v.identifying and v.name in data
    }
    kappas = {name: cohen_kappa(a, b) for name, (a, b) in (kappa_pairs or {}).items()}
    sens = sensitivity(data_all, data, codebook) if data_all is not None else None
    return Screening(scales, variables, kappas, sens, scored.scores)
