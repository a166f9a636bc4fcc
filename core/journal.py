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


def replay_grid(
    rows: list[tuple], index: pd.Index, names: list[str], details: dict | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """What the values must be according to the journal, as grids over forms x variables.

    ``index`` holds the form ids, ``names`` the variables (cells of other
    variables are ignored). Returns ``(text, state, seq)`` object grids: the
    newest text and state written to each cell and the seq of the journal row
    that wrote it; None where the journal never wrote the cell. An imported
    form's row comes before any later change to it, so imports are laid down
    first and single-field changes over them in seq order. ``details`` may
    hold the import rows' parsed ``detail`` by seq, to save parsing twice.

    >>> t, s, q = replay_grid([], pd.Index([1]), ["a"])
    >>> t.tolist(), s.tolist()
    ([[None]], [[None]])
    """
    text = np.full((len(index), len(names)), None, dtype=object)
    state, seq = text.copy(), text.copy()
    columns = pd.Index(names)
    imports = [r for r in rows if r[3] == "import_form"]
    if details is None:
        details = {r[0]: json.loads(r[11]) for r in imports}
    # The forms of one import share their keys: lay them down a group at a time.
    groups: dict[tuple, list[tuple]] = {}
    for r in imports:
        d = details[r[0]]
        groups.setdefault(tuple(d["text"]), []).append((r, d))
    for keys, members in groups.items():
        at = index.get_indexer([r[4] for r, _ in members])
        cols = columns.get_indexer(list(keys))
        ok_rows, ok_cols = at >= 0, cols >= 0
        got = np.array([list(d["text"].values()) for _, d in members], dtype=object)
        got = got.reshape(len(members), len(keys))[np.ix_(ok_rows, ok_cols)]
        rows_at, cols_at = at[ok_rows], cols[ok_cols]
        kinds = np.where(got == "", BLANK, KEYED).astype(object)
        for i, (_, d) in enumerate(m for m, k in zip(members, ok_rows, strict=True) if k):
            for name in d["illegible"]:
                hit = np.nonzero(np.asarray(keys, dtype=object)[ok_cols] == name)[0]
                kinds[i, hit] = ILLEGIBLE
        unset = got == None  # noqa: E711 - elementwise on an object array
        kinds[unset] = None
        seqs = np.array([r[0] for r, _ in members], dtype=object)[ok_rows]
        grid = np.ix_(rows_at, cols_at)
        text[grid], state[grid] = got, kinds
        seq[grid] = np.where(unset, None, seqs[:, None])
    sets = pd.DataFrame(
        [(r[0], r[4], r[5], r[8], r[9]) for r in rows if r[3] == "set_value"],
        columns=["seq", "form_id", "variable", "text", "state"], dtype=object,
    ).drop_duplicates(["form_id", "variable"], keep="last")  # rows come in seq order
    if len(sets):
        i = index.get_indexer(sets["form_id"].astype("int64"))
        j = columns.get_indexer(sets["variable"])
        ok = (i >= 0) & (j >= 0)
        for grid, col in ((text, "text"), (state, "state"), (seq, "seq")):
            grid[i[ok], j[ok]] = sets[col].to_numpy(dtype=object)[ok]
    return text, state, seq


def first_difference(
    expected: tuple[np.ndarray, np.ndarray, np.ndarray],
    stored: tuple[np.ndarray, np.ndarray],
    index: pd.Index,
    names: list[str],
    what: str,
) -> tuple[int | None, str] | None:
    """The first cell (by journal seq) where ``stored`` grids differ from the
    replay ``expected``, as (seq, sentence), or None when they agree.
    ``what`` names the stored side in the sentence.

    >>> g = replay_grid([], pd.Index([1]), ["a"])
    >>> first_difference(g, g[:2], pd.Index([1]), ["a"], "the values") is None
    True
    """
    e_text, e_state, e_seq = expected
    s_text, s_state = stored
    wrong = (e_text != s_text) | (e_state != s_state)
    if not wrong.any():
        return None
    rows, cols = np.nonzero(wrong)
    seqs = e_seq[rows, cols]
    known = np.array([s is not None for s in seqs])
    pick = int(np.argmin(np.where(known, seqs, np.iinfo(np.int64).max).astype(np.int64)))
    r, c = rows[pick], cols[pick]
    where = f"form {int(index[r])} field \"{names[c]}\""
    advice = "the file was changed outside keyproof; compare it with a backup."
    if e_state[r, c] is None:
        return None, (f"{where} in {what} holds \"{s_text[r, c]}\" ({s_state[r, c]}) but the "
                      f"journal never recorded it — {advice}")  # fmt: skip
    seq = int(e_seq[r, c])
    if s_state[r, c] is None:
        return seq, (f"{where} is missing from {what}, though journal row {seq} recorded "
                     f"\"{e_text[r, c]}\" — {advice}")  # fmt: skip
    return seq, (f"{where} in {what} holds \"{s_text[r, c]}\" ({s_state[r, c]}) but journal row "
                 f"{seq} recorded \"{e_text[r, c]}\" ({e_state[r, c]}) — {advice}")  # fmt: skip
