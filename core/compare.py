"""The comparison engine: every place two passes need a look at the paper.

Forms are paired across passes by their participant ID read as a typed value
(``07`` and ``7`` are one integer ID). For paired forms every field is
compared on typed values and states (``core.values``): a state difference
(blank / keyed / illegible / not keyed yet) or a typed difference is a
``mismatch`` with its likely cause (``core.causes``); a value both passes
agree on is checked against the codebook (``invalid_type``, ``out_of_range``,
``not_in_codes``, ``blank`` when required, ``not_applicable`` when
``applies_if`` says it should be blank, or should not be). Forms that cannot
be paired give form-level rows: ``only_in_pass1``/``only_in_pass2`` (with a
suggested partner from ``core.pairing``) and ``duplicate_id``.

Decisions, written down so that later parts can rely on them:

- **One row per cell.** When a cell has several problems the first of
  ``mismatch``, ``not_applicable``, ``invalid_type``, ``out_of_range`` /
  ``not_in_codes``, ``blank`` is reported: settling it against the paper
  settles the rest.
- **Order.** Participants in natural ID order (``2`` before ``10``; IDs that
  are not whole numbers after those, in natural order; a blank ID last); within
  a participant the form-level row comes first (the resolver pulls the form
  once, and first makes sure it is the right paper), then fields in paper
  order. ``_order`` is the paper position, -1 for form-level rows.
- **Duplicated IDs.** A participant ID on two forms of one pass gives one
  ``duplicate_id`` row; that participant's fields are compared once the
  duplicate is settled (a form dropped or its ID corrected), because which
  forms belong together is exactly the open question.
- **Declared missing codes** are always allowed, also where ``applies_if`` is
  false (a keyer may write "not applicable" as its code).
- **Conditions** are evaluated on each pass's values; a field is flagged
  ``not_applicable`` only when both passes agree on the condition, since a
  disagreement there is already a mismatch of the variable it names.
- ``pass1``/``pass2`` show the text as keyed, ``""`` for blank,
  ``(illegible)`` and ``(not keyed)`` for those states.

Speed: the whole of both passes is handled as 2-D arrays of small integer
codes (``core.compare_codes``): the cells of a group of variables sharing the
same rules are numbered among the group's distinct texts (taken straight from
categorical columns, as keyed files arrive; hashed otherwise), so the value
rules run on distinct texts only (a Likert block of 100,000 cells has five);
everything else is array arithmetic. Python-level work happens per variable
group, per discrepancy and per unpaired form, never per cell of a pass.

Length: a little over 600 lines, because the field checks, the form-level
rows and the ordering share the private array layout (``_Side``); turning
cells into codes, the causes and the partner search, which do not, live in
their own modules.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import causes as _causes
from . import compare_codes as _codes
from . import pairing as _pairing
from .codebook import Codebook, Variable
from .conditions import parse_condition
from .errors import CompareError
from .passdata import PassData
from .values import BLANK, ILLEGIBLE, KEYED, allowed_text, canonical_series, rule_problems

#: The discrepancy table's public columns (DESIGN.md), in order.
COLUMNS = ("participant", "variable", "kind", "pass1", "pass2", "cause", "detail")
#: Internal columns: form ids in each pass, paper position, suggested partner form.
INTERNAL = ("_form1", "_form2", "_order", "_partner")
#: Every kind, field-level then form-level (DESIGN.md).
KINDS = ("mismatch", "out_of_range", "not_in_codes", "invalid_type", "blank", "not_applicable",
         "only_in_pass1", "only_in_pass2", "duplicate_id")
FORM_KINDS = ("only_in_pass1", "only_in_pass2", "duplicate_id")

ILLEGIBLE_SHOWN = "(illegible)"
NOT_KEYED_SHOWN = "(not keyed)"

# State codes in the arrays.
_K, _B, _I, _N = _codes.K, _codes.B, _codes.I, _codes.N
# Kind codes; a higher code wins when a cell has several problems.
_KIND_CODE = {"blank": 1, "out_of_range": 2, "not_in_codes": 3, "invalid_type": 4,
              "not_applicable": 5, "mismatch": 6}
_KIND_NAME = np.array(["", "blank", "out_of_range", "not_in_codes", "invalid_type",
                       "not_applicable", "mismatch"], dtype=object)
_PROBLEM_CODE = {"": 0, "out_of_range": 2, "not_in_codes": 3}

Progress = Callable[[int, int], None]


# --------------------------------------------------------------------------- entry points


def compare_passes(
    codebook: Codebook, pass1: PassData, pass2: PassData, progress: Progress | None = None
) -> pd.DataFrame:
    """Every discrepancy between two passes, in the order a resolver works.

    Returns DESIGN.md's columns plus ``_form1``, ``_form2``, ``_order`` and
    ``_partner``; ``table.attrs["fields_compared"]`` holds the number of
    fields compared (paired forms × variables other than the ID, which pairs
    the forms and so always agrees; the report counts the same way).
    ``progress(done, total)`` is
    called as variable groups are done.

    >>> from core.codebook import Codebook, Variable
    >>> cb = Codebook((Variable("id", "integer", is_id=True), Variable("q", "integer", max=5)))
    >>> p1 = PassData.from_texts(1, pd.DataFrame({"id": ["1", "2"], "q": ["3", "4"]}))
    >>> p2 = PassData.from_texts(2, pd.DataFrame({"id": ["01", "2"], "q": ["3", "7"]}))
    >>> compare_passes(cb, p1, p2)[["participant", "variable", "kind", "pass2"]].values.tolist()
    [['2', 'q', 'mismatch', '7']]
    """
    names = codebook.names
    for p in (pass1, pass2):
        _check_pass(codebook, p)
    idvar = codebook.id_variable
    ids1, ids2 = _participants(idvar, pass1), _participants(idvar, pass2)
    dups = set(ids1[(ids1 != "") & ids1.duplicated(keep=False)]) \
        | set(ids2[(ids2 != "") & ids2.duplicated(keep=False)])
    ok1 = ids1[(ids1 != "") & ~ids1.isin(dups)]
    ok2 = ids2[(ids2 != "") & ~ids2.isin(dups)]
    common = _natural_sorted(set(ok1) & set(ok2))
    by_id1 = pd.Series(ok1.index, index=ok1.to_numpy())
    by_id2 = pd.Series(ok2.index, index=ok2.to_numpy())
    forms1 = by_id1.loc[common].to_numpy()
    forms2 = by_id2.loc[common].to_numpy()

    fields = _compare_fields(codebook, pass1, pass2, forms1, forms2, progress)
    fields.insert(0, "participant", np.asarray(common, dtype=object)[fields.pop("_row")]
                  if len(fields) else pd.Series(dtype=object))
    forms = _form_rows(codebook, pass1, pass2, ids1, ids2, dups, set(common))
    table = pd.concat([forms, fields], ignore_index=True) if len(forms) else fields
    table = _finish(table)
    table.attrs["fields_compared"] = len(common) * (len(names) - 1)  # one ID variable
    return table


def compare_study(study, progress: Progress | None = None) -> pd.DataFrame:
    """Compare a study's two passes, leaving out dropped forms.

    ``study`` is a :class:`core.store.Study`; see :func:`compare_passes` for
    the table. Example: ``compare_study(Study.open("s.sqlite", readonly=True))``.
    """
    passes = [study.load_pass(n, include_dropped=False) for n in (1, 2)]
    return compare_passes(study.codebook, passes[0], passes[1], progress)


# --------------------------------------------------------------------------- summary


@dataclass(frozen=True)
class Summary:
    """Counts of a discrepancy table, for the command line and the screens."""

    by_kind: dict[str, int] = field(default_factory=dict)
    """Rows per kind, in DESIGN.md's order; kinds with no rows left out."""
    by_cause: dict[str, int] = field(default_factory=dict)
    """Mismatches per cause, in DESIGN.md's order; causes with no rows left out."""
    fields_compared: int = 0
    """Fields of paired forms compared (forms × variables)."""
    discrepancies: int = 0
    """All rows, form-level ones included."""
    field_discrepancies: int = 0
    """Rows about one field (everything but the form-level kinds)."""

    @property
    def rate_per_10000(self) -> float:
        """Field-level discrepancies per 10,000 fields compared; 0 when none were compared."""
        if not self.fields_compared:
            return 0.0
        return 10_000 * self.field_discrepancies / self.fields_compared

    @property
    def mismatches(self) -> int:
        """Fields the two passes disagree on."""
        return self.by_kind.get("mismatch", 0)

    @property
    def _fields(self) -> str:
        n = self.fields_compared
        return f"{n:,} field{'' if n == 1 else 's'}"

    def lines(self) -> list[str]:
        """A few lines for a terminal or a screen."""
        if not self.discrepancies:
            return [f"{self._fields} compared; nothing to look at."]
        noun = "discrepancy" if self.discrepancies == 1 else "discrepancies"
        out = [f"{self.discrepancies:,} {noun} in {self._fields} compared "
               f"({self.rate_per_10000:.1f} per 10,000 fields)."]
        out.append("by kind: " + ", ".join(f"{k} {n:,}" for k, n in self.by_kind.items()))
        if self.by_cause:
            out.append("mismatch causes: "
                       + ", ".join(f"{k} {n:,}" for k, n in self.by_cause.items()))
        return out


