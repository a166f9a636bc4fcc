"""Read a pass keyed in a spreadsheet (CSV or XLSX) as exact texts, and import it.

Keyers sometimes type a pass into a spreadsheet instead of the keying screen.
This module turns such a file into a table of the exact texts typed (one row
per form, the codebook's columns in paper order) for ``Study.import_pass`` or
for comparing two files without a study.

Every cell is read as text: ``07`` stays ``07`` and ``NA`` stays ``NA``, so
the comparison sees what was typed. Spreadsheets store some things typed as
numbers or dates; those are written back as the text a person would have typed
(a whole number without ``.0``, a date in the variable's format). Anything the
reader had to interpret (an encoding guessed, a formula read by its saved
result, merged cells, hidden rows) is said in the notes, never done silently.
Column names must match the codebook exactly; a near miss is suggested but
never mapped.

Trade-off: XLSX files are read with openpyxl cell by cell (it has no column
reader). A CSV file with no quote character and one kind of line end (the
usual export) is checked line by line (empty, short and overlong rows, as
below) and split by pyarrow's CSV reader into categorical columns (each
column's distinct texts numbered once, see ``core.csv_columns``), many times
faster than the ``csv`` module; any other CSV
file goes through the ``csv`` module, which handles quoted separators and
line breaks inside cells. Both give the same rows, notes and errors.
"""

from __future__ import annotations

import codecs
import csv
import datetime as dt
import io
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from .codebook import Codebook
from .csv_columns import categorical_columns
from .errors import ImportFileError, UsageError
from .passdata import PassData
from .values import ISO_DATE

CSV_SUFFIXES = (".csv", ".txt", ".tsv")
XLSX_SUFFIXES = (".xlsx", ".xlsm")
_DELIMITERS = (",", ";", "\t")


@dataclass(frozen=True)
class ImportResult:
    """What one import brought into a study."""

    source: str
    """The file's name, as journaled."""
    pass_no: int
    keyer: str
    form_ids: tuple[int, ...]
    """The new forms' ids in the store, in file order."""
    notes: tuple[str, ...] = ()
    """What the reader interpreted (encoding, formulas, merged cells, ...), one sentence each."""
    duplicate_ids: tuple[str, ...] = ()
    """Participant IDs that occur on more than one row of the file (imported; compare flags them)."""

    @property
    def forms(self) -> int:
        """Number of forms imported."""
        return len(self.form_ids)

    def summary(self) -> str:
        """One line for the command line.

        >>> ImportResult("p1.csv", 1, "AB", (1, 2)).summary()
        'p1.csv: 2 forms imported into pass 1 (keyer AB).'
        """
        text = f"{self.source}: {self.forms} form{'s' if self.forms != 1 else ''} imported into pass {self.pass_no} (keyer {self.keyer})."
        if self.duplicate_ids:
            shown = ", ".join(self.duplicate_ids[:5])
            more = "" if len(self.duplicate_ids) <= 5 else f" and {len(self.duplicate_ids) - 5} more"
            text += f" IDs on more than one row: {shown}{more}."
        return text


