"""The decisions file behind ``keyproof decide --from``: check every row, then apply all.

Columns ``participant, variable, value, reason`` (CSV or XLSX, any order,
other columns ignored). An empty value means blank on paper; a declared
missing code is written as itself. A value outside the variable's range or
codes is refused unless its reason starts with ``paper says:`` (any case):
the paper really shows that value, so it is kept and listed in the report.

The trade-off is all or nothing: one bad row refuses the whole file with its
row number, so a half-applied file never has to be untangled; the good rows
then apply in one transaction. Callers use
:func:`core.resolution.apply_decisions_file`.
"""

from __future__ import annotations

from pathlib import Path
from zipfile import BadZipFile

import pandas as pd

from .errors import DecisionError
from .resolution import (
    BLANK,
    KEEP_PREFIX,
    KEYED,
    SETTLED,
    VALUE,
    _canonical_ids,
    _check_value,
    _need_keyer,
    decide,
    worklist,
)

_FILE_COLUMNS = ("participant", "variable", "value", "reason")


def apply_file(study, path, keyer: str) -> int:
    """Apply a decisions file (CSV or XLSX) all or nothing; returns decisions recorded.

    Columns ``participant, variable, value, reason`` (any order, more are
    ignored). Every row is checked before anything is written: an unknown
    participant or variable, a cell with nothing open, a value that cannot
    stand, a missing reason or a second row for the same cell refuses the
    whole file with a :class:`DecisionError` naming the file, row and column.
    Then all rows apply in one transaction. See the module docstring for
    blanks, missing codes and ``paper says:``.

    >>> apply_file(study, "decisions.csv", "LM")   # doctest: +SKIP
    12
    """
    path = Path(path)
    keyer = _need_keyer(keyer)
    table = _read_decisions(path)
    codebook = study.codebook
    rows = worklist(study)
    pending = rows[(rows["_status"] != SETTLED) & (rows["variable"].astype("string").fillna("") != "")]
    open_at: dict[tuple[str, str], list[int]] = {}
    for i, p, v in zip(pending.index, pending["participant"].astype(str),
                       pending["variable"].astype(str), strict=True):
        open_at.setdefault((p, v), []).append(i)
    forms = study.forms()
    known = set(_canonical_ids(codebook, forms["participant"])) if len(forms) else set()
    ids = _canonical_ids(codebook, table["participant"])
    plan: list[tuple[pd.Series, str, str, str, str]] = []
    seen: dict[tuple[str, str], int] = {}
    for pos, (participant, raw) in enumerate(zip(ids, table.itertuples(index=False), strict=True)):
        line = pos + 2  # the header is row 1, as a spreadsheet shows it

        def bad(column: str, what: str, line: int = line) -> DecisionError:
            return DecisionError(f'{path.name} row {line}, column "{column}": {what}.')

        name = raw.variable.strip()
        if not any(str(x).strip() for x in raw):
            continue  # an empty line; kept while reading so row numbers stay true
        if not raw.participant.strip():
            raise bad("participant", "the participant ID is empty — fill it in")
        if participant not in known:
            raise bad("participant", f'"{raw.participant.strip()}" has no form in this study — check the ID')
        if name not in codebook:
            raise bad("variable", f'"{name}" is not a variable of this study — check the name')
        reason = " ".join(raw.reason.split())
        if not reason:
            raise bad("reason", "the reason is empty — say why this value stands")
        cell = (participant, name)
        if cell not in open_at:
            raise bad("variable", f"participant {participant} has nothing open in {name} — remove the row")
        if cell in seen:
            raise bad("variable", f"participant {participant}, {name} is already decided in row {seen[cell]} — keep one row")
        seen[cell] = line
        value = raw.value.strip()
        if value:
            keep = reason.lower().startswith(KEEP_PREFIX)
            try:
                action = _check_value(codebook[name], value, keep,
                                      keep_hint=f'start the reason with "{KEEP_PREFIX}" if the paper really shows it')
            except DecisionError as exc:
                raise bad("value", str(exc)[:-1]) from None
            state = KEYED
        else:
            action, state = VALUE, BLANK
        for i in open_at[cell]:
            plan.append((rows.loc[i], action, value, state, reason))
    with study.transaction():
        for row, action, value, state, reason in plan:
            decide(study, row, action, value, state, reason, keyer)
    return len(plan)


def _read_decisions(path: Path) -> pd.DataFrame:
    """The decisions file as text columns (header row lower-cased, trimmed)."""
    if not path.is_file():
        raise DecisionError(f"{path.name} does not exist — check the file name.")
    suffix = path.suffix.lower()
    try:
        if suffix == ".xlsx":
            table = _read_xlsx(path)
        elif suffix in (".csv", ".txt", ".tsv"):
            with path.open(encoding="utf-8-sig") as handle:
                header = handle.readline()
            # The header names the columns, so it shows the separator plainly.
            sep = max((",", ";", "\t"), key=header.count)
            table = pd.read_csv(path, dtype=str, keep_default_na=False, sep=sep,
                                encoding="utf-8-sig", skip_blank_lines=False)
        else:
            raise DecisionError(f"{path.name} is neither .csv nor .xlsx — save it as one of them.")
    except DecisionError:
        raise
    except (UnicodeDecodeError, ValueError, OSError, KeyError, BadZipFile, pd.errors.ParserError) as exc:
        raise DecisionError(f"{path.name} could not be read as a table ({exc}) — save it as UTF-8 CSV or XLSX.") from None
    table.columns = [str(c).strip().lower() for c in table.columns]
    for col in _FILE_COLUMNS:
        if col not in table.columns:
            raise DecisionError(
                f'{path.name} row 1, column "{col}" is missing — the file needs the columns '
                "participant, variable, value, reason."
            )
    return table[list(_FILE_COLUMNS)].astype(str).reset_index(drop=True)


def _read_xlsx(path: Path) -> pd.DataFrame:
    from openpyxl import load_workbook

    book = load_workbook(path, read_only=True, data_only=True)
    try:
        sheet = book["decisions"] if "decisions" in book.sheetnames else book.worksheets[0]
        cells = [[_cell_text(v) for v in r] for r in sheet.iter_rows(values_only=True)]
    finally:
        book.close()
    if not cells:
        return pd.DataFrame(columns=list(_FILE_COLUMNS))
    width = len(cells[0])
    body = [(r + [""] * width)[:width] for r in cells[1:]]
    return pd.DataFrame(body, columns=cells[0], dtype=object)


def _cell_text(value) -> str:
    """A spreadsheet cell as the text a person sees (whole numbers without ``.0``)."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value).upper()
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if hasattr(value, "date") and hasattr(value, "isoformat"):
        return value.date().isoformat() if hasattr(value, "hour") else value.isoformat()
    return str(value)