def summarise(table: pd.DataFrame, fields_compared: int | None = None) -> Summary:
    """Counts by kind and cause, and the rate per 10,000 fields.

    ``fields_compared`` defaults to ``table.attrs["fields_compared"]`` (set by
    :func:`compare_passes`).

    >>> t = pd.DataFrame({"kind": ["mismatch", "only_in_pass1"], "cause": ["sign", ""]})
    >>> s = summarise(t, 200)
    >>> s.by_kind, s.rate_per_10000
    ({'mismatch': 1, 'only_in_pass1': 1}, 50.0)
    """
    if fields_compared is None:
        fields_compared = int(table.attrs.get("fields_compared", 0))
    kinds = table["kind"].value_counts()
    causes = table.loc[table["kind"] == "mismatch", "cause"].value_counts()
    by_kind = {k: int(kinds[k]) for k in KINDS if k in kinds.index}
    by_cause = {c: int(causes[c]) for c in _causes.CAUSES if c in causes.index}
    field_rows = int((~table["kind"].isin(FORM_KINDS)).sum())
    return Summary(by_kind, by_cause, int(fields_compared), len(table), field_rows)


# --------------------------------------------------------------------------- ordering


_NUMERIC_ID = re.compile(r"^-?\d+$")
_DIGIT_RUNS = re.compile(r"(\d+)")