def read_keyed_file(
    path: str | Path, codebook: Codebook, encoding: str | None = None
) -> tuple[pd.DataFrame, list[str]]:
    """Read a keyed CSV or XLSX file as exact texts, checked against the codebook's columns.

    Returns ``(texts, notes)``: ``texts`` has one row per form, indexed by the
    spreadsheet row number (the header is row 1), the codebook's names as
    columns in paper order, every cell a ``str`` (``""`` for an empty cell; a
    plain CSV file's columns are categorical, of ``str``, others hold objects).
    ``notes`` lists what was interpreted on the way, one sentence each.
    ``encoding`` applies to CSV only; None detects UTF-8 (with or without a
    byte-order mark), then cp1252, then latin-1.

    Raises :class:`ImportFileError` with one located sentence when the file
    cannot be read or its columns are not the codebook's.

    >>> texts, notes = read_keyed_file("pass1.csv", codebook)  # doctest: +SKIP
    >>> texts.loc[14, "age"]  # doctest: +SKIP
    '07'
    """
    path = Path(path)
    if not path.is_file():
        raise ImportFileError(f"{path.name}: no such file — check the path.")
    suffix = path.suffix.lower()
    if suffix in XLSX_SUFFIXES:
        header, rows, row_numbers, notes, letters = _read_xlsx(path, codebook)
        frame = pd.DataFrame(rows, columns=range(len(header)), dtype=object).fillna("")
    elif suffix == ".xls":
        raise ImportFileError(
            f"{path.name}: the old .xls format cannot be read — save it as .xlsx or .csv."
        )
    else:
        header, frame, row_numbers, notes = _read_csv(path, encoding)
        letters = None
    # Spreadsheets often save a trailing separator: a nameless, empty column.
    unnamed = {i for i, h in enumerate(header)
               if not h and (frame[i].str.strip() == "").all()}
    if unnamed:
        notes.append(f"{path.name}: {len(unnamed)} empty column{'s' if len(unnamed) != 1 else ''}"
                     " without a name ignored.")
    order = _check_columns(path.name, header, codebook, letters, unnamed)
    frame.index = pd.Index(row_numbers, name="row", dtype="int64")
    # Every cell is already a str; select columns only when the file's differ (a copy).
    texts = frame if order == list(range(frame.shape[1])) else frame[order]
    texts.columns = codebook.names
    if [header[i] for i in order] != list(header):
        notes.append(f"{path.name}: the columns are not in paper order; they were read by name.")
    return texts, notes


def read_pass_file(
    path: str | Path,
    codebook: Codebook,
    pass_no: int,
    encoding: str | None = None,
    keyer: str = "",
    notes: list[str] | None = None,
) -> PassData:
    """Read a keyed file as one pass, for comparing two files without a study.

    Rows are forms, indexed and labelled by their spreadsheet row
    (``"pass1.csv row 14"``); an empty cell is blank on paper. The reader's
    notes are appended to ``notes`` when a list is given. The text and state
    columns are categorical (see ``PassData.from_texts``).

    >>> p = read_pass_file("pass1.csv", codebook, 1)  # doctest: +SKIP
    >>> p.label.iloc[0]  # doctest: +SKIP
    'pass1.csv row 2'
    """
    texts, found = read_keyed_file(path, codebook, encoding)
    if notes is not None:
        notes.extend(found)
    return PassData.from_texts(pass_no, texts, keyer, label_prefix=f"{Path(path).name} row")


def import_file(study, path: str | Path, pass_no: int, keyer: str,
                encoding: str | None = None) -> ImportResult:
    """Import a keyed file into ``study`` as forms of pass ``pass_no`` keyed by ``keyer``.

    All rows go in one transaction through ``Study.import_pass``: either the
    whole file is imported or, on any error, nothing and the study is
    unchanged. Rows that share a participant ID are imported (the comparison
    flags them), and listed in the result.

    >>> result = import_file(study, "pass1.csv", 1, "AB")  # doctest: +SKIP
    >>> result.summary()  # doctest: +SKIP
    'pass1.csv: 60 forms imported into pass 1 (keyer AB).'
    """
    if pass_no not in (1, 2):
        raise UsageError(f"pass {pass_no} does not exist — use --pass 1 or --pass 2.")
    keyer = (keyer or "").strip()
    if not keyer:
        raise UsageError("no keyer given — name who keyed the file with --keyer, e.g. --keyer AB.")
    path = Path(path)
    codebook = study.codebook
    texts, notes = read_keyed_file(path, codebook, encoding)
    id_name = codebook.id_variable.name
    ids = texts[id_name].str.strip()
    repeated = ids[ids.duplicated(keep=False) & (ids != "")]
    duplicates = tuple(dict.fromkeys(repeated))
    before = study.forms(pass_no)
    if len(before):
        notes.append(
            f"pass {pass_no} already held {len(before)} form{'s' if len(before) != 1 else ''}; "
            "the file's forms were added to them."
        )
    form_ids = study.import_pass(pass_no, keyer, texts.reset_index(drop=True), source=path.name)
    return ImportResult(path.name, pass_no, keyer, tuple(int(f) for f in form_ids),
                        tuple(notes), duplicates)


