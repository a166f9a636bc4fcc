"""Decisions, set-asides and the verified table: from discrepancies to what stands.

The comparison (``core.compare``) lists what needs a human look; this module
joins that list with the resolver's decisions (kept by the store, journaled,
newest one counting), records new decisions, and builds the verified table
that exports, the report and screening read.

Trade-offs:

- A decision is keyed by (participant, variable, kind) and remembers both
  pass values it saw. The worklist is recomputed from the passes every time,
  so a decision can never hide a later change: when either pass value now
  differs from what the decision saw, the row is ``stale`` and open again.
  Recomputing costs one comparison; joining the decisions is one vectorised
  lookup by key, so 50,000 rows stay well under a second.
- A value that cannot be read as the variable's type (``7.5`` for an
  integer) never stands: it could not be typed in the verified table. A
  value of the right type outside the rule (range, codes) stands only when
  the resolver says the paper really shows it (``keep``); it is then listed
  in the report.
- A form keyed in one pass only stays open after ``confirm_one_pass``: the
  verified file is built from two passes, so the other pass must key it.

Statuses in the worklist's ``_status``:

- ``open``: nothing decided yet, the newest decision was a ``reopen``, or the
  form was confirmed as keyed in one pass only (``_decision_action`` is then
  ``one_pass_only``) and waits for the other pass;
- ``settled``: the newest decision saw the very pass values shown now;
- ``stale``: a pass value changed after the newest decision, or a form-level
  row that a pairing or a drop had settled shows again; the old decision is
  shown in the ``_decision_*`` columns.

Length: past the house's ~600 lines on purpose: every decision kind shares
one set of checks (reason, keyer, a value that may stand) and the screen
imports one module. The decisions file (``core.decisions_file``) and the
building of the verified table (``core.verified_build``) live apart, behind
:func:`apply_decisions_file` and :func:`verified_table` here; set-asides
live in ``core.setaside`` and are re-exported here.

Decisions file (``keyproof decide --from``): columns ``participant, variable,
value, reason``; an empty value means blank on paper; a declared missing code
is written as itself. A value outside the variable's range or codes is
refused unless its reason starts with ``paper says:`` (any case), meaning the
paper really shows that value; it is then kept and listed in the report.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterable

import numpy as np
import pandas as pd

from .codebook import Codebook, Variable
from .errors import DecisionError
from .setaside import (  # set-asides live apart; their names stay importable from here
    SET_ASIDE_COLUMNS,  # noqa: F401
    _canonical_id,
    _canonical_ids,
    _need_keyer,
    _need_reason,
    everyone_kept,  # noqa: F401
    restore,  # noqa: F401
    set_aside,  # noqa: F401
    set_aside_list,  # noqa: F401
)
from .values import BLANK, ILLEGIBLE, INVALID_TYPE, KEYED, allowed_text, canonical_series, parse
from .verified import Verified

OPEN = "open"
SETTLED = "settled"
STALE = "stale"
STATUSES = (OPEN, SETTLED, STALE)

# Store actions (DEVELOPERS.md "Store"); ``reopen`` is an undo: a newer decision.
VALUE = "value"
KEEP = "keep"
PAIR = "pair"
DROP = "drop"
ONE_PASS_ONLY = "one_pass_only"
REOPEN = "reopen"

FORM_KINDS = ("only_in_pass1", "only_in_pass2", "duplicate_id")
SHIFT_CAUSE = "field_shift"
CASE_SPACE_CAUSE = "case_space"
ILLEGIBLE_SHOWN = "(illegible)"
KEEP_PREFIX = "paper says:"

#: Reasons offered when a study has not set its own list.
DEFAULT_REASONS = (
    "checked against paper: pass 1 right",
    "checked against paper: pass 2 right",
    "checked against paper: both wrong",
    "paper blank",
    "paper illegible",
    "paper value outside the rule, kept",
    "same form keyed twice",
    "form number mistyped in one pass",
)

DECISION_COLUMNS = (
    "_decision_id",
    "_decision_action",
    "_decision_value",
    "_decision_state",
    "_decision_reason",
    "_decided_by",
    "_decided_at",
)

_KEY = ["participant", "variable", "kind"]


# --------------------------------------------------------------------------- worklist


def worklist(study, table: pd.DataFrame | None = None) -> pd.DataFrame:
    """The comparison of ``study`` joined with the decisions that count.

    ``table`` is a comparison already computed (``core.compare.compare_study``);
    None computes it. Returns the comparison's columns plus ``_status``
    (``open``, ``settled``, ``stale``) and the newest decision's
    ``_decision_id``, ``_decision_action``, ``_decision_value``,
    ``_decision_state``, ``_decision_reason``, ``_decided_by``,
    ``_decided_at`` (NA where nothing was decided). Form-level rows come
    first, then the comparison's own order (by form, in paper order). The
    index is 0..n-1.

    >>> rows = worklist(study)                        # doctest: +SKIP
    >>> rows.loc[rows["_status"] != "settled", ["participant", "variable", "kind"]]  # doctest: +SKIP
    """
    if table is None:
        from .compare import compare_study

        table = compare_study(study)
    return join_decisions(table, study.decisions())


def join_decisions(table: pd.DataFrame, decisions: pd.DataFrame) -> pd.DataFrame:
    """Join a comparison table with a decisions table (the store's columns).

    The pure half of :func:`worklist`, for tests and for callers that hold
    both tables already.

    >>> t = pd.DataFrame({"participant": ["1"], "variable": ["q1"], "kind": ["mismatch"],
    ...                   "pass1": ["3"], "pass2": ["4"]})
    >>> join_decisions(t, pd.DataFrame())["_status"].tolist()
    ['open']
    """
    work = table.reset_index(drop=True)
    for col in ("participant", "variable", "kind", "pass1", "pass2"):
        if col not in work:
            work[col] = ""
    newest = _newest(decisions)
    n = len(work)
    if newest.empty:
        pos = np.full(n, -1, dtype=np.intp)
    else:
        # One row per key on the right, so a lookup by key is the whole join.
        right = pd.MultiIndex.from_arrays([newest[c].to_numpy(dtype=object) for c in _KEY])
        pos = right.get_indexer(pd.MultiIndex.from_arrays([_plain(work[c]) for c in _KEY]))
    hit = pos >= 0
    taken = {}
    for src, dst in _DECISION_FIELDS.items():
        out = np.full(n, None, dtype=object)
        if hit.any():
            out[hit] = newest[src].to_numpy(dtype=object)[pos[hit]]
        taken[dst] = out
    for dst in DECISION_COLUMNS:
        # dtype=object spares pandas inferring a string dtype element by element.
        work[dst] = pd.Series(taken[dst], index=work.index, dtype=object)
    work["_decision_id"] = pd.array(taken["_decision_id"], dtype="Int64")
    # A pairing or a drop settles its row by changing the passes, so the row
    # showing again means it was undone (an ID re-keyed, a form restored).
    redone = np.isin(taken["_decision_action"], [PAIR, DROP])
    changed = hit & ((_plain(work["pass1"]) != taken["_seen1"])
                     | (_plain(work["pass2"]) != taken["_seen2"]) | redone)
    waiting = np.isin(taken["_decision_action"], [REOPEN, ONE_PASS_ONLY])
    status = np.full(n, OPEN, dtype=object)
    status[hit & ~changed & ~waiting] = SETTLED
    status[changed] = STALE
    work["_status"] = pd.Series(status, index=work.index, dtype=object)
    return _order(work)


_DECISION_FIELDS = {
    "decision_id": "_decision_id",
    "action": "_decision_action",
    "value": "_decision_value",
    "state": "_decision_state",
    "reason": "_decision_reason",
    "keyer": "_decided_by",
    "at": "_decided_at",
    "pass1": "_seen1",
    "pass2": "_seen2",
}


def _plain(column: pd.Series) -> np.ndarray:
    """A column as an object array of str, missing as ``""``."""
    if not pd.api.types.is_string_dtype(column.dtype):
        column = column.astype("string")
    return column.to_numpy(dtype=object, na_value="")


def _newest(decisions: pd.DataFrame | None) -> pd.DataFrame:
    """The newest decision per (participant, variable, kind); oldest first."""
    if decisions is None or decisions.empty:
        return pd.DataFrame()
    d = decisions
    if not d["decision_id"].is_monotonic_increasing:
        d = d.sort_values("decision_id", kind="stable")
    d = d.drop_duplicates(_KEY, keep="last").reset_index(drop=True)
    for col in ("participant", "variable", "kind", "pass1", "pass2", "value", "state"):
        d[col] = _plain(d[col])
    return d


def _order(work: pd.DataFrame) -> pd.DataFrame:
    """Form-level rows first; otherwise the comparison's own order (stable)."""
    form_level = work["kind"].isin(FORM_KINDS).to_numpy()
    if not form_level.any() or form_level.all():
        return work
    order = np.argsort(~form_level, kind="stable")
    return work.iloc[order].reset_index(drop=True)


def counts_by_status(rows: pd.DataFrame) -> dict[str, int]:
    """How many worklist rows are open, settled and stale.

    >>> counts_by_status(pd.DataFrame({"_status": ["open", "open", "settled"]}))
    {'open': 2, 'settled': 1, 'stale': 0}
    """
    found = rows["_status"].value_counts() if len(rows) else pd.Series(dtype=int)
    return {s: int(found.get(s, 0)) for s in STATUSES}


def open_rows(rows: pd.DataFrame) -> pd.DataFrame:
    """The rows that still need a decision (open or stale), in worklist order."""
    return rows[rows["_status"] != SETTLED]


def counts_by_kind(rows: pd.DataFrame) -> dict[str, int]:
    """Open (or stale) rows per kind, largest first: the worklist's headline.

    >>> counts_by_kind(pd.DataFrame({"kind": ["blank", "mismatch", "mismatch"],
    ...                              "_status": ["open", "open", "stale"]}))
    {'mismatch': 2, 'blank': 1}
    """
    found = open_rows(rows)["kind"].value_counts()
    return {str(k): int(v) for k, v in found.items()}


def next_open(rows: pd.DataFrame, start: int = 0) -> int | None:
    """Position of the first open or stale row at or after ``start``; None when none is left.

    >>> next_open(pd.DataFrame({"_status": ["settled", "open", "stale"]}), 2)
    2
    """
    waiting = np.flatnonzero(rows["_status"].to_numpy(dtype=object)[start:] != SETTLED)
    return int(waiting[0]) + start if len(waiting) else None


def position_of(rows: pd.DataFrame, participant: str) -> int | None:
    """Position of the first row of ``participant`` (as shown), for jumping to a form.

    A whole-number ID also finds the form by value, as the comparison pairs
    them (``07`` finds ``7``).

    >>> position_of(pd.DataFrame({"participant": ["3", "7", "7"]}), " 7")
    1
    >>> position_of(pd.DataFrame({"participant": ["3", "7"]}), "007")
    1
    """
    wanted = str(participant).strip()
    shown = rows["participant"].astype(str)
    hits = np.flatnonzero(shown.to_numpy() == wanted)
    if not len(hits) and wanted.lstrip("+-").isdigit():
        numbers = pd.to_numeric(shown.where(shown.str.fullmatch(r"[+-]?\d+"), None),
                                errors="coerce")
        hits = np.flatnonzero((numbers == int(wanted)).fillna(False).to_numpy())
    return int(hits[0]) if len(hits) else None


def neighbours(study, row, width: int = 3) -> pd.DataFrame:
    """Fields around ``row``'s field, as both passes keyed them, in paper order.

    Columns ``variable, pass1, pass2, here`` (``here`` marks the row's own
    field), ``width`` fields either side: a field shift shows as one column
    sliding against the other. Blank is ``""``, illegible ``(illegible)``,
    not keyed None.

    >>> neighbours(study, rows.iloc[0])             # doctest: +SKIP
    """
    names = study.codebook.names
    name = _text(row, "variable")
    at = names.index(name) if name in names else 0
    around = names[max(0, at - width): at + width + 1]
    sides = []
    for form in _forms_of(row):
        record = study.form(form) if form is not None else None
        shown = []
        for n in around:
            state = record.states.get(n) if record else None
            shown.append(None if state is None else
                         ILLEGIBLE_SHOWN if state == ILLEGIBLE else record.texts.get(n, ""))
        sides.append(shown)
    return pd.DataFrame({"variable": around, "pass1": sides[0], "pass2": sides[1],
                         "here": [n == name for n in around]})


# --------------------------------------------------------------------------- reasons


def reasons(study) -> list[str]:
    """Reasons offered to the resolver: the study's list, else :data:`DEFAULT_REASONS`.

    >>> reasons(study)[0]                              # doctest: +SKIP
    'checked against paper: pass 1 right'
    """
    raw = study.get_setting("reasons", None)
    if raw in (None, ""):
        return list(DEFAULT_REASONS)
    # A list; older studies stored it as JSON text inside the JSON setting.
    found = json.loads(raw) if isinstance(raw, str) else raw
    return [str(r) for r in found]


def set_reasons(study, items: Iterable[str], keyer: str) -> list[str]:
    """Replace the study's list of reasons (journaled); returns the list kept.

    Blank entries and repeats are dropped; an empty list is refused.

    >>> set_reasons(study, ["paper checked", "paper torn"], "LM")   # doctest: +SKIP
    ['paper checked', 'paper torn']
    """
    kept: list[str] = []
    for item in items:
        text = " ".join(str(item).split())
        if text and text not in kept:
            kept.append(text)
    if not kept:
        raise DecisionError("the list of reasons is empty — give at least one reason.")
    study.set_setting("reasons", kept, keyer)  # the store keeps settings as JSON itself
    return kept


# --------------------------------------------------------------------------- decisions


def decide(study, row, action: str, value: str, state: str, reason: str, keyer: str) -> int:
    """Record one decision on a worklist ``row``; returns the decision id.

    The low-level entry the named decisions below go through: it checks the
    reason and the keyer and hands both pass values the row shows to the
    store, which journals the decision. ``action`` is a store action
    (``value``, ``keep``, ``pair``, ``drop``, ``one_pass_only``, ``reopen``).

    >>> decide(study, rows.iloc[0], "value", "4", "keyed", "paper checked", "LM")  # doctest: +SKIP
    12
    """
    reason = _need_reason(reason)
    keyer = _need_keyer(keyer)
    form1, form2 = _forms_of(row)
    return study.add_decision(
        _text(row, "participant"),
        _text(row, "variable"),
        action,
        value,
        state or None,  # form-level and undo decisions have no state
        reason,
        keyer,
        _text(row, "pass1"),
        _text(row, "pass2"),
        _text(row, "kind"),
        form1=form1,
        form2=form2,
    )


def take_pass(study, row, pass_no: int, reason: str, keyer: str, keep: bool = False) -> int:
    """Let pass ``pass_no``'s value of ``row``'s cell stand.

    The exact text and state are read from that pass's form. A value outside
    the variable's rule is refused unless ``keep`` (the paper really shows it).

    >>> take_pass(study, rows.iloc[0], 1, "checked against paper: pass 1 right", "LM")  # doctest: +SKIP
    """
    if pass_no not in (1, 2):
        raise DecisionError(f"pass {pass_no} does not exist — take pass 1 or pass 2.")
    text, state = _pass_value(study, row, pass_no)
    if state == BLANK:
        return mark_blank(study, row, reason, keyer)
    if state == ILLEGIBLE:
        return mark_blank(study, row, reason, keyer, illegible=True)
    return set_paper_value(study, row, text, reason, keyer, keep=keep)


def set_paper_value(study, row, text: str, reason: str, keyer: str, keep: bool = False) -> int:
    """Let the value on the paper stand, typed by the resolver.

    ``text`` is read by the variable's rules (``core.values``). A text not of
    the variable's type is always refused; a value outside the range or
    codes is refused unless ``keep`` (the paper really says it), and is then
    recorded as kept, for the report. An empty text means blank on paper.

    >>> set_paper_value(study, rows.iloc[0], "42", "checked against paper: both wrong", "LM")  # doctest: +SKIP
    """
    var = _variable(study.codebook, row)
    if not str(text).strip():
        return mark_blank(study, row, reason, keyer)
    action = _check_value(var, str(text), keep, where=f'{_text(row, "participant")}: ')
    return decide(study, row, action, str(text).strip(), KEYED, reason, keyer)


def keep_value(study, row, text: str, reason: str, keyer: str) -> int:
    """Keep a value outside the variable's rule because the paper really says it.

    Listed in the verification report. A value inside the rule is simply
    recorded as the paper's value.

    >>> keep_value(study, rows.iloc[0], "130", "paper value outside the rule, kept", "LM")  # doctest: +SKIP
    """
    return set_paper_value(study, row, text, reason, keyer, keep=True)


def mark_blank(study, row, reason: str, keyer: str, illegible: bool = False) -> int:
    """The paper is blank in this field (or, with ``illegible``, cannot be read).

    Either way the verified table holds no value here (NA).

    >>> mark_blank(study, rows.iloc[0], "paper blank", "LM")   # doctest: +SKIP
    """
    _variable(study.codebook, row)
    return decide(study, row, VALUE, "", ILLEGIBLE if illegible else BLANK, reason, keyer)


def set_missing_code(study, row, code: str, reason: str, keyer: str) -> int:
    """Let one of the variable's declared missing codes stand (e.g. ``-9``).

    >>> set_missing_code(study, rows.iloc[0], "9", "paper blank", "LM")   # doctest: +SKIP
    """
    var = _variable(study.codebook, row)
    wanted = str(code).strip()
    declared = _canonical_set(var, var.missing_values)
    canon, _ = canonical_series(var, pd.Series([wanted], dtype=object))
    if not var.missing or canon.iloc[0] not in declared:
        offered = ", ".join(var.missing_values) or "none"
        raise DecisionError(
            f'"{wanted}" is not a declared missing code of {var.name} '
            f"(declared: {offered}) — pick one of those or type the paper's value."
        )
    return decide(study, row, VALUE, wanted, KEYED, reason, keyer)


def settle_shift(study, participant: str, pass_no: int, reason: str, keyer: str,
                 rows: pd.DataFrame | None = None, keep: bool = False) -> int:
    """Settle every field-shift cell of one form at once: pass ``pass_no`` is right.

    One transaction: all cells or none (a value outside its rule refuses the
    whole run unless ``keep``). ``rows`` is the current worklist (computed
    when None). Returns how many cells were settled.

    >>> settle_shift(study, "17", 1, "checked against paper: pass 1 right", "LM")  # doctest: +SKIP
    4
    """
    rows = worklist(study) if rows is None else rows
    mask = (
        (rows["participant"].astype("string") == str(participant))
        & (rows["cause"].astype("string") == SHIFT_CAUSE)
        & (rows["_status"] != SETTLED)
    )
    shift = rows[mask.fillna(False)]
    if shift.empty:
        raise DecisionError(
            f"participant {participant} has no open field shift — settle its cells one by one."
        )
    return _take_pass_all(study, shift, pass_no, reason, keyer, keep=keep)


def _take_pass_all(study, rows: pd.DataFrame, pass_no: int, reason: str, keyer: str,
                   keep: bool = False) -> int:
    """``take_pass`` on every row in one transaction: all or none; returns how many."""
    with study.transaction():
        for _, row in rows.iterrows():
            take_pass(study, row, pass_no, reason, keyer, keep=keep)
    return len(rows)


def spelling_rows(codebook: Codebook, rows: pd.DataFrame) -> pd.DataFrame:
    """Open discrepancies in free text (string, no codes) whose passes differ only in case or spaces.

    These are the ones :func:`settle_spelling` settles at once; a case or
    space difference in a number, a date or a coded answer is a real question
    (is ``1 2`` twelve?) and stays for the paper, one by one.
    """
    free = {v.name for v in codebook if v.type == "string" and not v.codes and not v.is_id}
    mask = ((rows["cause"].astype("string") == CASE_SPACE_CAUSE)
            & rows["variable"].isin(free) & (rows["_status"] != SETTLED))
    return rows[mask.fillna(False)]


def settle_spelling(study, pass_no: int, reason: str, keyer: str,
                    rows: pd.DataFrame | None = None) -> int:
    """Settle every free-text difference of case or spaces at once: pass ``pass_no``'s text stands.

    DESIGN.md's bulk settling: the two texts say the same, so one decision per
    cell, each with ``reason``, in one transaction. ``rows`` is the current
    worklist (computed when None). Returns how many cells were settled.

    >>> settle_spelling(study, 1, "case or spaces only: pass 1's spelling kept", "LM")  # doctest: +SKIP
    6
    """
    rows = worklist(study) if rows is None else rows
    todo = spelling_rows(study.codebook, rows)
    if todo.empty:
        raise DecisionError("no open difference of case or spaces in free text — "
                            "nothing to settle at once.")
    return _take_pass_all(study, todo, pass_no, reason, keyer)


def reopen(study, row, reason: str, keyer: str) -> int:
    """Undo the decision on ``row``: a newer decision that leaves it open again.

    >>> reopen(study, rows.iloc[0], "decided on the wrong form", "LM")   # doctest: +SKIP
    """
    return decide(study, row, REOPEN, "", "", reason, keyer)


# --------------------------------------------------------------------------- form level


def pair_forms(study, row, keep_id_from_pass: int, reason: str, keyer: str,
               partner: int | None = None) -> int:
    """Pair a form keyed in one pass only with its partner, correcting the mistyped ID.

    ``row`` is an ``only_in_pass1``/``only_in_pass2`` row; ``partner`` is the
    other pass's form id (default: the row's suggested ``_partner``).
    ``keep_id_from_pass`` names the pass whose ID is right; the other form's
    ID field is set to it by the resolver (journaled as a keyed change).

    >>> pair_forms(study, rows.iloc[0], 1, "form number mistyped in one pass", "LM")  # doctest: +SKIP
    """
    kind = _text(row, "kind")
    if kind not in ("only_in_pass1", "only_in_pass2"):
        raise DecisionError(
            f"participant {_text(row, 'participant')} has no form in one pass only "
            f"({kind or 'no kind'}) — pair only a form keyed in one pass."
        )
    if keep_id_from_pass not in (1, 2):
        raise DecisionError(f"pass {keep_id_from_pass} does not exist — keep pass 1's or pass 2's ID.")
    here = 1 if kind == "only_in_pass1" else 2
    own = _forms_of(row)[here - 1]
    if partner is None:
        partner = _int_or_none(_get(row, "_partner"))
    if own is None or partner is None:
        raise DecisionError(
            f"participant {_text(row, 'participant')} has no suggested partner form "
            "— give the other pass's form number."
        )
    form1, form2 = (own, partner) if here == 1 else (partner, own)
    id_name = study.codebook.id_variable.name
    right_form = form1 if keep_id_from_pass == 1 else form2
    wrong_form = form2 if keep_id_from_pass == 1 else form1
    right_id = study.form(right_form).texts.get(id_name) or ""
    if not str(right_id).strip():
        raise DecisionError(
            f"form {right_form} has no participant ID — key it before pairing."
        )
    reason = _need_reason(reason)
    keyer = _need_keyer(keyer)
    with study.transaction():
        study.set_value(wrong_form, id_name, right_id, KEYED, keyer)
        return study.add_decision(
            _text(row, "participant"), "", PAIR, right_id, KEYED, reason, keyer,
            _text(row, "pass1"), _text(row, "pass2"), kind, form1=form1, form2=form2,
        )


def drop_duplicate(study, form_id: int, reason: str, keyer: str, row=None) -> int:
    """Drop one of two forms with the same ID in one pass: the same paper keyed twice.

    The form is marked dropped by the store (journaled, never deleted); a
    ``drop`` decision records it for the report.

    >>> drop_duplicate(study, 31, "same form keyed twice", "LM")   # doctest: +SKIP
    """
    reason = _need_reason(reason)
    keyer = _need_keyer(keyer)
    record = study.form(int(form_id))
    id_name = study.codebook.id_variable.name
    participant = _canonical_id(study.codebook, record.texts.get(id_name) or "")
    pass_no = record.pass_no
    forms = study.forms(pass_no)
    twins = (_canonical_ids(study.codebook, forms["participant"]) == participant) & ~forms["dropped"]
    if record.dropped or int(twins.sum()) < 2:  # the same ID as read by its type: 07 = 7
        raise DecisionError(
            f"form {form_id} is the only form of participant {participant} in pass {pass_no} "
            "— drop only one of two forms with the same ID."
        )
    p1 = _text(row, "pass1") if row is not None else ""
    p2 = _text(row, "pass2") if row is not None else ""
    with study.transaction():
        study.drop_form(int(form_id), reason, keyer)
        return study.add_decision(
            participant, "", DROP, str(form_id), None, reason, keyer, p1, p2, "duplicate_id",
            form1=int(form_id) if pass_no != 2 else None,
            form2=int(form_id) if pass_no == 2 else None,
        )


def confirm_one_pass(study, row, reason: str, keyer: str) -> int:
    """Confirm that a form keyed in one pass only is a real paper form.

    The row stays ``open`` (``_decision_action`` = ``one_pass_only``) until
    the other pass keys that form: a verified value needs two passes.

    >>> confirm_one_pass(study, rows.iloc[0], "paper found, not yet keyed in pass 2", "LM")  # doctest: +SKIP
    """
    kind = _text(row, "kind")
    if kind not in ("only_in_pass1", "only_in_pass2"):
        raise DecisionError(
            f"participant {_text(row, 'participant')} is not a form in one pass only — "
            "confirm only such forms."
        )
    return decide(study, row, ONE_PASS_ONLY, "", "", reason, keyer)


# --------------------------------------------------------------------------- independence


def keyed_by(study, participant: str) -> set[str]:
    """Keyers of the forms (not dropped) whose ID is ``participant``.

    >>> keyed_by(study, "17")                          # doctest: +SKIP
    {'AB', 'JM'}
    """
    forms = study.forms()
    if forms.empty:
        return set()
    ids = _canonical_ids(study.codebook, forms["participant"])
    live = ~forms["dropped"].fillna(False).astype(bool)
    mine = forms[(ids == _canonical_id(study.codebook, participant)).to_numpy() & live.to_numpy()]
    return {str(k) for k in mine["keyer"].dropna() if str(k).strip()}


def independence_warning(study, participant: str, resolver: str) -> str | None:
    """A warning when ``resolver`` keyed one of ``participant``'s forms; else None.

    Never blocks. Barchard, Freeman, Ochoa & Stephens (2020, Behavior
    Research Methods) found that errors left after double entry come from
    making the two entries agree rather than checking the paper, and advise
    resolving against the paper, ideally by someone else.

    >>> independence_warning(study, "17", "AB")        # doctest: +SKIP
    'You (AB) keyed a pass of participant 17: ...'
    """
    who = str(resolver).strip()
    if not who or who not in keyed_by(study, participant):
        return None
    return (
        f"You ({who}) keyed a pass of participant {participant}: check each value "
        "against the paper, not against the other pass, or ask someone else to resolve it."
    )


def keyed_by_resolver(study, resolver: str, participants: Iterable[str] | None = None) -> list[str]:
    """Participants (of ``participants``, else all) with a form ``resolver`` keyed.

    One query for a whole decisions file or worklist, in natural ID order.

    >>> keyed_by_resolver(study, "AB", ["17", "18"])   # doctest: +SKIP
    ['17', '18']
    """
    forms = study.forms()
    who = str(resolver).strip()
    if forms.empty or not who:
        return []
    ids = _canonical_ids(study.codebook, forms["participant"]).to_numpy(dtype=object)
    mine = (forms["keyer"].astype(str).str.strip() == who).to_numpy() & ~forms["dropped"].to_numpy(dtype=bool)
    found = set(ids[mine]) - {""}
    if participants is not None:
        found &= {_canonical_id(study.codebook, p) for p in participants}
    ordered = sorted(found)
    return [ordered[i] for i in _natural_order(pd.Index(ordered, dtype=object))]


# --------------------------------------------------------------------------- helpers


def cell_text(value) -> str:
    """One worklist cell as text: None and NA give "" (the worklist mixes both).

    >>> cell_text(pd.NA), cell_text(None), cell_text(17)
    ('', '', '17')
    """
    if value is None:
        return ""
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    return str(value)


def _text(row, name: str) -> str:
    return cell_text(_get(row, name))


def _get(row, name: str):
    if row is None:
        return None
    if isinstance(row, dict):
        return row.get(name)
    try:
        return row[name]
    except (KeyError, IndexError, TypeError):
        return getattr(row, name, None)


def _int_or_none(value) -> int | None:
    if value is None:
        return None
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    try:
        return int(value)
    except (TypeError, ValueError):
        return None


def _forms_of(row) -> tuple[int | None, int | None]:
    return _int_or_none(_get(row, "_form1")), _int_or_none(_get(row, "_form2"))


def _variable(codebook: Codebook, row) -> Variable:
    name = _text(row, "variable")
    if not name:
        raise DecisionError(
            f"participant {_text(row, 'participant')}: a form-level problem has no field "
            "to take a value for — pair, drop or confirm the form instead."
        )
    if name not in codebook:
        raise DecisionError(f'"{name}" is not a variable of this study — check the name.')
    return codebook[name]


def _check_value(var: Variable, text: str, keep: bool, where: str = "",
                 keep_hint: str = "keep it only if the paper really says it") -> str:
    """The store action for ``text`` in ``var``, or DecisionError when it cannot stand."""
    parsed = parse(var, text)
    if parsed.problem == INVALID_TYPE:
        raise DecisionError(
            f'{where}"{text.strip()}" cannot stand in {var.name}, which takes '
            f"{allowed_text(var)} — write the paper's value, leave it empty for a blank, "
            "or use a missing code."
        )
    if parsed.problem:
        if not keep:
            raise DecisionError(
                f'{where}"{text.strip()}" is outside {var.name}\'s rule '
                f"({allowed_text(var)}) — {keep_hint}."
            )
        return KEEP
    return VALUE


def _pass_value(study, row, pass_no: int) -> tuple[str, str]:
    form = _forms_of(row)[pass_no - 1]
    name = _text(row, "variable")
    if form is not None and name:
        record = study.form(form)
        state = (record.states or {}).get(name)
        if state is None:
            raise DecisionError(
                f"pass {pass_no} has not keyed {name} for participant "
                f"{_text(row, 'participant')} — key it first or type the paper's value."
            )
        return str((record.texts or {}).get(name) or ""), str(state)
    shown = _text(row, f"pass{pass_no}")
    if shown == ILLEGIBLE_SHOWN:
        return "", ILLEGIBLE
    return shown, KEYED if shown.strip() else BLANK


def _canonical_set(var: Variable, values: Iterable[str]) -> set[str]:
    values = list(values)
    if not values:
        return set()
    canon, _ = canonical_series(var, pd.Series(values, dtype=object))
    return set(canon.dropna())


ProgressFn = Callable[[int, int], None]


def _natural_order(ids: pd.Index) -> list[int]:
    """Positions of ``ids`` in natural order, as the comparison sorts them."""
    numbers = pd.to_numeric(pd.Series(ids, dtype=object), errors="coerce")
    if len(ids) and numbers.notna().all() and (numbers % 1 == 0).all():
        return np.argsort(numbers.to_numpy(), kind="stable").tolist()  # the usual all-number IDs
    from .compare import natural_key

    return sorted(range(len(ids)), key=lambda i: natural_key(str(ids[i])))


# --------------------------------------------------------------------------- file and table


def apply_decisions_file(study, path, keyer: str) -> int:
    """Apply a decisions file (CSV or XLSX) all or nothing; returns decisions recorded.

    Columns ``participant, variable, value, reason``. Every row is checked
    before anything is written: an unknown participant or variable, a cell
    with nothing open, a value that cannot stand, a missing reason or a
    second row for the same cell refuses the whole file with a
    :class:`DecisionError` naming the file, row and column. Then all rows
    apply in one transaction (``core.decisions_file`` has the details).

    >>> apply_decisions_file(study, "decisions.csv", "LM")   # doctest: +SKIP
    12
    """
    from .decisions_file import apply_file

    return apply_file(study, path, keyer)


def verified_table(study, draft: bool = False, progress: ProgressFn | None = None,
                   rows: pd.DataFrame | None = None) -> Verified:
    """What stands for every participant not set aside, typed per the codebook.

    A cell holds the agreed value where both passes agree and nothing is
    open, else the value of its settled decision; blank and illegible paper
    give NA, and declared missing codes stay as codes. Forms are paired by
    ID; dropped forms are left out. While anything is open (set-aside
    participants aside) it refuses with :class:`OpenWorkError` (counts by
    kind), unless ``draft``: open cells are then NA and listed in
    ``open_cells``, and a participant with an open form-level problem has
    only its ID. ``progress(done, total)`` counts variables typed. ``rows``
    is a worklist already computed (:func:`worklist`); None computes it.

    >>> verified_table(study).data.head()             # doctest: +SKIP
    """
    from .verified_build import build_verified

    return build_verified(study, draft=draft, progress=progress, rows=rows)