def natural_key(participant: str) -> tuple:
    """Sort key: whole-number IDs by value, then other IDs in natural order, blank last.

    >>> sorted(["10", "b2", "2", "", "b10", "a"], key=natural_key)
    ['2', '10', 'a', 'b2', 'b10', '']
    """
    if participant == "":
        return (2,)
    if _NUMERIC_ID.match(participant):
        return (0, int(participant), participant)
    parts = tuple((0, int(p), "") if p.isdigit() else (1, 0, p.casefold())
                  for p in _DIGIT_RUNS.split(participant) if p)
    return (1, parts, participant)


def _natural_sorted(values) -> list:
    """``sorted(values, key=natural_key)``, quicker when every ID is a whole number."""
    values = list(values)
    if all(isinstance(v, str) and _NUMERIC_ID.match(v) for v in values):
        # natural_key gives these (0, int, text): the same order by (int, text).
        return sorted(values, key=lambda v: (int(v), v))
    return sorted(values, key=natural_key)


def _finish(table: pd.DataFrame) -> pd.DataFrame:
    if len(table) == 0:
        return _empty_table()
    uniq = table["participant"].unique()
    rank = {p: r for r, p in enumerate(_natural_sorted(uniq))}
    table = table.assign(_rank=table["participant"].map(rank))
    table = table.sort_values(["_rank", "_order"], kind="stable").drop(columns="_rank")
    table = table.reset_index(drop=True)
    for col in ("_form1", "_form2", "_partner"):
        table[col] = _ids_column(table[col])
    table["_order"] = table["_order"].astype("int64")
    return table[list(COLUMNS + INTERNAL)]


def _ids_column(col: pd.Series) -> pd.Series:
    try:
        return col.astype("Int64")
    except (TypeError, ValueError):
        return col.astype(object)


def _empty_table() -> pd.DataFrame:
    table = pd.DataFrame({c: pd.Series(dtype=object) for c in COLUMNS})
    for c in ("_form1", "_form2", "_partner"):
        table[c] = pd.Series(dtype="Int64")
    table["_order"] = pd.Series(dtype="int64")
    return table


