"""Codebook validation: raw cells in, a valid :class:`Codebook` or every problem out.

The readers in ``core.codebook_io`` (CSV, XLSX) and ``core.codebook_schema``
(Table Schema JSON) turn their file into :class:`RawRow` s of plain cells;
:func:`build_codebook` checks all of them against the rules of DESIGN.md and
raises one :class:`CodebookError` listing every problem, each one sentence
that names the file, the row (or field) and the variable, says what is wrong
and how to fix it. Nothing is mapped or guessed silently: a near-miss column
or type name is suggested, never assumed.

Cell rules: ``codes`` and ``missing`` read ``1=never; 2=sometimes`` (a
semicolon or a line break between codes; the label may be left out); yes/no
flags accept ``yes/no/true/false/1/0`` in any case, blank meaning no; ``min``
and ``max`` take a point or (if there is no point) a comma as decimal mark;
``min_answered`` is a share such as ``0.8`` or ``80%``. The participant ID is
always required. A scale's ``score`` and ``min_answered`` may be written on
one item or on all of them (they must agree); unset, a scale is scored as the
mean with at least 80 % of items answered (common practice).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from datetime import datetime

import pandas as pd
from rapidfuzz import fuzz, process
from rapidfuzz.distance import DamerauLevenshtein

from .codebook import COLUMNS, DEFAULT_MIN_ANSWERED, SCORE_METHODS, TYPES, Code, Codebook, Variable
from .conditions import KEYWORDS, parse_condition
from .errors import CodebookError
from .values import canonical_series

NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
MAX_NAME = 64
_TRUE = {"yes", "true", "1", "y"}
_FALSE = {"no", "false", "0", "n", ""}
_FLAG_WORDS = "yes/no/true/false/1/0"
_DECIMAL = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)$")


@dataclass(frozen=True)
class RawRow:
    """One variable's cells as read from a file, before any checking."""

    where: str
    """How a message locates it, e.g. ``codebook.csv row 7`` or ``schema.json field 3``."""
    row: int | None
    """Row in the source file (header is row 1); None for JSON fields."""
    cells: dict = field(default_factory=dict)
    """Column -> cell text ("" when empty); ``codes``/``missing`` may already be tuples of Code."""


def nearest(word: str, choices, cutoff: float = 0.65) -> str | None:
    """The closest of ``choices`` to ``word``, or None if none is close enough.

    Closeness is the normalised Damerau-Levenshtein similarity (a swap of two
    neighbouring letters counts as one slip, as in ``lable``), 0-1.

    >>> nearest("lable", ["name", "label", "type"])
    'label'
    >>> nearest("notes", ["name", "label", "codes"]) is None
    True
    """
    hit = process.extractOne(word.lower(), list(choices), score_cutoff=cutoff,
                             scorer=DamerauLevenshtein.normalized_similarity)
    return hit[0] if hit else None


def _nearest_type(word: str) -> str | None:
    # Types are often abbreviated ("int", "num"), which edit distance scores poorly.
    hit = process.extractOne(word.lower(), TYPES, scorer=fuzz.ratio, score_cutoff=50)
    return hit[0] if hit else None


def unknown_column_problem(where: str, column: str) -> str:
    """The sentence for a column keyproof does not read, with the nearest known one.

    >>> unknown_column_problem("cb.csv row 1", "lable")
    'cb.csv row 1: unknown column "lable" — did you mean "label"? Rename it, or delete the column.'
    """
    guess = nearest(column, COLUMNS)
    if guess:
        return (f'{where}: unknown column "{column}" — did you mean "{guess}"? '
                "Rename it, or delete the column.")
    return (f'{where}: unknown column "{column}" — keyproof reads only {", ".join(COLUMNS)}; '
            "delete or rename it.")


class _Checker:
    def __init__(self) -> None:
        self.problems: list[str] = []

    def add(self, raw: RawRow, name: str, what: str, fix: str) -> None:
        who = f' ("{name}")' if name else ""
        self.problems.append(f"{raw.where}{who}: {what} — {fix}.")