# --- CSV ---------------------------------------------------------------------------------------


def _decode(path: Path, encoding: str | None) -> tuple[str, list[str]]:
    raw = path.read_bytes()
    name = path.name
    if encoding:
        try:
            codecs.lookup(encoding)
        except LookupError:
            raise ImportFileError(
                f"{name}: unknown encoding {encoding!r} — use e.g. utf-8, cp1252 or latin-1."
            ) from None
        try:
            text = raw.decode(encoding)
        except UnicodeDecodeError as exc:
            row = raw.count(b"\n", 0, exc.start) + 1
            raise ImportFileError(
                f"{name} row {row}: byte 0x{raw[exc.start]:02x} is not valid {encoding} — "
                "give the file's real encoding with --encoding (e.g. cp1252)."
            ) from None
        return text.removeprefix("\ufeff"), []
    if raw.startswith(codecs.BOM_UTF8):
        return raw[len(codecs.BOM_UTF8):].decode("utf-8", errors="strict"), []
    # A spreadsheet's "Unicode text" export is UTF-16 with a byte-order mark.
    if raw.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        try:
            return raw.decode("utf-16").removeprefix("\ufeff"), [f"{name}: read as UTF-16."]
        except UnicodeDecodeError:
            pass
    try:
        return raw.decode("utf-8"), []
    except UnicodeDecodeError:
        pass
    # Windows spreadsheet exports in Western Europe are cp1252; latin-1 reads any byte.
    for guess in ("cp1252", "latin-1"):
        try:
            text = raw.decode(guess)
        except UnicodeDecodeError:
            continue
        return text, [
            f"{name}: not UTF-8, read as {guess} — if accented letters look wrong, "
            "give the encoding with --encoding."
        ]
    raise AssertionError("latin-1 decodes every byte")  # pragma: no cover


def _sniff(first_line: str) -> str:
    counts = {d: first_line.count(d) for d in _DELIMITERS}
    best = max(_DELIMITERS, key=lambda d: counts[d])
    return best if counts[best] else ","


def _read_csv(path: Path, encoding: str | None):
    name = path.name
    text, notes = _decode(path, encoding)
    if not text.strip():
        raise ImportFileError(
            f"{name}: the file is empty — export the pass with a header row of codebook names."
        )
    first = text.split("\n", 1)[0]
    delimiter = _sniff(first)
    if delimiter != ",":
        notes.append(f"{name}: columns separated by {'tabs' if delimiter == chr(9) else 'semicolons'}.")
    plain = text.replace("\r\n", "\n") if "\r" in text else text
    if not any(c in plain for c in '"\r\x00'):
        # Nothing quoted and one kind of line end: each line is one row, split at the
        # separator, which the C reader of pandas does many times faster than csv.
        return _read_plain_csv(name, plain, delimiter, notes)
    del plain
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        header = [h.strip() for h in next(reader)]
        rows, numbers, short, empty = [], [], [], 0
        start = reader.line_num + 1
        for cells in reader:
            line = start
            start = reader.line_num + 1
            if not any(c.strip() for c in cells):
                empty += 1
                continue
            if len(cells) > len(header):
                raise ImportFileError(
                    f"{name} row {line}: {len(cells)} cells but the header has {len(header)} "
                    "columns — remove the extra cell, or quote a value that contains "
                    f"the separator {delimiter!r}."
                )
            if len(cells) < len(header):
                short.append(line)
                cells = cells + [""] * (len(header) - len(cells))
            rows.append(cells)
            numbers.append(line)
    except csv.Error as exc:
        raise ImportFileError(
            f"{name} row {reader.line_num}: the file cannot be read as CSV ({exc}) — "
            "check the quotes on that row."
        ) from None
    _row_notes(name, short, empty, notes)
    return header, pd.DataFrame(rows, columns=range(len(header)), dtype=object), numbers, notes


