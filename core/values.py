"""Keyed text -> typed value, per variable: the rules comparison relies on.

A keyed value is stored as the exact text typed plus a state (``keyed``,
``blank`` = nothing on paper, ``illegible``). Parsing to a typed value is
derived, never stored. The same rules serve one field (the keying screen's
soft checks) and whole columns (the comparison, vectorised with pandas string
operations: one call per variable, never a Python loop per cell).

Rules:

- **integer**: optional sign and digits; leading zeros are fine (``07`` = 7);
  ``7.5``, ``7.0`` and ``1,000`` are not integers.
- **number**: optional sign, digits, one decimal separator. The decimal
  separator may be a point or a comma (``3,5`` = 3.5), because keyers in many
  countries type a comma; a text with both, or with more than one separator,
  is refused rather than guessed as a thousands separator. No exponents.
  Equality is by value (``3.50`` = ``3.5``), as IEEE doubles.
- **date**: exactly the variable's ``format`` (strftime notation), ISO 8601
  ``%Y-%m-%d`` by default. Day-first and month-first are never guessed.
- **string**: trimmed, Unicode NFC. Case and inner spaces matter for
  equality; comparison reports a case- or space-only difference with its own
  cause.

Declared missing codes are valid values of their variable whatever the range
or codes say.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass
from datetime import datetime
from functools import lru_cache

import pandas as pd

from .codebook import Variable

KEYED = "keyed"
BLANK = "blank"
ILLEGIBLE = "illegible"
STATES = (KEYED, BLANK, ILLEGIBLE)

ISO_DATE = "%Y-%m-%d"

_INTEGER = re.compile(r"^[+-]?\d+$")
#: An integer already in canonical form: what ``_INTEGER`` accepts with no rewriting.
_PLAIN_INTEGER = re.compile(r"0|-?[1-9]\d*")
_NUMBER = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)$")

# Problems a value can have, as comparison kinds (DESIGN.md).
INVALID_TYPE = "invalid_type"
OUT_OF_RANGE = "out_of_range"
NOT_IN_CODES = "not_in_codes"


@dataclass(frozen=True)
class Parsed:
    """One keyed text read by its variable's rules."""

    value: object
    """int, float, datetime.date or str; None when the text is not of the type."""
    canonical: str
    """Text that equal values share (``"7"`` for ``"07"``); the trimmed NFC text if invalid."""
    problem: str = ""
    """Empty when allowed; else ``invalid_type``, ``out_of_range`` or ``not_in_codes``."""
    message: str = ""
    """A short sentence for the keyer or resolver when there is a problem."""

    @property
    def ok(self) -> bool:
        return not self.problem


def clean_text(text: str) -> str:
    """Trim and NFC-normalise keyed text.

    >>> clean_text("  Cafe\\u0301 ")
    'Café'
    """
    return unicodedata.normalize("NFC", text).strip()


def parse(var: Variable, text: str) -> Parsed:
    """Read one keyed text (state ``keyed``) by ``var``'s rules and check the codebook.

    >>> from core.codebook import Variable
    >>> parse(Variable("age", "integer", min=18, max=99), "07").problem
    'out_of_range'
    >>> parse(Variable("age", "integer"), "07").canonical
    '7'
    """
    canon, valid = canonical_series(var, pd.Series([text], dtype=object))
    canonical = canon.iloc[0]
    if not valid.iloc[0]:
        return Parsed(None, canonical, INVALID_TYPE, _type_message(var))
    value = _typed(var, canonical)
    problem = rule_problems(var, canon, valid).iloc[0]
    return Parsed(value, canonical, problem, _rule_message(var, problem) if problem else "")


def _typed(var: Variable, canonical: str):
    if var.type == "integer":
        return int(canonical)
    if var.type == "number":
        return float(canonical)
    if var.type == "date":
        return datetime.strptime(canonical, ISO_DATE).date()
    return canonical


