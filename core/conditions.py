"""``applies_if``: a small condition language over earlier variables.

A codebook's ``applies_if`` column says when a field is asked at all
(``owns_pet = 1``, ``age >= 18 and smoker in (1, 2)``); when the condition is
false the field must be blank. This module parses such a text once into a
:class:`Condition` and evaluates it either over a whole DataFrame (vectorised,
for comparison and screening) or over one form's values (for the keying
screen). It is a hand-written tokenizer and recursive-descent parser: the text
is never handed to ``eval``.

Grammar (keywords are case-insensitive)::

    condition  := or_expr
    or_expr    := and_expr ("or" and_expr)*
    and_expr   := not_expr ("and" not_expr)*
    not_expr   := "not" not_expr | "(" or_expr ")" | test
    test       := NAME op value
                | NAME ["not"] "in" "(" value ("," value)* ")"
                | NAME "is" ["not"] "blank"
    op         := "=" | "!=" | "<" | "<=" | ">" | ">="
    value      := NUMBER | "quoted text" | 'quoted text'

How values meet literals (the same rule in both evaluators):

- A **number** literal compares with the field as a number: integers and
  numbers directly; a text field is read as a number (point or comma decimal,
  as ``core.values`` does) and a text that is not a number compares false.
- A **quoted** literal compares with the field as text: strings as they are,
  numbers as Python writes them (``7``, ``3.5``), dates as ISO ``YYYY-MM-DD``,
  so ``visit >= "2024-01-01"`` orders dates correctly.
- **Blank** (None, NaN, NA, or text that is empty after trimming): every
  comparison with a blank variable is false, whatever the operator, ``!=`` and
  ``not in`` included, so a question that depends on an unanswered one is not
  asked. ``not`` flips the result as plain logic (``not (x = 1)`` is true when
  ``x`` is blank); ``x is blank`` / ``x is not blank`` test for blank directly.
- Declared missing codes are values like any other here (``smoker = -9`` is
  true for a refusal); callers that want them treated as blank blank them first.

The trade-off: no arithmetic and no comparing two variables with each other,
which keeps the language small enough to read at a glance in a spreadsheet.
"""

from __future__ import annotations

import math
import operator
import re
from dataclasses import dataclass, field
from datetime import date, datetime

import numpy as np
import pandas as pd

__all__ = ["Condition", "parse_condition", "KEYWORDS"]

#: Words with a meaning in conditions; they cannot be used as variable names in one.
KEYWORDS = frozenset({"and", "or", "not", "in", "is", "blank"})

_OPS = {
    "=": operator.eq,
    "!=": operator.ne,
    "<": operator.lt,
    "<=": operator.le,
    ">": operator.gt,
    ">=": operator.ge,
}

_TOKEN = re.compile(
    r"""
    (?P<space>\s+)
  | (?P<number>[+-]?(?:\d+(?:\.\d*)?|\.\d+))
  | (?P<string>"[^"]*"|'[^']*')
  | (?P<name>[A-Za-z_][A-Za-z0-9_]*)
  | (?P<op><=|>=|!=|=|<|>)
  | (?P<punct>[(),])
    """,
    re.VERBOSE,
)

# Same reading of a text as a number as core.values uses for number fields.
_NUMBER_TEXT = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)$")


# --------------------------------------------------------------------------- tree


@dataclass(frozen=True)
class _Literal:
    value: float | str
    """A float for a number literal, a str for a quoted one."""

    def __str__(self) -> str:
        if isinstance(self.value, str):
            quote = "'" if '"' in self.value else '"'
            return f"{quote}{self.value}{quote}"
        v = self.value
        return str(int(v)) if float(v).is_integer() else repr(v)


@dataclass(frozen=True)
class _Compare:
    name: str
    op: str
    literal: _Literal

    def __str__(self) -> str:
        return f"{self.name} {self.op} {self.literal}"


@dataclass(frozen=True)
class _In:
    name: str
    literals: tuple[_Literal, ...]
    negate: bool = False

    def __str__(self) -> str:
        inner = ", ".join(str(x) for x in self.literals)
        return f"{self.name} {'not in' if self.negate else 'in'} ({inner})"