def _row_notes(name: str, short: list[int], empty: int, notes: list[str]) -> None:
    if short:
        notes.append(
            f"{name}: {_rows_text(short)} had fewer cells than the header; "
            "the missing cells were read as empty."
        )
    if empty:
        notes.append(f"{name}: {empty} empty row{'s' if empty != 1 else ''} skipped.")


def _read_plain_csv(name: str, text: str, delimiter: str, notes: list[str]):
    """``_read_csv`` for a file with no quotes and ``\\n`` line ends: the same rows and notes.

    Lines are checked one by one (a row each: empty, short, too long); the
    cells are then split into categorical columns by pyarrow's CSV reader
    (``core.csv_columns``), which numbers each column's distinct texts as it
    goes, so they are never hashed again.
    """
    lines = text.split("\n")
    if lines[-1] == "":
        lines.pop()  # the line end of the last row, not an empty row
    # An empty first line is a header of no names, as the csv module reads it.
    header = [h.strip() for h in lines[0].split(delimiter)] if lines[0] else []
    width = len(header)
    kept, numbers, short, empty = [], [], [], 0
    for number, line in enumerate(lines[1:], start=2):
        cells = line.count(delimiter) + 1
        # A line starting with a visible character is not empty; look closer otherwise.
        first = line[:1]
        if (not first or first == delimiter or first.isspace()) \
                and not line.replace(delimiter, "").strip():
            empty += 1
            continue
        if cells > width:
            raise ImportFileError(
                f"{name} row {number}: {cells} cells but the header has {width} "
                "columns — remove the extra cell, or quote a value that contains "
                f"the separator {delimiter!r}."
            )
        if cells < width:
            short.append(number)
            line += delimiter * (width - cells)  # the cells a short row lacks, empty
        kept.append(line)
        numbers.append(number)
    _row_notes(name, short, empty, notes)
    if not kept:
        return header, pd.DataFrame(columns=range(width), dtype=object), numbers, notes
    del lines
    return header, categorical_columns("\n".join(kept).encode("utf-8"), width, delimiter), \
        numbers, notes


# --- XLSX --------------------------------------------------------------------------------------


