"""The computed scale score columns of the verified file, and how each was computed.

After the codebook's variables, the verified file carries one score per
scale, computed by :func:`core.screening.scale_scores` from the verified
items, never keyed: named after the scale, or ``<scale>_score`` when a
variable already has that name. :class:`ScoreColumn` holds the rule in
words for the Table Schema's ``description``, the XLSX codebook sheet and
the report. :mod:`core.export` re-exports these names.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import pandas as pd

from .codebook import Codebook, Variable


@dataclass(frozen=True)
class ScoreColumn:
    """One computed scale score column of the verified file and how it was computed."""

    name: str
    """The column's name in the file."""
    scale: str
    items: tuple[str, ...]
    reversed: tuple[str, ...]
    """Reverse-keyed items, with their scoring, e.g. ``belong3 (1 + 5 - x)``."""
    method: str
    """``sum`` or ``mean``."""
    min_answered: float
    prorated: int
    too_few: int
    partial: int = 0
    """Scores formed from some but not all items (for a sum, the prorated ones)."""

    @property
    def rule(self) -> str:
        """The rule in words, for the Table Schema description and the XLSX codebook sheet."""
        k = len(self.items)
        need = math.ceil(self.min_answered * k - 1e-9)
        how = "sum" if self.method == "sum" else "mean"
        parts = [f"Computed by keyproof, not keyed: the {how} of the {k} items of scale "
                 f"{self.scale} ({', '.join(self.items)})"]
        if self.reversed:
            parts.append("reverse-keyed items scored as min + max - x: " + ", ".join(self.reversed))
        parts.append("declared missing codes left out")
        parts.append(f"missing when fewer than {self.min_answered:.0%} of the items ({need} of "
                     f"{k}) are answered: {self.too_few} participant(s)")
        if how == "sum":
            parts.append(f"a sum with items unanswered is prorated (sum x {k} / answered): "
                         f"{self.prorated} score(s) prorated")
        else:
            parts.append(f"a mean is taken over the answered items: {self.partial} score(s) "
                         "from fewer than all items")
        return "; ".join(parts) + "."

    def as_dict(self) -> dict:
        return {**asdict(self), "rule": self.rule}


def score_names(codebook: Codebook) -> dict[str, str]:
    """Scale -> its score column: the scale's name, or ``<scale>_score`` if a variable has it.

    Names are compared case-insensitively, as spreadsheets and statistics
    programs do.

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True), Variable("calm", "integer", scale="calm"),
    ...                Variable("a1", "integer", scale="A")))
    >>> score_names(cb)
    {'calm': 'calm_score', 'A': 'A'}
    """
    taken = {v.name.casefold() for v in codebook}
    names = {}
    for scale in codebook.scales:
        name, n = scale, 1
        while name.casefold() in taken:
            name = f"{scale}_score" + (str(n) if n > 1 else "")
            n += 1
        taken.add(name.casefold())
        names[scale] = name
    return names


def score_columns(data: pd.DataFrame, codebook: Codebook) -> tuple[pd.DataFrame, tuple[ScoreColumn, ...]]:
    """The scale scores of ``data`` as columns (same index), and how each was computed.

    Scored by :func:`core.screening.scale_scores` (reverse keys, sum or mean,
    the minimum answered share; declared missing codes left out); NaN where
    too few items were answered.

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("pid", is_id=True),
    ...                Variable("a1", "integer", min=1, max=5, scale="A"),
    ...                Variable("a2", "integer", min=1, max=5, scale="A", reverse=True)))
    >>> table, cols = score_columns(pd.DataFrame({"pid": ["1"], "a1": [4], "a2": [2]}), cb)
    >>> table["A"].tolist(), cols[0].reversed
    ([4.0], ('a2 (1 + 5 - x)',))
    """
    from .screening import scale_scores

    names = score_names(codebook)
    if not names:
        return pd.DataFrame(index=data.index), ()
    scored = scale_scores(data, codebook)
    table = scored.scores[list(names)].rename(columns=names)
    columns = tuple(
        ScoreColumn(
            names[scale], scale, tuple(v.name for v in items),
            tuple(f"{v.name} ({_reverse_text(v)})" for v in items if v.reverse),
            scored.method[scale], scored.min_answered[scale],
            scored.prorated[scale], scored.too_few[scale],
            partial_scores(scored.items[scale], scored.scores[scale]),
        )
        for scale, items in codebook.scales.items()
    )
    return table, columns


def partial_scores(items: pd.DataFrame, score: pd.Series) -> int:
    """How many scores stand although some of their items were not answered.

    >>> partial_scores(pd.DataFrame({"a": [1, None, None], "b": [2, 3, None]}),
    ...                pd.Series([1.5, 3.0, None]))
    1
    """
    return int((items.isna().any(axis=1) & score.notna()).sum())


def _reverse_text(var: Variable) -> str:
    if var.min is not None and var.max is not None:
        return f"{_number_text(var.min)} + {_number_text(var.max)} - x"
    return "lowest + highest code - x"


def _number_text(x: float | None) -> str:
    if x is None:
        return ""
    return str(int(x)) if float(x).is_integer() else repr(float(x))