# --------------------------------------------------------------------------- checks


def _check_pass(codebook: Codebook, p: PassData) -> None:
    names = codebook.names
    cols = list(p.text.columns)
    if cols != names:
        missing = [n for n in names if n not in cols]
        extra = [c for c in cols if c not in names]
        where = f"pass {p.pass_no}"
        if missing:
            raise CompareError(f"{where} has no column {missing[0]!r} that the codebook names; "
                               "key or import the pass with the codebook's columns.")
        if extra:
            raise CompareError(f"{where} has a column {extra[0]!r} that is not in the codebook; "
                               "remove it or add it to the codebook.")
        raise CompareError(f"{where} has the codebook's columns in another order; "
                           "reorder them as in the codebook.")
    if list(p.state.columns) != names or not p.state.index.equals(p.text.index):
        raise CompareError(f"pass {p.pass_no}: its state table does not match its text table; "
                           "reload the pass.")
    if not p.text.index.is_unique:
        raise CompareError(f"pass {p.pass_no}: form ids repeat; reload the pass.")


def _participants(idvar: Variable, p: PassData) -> pd.Series:
    """Canonical participant ID per form ("" when the ID is blank, illegible or not keyed)."""
    keyed = (p.state[idvar.name].astype(object) == KEYED).to_numpy(dtype=bool)
    texts = p.text[idvar.name].astype(object).where(keyed, None)
    plain = texts[keyed]
    if idvar.type == "integer" and plain.str.fullmatch(r"0|[1-9][0-9]*").all():
        return texts.where(keyed, "").astype(object)  # already canonical: skip the rules
    canon, _ = canonical_series(idvar, texts)
    return canon.where(keyed, "").fillna("").astype(object)


def _state_codes(state: pd.DataFrame) -> np.ndarray:
    # Hashing the few distinct states beats comparing every cell with each state.
    codes, uniques = pd.factorize(state.to_numpy(dtype=object).ravel())
    lookup = np.array([{KEYED: _K, BLANK: _B, ILLEGIBLE: _I}.get(u, _N) for u in uniques] + [_N],
                      dtype=np.int8)
    return lookup[codes].reshape(state.shape)


def _shown(text: np.ndarray, state: np.ndarray) -> np.ndarray:
    """What ``pass1``/``pass2`` show for cells with these texts and states."""
    out = np.where(state == _B, "", np.where(state == _I, ILLEGIBLE_SHOWN, NOT_KEYED_SHOWN))
    out = out.astype(object)
    keyed = state == _K
    out[keyed] = text[keyed]
    return out


# --------------------------------------------------------------------------- fields


def _signature(var: Variable) -> tuple:
    return (var.type, var.format, var.code_values, var.missing_values, var.min, var.max)


@dataclass
class _Side:
    """One pass over the paired forms, as arrays (rows = paired forms, columns = variables)."""

    state: np.ndarray  # int8 state code
    ucode: np.ndarray  # the cell's text among its variable group's distinct texts; -1 none


@dataclass
class _Rules:
    """Per column, tables indexed by a cell's ``ucode`` (the last entry is for -1, no text).

    Columns of one variable group share their tables. Keeping what the value
    rules say per distinct text, instead of per cell, spares a full copy of
    both passes for each table; cells are looked up where they are needed.
    """

    texts: list[np.ndarray]  # the text keyed (None for -1)
    canon: list[np.ndarray]  # its canonical value (None for -1)
    gid: list[np.ndarray]  # value number, comparable across variables (-1 for -1)
    agreed_kind: list[np.ndarray | None]  # int8 kind code of a value alone; None: all fit
    missing: list[np.ndarray]  # a declared missing code

    def at(self, table: str, side: _Side, rows: np.ndarray, cols: np.ndarray,
           dtype=object) -> np.ndarray:
        """The ``table`` entries of the listed cells of ``side``, one variable at a time."""
        tables = getattr(self, table)
        codes = side.ucode[rows, cols]
        out = np.zeros(len(rows), dtype=dtype)
        for j in np.unique(cols).tolist():
            if tables[j] is not None:  # None: an all-zero table
                at = cols == j
                out[at] = tables[j][codes[at]]
        return out