def _read_xlsx(path: Path, codebook: Codebook):
    from openpyxl import load_workbook
    from openpyxl.utils import column_index_from_string, get_column_letter
    from openpyxl.utils.exceptions import InvalidFileException

    name = path.name
    try:
        # Streamed, saved results of formulas: about twice as fast as a full load.
        book = load_workbook(path, data_only=True, read_only=True)
        sheet = book.worksheets[0]
        grid = list(sheet.iter_rows(values_only=True))
        # What streaming does not give (formulas, merged cells, hidden rows) comes
        # from the sheet's own XML, scanned as text.
        with zipfile.ZipFile(path) as archive:
            xml = archive.read(sheet._worksheet_path).decode("utf-8")
        sheets = len(book.worksheets)
        book.close()
    except (InvalidFileException, zipfile.BadZipFile, OSError, KeyError, ValueError) as exc:
        raise ImportFileError(
            f"{name}: not a readable .xlsx workbook ({exc}) — save it again as .xlsx or .csv."
        ) from None
    notes: list[str] = []
    if sheets > 1:
        notes.append(f"{name}: read sheet {sheet.title!r}, the first of {sheets}.")
    if not grid or all(v is None for v in grid[0]):
        raise ImportFileError(
            f"{name}: the first sheet has no header in row 1 — put the codebook names in row 1."
        )
    width = max(i + 1 for i, v in enumerate(grid[0]) if v is not None)
    header = ["" if v is None else str(v).strip() for v in grid[0][:width]]
    letters = [get_column_letter(i + 1) for i in range(width)]

    def value_at(coordinate: str):
        col, row = _split_cell(coordinate)
        values = grid[row - 1] if row <= len(grid) else ()
        index = column_index_from_string(col) - 1
        return values[index] if index < len(values) else None

    formula_cells = _formula_cells(xml)
    for coordinate in formula_cells:
        col, row = _split_cell(coordinate)
        if row > 1 and column_index_from_string(col) <= width and value_at(coordinate) is None:
            raise ImportFileError(
                f"{name} cell {coordinate}: a formula with no saved result — open and save the "
                "file in a spreadsheet program, or replace the formula by its value."
            )
    if formula_cells:
        notes.append(
            f"{name}: {len(formula_cells)} cell{'s' if len(formula_cells) != 1 else ''} hold "
            f"formulas ({_cells_text(formula_cells)}); their saved results were read."
        )
    for r, values in enumerate(grid[1:], start=2):
        beyond = [i for i, v in enumerate(values[width:], start=width)
                  if v is not None and str(v).strip()]
        if beyond:
            raise ImportFileError(
                f"{name} cell {get_column_letter(beyond[0] + 1)}{r}: a value in a column with "
                "no name in row 1 — name the column or clear the cell."
            )
    var_of_column = {i: codebook[h] for i, h in enumerate(header) if h in codebook}
    rows, numbers, skipped = [], [], []
    for r, values in enumerate(grid[1:], start=2):
        values = list(values[:width]) + [None] * (width - len(values[:width]))
        if all(v is None or (isinstance(v, str) and not v.strip()) for v in values):
            skipped.append(r)
            continue
        rows.append([_cell_text(v, var_of_column.get(i)) for i, v in enumerate(values)])
        numbers.append(r)
    # Empty rows after the last form are a spreadsheet's formatting, not worth a note.
    empty = sum(1 for r in skipped if numbers and r < numbers[-1])
    if empty:
        notes.append(f"{name}: {empty} empty row{'s' if empty != 1 else ''} skipped.")

    merged = re.findall(r'<mergeCell\b[^>]*\bref="([^"]+)"', xml)
    if merged:
        notes.append(
            f"{name}: merged cells {', '.join(merged[:5])}{' …' if len(merged) > 5 else ''}; "
            "the value was read into the first cell of each and the others as empty — "
            "check those forms against the paper."
        )
    hidden_rows = set()
    for m in re.finditer(r"<row\b([^>]*)>", xml):
        number = re.search(r'\br="(\d+)"', m.group(1))
        if number and _hidden(m.group(1)):
            hidden_rows.add(int(number.group(1)))
    hidden = [r for r in numbers if r in hidden_rows]
    if hidden:
        notes.append(f"{name}: hidden {_rows_text(hidden)} were imported like the others.")
    hidden_cols = []
    for m in re.finditer(r"<col\b([^>]*)/?>", xml):
        low, high = re.search(r'\bmin="(\d+)"', m.group(1)), re.search(r'\bmax="(\d+)"', m.group(1))
        if _hidden(m.group(1)) and low and high:
            hidden_cols += [letters[i - 1] for i in range(int(low.group(1)), int(high.group(1)) + 1)
                            if i <= width]
    if hidden_cols:
        notes.append(f"{name}: hidden columns {', '.join(hidden_cols)} were read like the others.")
    return header, rows, numbers, notes, letters


def _hidden(attributes: str) -> bool:
    return re.search(r'\bhidden="(1|true)"', attributes) is not None


