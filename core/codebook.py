"""The codebook model: what each variable is and what it allows.

A codebook is a tuple of :class:`Variable` in paper order. It is a plain,
frozen value: loaders (``core.codebook_io``) build it from CSV, XLSX or a
Frictionless Table Schema and validate it; the store keeps it as JSON with its
hash; everything downstream (values, comparison, export) reads it.

Code values are kept as the text written in the codebook (``"1"``, ``"-9"``),
not as numbers: comparison and export parse them with the variable's own type
through ``core.values``, so ``"01"`` and ``"1"`` are the same code of an
integer variable, and a string variable may have codes like ``"m"``.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import asdict, dataclass, field

TYPES = ("integer", "number", "string", "date")

#: How a scale's score is formed from its (reverse-scored) items.
SCORE_METHODS = ("mean", "sum")

#: Share of a scale's items that must be answered for a score. 0.8 is common
#: practice in questionnaire scoring (not a published standard); a codebook
#: may set its own per scale.
DEFAULT_MIN_ANSWERED = 0.8

#: The tabular codebook's columns, in the order they are written out.
COLUMNS = (
    "name",
    "label",
    "type",
    "id",
    "min",
    "max",
    "codes",
    "missing",
    "required",
    "identifying",
    "section",
    "scale",
    "reverse",
    "applies_if",
    "width",
    "format",
    "score",
    "min_answered",
)


@dataclass(frozen=True)
class Code:
    """One allowed code (or declared missing code) and its label."""

    value: str
    """The code as written in the codebook, e.g. ``"2"`` or ``"-9"``."""
    label: str = ""
    """What the code means, e.g. ``"sometimes"``; may be empty."""


@dataclass(frozen=True)
class Variable:
    """One variable (one field on the paper form)."""

    name: str
    """Unique (case-insensitively) identifier: a letter, then letters, digits or ``_``."""
    type: str = "string"
    """One of :data:`TYPES`."""
    label: str = ""
    """The question as a person reads it."""
    is_id: bool = False
    """True for the one participant-ID variable (the codebook's ``id`` column)."""
    min: float | None = None
    """Smallest allowed value (numbers and integers); None means no lower bound."""
    max: float | None = None
    """Largest allowed value; None means no upper bound."""
    codes: tuple[Code, ...] = ()
    """Allowed codes; empty means any value of the type (within min/max)."""
    missing: tuple[Code, ...] = ()
    """Declared missing codes (e.g. -9 = refused); always allowed, never counted as data."""
    required: bool = False
    """A blank on paper is a discrepancy to check when True."""
    identifying: bool = False
    """Identifying information: never written to the analysis file."""
    section: str = ""
    """Page or part of the paper form; groups fields on the keying screen."""
    scale: str = ""
    """Name of the multi-item scale this item belongs to; empty for none."""
    reverse: bool = False
    """Reverse-keyed scale item, scored as (min + max - x)."""
    applies_if: str = ""
    """Condition over earlier variables (``owns_pet = 1``); when false the field must be blank."""
    width: int | None = None
    """Characters after which keying auto-advances; None means implied by codes/range, if any."""
    format: str = ""
    """Date format in strftime notation (``%d.%m.%Y``); empty means ISO 8601 ``%Y-%m-%d``."""
    score: str = "mean"
    """How this item's scale is scored: ``"mean"`` or ``"sum"`` of its items (same for every item of a scale)."""
    min_answered: float = DEFAULT_MIN_ANSWERED
    """Share (0-1) of the scale's items that must be answered for a score, else the score is missing.

    With ``"sum"``, a score with some items unanswered is prorated (the mean
    of the answered items times the number of items)."""
    row: int | None = field(default=None, compare=False)
    """Row of the variable in its source file (header is row 1), for messages; None if unknown.

    Not part of the variable's identity: the same codebook read from CSV and
    from Table Schema compares equal."""

    @property
    def code_values(self) -> tuple[str, ...]:
        """The allowed codes' texts, in codebook order."""
        return tuple(c.value for c in self.codes)

    @property
    def missing_values(self) -> tuple[str, ...]:
        """The declared missing codes' texts, in codebook order."""
        return tuple(c.value for c in self.missing)

    def label_of(self, value: str) -> str:
        """The label of a code or missing code written as ``value``; empty if none.

        >>> Variable("q1", "integer", codes=(Code("1", "never"),)).label_of("1")
        'never'
        """
        for code in (*self.codes, *self.missing):
            if code.value == value:
                return code.label
        return ""

    @property
    def implied_width(self) -> int | None:
        """Characters a complete entry has: ``width``, else the longest code or bound.

        Only integer variables imply a width (``1..5`` -> 1, codes ``1..12`` ->
        None because both 1 and 2 characters are complete entries).
        """
        if self.width:
            return self.width
        if self.type != "integer":
            return None
        texts = [c.value for c in self.codes] + [c.value for c in self.missing]
        if not texts and self.min is not None and self.max is not None:
            texts = [str(int(self.min)), str(int(self.max))]
        lengths = {len(t) for t in texts}
        return lengths.pop() if len(lengths) == 1 else None


@dataclass(frozen=True)
class Codebook:
    """The variables of a study, in paper order."""

    variables: tuple[Variable, ...]
    source: str = field(default="", compare=False)
    """Where it was read from (a path), for messages; not part of its identity."""

    def __post_init__(self) -> None:
        object.__setattr__(self, "_by_name", {v.name: v for v in self.variables})

    def __len__(self) -> int:
        return len(self.variables)

    def __iter__(self):
        return iter(self.variables)

    def __contains__(self, name: object) -> bool:
        return name in self._by_name  # type: ignore[attr-defined]

    def __getitem__(self, name: str) -> Variable:
        return self._by_name[name]  # type: ignore[attr-defined]

    @property
    def names(self) -> list[str]:
        """Variable names in paper order."""
        return [v.name for v in self.variables]

    @property
    def id_variable(self) -> Variable:
        """The participant-ID variable (a valid codebook has exactly one)."""
        for v in self.variables:
            if v.is_id:
                return v
        raise KeyError("the codebook has no ID variable")

    @property
    def scales(self) -> dict[str, tuple[Variable, ...]]:
        """Multi-item scales: scale name -> its items in paper order, scales in order of first item.

        >>> cb = Codebook((Variable("id", is_id=True), Variable("q1", "integer", scale="calm"),
        ...                Variable("q2", "integer", scale="calm")))
        >>> [v.name for v in cb.scales["calm"]]
        ['q1', 'q2']
        """
        out: dict[str, list[Variable]] = {}
        for v in self.variables:
            if v.scale:
                out.setdefault(v.scale, []).append(v)
        return {name: tuple(items) for name, items in out.items()}

    @property
    def identifying_names(self) -> list[str]:
        """Names of identifying variables (kept out of the analysis file)."""
        return [v.name for v in self.variables if v.identifying]

    def to_dict(self) -> dict:
        """A JSON-ready dict (what the store keeps); :meth:`from_dict` reverses it."""
        return {"variables": [_variable_dict(v) for v in self.variables]}

    @classmethod
    def from_dict(cls, data: dict, source: str = "") -> Codebook:
        """Rebuild a codebook written by :meth:`to_dict`."""
        variables = []
        for d in data["variables"]:
            d = dict(d)
            d["codes"] = tuple(Code(**c) for c in d.get("codes", ()))
            d["missing"] = tuple(Code(**c) for c in d.get("missing", ()))
            variables.append(Variable(**d))
        return cls(tuple(variables), source=source)

    def to_json(self) -> str:
        """Canonical JSON (sorted keys, no row numbers): equal codebooks give equal text."""
        data = self.to_dict()
        for d in data["variables"]:
            d.pop("row", None)
        return json.dumps(data, sort_keys=True, ensure_ascii=False, separators=(",", ":"))

    @property
    def hash(self) -> str:
        """SHA-256 of :meth:`to_json`, hex; identifies the codebook a study was keyed with."""
        return hashlib.sha256(self.to_json().encode("utf-8")).hexdigest()


def _variable_dict(v: Variable) -> dict:
    d = asdict(v)
    d["codes"] = [asdict(c) for c in v.codes]
    d["missing"] = [asdict(c) for c in v.missing]
    return d
