"""Reading codebooks from CSV, XLSX and Table Schema JSON; writing Table Schema.

``load_codebook(path)`` is the one entry point. It reads the file into plain
cells (this module), then ``core.codebook_rules`` checks every cell and
raises one ``CodebookError`` listing every problem at once. Table Schema
reading and writing live in ``core.codebook_schema`` and the update diff in
``core.codebook_diff``; both are re-exported here so callers open one module.

What real files look like, and what we do about it:

- CSV: UTF-8 with or without a byte-order mark, UTF-16 with a mark (a
  spreadsheet's "Unicode text"), else Windows-1252, else Latin-1. The
  delimiter (comma, semicolon or tab) is taken from the header line alone,
  because the ``codes`` cells below it hold semicolons of their own, unless a
  first line such as ``sep=;`` names it.
- XLSX: the sheet named ``codebook`` (any case), else the first sheet. Whole
  numbers stored as floats read as ``7``, not ``7.0``; dates read as ISO
  text; formulas by their cached value (a formula the spreadsheet never
  calculated is reported). A cell merged down one column (a section name
  spanning its rows) gives its value to every row; a merge across columns is
  reported, because which column it belongs to would be a guess.
- Header names are matched ignoring case and surrounding spaces only; any
  other unknown column is reported with the nearest known name.
"""

from __future__ import annotations

import csv
import io
from datetime import date, datetime, time
from pathlib import Path

from .codebook import COLUMNS, DEFAULT_MIN_ANSWERED, Codebook, Variable
from .codebook_diff import CodebookDiff, VariableChange, diff_codebooks
from .codebook_rules import RawRow, build_codebook, unknown_column_problem
from .codebook_schema import (
    codebook_from_table_schema,
    read_table_schema,
    to_table_schema,
    write_table_schema,
)
from .errors import CodebookError

__all__ = [
    "CodebookDiff",
    "VariableChange",
    "codebook_from_grid",
    "codebook_from_table_schema",
    "codebook_rows",
    "diff_codebooks",
    "load_codebook",
    "to_table_schema",
    "write_codebook_csv",
    "write_table_schema",
]