def _sides(codebook: Codebook, p1: PassData, p2: PassData, forms1, forms2, progress):
    """Both passes as arrays, whether their values are equal, and the per-column tables.

    The cells of each group of variables with the same rules are factorised
    together (pass 2 only where it differs from pass 1), so the value rules
    run once per group, on the group's distinct texts only, and the Python
    work is per group, not per column.
    """
    names = codebook.names
    n, m = len(forms1), len(names)
    pos1, pos2 = p1.text.index.get_indexer(forms1), p2.text.index.get_indexer(forms2)
    # Column-major, since they are filled one group of columns at a time.
    sides = [_Side(np.empty((n, m), np.int8, order="F"), np.empty((n, m), np.int32, order="F"))
             for _ in range(2)]
    # Whether the two passes' canonical values are equal: a bool per cell, where
    # keeping each side's value numbers would take eight bytes.
    same = np.empty((n, m), dtype=bool, order="F")
    rules = _Rules(*([None] * m for _ in range(5)))
    sides[0].state[:] = _codes.state_grid(p1.state, pos1)
    sides[1].state[:] = _codes.state_grid(p2.state, pos2)
    text1, text2 = _codes.columns_of(p1.text), _codes.columns_of(p2.text)
    groups: dict[tuple, list[int]] = {}
    for j, var in enumerate(codebook.variables):
        groups.setdefault(_signature(var), []).append(j)
    global_ids: dict[str, int] = {}
    for done, cols in enumerate(groups.values(), start=1):
        var = codebook.variables[cols[0]]
        # A few columns at a time keeps the copies small; codes wait in ``ucode``
        # until the group's distinct texts are known, then become group codes.
        parts = []
        for start in range(0, len(cols), _codes.CHUNK):
            chunk = cols[start:start + _codes.CHUNK]
            codes_a, codes_b, chunk_uniques = _codes.pair_chunk(text1, text2, pos1, pos2, chunk)
            sides[0].ucode[:, chunk] = codes_a
            sides[1].ucode[:, chunk] = codes_b
            parts.append((chunk, chunk_uniques))
        uniques = parts[0][1] if len(parts) == 1 else \
            pd.unique(np.concatenate([u for _, u in parts])).astype(object)
        index = pd.Index(uniques, dtype=object)
        canon, valid = canonical_series(var, pd.Series(uniques, dtype=object))
        problem = rule_problems(var, canon, valid).map(_PROBLEM_CODE).to_numpy(dtype=np.int8)
        missing = np.zeros(len(uniques), dtype=bool)
        if var.missing:
            codes_missing, _ = canonical_series(var, pd.Series(list(var.missing_values),
                                                               dtype=object))
            missing = (canon.isin(set(codes_missing)) & valid).to_numpy(dtype=bool)
        canon_arr = canon.to_numpy(dtype=object)
        # Index -1 (no text at all) picks the appended last element.
        gid = np.array([global_ids.setdefault(c, len(global_ids)) for c in canon_arr] + [-1],
                       dtype=np.int32)
        kind = np.where(valid.to_numpy(dtype=bool), problem, _KIND_CODE["invalid_type"])
        kind_ext = np.append(kind, 0).astype(np.int8) if kind.any() else None
        missing_ext = np.append(missing, False)
        for chunk, chunk_uniques in parts:
            if len(parts) > 1:
                remap = np.append(_codes.positions(uniques, chunk_uniques, index),
                                  -1).astype(np.int32)
                for side in sides:
                    side.ucode[:, chunk] = remap[side.ucode[:, chunk]]
            ca, cb = sides[0].ucode[:, chunk], sides[1].ucode[:, chunk]
            # Equal codes are equal values; only the other cells need their value numbers.
            eq = ca == cb
            r, c = np.nonzero(~eq)
            eq[r, c] = gid[ca[r, c]] == gid[cb[r, c]]
            same[:, chunk] = eq
        texts_ext = np.append(uniques.astype(object), None)
        canon_ext = np.append(canon_arr, None)
        for j in cols:
            rules.texts[j], rules.canon[j], rules.gid[j] = texts_ext, canon_ext, gid
            rules.agreed_kind[j], rules.missing[j] = kind_ext, missing_ext
        if progress:
            progress(done, len(groups))
    return sides, same, rules