@dataclass(frozen=True)
class _IsBlank:
    name: str
    negate: bool = False

    def __str__(self) -> str:
        return f"{self.name} is {'not blank' if self.negate else 'blank'}"


@dataclass(frozen=True)
class _Not:
    inner: object

    def __str__(self) -> str:
        return f"not ({self.inner})"


@dataclass(frozen=True)
class _Junction:
    word: str  # "and" or "or"
    parts: tuple

    def __str__(self) -> str:
        return f" {self.word} ".join(f"({p})" if isinstance(p, _Junction) else str(p)
                                     for p in self.parts)


@dataclass(frozen=True)
class _Always:
    def __str__(self) -> str:
        return ""


# --------------------------------------------------------------------------- parsing


@dataclass(frozen=True)
class _Token:
    kind: str  # number, string, name, keyword, op, punct, end
    text: str
    pos: int


def _tokenize(text: str) -> list[_Token]:
    tokens: list[_Token] = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m:
            ch = text[pos]
            if ch in "\"'":
                raise ValueError(f"the quote at position {pos + 1} is never closed; add the closing {ch}.")
            if text.startswith("==", pos):
                raise ValueError(f'"==" at position {pos + 1}: write a single "=" for equality.')
            raise ValueError(f"unexpected character {ch!r} at position {pos + 1}; "
                             "use names, numbers, quoted text, = != < <= > >=, and, or, not, in, parentheses.")
        kind = m.lastgroup or ""
        if kind == "op" and text.startswith("==", pos):
            raise ValueError(f'"==" at position {pos + 1}: write a single "=" for equality.')
        if kind == "number" and tokens and tokens[-1].kind in ("name", "number", "string") \
                and m.group()[0] in "+-":
            raise ValueError(f"unexpected {m.group()[0]!r} at position {pos + 1}; "
                             "conditions have no arithmetic.")
        if kind != "space":
            tok_text = m.group()
            if kind == "name" and tok_text.lower() in KEYWORDS:
                kind, tok_text = "keyword", tok_text.lower()
            tokens.append(_Token(kind, tok_text, pos + 1))
        pos = m.end()
    tokens.append(_Token("end", "", len(text) + 1))
    return tokens


class _Parser:
    def __init__(self, text: str):
        self.tokens = _tokenize(text)
        self.i = 0

    @property
    def tok(self) -> _Token:
        return self.tokens[self.i]

    def take(self) -> _Token:
        tok = self.tokens[self.i]
        self.i += 1
        return tok

    def at(self, kind: str, text: str | None = None) -> bool:
        tok = self.tok
        return tok.kind == kind and (text is None or tok.text == text)

    def fail(self, expected: str):
        tok = self.tok
        found = "the end" if tok.kind == "end" else f"{tok.text!r} at position {tok.pos}"
        raise ValueError(f"expected {expected} but found {found}.")

    def parse(self):
        node = self.or_expr()
        if not self.at("end"):
            self.fail('"and", "or" or the end')
        return node

    def or_expr(self):
        parts = [self.and_expr()]
        while self.at("keyword", "or"):
            self.take()
            parts.append(self.and_expr())
        return parts[0] if len(parts) == 1 else _Junction("or", tuple(parts))

    def and_expr(self):
        parts = [self.not_expr()]
        while self.at("keyword", "and"):
            self.take()
            parts.append(self.not_expr())
        return parts[0] if len(parts) == 1 else _Junction("and", tuple(parts))

    def not_expr(self):
        if self.at("keyword", "not"):
            self.take()
            return _Not(self.not_expr())
        if self.at("punct", "("):
            self.take()
            node = self.or_expr()
            if not self.at("punct", ")"):
                self.fail('")"')
            self.take()
            return node
        return self.test()

    def test(self):
        if not self.at("name"):
            self.fail("a variable name")
        name = self.take().text
        if self.at("op"):
            op = self.take().text
            return _Compare(name, op, self.value(f'"{op}"'))
        if self.at("keyword", "is"):
            self.take()
            negate = self.at("keyword", "not")
            if negate:
                self.take()
            if not self.at("keyword", "blank"):
                self.fail('"blank" after "is"')
            self.take()
            return _IsBlank(name, negate)
        negate = self.at("keyword", "not")
        if negate:
            self.take()
        if self.at("keyword", "in"):
            self.take()
            return _In(name, self.value_list(), negate)
        self.fail(f'a comparison (= != < <= > >=), "in", or "is blank" after {name!r}')

    def value_list(self) -> tuple[_Literal, ...]:
        if not self.at("punct", "("):
            self.fail('"(" to open the list after "in"')
        self.take()
        values = [self.value('"("')]
        while self.at("punct", ","):
            self.take()
            values.append(self.value('","'))
        if not self.at("punct", ")"):
            self.fail('"," or ")" in the list')
        self.take()
        return tuple(values)

    def value(self, after: str) -> _Literal:
        if self.at("number"):
            return _Literal(float(self.take().text))
        if self.at("string"):
            return _Literal(self.take().text[1:-1])
        self.fail(f"a number or quoted text after {after}")