def canonical_series(var: Variable, texts: pd.Series) -> tuple[pd.Series, pd.Series]:
    """Canonical text and validity for a column of keyed texts of one variable.

    Returns ``(canonical, valid)`` with ``texts``' index: ``canonical`` is a
    text that equal typed values share (integers without leading zeros or
    ``+``, numbers as Python's ``repr`` of the double, dates as ISO
    ``YYYY-MM-DD``, strings trimmed NFC); where a text is not of the type,
    ``canonical`` is the trimmed NFC text and ``valid`` is False. Missing
    entries (None/NaN) stay missing and count as valid.

    >>> from core.codebook import Variable
    >>> c, ok = canonical_series(Variable("x", "number"), pd.Series(["3,50", "3.5", "1.2.3"]))
    >>> list(c), list(ok)
    (['3.5', '3.5', '1.2.3'], [True, True, False])
    """
    if len(texts) <= _SMALL:
        # Codebook codes, one ID, one field: a few texts, where building pandas
        # objects would cost milliseconds a call. Same rules, plain Python.
        items = texts.tolist()
        if all(isinstance(t, str) or t is None for t in items):
            canon, valid = _canonical_small(var.type, var.format, tuple(items))
            # No dtype given for the texts: inferred as the column path's are.
            return (pd.Series(canon, index=texts.index, dtype=None if canon else object),
                    pd.Series(valid, index=texts.index, dtype=bool))
    return _canonical_columns(var.type, var.format, texts)


#: Up to this many texts go through the per-text path with its cache.
_SMALL = 64
_PLUS = re.compile(r"^\+")
_ZEROS = re.compile(r"^(-?)0+(?=\d)")


@lru_cache(maxsize=8192)
def _canonical_small(type_: str, fmt: str, texts: tuple) -> tuple[list, list]:
    """``canonical_series`` of a few texts (str or None), cached: codebooks repeat their codes."""
    if type_ in ("string", "integer"):
        canon, valid = [], []
        # As the column path gives them: NaN for a missing entry, None when all are missing.
        absent = None if all(t is None for t in texts) else float("nan")
        for text in texts:
            if text is None:
                canon.append(absent)
                valid.append(True)
                continue
            text = clean_text(text)
            ok = type_ == "string" or _INTEGER.fullmatch(text) is not None
            if ok and type_ == "integer":
                text = _ZEROS.sub(r"\1", _PLUS.sub("", text))
                text = "0" if text == "-0" else text
            canon.append(text)
            valid.append(ok)
        return canon, valid
    # Numbers and dates keep pandas' parsers, so a code reads exactly as a keyed cell would.
    canon, valid = _canonical_columns(type_, fmt, pd.Series(list(texts), dtype=object))
    return canon.tolist(), valid.tolist()


def _canonical_columns(type_: str, fmt: str, texts: pd.Series) -> tuple[pd.Series, pd.Series]:
    present = texts.notna()
    s = texts.where(present, None).astype(object)
    s = s.map(clean_text, na_action="ignore")
    if type_ == "string":
        return s, pd.Series(True, index=texts.index)
    if type_ == "integer":
        # Most keyed integers are already canonical (no sign, no leading zero):
        # one test settles them, and only the rest go through the rewriting.
        plain = s.str.fullmatch(_PLAIN_INTEGER.pattern).fillna(False).to_numpy(dtype=bool)
        ok_arr, canon_arr = plain.copy(), s.to_numpy(dtype=object, copy=True)
        if not plain.all():
            r = s[~plain]
            ok_r = r.str.fullmatch(_INTEGER.pattern).fillna(False).astype(bool)
            canon_r = r.where(~ok_r, r.str.replace(r"^\+", "", regex=True)
                              .str.replace(r"^(-?)0+(?=\d)", r"\1", regex=True)
                              .str.replace(r"^-0$", "0", regex=True))
            ok_arr[~plain] = ok_r.to_numpy(dtype=bool)
            canon_arr[~plain] = canon_r.to_numpy(dtype=object)
        ok = pd.Series(ok_arr, index=s.index)
        # dtype inferred, as string methods give it: str when any text is present.
        canon = pd.Series(canon_arr, index=s.index, dtype=None if len(s) else object)
    elif type_ == "number":
        ok = s.str.fullmatch(_NUMBER.pattern).fillna(False).astype(bool)
        numbers = pd.to_numeric(s.where(ok).str.replace(",", ".", regex=False), errors="coerce")
        canon = s.where(~ok, numbers.map(lambda x: repr(float(x)) if x == x else None))
        canon = canon.where(canon != "-0.0", "0.0")
    elif type_ == "date":
        fmt = fmt or ISO_DATE
        dates = pd.to_datetime(s, format=fmt, errors="coerce")
        ok = dates.notna()
        canon = s.where(~ok, dates.dt.strftime(ISO_DATE))
    else:  # pragma: no cover - the codebook loader refuses unknown types
        raise ValueError(f"unknown type {type_!r}")
    valid = ok | ~present
    return canon.where(present, None), valid