def _split_cell(coordinate: str) -> tuple[str, int]:
    m = re.fullmatch(r"\$?([A-Z]+)\$?(\d+)", coordinate)
    return m.group(1), int(m.group(2))


def _formula_cells(xml: str) -> list[str]:
    """Coordinates of the cells holding a formula, in sheet order (from the sheet XML)."""
    cells = []
    for m in re.finditer(r"<f[ >/]", xml):
        start = xml.rfind("<c ", 0, m.start())
        ref = re.match(r'<c\b[^>]*\br="([A-Z]+\d+)"', xml[start:]) if start >= 0 else None
        if ref:
            cells.append(ref.group(1))
    return cells


def _cell_text(value, var) -> str:
    """The text a person would have typed for a spreadsheet cell's stored value."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if value.is_integer():
            return str(int(value))
        text = f"{value:.15g}"  # a spreadsheet keeps 15 significant digits
        if "e" in text:
            import numpy as np

            text = np.format_float_positional(value, trim="-")
        return text
    if isinstance(value, dt.datetime):
        if var is not None and var.type == "date":
            return value.strftime(var.format or ISO_DATE)
        return value.date().isoformat() if value.time() == dt.time() else value.isoformat()
    if isinstance(value, dt.date):
        return value.strftime(var.format or ISO_DATE) if var is not None and var.type == "date" \
            else value.isoformat()
    if isinstance(value, dt.time | dt.timedelta):
        return str(value)
    return str(value)


# --- columns -----------------------------------------------------------------------------------


def _check_columns(name: str, header: list[str], codebook: Codebook,
                   letters: list[str] | None, ignore: set[int] = frozenset()) -> list[int]:
    """Positions of the codebook's variables in ``header``, or one located error."""
    from rapidfuzz import fuzz, process

    def where(i: int) -> str:
        return f"column {letters[i]}" if letters else f"column {i + 1}"

    problems: list[str] = []
    seen: dict[str, int] = {}
    for i, h in enumerate(header):
        if i in ignore:
            continue
        if h in seen:
            problems.append(
                f'{name} row 1, {where(i)} ("{h}"): the column name appears twice '
                f"(also {where(seen[h])}) — keep one of them."
            )
        seen.setdefault(h, i)
    missing = [v for v in codebook.names if v not in seen]
    for i, h in enumerate(header):
        if h in codebook or i in ignore:
            continue
        if not h:
            problems.append(
                f"{name} row 1, {where(i)}: the column has no name — "
                "write its codebook name in the header or remove the column."
            )
            continue
        pool = missing or codebook.names
        best = process.extractOne(h.lower(), [m.lower() for m in pool], scorer=fuzz.ratio,
                                  score_cutoff=70)
        if best is not None:
            suggestion = pool[best[2]]
            problems.append(
                f'{name} row 1, {where(i)} ("{h}"): not a codebook variable, perhaps '
                f'"{suggestion}" — rename the column to match the codebook exactly.'
            )
        else:
            problems.append(
                f'{name} row 1, {where(i)} ("{h}"): not a codebook variable — rename it to '
                "a codebook name or remove the column."
            )
    for v in missing:
        problems.append(
            f'{name} row 1: no column for codebook variable "{v}" — add the column '
            "(it may be empty) or correct the header."
        )
    if problems:
        more = len(problems) - 1
        extra = f" (and {more} more column problem{'s' if more > 1 else ''})" if more else ""
        raise ImportFileError(problems[0].removesuffix(".") + extra + ".")
    return [seen[v] for v in codebook.names]


def _rows_text(rows: list[int]) -> str:
    shown = ", ".join(str(r) for r in rows[:8])
    more = f" and {len(rows) - 8} more" if len(rows) > 8 else ""
    return f"row{'s' if len(rows) != 1 else ''} {shown}{more}"


def _cells_text(cells: list[str]) -> str:
    return ", ".join(cells[:5]) + (f" and {len(cells) - 5} more" if len(cells) > 5 else "")