def build_codebook(rows: list[RawRow], source: str = "", problems: list[str] | None = None,
                   label: str = "the codebook") -> Codebook:
    """Check raw rows and build the codebook, or raise ``CodebookError`` with every problem.

    ``problems`` are problems the reader already found (e.g. unknown columns);
    they come first. ``label`` names the file in file-wide messages.

    >>> rows = [RawRow("cb.csv row 2", 2, {"name": "pid", "type": "string", "id": "yes"}),
    ...         RawRow("cb.csv row 3", 3, {"name": "age", "type": "integer", "min": "99", "max": "16"})]
    >>> build_codebook(rows)
    Traceback (most recent call last):
    ...
    core.errors.CodebookError: cb.csv row 3 ("age"): min 99 is greater than max 16 — swap them or fix the typo.
    """
    check = _Checker()
    check.problems.extend(problems or [])
    variables: list[Variable] = []
    raws: list[RawRow] = []
    for raw in rows:
        var = _variable(check, raw)
        if var is not None:
            variables.append(var)
            raws.append(raw)
    _check_names_unique(check, variables, raws)
    _check_id(check, variables, raws, label)
    _check_conditions(check, variables, raws)
    variables = _settle_scales(check, variables, raws)
    if not rows:
        check.problems.append(f"{label} lists no variables — add one row per variable under the header.")
    if check.problems:
        raise CodebookError(check.problems)
    return Codebook(tuple(variables), source=source)


# --------------------------------------------------------------------------- one row


def _text(raw: RawRow, column: str) -> str:
    value = raw.cells.get(column, "")
    return "" if value is None else str(value).strip()


def _variable(check: _Checker, raw: RawRow) -> Variable | None:
    name = _text(raw, "name")
    if not name:
        check.add(raw, "", "the name is blank", "give the variable a name or delete the row")
    elif not NAME_RE.match(name):
        check.add(raw, name, f'"{name}" is not a valid name', "start with a letter and use only "
                  "letters, digits and _ (no spaces)")
    elif len(name) > MAX_NAME:
        check.add(raw, name, f"the name is {len(name)} characters long", f"shorten it to {MAX_NAME} or fewer")
    elif name.lower() in KEYWORDS:
        check.add(raw, name, f'"{name}" is a word conditions use', "choose another name")

    type_ = _text(raw, "type").lower()
    known = type_ in TYPES
    if not type_:
        check.add(raw, name, "the type is blank", f"write one of {', '.join(TYPES)}")
        type_ = "string"
    elif not known:
        guess = _nearest_type(type_)
        hint = f'did you mean "{guess}"? Write' if guess else "write"
        check.add(raw, name, f'unknown type "{type_}"', f"{hint} one of {', '.join(TYPES)}")
        type_ = "string"

    flags = {col: _flag(check, raw, name, col) for col in ("id", "required", "identifying", "reverse")}
    # With an unknown type, checks that depend on the type would only add noise.
    bounds_type = type_ if known else "number"
    before_bounds = len(check.problems)
    low = _bound(check, raw, name, bounds_type, "min")
    high = _bound(check, raw, name, bounds_type, "max")
    bounds_ok = len(check.problems) == before_bounds
    if low is not None and high is not None and low > high:
        check.add(raw, name, f"min {_num(low)} is greater than max {_num(high)}", "swap them or fix the typo")
    fmt = _format(check, raw, name, type_)
    probe = Variable(name or "x", type_, format=fmt)
    codes = _codes(check, raw, name, probe, "codes")
    missing = _codes(check, raw, name, probe, "missing")
    if known and bounds_ok:
        _check_code_rules(check, raw, name, probe, codes, missing, low, high)
    width = _width(check, raw, name)
    scale = _text(raw, "scale")
    if flags["reverse"] and not scale:
        check.add(raw, name, "reverse is yes but the variable has no scale",
                  "name its scale in the scale column, or set reverse to no")
    if flags["reverse"] and bounds_ok and (low is None or high is None):
        check.add(raw, name, "a reverse-keyed item needs min and max (scored as min + max − x)",
                  "fill in min and max")
    if scale and known and type_ not in ("integer", "number"):
        check.add(raw, name, f'a {type_} variable cannot be an item of scale "{scale}"',
                  "make it integer or number, or clear its scale")
    if flags["id"] and _text(raw, "applies_if"):
        check.add(raw, name, "the participant ID cannot have an applies_if condition",
                  "clear applies_if for the ID")
    if not name:  # already reported; a nameless row cannot take part in the checks across rows
        return None
    return Variable(
        name=name, type=type_, label=_text(raw, "label"), is_id=flags["id"],
        min=low, max=high, codes=codes, missing=missing, required=flags["required"] or flags["id"],
        identifying=flags["identifying"], section=_text(raw, "section"), scale=scale,
        reverse=flags["reverse"], applies_if=_text(raw, "applies_if"), width=width, format=fmt,
        row=raw.row,
    )