def rule_problems(var: Variable, canonical: pd.Series, valid: pd.Series) -> pd.Series:
    """Codebook problem of each valid canonical value: ``out_of_range``, ``not_in_codes`` or "".

    Invalid or missing entries get "" (their problem is the type, or none).
    Declared missing codes are always allowed.
    """
    result = pd.Series("", index=canonical.index, dtype=object)
    present = canonical.notna() & valid
    if not present.any():
        return result
    missing = set(_canonical_codes(var, var.missing_values))
    is_missing = canonical.isin(missing)
    checked = present & ~is_missing
    if var.codes:
        allowed = set(_canonical_codes(var, var.code_values))
        result[checked & ~canonical.isin(allowed)] = NOT_IN_CODES
    if var.type in ("integer", "number") and (var.min is not None or var.max is not None):
        numbers = pd.to_numeric(canonical.where(checked), errors="coerce")
        low = numbers < var.min if var.min is not None else False
        high = numbers > var.max if var.max is not None else False
        outside = checked & (low | high) & (result == "")
        result[outside] = OUT_OF_RANGE
    return result


def _canonical_codes(var: Variable, values: tuple[str, ...]) -> list[str]:
    if not values:
        return []
    canon, _ = canonical_series(var, pd.Series(list(values), dtype=object))
    return list(canon)


def allowed_text(var: Variable) -> str:
    """What ``var`` allows, in a few words, for the keying and resolution screens.

    >>> from core.codebook import Code, Variable
    >>> allowed_text(Variable("q", "integer", codes=(Code("1", "no"), Code("2", "yes"))))
    'codes 1=no; 2=yes'
    """
    parts = []
    if var.codes:
        parts.append("codes " + "; ".join(_code_text(c.value, c.label) for c in var.codes))
    elif var.min is not None or var.max is not None:
        low = _bound(var.min) if var.min is not None else "…"
        high = _bound(var.max) if var.max is not None else "…"
        parts.append(f"{var.type} {low} to {high}")
    elif var.type == "date":
        parts.append(f"date {var.format or ISO_DATE}")
    else:
        parts.append(var.type)
    if var.missing:
        parts.append("missing " + "; ".join(_code_text(c.value, c.label) for c in var.missing))
    return ", ".join(parts)


def _code_text(value: str, label: str) -> str:
    return f"{value}={label}" if label else value


def _bound(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else repr(float(x))


def _type_message(var: Variable) -> str:
    if var.type == "integer":
        return f"{var.name} takes whole numbers only."
    if var.type == "number":
        return f"{var.name} takes a number such as 3.5 or 3,5."
    if var.type == "date":
        return f"{var.name} takes a date written {var.format or ISO_DATE}."
    return f"{var.name} cannot take this text."


def _rule_message(var: Variable, problem: str) -> str:
    if problem == OUT_OF_RANGE:
        return f"{var.name} allows {allowed_text(var)}; this is outside."
    return f"{var.name} allows {allowed_text(var)}; this is not one of them."
