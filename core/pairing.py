"""Suggest the likely partner of a form that is in one pass only.

A form shows up in one pass only when its participant ID was mistyped in one
pass (``132`` keyed as ``123``) or when a form was skipped. The two cases look
alike by ID but not by content: two keyings of one paper agree on nearly every
field, two different papers rarely do. So a candidate partner is scored on
both: the ID's edit distance (an adjacent swap counts as one edit, the
optimal-string-alignment distance from rapidfuzz) and the share of the other
fields whose values agree. The trade-off: every unpaired form of one pass is
compared with every unpaired form of the other (a small set in practice),
field by field as whole columns.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from rapidfuzz.distance import OSA

#: Share of agreeing fields from which two forms are taken to be one paper
#: whatever their IDs (two keyings of one paper typically agree on > 95 %).
SAME_PAPER = 0.9
#: With an ID at most one edit away, this share of agreeing fields suffices.
NEAR_ID_AGREEMENT = 0.6


@dataclass(frozen=True)
class Suggestion:
    """A likely partner for an unpaired form."""

    form: object
    """The partner's form id in the other pass."""
    participant: str
    """The partner's participant ID (canonical; "" when blank)."""
    id_edits: int
    """Edits between the two IDs (an adjacent swap is one)."""
    agreement: float
    """Share (0–1) of the other fields whose values agree."""

    def text(self, other_pass: int) -> str:
        """The suggestion as the resolver reads it in ``detail``."""
        edits = f"{self.id_edits} edit" + ("" if self.id_edits == 1 else "s")
        shown = self.participant or "(blank)"
        return (f'likely the same paper as pass {other_pass} form "{shown}" '
                f"(ID {edits}, {round(100 * self.agreement)}% of fields agree)")


def field_keys(text: pd.DataFrame, state: pd.DataFrame) -> np.ndarray:
    """Comparable keys per cell: state plus trimmed text, so equal keys mean the same entry.

    >>> t = pd.DataFrame({"q": [" 3", ""]}); s = pd.DataFrame({"q": ["keyed", "blank"]})
    >>> field_keys(t, s).tolist()
    [['keyed:3'], ['blank:']]
    """
    st = state.to_numpy(dtype=object)
    tx = text.to_numpy(dtype=object)
    # Unpaired forms are few, so a plain comprehension over their cells is cheap.
    keys = [f"{'none' if s is None or s != s else s}:{'' if t is None or t != t else str(t).strip()}"
            for s, t in zip(st.ravel(), tx.ravel(), strict=True)]
    return np.array(keys, dtype=object).reshape(tx.shape)


def suggest(
    ids_a: pd.Series, keys_a: np.ndarray, ids_b: pd.Series, keys_b: np.ndarray
) -> dict[object, Suggestion]:
    """For each unpaired form of pass A, its likely partner among pass B's, if any.

    ``ids_*`` are the participant IDs indexed by form id; ``keys_*`` the
    matching rows of :func:`field_keys` for the fields other than the ID.
    A partner is suggested when at least :data:`SAME_PAPER` of the fields
    agree, or :data:`NEAR_ID_AGREEMENT` with an ID at most one edit away;
    the best candidate has the most agreeing fields, then the closest ID.

    >>> keys = np.array([["1", "2", "3", "4"]], dtype=object)
    >>> s = suggest(pd.Series(["123"], index=[7]), keys, pd.Series(["132"], index=[9]), keys)
    >>> s[7].form, s[7].id_edits, s[7].agreement
    (9, 1, 1.0)
    """
    out: dict[object, Suggestion] = {}
    if len(ids_a) == 0 or len(ids_b) == 0:
        return out
    agree = _agreement(keys_a, keys_b)
    edits = np.array([[OSA.distance(a, b) for b in ids_b] for a in ids_a], dtype=float)
    ok = (agree >= SAME_PAPER) | ((edits <= 1) & (agree >= NEAR_ID_AGREEMENT))
    score = np.where(ok, agree - 0.001 * edits, -np.inf)
    best = score.argmax(axis=1)
    for i, form in enumerate(ids_a.index):
        j = best[i]
        if np.isfinite(score[i, j]):
            partner = ids_b.index[j]
            partner = partner.item() if hasattr(partner, "item") else partner
            out[form] = Suggestion(partner, ids_b.iloc[j], int(edits[i, j]),
                                   float(agree[i, j]))
    return out


def _agreement(keys_a: np.ndarray, keys_b: np.ndarray) -> np.ndarray:
    """Share of fields agreeing for every pair of rows (fields blank in both do not count)."""
    a, b = len(keys_a), len(keys_b)
    if keys_a.shape[1] == 0:
        return np.zeros((a, b))
    same = np.zeros((a, b))
    counted = np.zeros((a, b))
    empty_a = _empty(keys_a)
    empty_b = _empty(keys_b)
    for c in range(keys_a.shape[1]):  # one whole column of every pair at a time
        eq = keys_a[:, c][:, None] == keys_b[:, c][None, :]
        both_empty = empty_a[:, c][:, None] & empty_b[:, c][None, :]
        same += eq & ~both_empty
        counted += ~both_empty
    return np.divide(same, counted, out=np.zeros((a, b)), where=counted > 0)


def _empty(keys: np.ndarray) -> np.ndarray:
    flat = pd.Series(keys.ravel(), dtype=object)
    return flat.str.startswith(("blank:", "none:")).to_numpy(dtype=bool).reshape(keys.shape)