def parse_condition(text: str) -> Condition:
    """Parse an ``applies_if`` text; an empty text gives a condition that is always true.

    Raises ``ValueError`` with a one-sentence reason (position counted from 1)
    when the text does not follow the grammar in this module's docstring.

    >>> c = parse_condition("age >= 18 and smoker in (1, 2)")
    >>> c.names
    ('age', 'smoker')
    >>> c.evaluate_one({"age": 30, "smoker": 2})
    True
    >>> parse_condition("age >")
    Traceback (most recent call last):
    ...
    ValueError: expected a number or quoted text after ">" but found the end.
    """
    text = "" if text is None else str(text)
    if not text.strip():
        return Condition("", _Always())
    return Condition(text.strip(), _Parser(text).parse())


# --------------------------------------------------------------------------- condition


@dataclass(frozen=True)
class Condition:
    """A parsed ``applies_if`` condition; build it with :func:`parse_condition`."""

    text: str
    """The condition as written (trimmed); empty for "always applies"."""
    tree: object = field(repr=False)

    @property
    def always(self) -> bool:
        """True for the empty condition (the field always applies)."""
        return isinstance(self.tree, _Always)

    @property
    def names(self) -> tuple[str, ...]:
        """The variables the condition refers to, in order of first mention."""
        seen: dict[str, None] = {}
        for node in _walk(self.tree):
            if isinstance(node, _Compare | _In | _IsBlank):
                seen.setdefault(node.name, None)
        return tuple(seen)

    @property
    def tests(self) -> tuple[tuple[str, str, tuple[float | str, ...]], ...]:
        """``(variable, operator, literals)`` of every comparison; ``in`` and ``not in`` included.

        >>> parse_condition("pet = 1 and kind not in ('cat', 'dog')").tests
        (('pet', '=', (1.0,)), ('kind', 'not in', ('cat', 'dog')))
        """
        out = []
        for node in _walk(self.tree):
            if isinstance(node, _Compare):
                out.append((node.name, node.op, (node.literal.value,)))
            elif isinstance(node, _In):
                out.append((node.name, "not in" if node.negate else "in",
                            tuple(lit.value for lit in node.literals)))
        return tuple(out)

    def __str__(self) -> str:
        return str(self.tree)

    def evaluate(self, frame: pd.DataFrame) -> pd.Series:
        """True where the condition holds, one bool per row of ``frame``, vectorised.

        ``frame`` holds typed values (Int64 / Float64 / string / datetime64 or
        plain object columns) with at least the columns in :attr:`names`; a
        missing column raises ``KeyError``.

        >>> frame = pd.DataFrame({"pet": [1, 2, None]})
        >>> parse_condition("pet = 1").evaluate(frame).tolist()
        [True, False, False]
        >>> parse_condition("pet != 1").evaluate(frame).tolist()
        [False, True, False]
        """
        missing = [n for n in self.names if n not in frame.columns]
        if missing:
            raise KeyError(f"the condition {self.text!r} needs column(s) {', '.join(missing)}")
        cache: dict[tuple[str, str], pd.Series] = {}
        result = _eval_frame(self.tree, frame, cache)
        return result.astype(bool).rename(None)

    def evaluate_one(self, values: dict) -> bool:
        """Whether the condition holds for one form's ``values`` (name -> typed value).

        A name absent from ``values`` counts as blank, so the keying screen
        can ask before the referenced field is keyed.

        >>> parse_condition("owns_pet = 1").evaluate_one({"owns_pet": 1})
        True
        >>> parse_condition("owns_pet = 1").evaluate_one({})
        False
        """
        return bool(_eval_one(self.tree, values))