def _flag(check: _Checker, raw: RawRow, name: str, column: str) -> bool:
    text = _text(raw, column).lower()
    if text in _TRUE:
        return True
    if text not in _FALSE:
        check.add(raw, name, f'{column} "{_text(raw, column)}" is not a yes/no answer',
                  f"write one of {_FLAG_WORDS}, or leave it blank for no")
    return False


def _read_number(text: str) -> float | None:
    t = text.strip()
    if "," in t and "." not in t:
        t = t.replace(",", ".")
    return float(t) if _DECIMAL.match(t) else None


def _bound(check: _Checker, raw: RawRow, name: str, type_: str, column: str) -> float | None:
    text = _text(raw, column)
    if not text:
        return None
    if type_ not in ("integer", "number"):
        check.add(raw, name, f"{column} {text} is set for a {type_} variable",
                  f"clear {column}, or make the type integer or number")
        return None
    value = _read_number(text)
    if value is None:
        check.add(raw, name, f'{column} "{text}" is not a number', "write a number such as 1 or 2.5")
        return None
    if type_ == "integer" and not value.is_integer():
        check.add(raw, name, f"{column} {text} is not a whole number but the type is integer",
                  "use a whole number, or make the type number")
    return value


def _place(raw: RawRow) -> str:
    """``row 4`` or ``field 3``: the end of a locator, for pointing at another row."""
    return " ".join(raw.where.rsplit(" ", 2)[-2:])