def _conditions(codebook: Codebook, side: _Side, rules: _Rules) -> np.ndarray:
    """Per cell: does its variable apply on this form (True where no ``applies_if``)."""
    n, m = side.state.shape
    out = np.ones((n, m), dtype=bool)
    position = {name: j for j, name in enumerate(codebook.names)}
    for j, var in enumerate(codebook.variables):
        if not var.applies_if.strip():
            continue
        try:
            cond = parse_condition(var.applies_if)
            frame = pd.DataFrame({name: rules.canon[position[name]][side.ucode[:, position[name]]]
                                  for name in cond.names})
            out[:, j] = cond.evaluate(frame).to_numpy(dtype=bool)
        except (ValueError, KeyError) as exc:
            raise CompareError(f"codebook variable {var.name!r}: applies_if {var.applies_if!r} "
                               f"cannot be used ({exc}); fix the codebook.") from None
    return out


def _compare_fields(codebook, p1, p2, forms1, forms2, progress) -> pd.DataFrame:
    variables = codebook.variables
    if len(forms1) == 0:
        return _field_frame([], [], [], [], [], [], [], [], [], [])
    (a, b), same, rules = _sides(codebook, p1, p2, forms1, forms2, progress)
    required = np.array([v.required for v in variables], dtype=bool)
    conditional = np.array([bool(v.applies_if.strip()) for v in variables], dtype=bool)
    cond_a, cond_b = _conditions(codebook, a, rules), _conditions(codebook, b, rules)

    keyed_a, keyed_b = a.state == _K, b.state == _K
    differ = (a.state != b.state) | (keyed_a & keyed_b & ~same)
    del same
    agreed = keyed_a & keyed_b & ~differ
    empty_agreed = ~differ & ((a.state == _B) | (a.state == _I))
    kind = np.zeros(differ.shape, dtype=np.int8)
    kind[empty_agreed & required & ~conditional] = _KIND_CODE["blank"]
    # What an agreed value breaks on its own (invalid_type, out_of_range,
    # not_in_codes): looked up only in columns where some distinct text breaks a rule.
    for j, table in enumerate(rules.agreed_kind):
        if table is not None:
            got = table[a.ucode[:, j]]
            at = agreed[:, j] & (got > 0)
            kind[at, j] = got[at]
    # not_applicable needs an applies_if (elsewhere the condition is always true).
    for j in np.flatnonzero(conditional).tolist():
        missing = rules.missing[j][a.ucode[:, j]]
        ca, cb = cond_a[:, j], cond_b[:, j]
        not_app = (agreed[:, j] & ~missing & ~ca & ~cb) \
            | (empty_agreed[:, j] & required[j] & ca & cb)
        kind[not_app, j] = _KIND_CODE["not_applicable"]
    kind[differ] = _KIND_CODE["mismatch"]

    rows, cols = np.nonzero(kind)
    k = kind[rows, cols]
    text_a, text_b = rules.at("texts", a, rows, cols), rules.at("texts", b, rows, cols)
    shown1 = _shown(text_a, a.state[rows, cols])
    shown2 = _shown(text_b, b.state[rows, cols])
    is_mis = k == _KIND_CODE["mismatch"]
    cause = np.full(len(rows), "", dtype=object)
    if is_mis.any():
        shift = _shift_cells(a, b, differ, rules.gid)
        cause[is_mis] = _mismatch_causes(variables, a, b, rows[is_mis], cols[is_mis],
                                         text_a[is_mis], text_b[is_mis], shift)
    side_a = _side_problems(a, rules, cond_a, required, rows, cols)
    side_b = _side_problems(b, rules, cond_b, required, rows, cols)
    allowed = {j: f"{variables[j].name} allows {allowed_text(variables[j])}"
               for j in np.unique(cols).tolist()}
    detail = [_detail(variables[j], allowed[j], kk, pa, pb, ca, cb, st)
              for j, kk, pa, pb, ca, cb, st in zip(
                  cols.tolist(), k.tolist(), side_a.tolist(), side_b.tolist(),
                  cond_a[rows, cols].tolist(), cond_b[rows, cols].tolist(),
                  a.state[rows, cols].tolist(), strict=True)]
    names = np.array(codebook.names, dtype=object)
    return _field_frame(rows, names[cols], _KIND_NAME[k], shown1, shown2, cause, detail,
                        np.asarray(forms1, dtype=object)[rows],
                        np.asarray(forms2, dtype=object)[rows], cols)