def _walk(node):
    yield node
    if isinstance(node, _Not):
        yield from _walk(node.inner)
    elif isinstance(node, _Junction):
        for part in node.parts:
            yield from _walk(part)


# --------------------------------------------------------------------------- vectorised


def _kind(col: pd.Series) -> str:
    """How a column is read: ``datetime``, ``numeric``, ``text`` or (rarely) ``mixed``."""
    if pd.api.types.is_datetime64_any_dtype(col):
        return "datetime"
    if pd.api.types.is_bool_dtype(col):
        return "mixed"  # True/False are not numbers here; read cell by cell like evaluate_one
    if pd.api.types.is_numeric_dtype(col):
        return "numeric"
    inferred = pd.api.types.infer_dtype(col, skipna=True)
    return "text" if inferred in ("string", "empty") else "mixed"


def _per_value(col: pd.Series, fn, na, dtype) -> pd.Series:
    """``fn`` applied once per distinct value of a text column, then spread back in C.

    Keyed columns repeat a few values (codes, ages) many times, so this costs
    a hash pass plus one Python call per distinct value, not per cell, and it
    reads each value exactly as the one-form evaluator does.
    """
    codes, uniques = pd.factorize(col.astype(object), use_na_sentinel=True)
    values = np.array([fn(u) for u in uniques] + [na], dtype=dtype)
    return pd.Series(values[codes], index=col.index)  # code -1 picks the trailing ``na``


def _blank_series(col: pd.Series) -> pd.Series:
    kind = _kind(col)
    if kind in ("numeric", "datetime"):
        return col.isna().astype(bool)
    if kind == "text":
        return _per_value(col, _is_blank_one, True, bool)
    # Mixed Python objects (a frame built from typed dicts): one call per cell, rare and
    # small; factorizing would merge 1, 1.0 and True, which read differently as text.
    return col.map(_is_blank_one, na_action=None).astype(bool)


def _numbers(col: pd.Series) -> pd.Series:
    """The column as float64; NaN where blank or not a number."""
    kind = _kind(col)
    if kind == "numeric":
        return col.astype("Float64").astype("float64")
    if kind == "datetime":
        return pd.Series(math.nan, index=col.index, dtype="float64")
    to_float = lambda v: math.nan if (n := _number_one(v)) is None else n  # noqa: E731
    if kind == "text":
        return _per_value(col, to_float, math.nan, "float64")
    return col.map(to_float).astype("float64")


def _texts(col: pd.Series) -> pd.Series:
    """The column as text (object of str, None where blank), as :func:`_text_one` writes it."""
    kind = _kind(col)
    present = col.notna()
    if kind == "datetime":
        return col.dt.strftime("%Y-%m-%d").astype(object).where(present, None)
    if kind == "numeric":
        # pandas writes floats as Python's str() does (shortest repr), ints without ".0".
        return col.astype(str).astype(object).where(present, None)
    if kind == "text":
        return col.astype(object).where(present, None)
    return col.map(_text_one, na_action="ignore").astype(object).where(present, None)


def _column(frame: pd.DataFrame, name: str, kind: str, cache: dict) -> pd.Series:
    key = (name, kind)
    if key not in cache:
        col = frame[name]
        if kind == "blank":
            cache[key] = _blank_series(col)
        elif kind == "number":
            cache[key] = _numbers(col)
        else:
            cache[key] = _texts(col)
    return cache[key]