def load_codebook(path) -> Codebook:
    """Read and validate a codebook from ``.csv``, ``.xlsx`` or Table Schema ``.json``.

    Raises ``CodebookError`` whose ``problems`` list every problem found, each
    one sentence naming the file, row and variable.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "cb.csv"
    >>> _ = p.write_text("name,type,id,min,max\\npid,string,yes,,\\nage,integer,,99,16\\n")
    >>> load_codebook(p)
    Traceback (most recent call last):
    ...
    core.errors.CodebookError: cb.csv row 3 ("age"): min 99 is greater than max 16 — swap them or fix the typo.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if not path.is_file():
        raise CodebookError(f"{path.name}: no such codebook file — check the path.")
    if suffix in (".csv", ".tsv", ".txt"):
        grid, problems = _read_csv(path), []
    elif suffix in (".xlsx", ".xlsm"):
        grid, problems = _read_xlsx(path)
    elif suffix == ".json":
        return read_table_schema(path)
    elif suffix == ".xls":
        raise CodebookError(f"{path.name}: the old .xls format cannot be read — save it as .xlsx "
                            "(Excel workbook) or .csv and try again.")
    else:
        raise CodebookError(f"{path.name}: unknown codebook format {suffix or '(no extension)'} — "
                            "use a .csv, .xlsx or Table Schema .json file.")
    return codebook_from_grid(grid, path.name, source=str(path), problems=problems)


def codebook_from_grid(grid: list[tuple[int, list[str]]], filename: str, source: str = "",
                       problems: list[str] | None = None) -> Codebook:
    """Build a codebook from ``(row number, cells)`` pairs, the header first.

    The form every tabular reader produces; handy for tests and for callers
    that already hold the table.

    >>> cb = codebook_from_grid([(1, ["name", "type", "id"]), (2, ["pid", "string", "yes"])], "cb.csv")
    >>> cb.id_variable.name
    'pid'
    """
    problems = list(problems or [])
    grid = [(n, cells) for n, cells in grid if any(c.strip() for c in cells)]
    if not grid:
        raise CodebookError(f"{filename} is empty — write a header row (name, label, type, ...) "
                            "and one row per variable.")
    header_row, header = grid[0]
    where = f"{filename} row {header_row}"
    columns: list[str | None] = []
    seen: set[str] = set()
    for i, cell in enumerate(header):
        col = cell.strip().lower()
        if not col:
            has_data = any(i < len(cells) and cells[i].strip() for _, cells in grid[1:])
            if has_data:
                problems.append(f"{where}: column {_letter(i)} has values but no header — "
                                "name the column or delete it.")
            columns.append(None)
        elif col in seen:
            problems.append(f'{where}: column "{cell.strip()}" appears twice — keep one of them.')
            columns.append(None)
        elif col not in COLUMNS:
            problems.append(unknown_column_problem(where, cell.strip()))
            columns.append(None)
        else:
            seen.add(col)
            columns.append(col)
    for needed in ("name", "type"):
        if needed not in seen:
            problems.append(f'{where}: there is no "{needed}" column — add it to the header row.')
    if "name" not in seen or "type" not in seen:
        raise CodebookError(problems)
    rows = []
    for number, cells in grid[1:]:
        values = {col: (cells[i] if i < len(cells) else "") for i, col in enumerate(columns) if col}
        rows.append(RawRow(f"{filename} row {number}", number, values))
    return build_codebook(rows, source=source, problems=problems, label=filename)


def _letter(index: int) -> str:
    from openpyxl.utils import get_column_letter

    return get_column_letter(index + 1)


# --------------------------------------------------------------------------- writing


def codebook_rows(codebook: Codebook) -> list[dict[str, str]]:
    """The codebook in DESIGN.md's tabular form: one dict of cell texts per variable.

    Scale settings are written on every item of a scale only when they differ
    from the defaults. A code label holding ``;`` or ``=`` cannot be written
    in this form (the Table Schema keeps it).

    >>> from core.codebook import Code, Codebook, Variable
    >>> row = codebook_rows(Codebook((Variable("q", "integer", codes=(Code("1", "no"),)),)))[0]
    >>> row["codes"], row["required"]
    ('1=no', 'no')
    """
    return [_row(v) for v in codebook.variables]


def write_codebook_csv(codebook: Codebook, path) -> Path:
    """Write :func:`codebook_rows` as a UTF-8 CSV that :func:`load_codebook` reads back equal.

    >>> import tempfile, pathlib
    >>> from core.codebook import Codebook, Variable
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "codebook.csv"
    >>> cb = Codebook((Variable("pid", is_id=True, required=True),))
    >>> load_codebook(write_codebook_csv(cb, p)) == cb
    True
    """
    from .atomic import atomic_text

    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=list(COLUMNS), lineterminator="\n")
    writer.writeheader()
    writer.writerows(codebook_rows(codebook))
    return atomic_text(path, out.getvalue())


def _row(v: Variable) -> dict[str, str]:
    def yes(flag: bool) -> str:
        return "yes" if flag else "no"

    def bound(x: float | None) -> str:
        return "" if x is None else (str(int(x)) if float(x).is_integer() else repr(float(x)))

    def codes(items) -> str:
        return "; ".join(f"{c.value}={c.label}" if c.label else c.value for c in items)

    custom = v.scale and (v.score, v.min_answered) != ("mean", DEFAULT_MIN_ANSWERED)
    return {
        "name": v.name, "label": v.label, "type": v.type, "id": yes(v.is_id),
        "min": bound(v.min), "max": bound(v.max), "codes": codes(v.codes), "missing": codes(v.missing),
        "required": yes(v.required), "identifying": yes(v.identifying), "section": v.section,
        "scale": v.scale, "reverse": yes(v.reverse), "applies_if": v.applies_if,
        "width": "" if v.width is None else str(v.width), "format": v.format,
        "score": v.score if custom else "", "min_answered": repr(v.min_answered) if custom else "",
    }


# --------------------------------------------------------------------------- CSV


def _decode(path: Path) -> str:
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise CodebookError(f"{path.name}: cannot be read ({exc.strerror}) — check the file "
                            "and its permissions.") from None
    if data.startswith(b"PK\x03\x04"):  # the zip container every .xlsx file is
        raise CodebookError(f"{path.name}: is a spreadsheet workbook, not CSV text — rename it to "
                            ".xlsx, or save it from the spreadsheet as CSV.")
    if data.startswith(b"\xef\xbb\xbf"):
        try:
            return data[3:].decode("utf-8")
        except UnicodeDecodeError as exc:
            raise CodebookError(f"{path.name}: marked as UTF-8 but byte {exc.start + 3} is not "
                                "UTF-8 — save the file again as CSV UTF-8.") from None
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return data.decode("utf-16")
    for encoding in ("utf-8", "cp1252"):
        try:
            return data.decode(encoding)
        except UnicodeDecodeError:
            continue
    return data.decode("latin-1")  # every byte is a Latin-1 character


def _read_csv(path: Path) -> list[tuple[int, list[str]]]:
    text = _decode(path)
    first = next((line for line in text.splitlines() if line.strip()), "")
    if first.lower().startswith("sep=") and len(first.strip()) == 5:
        # A spreadsheet's "sep=;" line names the delimiter; the spreadsheet hides it, so
        # rows are numbered as the user sees them there.
        delimiter = first.strip()[4]
        text = text.split("\n", 1)[1] if "\n" in text else ""
        first = next((line for line in text.splitlines() if line.strip()), "")
    else:
        # The header names hold no delimiters; the cells below may (codes use ";").
        delimiter = max([",", ";", "\t"], key=first.count)
    try:
        # skipinitialspace: `a, "b, c"` is two cells, as a person writing it means.
        records = list(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter,
                                  skipinitialspace=True))
    except csv.Error as exc:
        raise CodebookError(f"{path.name}: cannot be read as CSV ({exc}) — check for an "
                            "unclosed quote.") from None
    return [(i, [c.strip() for c in rec]) for i, rec in enumerate(records, start=1)]


# --------------------------------------------------------------------------- XLSX


def _read_xlsx(path: Path) -> tuple[list[tuple[int, list[str]]], list[str]]:
    import openpyxl
    from openpyxl.utils.exceptions import InvalidFileException

    try:
        book = openpyxl.load_workbook(path, data_only=True)
        formulas = openpyxl.load_workbook(path, data_only=False)
    except (InvalidFileException, OSError, KeyError, ValueError) as exc:
        raise CodebookError(f"{path.name}: not a readable .xlsx workbook ({type(exc).__name__}) — "
                            "save it again from the spreadsheet as .xlsx.") from None
    except Exception as exc:  # zipfile.BadZipFile and friends from a damaged file
        raise CodebookError(f"{path.name}: not a readable .xlsx workbook ({type(exc).__name__}) — "
                            "save it again from the spreadsheet as .xlsx.") from None
    sheet = next((ws for ws in book.worksheets if ws.title.strip().lower() == "codebook"),
                 book.worksheets[0])
    raw = formulas[sheet.title]
    problems: list[str] = []
    values: dict[tuple[int, int], object] = {}
    for row in sheet.iter_rows():
        for cell in row:
            if cell.value is not None:
                values[(cell.row, cell.column)] = cell.value
            elif isinstance(raw.cell(cell.row, cell.column).value, str) and \
                    str(raw.cell(cell.row, cell.column).value).startswith("="):
                problems.append(f"{path.name} row {cell.row}: cell {cell.coordinate} has a formula "
                                "with no saved result — open the file in a spreadsheet, let it "
                                "calculate, and save it again.")
    for merged in sheet.merged_cells.ranges:
        top = values.get((merged.min_row, merged.min_col))
        if merged.min_col != merged.max_col:
            problems.append(f"{path.name} row {merged.min_row}: cells {merged.coord} are merged across "
                            "columns — unmerge them so each column has its own value.")
        elif top is not None:
            for r in range(merged.min_row + 1, merged.max_row + 1):
                values[(r, merged.min_col)] = top
    if not values:
        return [], problems
    last_row = max(r for r, _ in values)
    last_col = max(c for _, c in values)
    grid = [(r, [_cell_text(values.get((r, c))) for c in range(1, last_col + 1)])
            for r in range(1, last_row + 1)]
    return grid, problems


def _cell_text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, datetime):
        return value.date().isoformat() if value.time() == time(0) else value.isoformat(sep=" ")
    if isinstance(value, date | time):
        return value.isoformat()
    return str(value).strip()