def _field_frame(rows, variable, kind, pass1, pass2, cause, detail, form1, form2, order):
    return pd.DataFrame({
        "_row": np.asarray(rows, dtype=np.int64),
        "variable": np.asarray(variable, dtype=object),
        "kind": np.asarray(kind, dtype=object),
        "pass1": np.asarray(pass1, dtype=object),
        "pass2": np.asarray(pass2, dtype=object),
        "cause": np.asarray(cause, dtype=object),
        "detail": np.asarray(detail, dtype=object),
        "_form1": np.asarray(form1, dtype=object),
        "_form2": np.asarray(form2, dtype=object),
        "_order": np.asarray(order, dtype=np.int64),
        "_partner": np.full(len(rows), None, dtype=object),
    })


def _shift_cells(a: _Side, b: _Side, differ: np.ndarray, gid_of) -> np.ndarray:
    """Field-shift cells; only forms with two or more disagreements can hold a run."""
    out = np.zeros(differ.shape, dtype=bool)
    rows = np.flatnonzero(differ.sum(axis=1) >= 2)
    if len(rows) == 0:
        return out
    # Keys comparable across variables: canonical value and state together.
    keys = [(_gids(s, gid_of, rows) + 1) * 4 + s.state[rows] for s in (a, b)]
    absent = [(s.state[rows] == _B) | (s.state[rows] == _N) for s in (a, b)]
    out[rows] = _causes.field_shift_cells(keys[0], keys[1], differ[rows], absent[0], absent[1])
    return out


def _gids(side: _Side, gid_of, rows: np.ndarray) -> np.ndarray:
    """Value numbers (comparable across variables) of the listed rows."""
    out = np.empty((len(rows), len(gid_of)), dtype=np.int64)
    for j, gid in enumerate(gid_of):
        out[:, j] = gid[side.ucode[rows, j]]
    return out


def _mismatch_causes(variables, a: _Side, b: _Side, rows, cols, text_a, text_b,
                     shift) -> np.ndarray:
    sa, sb = a.state[rows, cols], b.state[rows, cols]
    # Plain lists: one pass over the disagreements, not a string method per step.
    text1 = pd.Series([str(t).strip() if k else "" for t, k in zip(
        text_a.tolist(), (sa == _K).tolist(), strict=True)], dtype=object)
    text2 = pd.Series([str(t).strip() if k else "" for t, k in zip(
        text_b.tolist(), (sb == _K).tolist(), strict=True)], dtype=object)
    numeric = np.array([v.type in ("integer", "number") for v in variables])[cols]
    width = np.array([v.implied_width or 0 for v in variables])[cols]
    s = lambda x: pd.Series(x)  # noqa: E731
    got = _causes.classify(text1, text2, s(sa == _K), s(sb == _K),
                           s((sa == _B) | (sa == _N)), s((sb == _B) | (sb == _N)),
                           s(numeric), s(width), s(shift[rows, cols]))
    return got.to_numpy(dtype=object)


def _side_problems(side: _Side, rules: _Rules, cond, required, rows, cols) -> np.ndarray:
    """Per listed cell, the kind code of what this pass's value alone breaks (0 = fits)."""
    st = side.state[rows, cols]
    keyed = st == _K
    out = np.zeros(len(rows), dtype=np.int8)
    c = cond[rows, cols]
    out[(st == _B) & required[cols] & c] = _KIND_CODE["blank"]
    got = rules.at("agreed_kind", side, rows, cols, np.int8)
    rule = keyed & (got > 0)
    out[rule] = got[rule]
    out[keyed & ~c & ~rules.at("missing", side, rows, cols, bool)] = _KIND_CODE["not_applicable"]
    return out


_BREAKS = {1: "is blank but required", 2: "is out of range", 3: "is not one of the codes",
           4: "is not a valid {type}", 5: "is keyed but the question does not apply"}