def _compare_series(frame, name, op, literal: _Literal, cache) -> pd.Series:
    blank = _column(frame, name, "blank", cache)
    if isinstance(literal.value, str):
        values = _column(frame, name, "text", cache)
        usable = ~blank & values.notna()
        result = pd.Series(False, index=frame.index)
        if usable.any():
            result[usable] = _OPS[op](values[usable].astype(str), literal.value)
        return result
    numbers = _column(frame, name, "number", cache)
    usable = ~blank & numbers.notna()
    return (_OPS[op](numbers, literal.value) & usable).astype(bool)


def _eval_frame(node, frame: pd.DataFrame, cache: dict) -> pd.Series:
    if isinstance(node, _Always):
        return pd.Series(True, index=frame.index)
    if isinstance(node, _Compare):
        return _compare_series(frame, node.name, node.op, node.literal, cache)
    if isinstance(node, _In):
        hit = pd.Series(False, index=frame.index)
        for lit in node.literals:
            hit = hit | _compare_series(frame, node.name, "=", lit, cache)
        if not node.negate:
            return hit
        # "not in" is false on blank, like every comparison.
        return ~hit & ~_column(frame, node.name, "blank", cache)
    if isinstance(node, _IsBlank):
        blank = _column(frame, node.name, "blank", cache)
        return ~blank if node.negate else blank.copy()
    if isinstance(node, _Not):
        return ~_eval_frame(node.inner, frame, cache)
    if isinstance(node, _Junction):
        parts = [_eval_frame(p, frame, cache) for p in node.parts]
        out = parts[0]
        for p in parts[1:]:
            out = (out & p) if node.word == "and" else (out | p)
        return out
    raise TypeError(f"unknown condition node {node!r}")  # pragma: no cover


# --------------------------------------------------------------------------- one form


def _is_blank_one(v) -> bool:
    if v is None or v is pd.NA or v is pd.NaT:
        return True
    if isinstance(v, float) and math.isnan(v):
        return True
    if isinstance(v, str):
        return v.strip() == ""
    return False


def _number_one(v) -> float | None:
    if isinstance(v, bool) or isinstance(v, date | datetime | pd.Timestamp):
        return None
    if isinstance(v, int | float):
        return float(v)
    if isinstance(v, str):
        t = v.strip()
        return float(t.replace(",", ".")) if _NUMBER_TEXT.match(t) else None
    try:  # numpy scalars
        return float(v)
    except (TypeError, ValueError):
        return None


def _text_one(v) -> str:
    if isinstance(v, pd.Timestamp | datetime):
        return v.strftime("%Y-%m-%d")
    if isinstance(v, date):
        return v.isoformat()
    if hasattr(v, "item") and not isinstance(v, str):  # numpy scalars -> Python
        return _text_one(v.item())
    return str(v)


def _compare_one(value, op: str, literal: _Literal) -> bool:
    if _is_blank_one(value):
        return False
    if isinstance(literal.value, str):
        return _OPS[op](_text_one(value), literal.value)
    number = _number_one(value)
    return number is not None and _OPS[op](number, literal.value)


def _eval_one(node, values: dict) -> bool:
    if isinstance(node, _Always):
        return True
    if isinstance(node, _Compare):
        return _compare_one(values.get(node.name), node.op, node.literal)
    if isinstance(node, _In):
        value = values.get(node.name)
        hit = any(_compare_one(value, "=", lit) for lit in node.literals)
        return (not hit and not _is_blank_one(value)) if node.negate else hit
    if isinstance(node, _IsBlank):
        blank = _is_blank_one(values.get(node.name))
        return not blank if node.negate else blank
    if isinstance(node, _Not):
        return not _eval_one(node.inner, values)
    if isinstance(node, _Junction):
        if node.word == "and":
            return all(_eval_one(p, values) for p in node.parts)
        return any(_eval_one(p, values) for p in node.parts)
    raise TypeError(f"unknown condition node {node!r}")  # pragma: no cover
