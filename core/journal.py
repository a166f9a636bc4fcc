"""The journal's hash chain and the audit that re-checks it, without SQL.

The store (``core.store``) writes journal rows and hands their tuples here;
this module only hashes, chains and compares, so the rules can be read (and
re-implemented by anyone checking a study) without reading any SQL.

A row's hash is SHA-256 over compact JSON of its columns from ``seq`` to
``prev_hash``; ``prev_hash`` is the previous row's hash (``GENESIS`` for the
first), so editing, deleting or reordering any row breaks the chain at that
row. Replaying the value rows (``set_value``, ``import_form``) gives what the
values table must hold, so a value changed behind the journal's back shows.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .values import BLANK, ILLEGIBLE, KEYED

#: The hash a study's first journal row chains onto.
GENESIS = "0" * 64

#: Journal columns in table order; the hash covers all but the last.
COLUMNS = (
    "seq", "at", "who", "action", "form_id", "variable", "old_text", "old_state",
    "new_text", "new_state", "reason", "detail", "prev_hash", "hash",
)  # fmt: skip

_CELL = ["form_id", "variable", "text", "state"]


@dataclass(frozen=True)
class AuditResult:
    """What :meth:`core.store.Study.audit` found."""

    ok: bool
    rows: int
    """Journal rows checked."""
    first_bad_seq: int | None
    """Sequence number of the first bad journal row; None when ok or not row-specific."""
    message: str
    """One sentence for a person: all well, or what is wrong where."""


def row_hash(row: tuple | list) -> str:
    """SHA-256 (hex) of one journal row's content, ``prev_hash`` included.

    ``row`` holds the journal columns from ``seq`` to ``prev_hash`` in table
    order. The canonical serialisation is compact JSON of that list (UTF-8,
    no ASCII escaping), so any JSON library can recompute it.

    >>> len(row_hash([1, "2026-01-01T00:00:00.000000Z", "AB", "create_study",
    ...               None, None, None, None, None, None, "", "{}", GENESIS]))
    64
    """
    payload = json.dumps(list(row), ensure_ascii=False, separators=(",", ":"))
    return hashlib.sha256(payload.encode("utf-8")).hexdigest()


def check_chain(rows: list[tuple], head: str = "") -> tuple[int, str] | None:
    """The first journal row out of its chain as (seq, sentence), or None.

    ``rows`` are full journal rows ordered by seq; ``head`` is the
    ``"seq:hash"`` the store recorded with its newest row, which catches
    rows deleted from the end.

    >>> check_chain([]) is None
    True
    """
    prev, expected = GENESIS, 1
    for r in rows:
        seq = r[0]
        if seq != expected:
            return expected, (
                f"journal row {expected} is missing (row {expected - 1} is followed by row "
                f"{seq}) — rows were deleted; restore the file from a backup."
            )
        if r[12] != prev:
            return seq, (
                f"journal row {seq} does not chain onto row {seq - 1} — row {seq - 1} was "
                "edited, or rows were removed or reordered; restore the file from a backup."
            )
        if row_hash(r[:13]) != r[13]:
            return seq, (
                f"journal row {seq} ({r[3]} by {r[2]} at {r[1]}) does not match its hash — "
                "it was edited or moved after it was written; restore the file from a backup."
            )
        prev, expected = r[13], seq + 1
    if head:
        head_seq, _, head_hash = head.partition(":")
        if int(head_seq) != expected - 1 or head_hash != prev:
            return expected, (
                f"the journal ends at row {expected - 1} but the study recorded row {head_seq} "
                "as its newest — the last rows were deleted; restore the file from a backup."
            )
    return None


def replay_values(rows: list[tuple]) -> pd.DataFrame:
    """What the values table must hold according to the journal.

    Returns one row per (form_id, variable) with the newest ``text``,
    ``state`` and the ``seq`` of the journal row that wrote it.

    >>> replay_values([]).empty
    True
    """
    sets = [(r[0], r[4], r[5], r[8], r[9]) for r in rows if r[3] == "set_value"]
    frames = [pd.DataFrame(sets, columns=["seq", *_CELL], dtype=object)]
    imports = [r for r in rows if r[3] == "import_form"]
    if imports:
        details = [json.loads(r[11]) for r in imports]
        wide = pd.DataFrame([d["text"] for d in details], index=[r[4] for r in imports])
        wide.index.name, wide.columns.name = "form_id", "variable"
        long = wide.astype(object).stack().rename("text").reset_index()
        long = long[long["text"].notna()].copy()
        long["state"] = np.where(long["text"] == "", BLANK, KEYED)
        marked = {(r[4], v) for r, d in zip(imports, details, strict=True) for v in d["illegible"]}
        if marked:
            hit = pd.MultiIndex.from_frame(long[["form_id", "variable"]]).isin(list(marked))
            long.loc[hit, "state"] = ILLEGIBLE
        long["seq"] = long["form_id"].map({r[4]: r[0] for r in imports})
        frames.append(long[["seq", *_CELL]].astype(object))
    frames = [f for f in frames if not f.empty]
    if not frames:
        return pd.DataFrame(columns=["seq", *_CELL])
    out = pd.concat(frames, ignore_index=True)
    out = out.sort_values("seq", kind="stable")
    return out.drop_duplicates(["form_id", "variable"], keep="last")


def first_difference(expected: pd.DataFrame, stored: pd.DataFrame, what: str) -> tuple[int | None, str] | None:
    """The first cell where ``stored`` differs from ``expected`` (a replay), as
    (seq, sentence), or None when they agree. ``what`` names the stored side.

    >>> first_difference(replay_values([]), pd.DataFrame(columns=_CELL), "the values") is None
    True
    """
    both = expected.merge(
        stored.astype(object), on=["form_id", "variable"], how="outer",
        suffixes=("_j", "_s"), indicator=True,
    )  # fmt: skip
    wrong = both[
        (both["_merge"] != "both")
        | (both["text_j"] != both["text_s"])
        | (both["state_j"] != both["state_s"])
    ]
    if wrong.empty:
        return None
    w = wrong.sort_values("seq", na_position="last").iloc[0]
    where = f"form {int(w['form_id'])} field \"{w['variable']}\""
    if w["_merge"] == "right_only":
        return None, (
            f"{where} in {what} holds \"{w['text_s']}\" ({w['state_s']}) but the journal never "
            "recorded it — the file was changed outside keyproof; compare it with a backup."
        )
    seq = int(w["seq"])
    if w["_merge"] == "left_only":
        return seq, (
            f"{where} is missing from {what}, though journal row {seq} recorded "
            f"\"{w['text_j']}\" — the file was changed outside keyproof; compare it with a backup."
        )
    return seq, (
        f"{where} in {what} holds \"{w['text_s']}\" ({w['state_s']}) but journal row {seq} "
        f"recorded \"{w['text_j']}\" ({w['state_j']}) — the file was changed outside keyproof; "
        "compare it with a backup."
    )