def _num(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else repr(float(x))


def _format(check: _Checker, raw: RawRow, name: str, type_: str) -> str:
    fmt = _text(raw, "format")
    if not fmt:
        return ""
    if type_ != "date":
        check.add(raw, name, f'format "{fmt}" is set for a {type_} variable',
                  "clear format (it is only for dates), or make the type date")
        return ""
    day = datetime(2031, 12, 25)
    try:
        ok = datetime.strptime(day.strftime(fmt), fmt).date() == day.date()
    except ValueError:
        ok = False
    if not ok or "%" not in fmt:
        check.add(raw, name, f'date format "{fmt}" cannot write and read back a whole date',
                  "write it with %d, %m and %Y, e.g. %d.%m.%Y or %Y-%m-%d")
        return ""
    return fmt


def _width(check: _Checker, raw: RawRow, name: str) -> int | None:
    text = _text(raw, "width")
    if not text:
        return None
    value = _read_number(text)
    if value is None or not value.is_integer() or value < 1:
        check.add(raw, name, f'width "{text}" is not a whole number of characters',
                  "write a whole number of 1 or more, or leave it blank")
        return None
    return int(value)


def _codes(check: _Checker, raw: RawRow, name: str, var: Variable, column: str) -> tuple[Code, ...]:
    cell = raw.cells.get(column, "")
    if isinstance(cell, tuple):
        codes = cell
    else:
        text = "" if cell is None else str(cell).strip()
        if not text:
            return ()
        codes = []
        for item in re.split(r"[;\n]", text):
            item = item.strip()
            if not item:
                continue
            value, sep, label = item.partition("=")
            value, label = value.strip(), label.strip()
            if not value or "=" in label or (not sep and re.search(r"[,:]", value)):
                check.add(raw, name, f'{column} "{text}" cannot be read',
                          "write them as 1=never; 2=sometimes; 3=often")
                return ()
            codes.append(Code(value, label))
        codes = tuple(codes)
    values = pd.Series([c.value for c in codes], dtype=object)
    canon, valid = canonical_series(var, values)
    bad = [c.value for c, ok in zip(codes, valid, strict=True) if not ok]
    if bad:
        check.add(raw, name, f'{column} {", ".join(bad)} {"is" if len(bad) == 1 else "are"} not '
                  f"{_a(var.type)} value", "fix the code or make the type fit")
        return tuple(codes)
    seen: dict[str, str] = {}
    for code, c in zip(codes, canon, strict=True):
        if c in seen:
            check.add(raw, name, f"{column} lists {code.value} twice", "keep one of them")
        seen.setdefault(c, code.value)
    return tuple(codes)


def _a(type_: str) -> str:
    return {"integer": "a whole-number", "number": "a number", "date": "a date"}.get(type_, "a")


def _check_code_rules(check, raw, name, var, codes, missing, low, high) -> None:
    if not codes and not missing:
        return
    canon_codes = dict(zip(canonical_series(var, pd.Series([c.value for c in codes], dtype=object))[0],
                           (c.value for c in codes), strict=True))
    if var.type in ("integer", "number") and (low is not None or high is not None):
        for canon, text in canon_codes.items():
            x = _read_number(str(canon))
            if x is not None and ((low is not None and x < low) or (high is not None and x > high)):
                check.add(raw, name, f"code {text} is outside min–max ({_range(low, high)})",
                          "widen min/max or fix the code")
    canon_missing = canonical_series(var, pd.Series([c.value for c in missing], dtype=object))[0]
    for code, canon in zip(missing, canon_missing, strict=True):
        if canon in canon_codes:
            check.add(raw, name, f"missing code {code.value} is also a valid code",
                      "use a missing code the paper cannot mean as an answer, e.g. -9")
            continue
        x = _read_number(str(canon)) if var.type in ("integer", "number") else None
        inside = (x is not None and not codes and (low is not None or high is not None)
                  and (low is None or x >= low) and (high is None or x <= high))
        if inside:
            check.add(raw, name, f"missing code {code.value} is inside the valid range ({_range(low, high)})",
                      "use a missing code outside min–max, e.g. -9")


def _range(low, high) -> str:
    return f"{_num(low) if low is not None else '…'} to {_num(high) if high is not None else '…'}"


# --------------------------------------------------------------------------- whole codebook


def _check_names_unique(check: _Checker, variables: list[Variable], raws: list[RawRow]) -> None:
    first: dict[str, tuple[Variable, RawRow]] = {}
    for var, raw in zip(variables, raws, strict=True):
        if not var.name:
            continue
        key = var.name.lower()
        if key in first:
            other, other_raw = first[key]
            check.add(raw, var.name, f'the name repeats {_place(other_raw)} ("{other.name}"), '
                      "ignoring case", "rename one of them")
        else:
            first[key] = (var, raw)


def _check_id(check: _Checker, variables, raws, label: str) -> None:
    ids = [(v, r) for v, r in zip(variables, raws, strict=True) if v.is_id]
    if not ids and variables:
        check.problems.append(f"{label} marks no variable as the participant ID — write yes in the "
                              "id column of the one variable that holds the form's participant ID.")
    for var, raw in ids[1:]:
        first = ids[0][0].name
        check.add(raw, var.name, f'a second participant ID (the first is "{first}")',
                  "mark only one variable with id = yes")
    for var, raw in ids:
        if var.scale:
            check.add(raw, var.name, "the participant ID cannot be a scale item", "clear its scale")


def _check_conditions(check: _Checker, variables, raws) -> None:
    position = {v.name: i for i, v in enumerate(variables) if v.name}
    by_name = {v.name: v for v in variables if v.name}
    for i, (var, raw) in enumerate(zip(variables, raws, strict=True)):
        if not var.applies_if:
            continue
        try:
            cond = parse_condition(var.applies_if)
        except ValueError as exc:
            check.add(raw, var.name, f'applies_if "{var.applies_if}" cannot be read ({str(exc).rstrip(".")})',
                      "write it like owns_pet = 1 or age >= 18 and smoker in (1, 2)")
            continue
        for ref in cond.names:
            if ref not in position:
                guess = nearest(ref, [n for n in position if position[n] < i])
                hint = f'did you mean "{guess}"? Fix' if guess else "fix"
                check.add(raw, var.name, f'applies_if names "{ref}", which is not in the codebook',
                          f"{hint} the name (names are case-sensitive)")
            elif position[ref] >= i:
                where = "itself" if ref == var.name else "a later variable"
                check.add(raw, var.name, f'applies_if names "{ref}", {where}',
                          "a condition may only use variables that come earlier on the form")
        for ref, op, literals in cond.tests:
            if ref in by_name:
                _check_literals(check, raw, var.name, by_name[ref], op, literals)


def _check_literals(check: _Checker, raw: RawRow, name: str, ref: Variable, op: str,
                    literals: tuple) -> None:
    """Catch literals that can never match: wrong kind, a date not in ISO, an unknown code."""
    for literal in literals:
        shown = _num(literal) if isinstance(literal, float) else f'"{literal}"'
        if ref.type in ("integer", "number") and isinstance(literal, str):
            check.add(raw, name, f'applies_if compares the {ref.type} "{ref.name}" with quoted text '
                      f"{shown}", "write the number without quotes")
        elif ref.type == "date" and not isinstance(literal, str):
            check.add(raw, name, f'applies_if compares the date "{ref.name}" with the number {shown}',
                      'write the date in quotes as "YYYY-MM-DD"')
        elif ref.type == "date" and not _is_iso_date(literal):
            check.add(raw, name, f'applies_if compares the date "{ref.name}" with {shown}',
                      'write the date as "YYYY-MM-DD", whatever the date format on paper')
        elif ref.codes and op in ("=", "!=", "in", "not in"):
            text = _num(literal) if isinstance(literal, float) else literal
            allowed, valid = canonical_series(ref, pd.Series([*ref.code_values, *ref.missing_values],
                                                             dtype=object))
            canon = canonical_series(ref, pd.Series([text], dtype=object))[0].iloc[0]
            # Unreadable codes are reported on their own row; do not pile on here.
            if valid.all() and canon not in set(allowed):
                check.add(raw, name, f'applies_if compares "{ref.name}" with {shown}, which is not '
                          f"one of its codes ({', '.join(ref.code_values)})",
                          "use one of its codes or declared missing codes")


def _is_iso_date(text: str) -> bool:
    try:
        return datetime.strptime(text, "%Y-%m-%d").strftime("%Y-%m-%d") == text
    except ValueError:
        return False


def _settle_scales(check: _Checker, variables, raws) -> list[Variable]:
    """Give every item of a scale the scale's one score method and min_answered."""
    settings: dict[str, dict[str, tuple[object, RawRow]]] = {}
    for var, raw in zip(variables, raws, strict=True):
        score = _text(raw, "score").lower()
        share_text = _text(raw, "min_answered")
        if (score or share_text) and not var.scale:
            column = "score" if score else "min_answered"
            check.add(raw, var.name, f"{column} is set but the variable has no scale",
                      f"name its scale in the scale column, or clear {column}")
            continue
        if not var.scale:
            continue
        mine = settings.setdefault(var.scale, {})
        if score:
            if score not in SCORE_METHODS:
                check.add(raw, var.name, f'score "{score}" is not a way to score a scale',
                          f"write {' or '.join(SCORE_METHODS)}")
            else:
                _agree(check, raw, var, mine, "score", score)
        if share_text:
            share = _share(share_text)
            if share is None:
                check.add(raw, var.name, f'min_answered "{share_text}" is not a share between 0 and 1',
                          "write a share such as 0.8 or 80%")
            else:
                _agree(check, raw, var, mine, "min_answered", share)
    out = []
    for var in variables:
        mine = settings.get(var.scale, {})
        score = mine.get("score", ("mean", None))[0]
        share = mine.get("min_answered", (DEFAULT_MIN_ANSWERED, None))[0]
        out.append(replace(var, score=score, min_answered=share))
    return out


def _agree(check, raw, var, mine, column, value) -> None:
    if column in mine and mine[column][0] != value:
        first_value, first_raw = mine[column]
        check.add(raw, var.name, f"{column} {value} differs from {first_value} set at "
                  f'{_place(first_raw)} for scale "{var.scale}"', "give every item of a scale the same setting, or leave "
                  "all but one blank")
    else:
        mine.setdefault(column, (value, raw))


def _share(text: str) -> float | None:
    t = text.strip()
    percent = t.endswith("%")
    value = _read_number(t.rstrip("%").strip())
    if value is None:
        return None
    if percent:
        value /= 100
    return value if 0 <= value <= 1 else None
