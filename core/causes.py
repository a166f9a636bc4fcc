"""The likely keying slip behind each disagreement between two passes.

A cause is a hint for the resolver, not a verdict: both passes are checked
against the paper anyway. The classes come from DESIGN.md; each mismatch gets
the first that fits, in this order (so every mismatch gets exactly one):

1. ``field_shift`` — a run of three or more consecutive fields of one form
   where one pass equals the other moved along by one field (a skipped or a
   doubled field); every disagreeing cell of the run gets it, and so does the
   disagreeing cell just after the run when the pass that ran ahead left it
   blank (the end of the page it ran out of).
2. ``omitted`` — a value in one pass, blank (or not keyed yet) in the other.
3. ``case_space`` — the texts differ only in letter case or spaces.
4. ``sign`` — numbers equal but for their sign.
5. ``decimal_shift`` — numbers that differ by a power of ten (``29.4`` and
   ``294``); also an extra or missing trailing zero of an integer, because
   the resolver's question is the same: where does the point go?
6. ``transposed`` — two adjacent characters swapped (``83`` and ``38``).
7. ``neighbour_key`` — one character replaced by a key next to it (sharing an
   edge, diagonals excluded) on the numeric keypad or on the top digit row::

       numeric keypad        top row
         7 8 9               1 2 3 4 5 6 7 8 9 0 -
         4 5 6
         1 2 3
         0 0 .               (the wide 0 touches 1 and 2; "." also as ",")

8. ``extra_char`` / ``dropped_char`` — the texts differ by one character
   inserted in one of them. A character doubling its neighbour (``1`` and
   ``11``) is ``extra_char``; otherwise, when the variable has a width, the
   text longer than the width has an extra character and the one shorter has
   dropped one; failing that the shorter text is taken to have dropped it.
   Which pass is which never matters, so swapping the passes keeps the cause.
9. ``other`` — anything else (including illegible against a value).

The trade-off: field shifts are found by whole-frame comparison of shifted
columns (vectorised); the character classes use rapidfuzz's edit operations,
one call per disagreeing pair — never per cell of a pass.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from rapidfuzz.distance import Levenshtein

CAUSES = (
    "transposed",
    "neighbour_key",
    "dropped_char",
    "extra_char",
    "decimal_shift",
    "sign",
    "field_shift",
    "case_space",
    "omitted",
    "other",
)

_KEYPAD = ["789", "456", "123", "00."]
_TOP_ROW = "1234567890-"


def _neighbour_pairs() -> frozenset[frozenset[str]]:
    pairs: set[frozenset[str]] = set()
    for r, row in enumerate(_KEYPAD):
        for c, key in enumerate(row):
            for rr, cc in ((r, c + 1), (r + 1, c)):
                if rr < len(_KEYPAD) and cc < len(_KEYPAD[rr]) and _KEYPAD[rr][cc] != key:
                    pairs.add(frozenset((key, _KEYPAD[rr][cc])))
    for a, b in zip(_TOP_ROW, _TOP_ROW[1:], strict=False):
        pairs.add(frozenset((a, b)))
    # Keypads in decimal-comma countries print "," where others print ".".
    pairs |= {frozenset((",", other)) for p in list(pairs) if "." in p for other in p - {"."}}
    return frozenset(pairs)


#: Unordered pairs of keys that share an edge on the keypad or the top digit row.
NEIGHBOURS = _neighbour_pairs()


def are_neighbours(a: str, b: str) -> bool:
    """True when keys ``a`` and ``b`` touch on the numeric keypad or the top digit row.

    >>> are_neighbours("5", "8"), are_neighbours("1", "3")
    (True, False)
    """
    return frozenset((a, b)) in NEIGHBOURS


def text_cause(a: str, b: str, width: int | None = None) -> str:
    """The character-level cause for two different keyed texts (no number rules).

    >>> text_cause("83", "38"), text_cause("2", "3"), text_cause("1", "11"), text_cause("27", "2")
    ('transposed', 'neighbour_key', 'extra_char', 'dropped_char')
    """
    if a == b:
        return "other"
    if len(a) == len(b):
        diff = [i for i, (x, y) in enumerate(zip(a, b, strict=True)) if x != y]
        if len(diff) == 2 and diff[1] == diff[0] + 1 and a[diff[0]] == b[diff[1]] \
                and a[diff[1]] == b[diff[0]]:
            return "transposed"
        if len(diff) == 1 and are_neighbours(a[diff[0]], b[diff[0]]):
            return "neighbour_key"
        return "other"
    if abs(len(a) - len(b)) != 1:
        return "other"
    longer, shorter = (a, b) if len(a) > len(b) else (b, a)
    ops = Levenshtein.editops(longer, shorter)
    if len(ops) != 1 or ops[0].tag != "delete":
        return "other"
    pos = ops[0].src_pos
    ch = longer[pos]
    # A run of equal characters makes the position ambiguous; any member doubles.
    if (pos > 0 and longer[pos - 1] == ch) or (pos + 1 < len(longer) and longer[pos + 1] == ch):
        return "extra_char"
    if width:
        if len(longer) > width:
            return "extra_char"
        if len(shorter) < width:
            return "dropped_char"
    return "dropped_char"


def _number(text: str) -> float | None:
    t = text.strip().replace(",", ".")
    try:
        x = float(t)
    except ValueError:
        return None
    return x if math.isfinite(x) else None


def number_cause(a: str, b: str) -> str:
    """``sign`` or ``decimal_shift`` for two numeric texts that differ, else "".

    >>> number_cause("-5", "5"), number_cause("29.4", "294"), number_cause("3", "4")
    ('sign', 'decimal_shift', '')
    """
    x, y = _number(a), _number(b)
    if x is None or y is None or x == y:
        return ""
    if x == -y:
        return "sign"
    if x == 0 or y == 0 or (x < 0) != (y < 0):
        return ""
    k = math.log10(abs(x) / abs(y))
    if round(k) != 0 and abs(k - round(k)) < 1e-9:
        return "decimal_shift"
    return ""


def classify(
    text1: pd.Series,
    text2: pd.Series,
    keyed1: pd.Series,
    keyed2: pd.Series,
    absent1: pd.Series,
    absent2: pd.Series,
    numeric: pd.Series,
    width: pd.Series | None = None,
    shift: pd.Series | None = None,
) -> pd.Series:
    """The cause of each disagreement, one per row of the aligned inputs.

    ``text1``/``text2`` are the trimmed keyed texts (any text where not keyed),
    ``keyed*`` say a value was keyed, ``absent*`` that the field is blank or
    not keyed yet (illegible is neither), ``numeric`` marks integer and number
    variables, ``width`` the variable's width (0 for none) and ``shift`` the
    cells already found in a field shift (:func:`field_shift_cells`).

    >>> t = lambda *v: pd.Series(list(v))
    >>> classify(t("83", "4"), t("38", ""), t(True, True), t(True, False),
    ...          t(False, False), t(False, True), t(True, True)).tolist()
    ['transposed', 'omitted']
    """
    index = text1.index
    n = len(index)
    flags = [np.asarray(x, dtype=bool).tolist()
             for x in (keyed1, keyed2, absent1, absent2, numeric)]
    widths = [0] * n if width is None else np.asarray(width, dtype=np.int64).tolist()
    shifted = [False] * n if shift is None else np.asarray(shift, dtype=bool).tolist()
    # One plain loop over the disagreements (never over a pass's cells): each
    # row leaves at its first class, where vectorised string methods would run
    # every class's work on every row.
    out = []
    for a, b, k1, k2, b1, b2, num, w, sh in zip(text1.tolist(), text2.tolist(), *flags,
                                                  widths, shifted, strict=True):
        if sh:
            out.append("field_shift")
        elif (k1 and b2) or (k2 and b1):
            out.append("omitted")
        elif not (k1 and k2):
            out.append("other")
        else:
            a, b = str(a), str(b)
            if "".join(a.casefold().split()) == "".join(b.casefold().split()):
                out.append("case_space")
                continue
            cause = number_cause(a, b) if num else ""
            out.append(cause or text_cause(a, b, w or None))
    return pd.Series(out, index=index, dtype=object)


def field_shift_cells(
    a: np.ndarray, b: np.ndarray, differ: np.ndarray, absent_a: np.ndarray, absent_b: np.ndarray
) -> np.ndarray:
    """Cells (rows = forms, columns = fields in paper order) that belong to a field shift.

    ``a`` and ``b`` hold comparable keys of the two passes (equal keys = equal
    values, blanks included), ``differ`` marks disagreeing cells and
    ``absent_*`` blank or not-keyed cells. A run is three or more consecutive
    cells where pass 2 runs one field ahead (``b[j] == a[j+1]``, or ``a[j] ==
    b[j-1]`` at the run's last cell) or pass 1 does (``a`` and ``b``
    exchanged), holding at least two disagreements; its
    disagreeing cells are marked, plus the disagreeing cell just after the run
    when the pass that ran ahead left it blank.

    >>> a = np.array([["1", "2", "3", "6", "4", "2", "5"]], dtype=object)
    >>> b = np.array([["1", "3", "6", "4", "2", "", "5"]], dtype=object)
    >>> field_shift_cells(a, b, a != b, a == "", b == "").astype(int).tolist()
    [[0, 1, 1, 1, 1, 1, 0]]
    """
    n, m = a.shape
    out = np.zeros((n, m), dtype=bool)
    if m < 3 or n == 0:
        return out
    # Pass 2 one field ahead: b[k] == a[k+1]; its last cell shows as a[k] == b[k-1].
    ahead_b = np.zeros((n, m), dtype=bool)
    ahead_b[:, :-1] = b[:, :-1] == a[:, 1:]
    ahead_b[:, 1:] |= a[:, 1:] == b[:, :-1]
    ahead_a = np.zeros((n, m), dtype=bool)
    ahead_a[:, :-1] = a[:, :-1] == b[:, 1:]
    ahead_a[:, 1:] |= b[:, 1:] == a[:, :-1]
    for run_mask, absent_ahead in ((ahead_b, absent_b), (ahead_a, absent_a)):
        out |= _runs(run_mask, differ, absent_ahead)
    return out


def _runs(e: np.ndarray, differ: np.ndarray, absent_ahead: np.ndarray) -> np.ndarray:
    n, m = e.shape
    flat = e.ravel()
    prev = np.zeros_like(flat)
    prev[1:] = flat[:-1]
    prev[::m] = False  # a run never continues from the previous form
    starts = flat & ~prev
    ids = np.cumsum(starts) * flat
    lengths = np.bincount(ids)
    disagreements = np.bincount(ids, weights=(differ.ravel() & flat))
    good = (lengths >= 3) & (disagreements >= 2)
    good[0] = False  # id 0 = not in any run
    marked = good[ids] & differ.ravel()
    nxt = np.zeros_like(flat)
    nxt[:-1] = flat[1:]
    nxt[m - 1::m] = False
    ends = np.flatnonzero(flat & ~nxt & good[ids])
    tails = ends + 1
    tails = tails[(tails % m) != 0]  # the run ended at the last field of its form
    tails = tails[differ.ravel()[tails] & absent_ahead.ravel()[tails]]
    marked[tails] = True
    return marked.reshape(n, m)