def _detail(var: Variable, allowed: str, kind: int, pa: int, pb: int, cond_a: bool,
            cond_b: bool, state: int) -> str:
    if kind == _KIND_CODE["mismatch"]:
        if not pa and not pb:
            return "both values fit the codebook"
        words = {p: _BREAKS[p].format(type=var.type) for p in (pa, pb) if p}
        if pa and pb:
            return f"both break the codebook ({allowed}): pass 1 {words[pa]}; pass 2 {words[pb]}"
        bad, good = (1, 2) if pa else (2, 1)
        return f"pass {bad} {words[pa or pb]} ({allowed}); pass {good} fits"
    if kind == _KIND_CODE["not_applicable"]:
        if state == _K:
            return f"applies only if {var.applies_if}, which is false; keyed in both passes"
        return f"applies ({var.applies_if}) and is required, but blank in both passes"
    if kind == _KIND_CODE["blank"]:
        if state == _I:
            return "required; both passes marked it illegible"
        return "required, blank in both passes"
    if kind == _KIND_CODE["invalid_type"]:
        return _BREAKS[4].format(type=var.type).replace("is ", "both passes keyed ", 1) \
            + (f" written {var.format}" if var.type == "date" and var.format else "")
    return allowed


# --------------------------------------------------------------------------- form level


def _form_rows(codebook, p1: PassData, p2: PassData, ids1, ids2, dups, paired) -> pd.DataFrame:
    idname = codebook.id_variable.name
    rest1 = ids1[~ids1.isin(paired) & ~ids1.isin(dups)]
    rest2 = ids2[~ids2.isin(paired) & ~ids2.isin(dups)]
    records = []
    # Unpaired forms may pair with each other or with a form of a duplicated ID.
    cand1 = ids1[~ids1.isin(paired)]
    cand2 = ids2[~ids2.isin(paired)]
    hints1, hints2 = {}, {}
    if len(rest1) or len(rest2):  # partners are suggested for unpaired forms only
        others = [n for n in codebook.names if n != idname]
        keys1 = _pairing.field_keys(p1.text.loc[cand1.index, others],
                                    p1.state.loc[cand1.index, others])
        keys2 = _pairing.field_keys(p2.text.loc[cand2.index, others],
                                    p2.state.loc[cand2.index, others])
        in1 = cand1.index.get_indexer(rest1.index)
        in2 = cand2.index.get_indexer(rest2.index)
        hints1 = _pairing.suggest(rest1, keys1[in1], cand2, keys2)
        hints2 = _pairing.suggest(rest2, keys2[in2], cand1, keys1)
    for pass_no, p, rest, hints, other in ((1, p1, rest1, hints1, 2), (2, p2, rest2, hints2, 1)):
        shown = _shown(p.text.loc[rest.index, idname].to_numpy(dtype=object),
                       _state_codes(p.state.loc[rest.index, [idname]])[:, 0])
        for form, participant, idtext in zip(rest.index, rest, shown, strict=True):
            where = _label(p, form)
            if participant == "":
                text = f"{where}: the participant ID is blank"
            else:
                text = f"{where}; no form in pass {other} has this ID"
            hint = hints.get(form)
            if hint is not None:
                text += "; " + hint.text(other)
            records.append({
                "participant": participant, "variable": "", "kind": f"only_in_pass{pass_no}",
                "pass1": idtext if pass_no == 1 else "", "pass2": idtext if pass_no == 2 else "",
                "cause": "", "detail": text,
                "_form1": form if pass_no == 1 else None, "_form2": form if pass_no == 2 else None,
                "_order": -1, "_partner": hint.form if hint is not None else None,
            })
    for participant in dups:
        f1 = list(ids1.index[ids1 == participant])
        f2 = list(ids2.index[ids2 == participant])
        parts = []
        for pass_no, p, fs in ((1, p1, f1), (2, p2, f2)):
            parts.append(f"pass {pass_no}: " + (", ".join(_label(p, f) for f in fs) or "none"))
        records.append({
            "participant": participant, "variable": "", "kind": "duplicate_id",
            "pass1": _forms_count(len(f1)), "pass2": _forms_count(len(f2)), "cause": "",
            "detail": "; ".join(parts) + "; its fields are compared once one form a pass remains",
            "_form1": f1[0] if f1 else None, "_form2": f2[0] if f2 else None,
            "_order": -1, "_partner": None,
        })
    return pd.DataFrame.from_records(records, columns=list(COLUMNS + INTERNAL))


def _forms_count(n: int) -> str:
    return f"{n} form" + ("" if n == 1 else "s")


def _label(p: PassData, form) -> str:
    if form in p.label.index:
        label = p.label.loc[form]
        if isinstance(label, str) and label:
            return label
    return f"pass {p.pass_no} form {form}"
