"""Reading keyed spreadsheets: awkward real-world CSV and XLSX files, as exact texts."""

from __future__ import annotations

import datetime as dt
import io
import zipfile

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook

from core.codebook import Codebook, Variable
from core.errors import ImportFileError
from core.importer import read_keyed_file, read_pass_file

CB = Codebook((
    Variable("pid", "integer", is_id=True),
    Variable("age", "integer", min=16, max=99),
    Variable("joined", "date"),
    Variable("born", "date", format="%d.%m.%Y"),
    Variable("town", "string"),
    Variable("plot", "number"),
))
HEADER = ["pid", "age", "joined", "born", "town", "plot"]


def write(tmp_path, name, text, encoding="utf-8"):
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def csv_text(rows, sep=",", header=HEADER):
    return "\n".join(sep.join(r) for r in [header, *rows]) + "\n"


ROWS = [
    ["101", "34", "2019-03-12", "01.02.1990", "Zürich", "12.5"],
    ["102", "07", "", "", "NA", "3.5"],
]


# --- CSV ---------------------------------------------------------------------------------------


def test_cells_stay_exact_text_where_pandas_defaults_would_change_them(tmp_path):
    path = write(tmp_path, "p.csv", csv_text(ROWS))
    # Reference: pandas' own defaults turn "07" into 7 and "NA" into NaN; the
    # reader must not.
    default = pd.read_csv(path)
    assert default.loc[1, "age"] == 7 and pd.isna(default.loc[1, "town"])
    texts, notes = read_keyed_file(path, CB)
    assert texts.loc[3, "age"] == "07"
    assert texts.loc[3, "town"] == "NA"
    assert texts.loc[3, "joined"] == ""
    assert list(texts.columns) == HEADER
    assert notes == []


def test_spreadsheet_row_numbers_index_the_forms(tmp_path):
    # A spreadsheet numbers the header row 1, so the first form is row 2.
    path = write(tmp_path, "p.csv", csv_text(ROWS))
    texts, _ = read_keyed_file(path, CB)
    assert list(texts.index) == [2, 3]


def test_utf8_byte_order_mark_is_not_part_of_the_first_name(tmp_path):
    # The Unicode standard's BOM (U+FEFF) marks the encoding; it is not text.
    path = tmp_path / "bom.csv"
    path.write_bytes(csv_text(ROWS).encode("utf-8-sig"))
    assert path.read_bytes()[:3] == b"\xef\xbb\xbf"
    texts, notes = read_keyed_file(path, CB)
    assert list(texts.columns) == HEADER
    assert texts.loc[2, "town"] == "Zürich"
    assert notes == []


def test_cp1252_file_is_detected_and_said(tmp_path):
    # Bytes 0x93/0x94/0x96 are curly quotes and an en dash in cp1252 and not
    # valid UTF-8; Python's own codec is the reference for the expected text.
    town = "“Bad Saint–Cloud” Café"
    path = write(tmp_path, "win.csv", csv_text([["101", "34", "", "", town, "1"]]), "cp1252")
    with pytest.raises(UnicodeDecodeError):
        path.read_bytes().decode("utf-8")
    texts, notes = read_keyed_file(path, CB)
    assert texts.loc[2, "town"] == town
    assert any("cp1252" in n for n in notes)


def test_latin1_file_read_the_same_detected_or_given(tmp_path):
    # ISO 8859-1 and cp1252 agree on 0xA0-0xFF (both code charts), so
    # detection reads a latin-1 file right; giving latin-1 reads it with no note.
    town = "Ærøskøbing à côté"
    path = write(tmp_path, "lat.csv", csv_text([["101", "34", "", "", town, "1"]]), "latin-1")
    detected, notes = read_keyed_file(path, CB)
    given, given_notes = read_keyed_file(path, CB, encoding="latin-1")
    assert detected.loc[2, "town"] == town == given.loc[2, "town"]
    assert notes and not given_notes


def test_wrong_encoding_given_names_the_row(tmp_path):
    rows = [["101", "34", "", "", "Basel", "1"], ["102", "35", "", "", "Genève", "2"]]
    path = write(tmp_path, "lat.csv", csv_text(rows), "latin-1")
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB, encoding="utf-8")
    assert str(err.value) == (
        "lat.csv row 3: byte 0xe8 is not valid utf-8 — give the file's real encoding "
        "with --encoding (e.g. cp1252)."
    )


def test_unknown_encoding_name_is_refused(tmp_path):
    path = write(tmp_path, "p.csv", csv_text(ROWS))
    with pytest.raises(ImportFileError, match="unknown encoding 'klingon'"):
        read_keyed_file(path, CB, encoding="klingon")


@pytest.mark.parametrize(("sep", "word"), [(";", "semicolons"), ("\t", "tabs")])
def test_semicolon_and_tab_separated_files(tmp_path, sep, word):
    rows = [ROWS[0], [*ROWS[1][:5], "3,5"]]
    path = write(tmp_path, "p.csv", csv_text(rows, sep=sep))
    texts, notes = read_keyed_file(path, CB)
    # Reference: the standard library's csv module reading the same file with
    # the separator named explicitly.
    import csv

    expected = list(csv.reader(io.StringIO(path.read_text("utf-8")), delimiter=sep))[1:]
    assert texts.values.tolist() == expected
    assert texts.loc[3, "plot"] == "3,5"  # a decimal comma is kept as typed
    assert any(word in n for n in notes)


def test_quoted_separator_and_line_break_inside_a_cell(tmp_path):
    # RFC 4180: a quoted field may hold the separator and line breaks; the
    # next record's row number counts the physical lines.
    text = 'pid,age,joined,born,town,plot\n101,34,,,"Lane 3, shed\nnear the gate",1\n102,40,,,X,2\n'
    path = write(tmp_path, "q.csv", text)
    texts, _ = read_keyed_file(path, CB)
    assert texts.loc[2, "town"] == "Lane 3, shed\nnear the gate"
    assert list(texts.index) == [2, 4]


def test_row_with_too_many_cells_is_refused_with_its_row(tmp_path):
    rows = [ROWS[0], ["102", "40", "", "", "Basel", "1", "extra"]]
    path = write(tmp_path, "p.csv", csv_text(rows))
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value).startswith("p.csv row 3: 7 cells but the header has 6 columns")


def test_short_rows_and_empty_rows_are_said(tmp_path):
    text = "pid,age,joined,born,town,plot\n101,34\n\n,,,,,\n102,40,,,Basel,1\n"
    path = write(tmp_path, "p.csv", text)
    texts, notes = read_keyed_file(path, CB)
    assert list(texts.index) == [2, 5]
    assert texts.loc[2].tolist() == ["101", "34", "", "", "", ""]
    assert any("row 2 had fewer cells" in n for n in notes)
    assert any("2 empty rows skipped" in n for n in notes)


def test_columns_in_another_order_are_read_by_name(tmp_path):
    header = ["age", "pid", "joined", "born", "town", "plot"]
    path = write(tmp_path, "p.csv", csv_text([["34", "101", "", "", "", ""]], header=header))
    texts, notes = read_keyed_file(path, CB)
    assert list(texts.columns) == HEADER
    assert texts.loc[2, "pid"] == "101" and texts.loc[2, "age"] == "34"
    assert any("not in paper order" in n for n in notes)


# --- columns that do not match -----------------------------------------------------------------


def test_near_miss_column_is_suggested_never_mapped(tmp_path):
    header = ["pid", "Age", "joined", "born", "town", "plot"]
    path = write(tmp_path, "p.csv", csv_text([ROWS[0]], header=header))
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value) == (
        'p.csv row 1, column 2 ("Age"): not a codebook variable, perhaps "age" — rename the '
        'column to match the codebook exactly (and 1 more column problem).'
    )


def test_unknown_and_missing_columns_are_refused(tmp_path):
    header = ["pid", "age", "joined", "born", "town", "zzzqqq"]
    path = write(tmp_path, "p.csv", csv_text([ROWS[0]], header=header))
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value).startswith('p.csv row 1, column 6 ("zzzqqq"): not a codebook variable')
    path = write(tmp_path, "short.csv", csv_text([ROWS[0][:5]], header=HEADER[:5]))
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value) == (
        'short.csv row 1: no column for codebook variable "plot" — add the column '
        "(it may be empty) or correct the header."
    )


def test_duplicate_column_is_refused(tmp_path):
    header = [*HEADER, "age"]
    path = write(tmp_path, "p.csv", csv_text([[*ROWS[0], "35"]], header=header))
    with pytest.raises(ImportFileError, match=r'column 7 \("age"\): the column name appears twice'):
        read_keyed_file(path, CB)


def test_missing_and_empty_files(tmp_path):
    with pytest.raises(ImportFileError, match="nothere.csv: no such file"):
        read_keyed_file(tmp_path / "nothere.csv", CB)
    with pytest.raises(ImportFileError, match="empty.csv: the file is empty"):
        read_keyed_file(write(tmp_path, "empty.csv", ""), CB)


# --- XLSX --------------------------------------------------------------------------------------


def workbook(rows):
    wb = Workbook()
    ws = wb.active
    ws.title = "pass"
    ws.append(HEADER)
    for r in rows:
        ws.append(r)
    return wb, ws


def test_xlsx_numbers_and_dates_read_as_typed_text(tmp_path):
    wb, _ = workbook([
        [101, 34.0, dt.datetime(2019, 3, 12), dt.datetime(1990, 2, 1), "Basel", 12.5],
        [102.0, "07", dt.date(2020, 1, 5), None, 42, 0.1 + 0.2],
    ])
    path = tmp_path / "p.xlsx"
    wb.save(path)
    texts, notes = read_keyed_file(path, CB)
    # Whole numbers stored as floats come back as typed, without ".0".
    assert texts.loc[2, "age"] == "34" and texts.loc[3, "pid"] == "102"
    # Excel shows doubles to 15 significant digits (its documented precision,
    # from memory), so 0.1 + 0.2 reads as the 0.3 a keyer typed.
    assert texts.loc[3, "plot"] == "0.3" and texts.loc[2, "plot"] == "12.5"
    # ISO 8601 calendar dates, or the variable's own format (strftime, the
    # reference being Python's datetime.strftime).
    assert texts.loc[2, "joined"] == "2019-03-12"
    assert texts.loc[2, "born"] == dt.date(1990, 2, 1).strftime("%d.%m.%Y")
    assert texts.loc[3, "joined"] == "2020-01-05"
    assert texts.loc[3, "age"] == "07" and texts.loc[3, "town"] == "42"
    assert texts.loc[3, "born"] == ""
    assert notes == []


def with_cached_value(path, formula, value):
    """Give a formula the saved result a spreadsheet program would write (openpyxl writes none)."""
    src = zipfile.ZipFile(path)
    parts = {n: src.read(n) for n in src.namelist()}
    src.close()
    sheet = "xl/worksheets/sheet1.xml"
    old = f"<f>{formula}</f><v />".encode()
    assert old in parts[sheet]
    parts[sheet] = parts[sheet].replace(old, f"<f>{formula}</f><v>{value}</v>".encode())
    with zipfile.ZipFile(path, "w") as out:
        for name, data in parts.items():
            out.writestr(name, data)


def test_xlsx_formula_read_by_saved_result_and_said(tmp_path):
    wb, _ = workbook([[101, "=30+4", None, None, "Basel", 1]])
    path = tmp_path / "f.xlsx"
    wb.save(path)
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value).startswith("f.xlsx cell B2: a formula with no saved result")
    with_cached_value(path, "30+4", "34")
    texts, notes = read_keyed_file(path, CB)
    assert texts.loc[2, "age"] == "34"
    assert any("formulas (B2)" in n for n in notes)


def test_xlsx_merged_cells_and_hidden_rows_are_reported(tmp_path):
    wb, ws = workbook([
        [101, 34, None, None, "Basel", 1],
        [102, None, None, None, "Basel", 2],
        [103, 50, None, None, "Bern", 3],
    ])
    ws.merge_cells("B2:B3")
    ws.row_dimensions[4].hidden = True
    ws.column_dimensions["E"].hidden = True
    path = tmp_path / "m.xlsx"
    wb.save(path)
    texts, notes = read_keyed_file(path, CB)
    assert texts["age"].tolist() == ["34", "", "50"]
    assert any("merged cells B2:B3" in n for n in notes)
    assert any("hidden row 4 were imported" in n for n in notes)
    assert any("hidden columns E were read" in n for n in notes)


def test_xlsx_near_miss_column_names_the_letter(tmp_path):
    wb = Workbook()
    wb.active.append(["pid", "age", "joined", "born", "twon", "plot"])
    path = tmp_path / "h.xlsx"
    wb.save(path)
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value).startswith('h.xlsx row 1, column E ("twon"): not a codebook variable, '
                                     'perhaps "town"')


def test_old_xls_and_broken_xlsx_are_refused(tmp_path):
    with pytest.raises(ImportFileError, match="old .xls format"):
        read_keyed_file(write(tmp_path, "p.xls", "x"), CB)
    with pytest.raises(ImportFileError, match="bad.xlsx: not a readable .xlsx workbook"):
        read_keyed_file(write(tmp_path, "bad.xlsx", "not a zip"), CB)


# --- as a pass ---------------------------------------------------------------------------------


def test_read_pass_file_labels_forms_by_spreadsheet_row(tmp_path):
    path = write(tmp_path, "pass1.csv", csv_text(ROWS))
    notes: list[str] = []
    p = read_pass_file(path, CB, 1, keyer="AB", notes=notes)
    assert p.pass_no == 1 and p.forms == 2
    assert p.label.tolist() == ["pass1.csv row 2", "pass1.csv row 3"]
    assert p.state.loc[3, "joined"] == "blank" and p.state.loc[3, "age"] == "keyed"
    assert p.text.loc[3, "age"] == "07"
    assert p.keyer.tolist() == ["AB", "AB"]


def test_trailing_empty_unnamed_column_is_ignored_but_a_named_gap_is_not(tmp_path):
    text = "pid,age,joined,born,town,plot,\n101,34,,,,1,\n"
    texts, notes = read_keyed_file(write(tmp_path, "t.csv", text), CB)
    assert texts.loc[2, "plot"] == "1"
    assert any("1 empty column without a name ignored" in n for n in notes)
    text = "pid,age,joined,born,town,plot,\n101,34,,,,1,oops\n"
    with pytest.raises(ImportFileError, match=r"t2.csv row 1, column 7: the column has no name"):
        read_keyed_file(write(tmp_path, "t2.csv", text), CB)


def test_xlsx_value_beyond_the_named_columns_is_refused(tmp_path):
    wb, ws = workbook([[101, 34, None, None, "Basel", 1, None, "stray"]])
    path = tmp_path / "w.xlsx"
    wb.save(path)
    with pytest.raises(ImportFileError) as err:
        read_keyed_file(path, CB)
    assert str(err.value) == (
        "w.xlsx cell H2: a value in a column with no name in row 1 — name the column or "
        "clear the cell."
    )


def test_windows_line_endings(tmp_path):
    # RFC 4180 writes CRLF between records; the row numbers and texts are the same.
    path = tmp_path / "crlf.csv"
    path.write_bytes(csv_text(ROWS).replace("\n", "\r\n").encode("utf-8"))
    texts, notes = read_keyed_file(path, CB)
    assert texts.values.tolist() == ROWS and list(texts.index) == [2, 3]
    assert notes == []


def test_utf16_unicode_text_export(tmp_path):
    # A spreadsheet's "Unicode text" export: UTF-16 with a byte-order mark, tabs
    # between cells; Python's utf-16 codec writes the reference bytes.
    path = tmp_path / "u.txt"
    path.write_bytes(csv_text(ROWS, sep="\t").encode("utf-16"))
    texts, notes = read_keyed_file(path, CB)
    assert texts.values.tolist() == ROWS
    assert any("UTF-16" in n for n in notes) and any("tabs" in n for n in notes)


def test_demo_pass_typed_into_a_spreadsheet_reads_as_the_csv(tmp_path):
    # A keyer typing the demo's pass 1 into a spreadsheet gets numbers and dates
    # stored as such; read back, the texts equal the CSV (read by the standard
    # library's csv module as the reference).
    import csv
    from pathlib import Path

    from core.codebook_io import load_codebook

    demo = Path(__file__).resolve().parents[1] / "fixtures" / "demo"
    codebook = load_codebook(demo / "codebook.csv")
    with (demo / "pass1.csv").open(encoding="utf-8", newline="") as fh:
        rows = list(csv.reader(fh))
    wb = Workbook()
    ws = wb.active
    ws.append(rows[0])
    for row in rows[1:]:
        cells = []
        for name, text in zip(rows[0], row, strict=True):
            kind = codebook[name].type
            if text == "":
                cells.append(None)
            elif kind == "integer":
                cells.append(float(text) if name == "age" else int(text))  # some as floats
            elif kind == "number":
                cells.append(float(text))
            elif kind == "date":
                cells.append(dt.datetime.strptime(text, "%Y-%m-%d"))
            else:
                cells.append(text)
        ws.append(cells)
    path = tmp_path / "pass1.xlsx"
    wb.save(path)
    texts, notes = read_keyed_file(path, codebook)
    expected = pd.DataFrame(rows[1:], columns=rows[0], index=texts.index)
    numbers = [v.name for v in codebook if v.type == "number"]
    others = [n for n in rows[0] if n not in numbers]
    assert texts[others].values.tolist() == expected[others].values.tolist()
    # A cell stores a number, not its digits: "7.0" typed comes back as "7", the
    # same value (compared as pandas reads numbers).
    def values(frame):
        return frame[numbers].replace("", "nan").astype(float).to_numpy()

    assert np.array_equal(values(texts), values(expected), equal_nan=True)
    assert notes == []


# Files without quotes take a faster line-by-line reader; the csv module is the
# reference for what any file must read as (Python standard library csv).
@pytest.mark.parametrize("body", [
    "id,q1,q2\n1,3,4\n2,,5\n",
    "id,q1,q2\r\n1,3,4\r\n\r\n2, 5 ,\r\n",
    "id,q1,q2\n1,3\n,,\n  \n2,1,2",
    "id;q1;q2\n07;NA;x y\n",
])
def test_unquoted_files_read_as_the_csv_module_reads_them(tmp_path, body):
    import csv as csv_module
    import io

    path = tmp_path / "p.csv"
    path.write_bytes(body.encode("utf-8"))
    texts, _ = read_keyed_file(path, _CB3)
    delimiter = ";" if ";" in body.split("\n")[0] else ","
    rows = list(csv_module.reader(io.StringIO(body, newline=""), delimiter=delimiter))[1:]
    expected = [r + [""] * (3 - len(r)) for r in rows if any(c.strip() for c in r)]
    assert texts.to_numpy().tolist() == expected
    assert all(isinstance(v, str) for v in texts.to_numpy().ravel())


def test_unquoted_and_quoted_files_give_the_same_rows_and_notes(tmp_path):
    body = "id,q1,q2\n1,3,4\n\n2,5\n3,1,2,9\n"
    plain, quoted = tmp_path / "a.csv", tmp_path / "b.csv"
    plain.write_text(body.replace("3,1,2,9\n", ""), encoding="utf-8")
    quoted.write_text(body.replace("3,1,2,9\n", "").replace("1,3,4", '"1",3,4'), encoding="utf-8")
    a, notes_a = read_keyed_file(plain, _CB3)
    b, notes_b = read_keyed_file(quoted, _CB3)
    # The plain file's columns come back categorical, the quoted one's as object:
    # the same texts in every cell is what counts.
    pd.testing.assert_frame_equal(a.astype(object), b.astype(object))
    assert [n.replace("a.csv", "") for n in notes_a] == [n.replace("b.csv", "") for n in notes_b]
    # Line 5 (header = row 1, the empty line counted) has one cell too many.
    plain.write_text(body, encoding="utf-8")
    quoted.write_text(body.replace("1,3,4", '"1",3,4'), encoding="utf-8")
    for path in (plain, quoted):
        with pytest.raises(ImportFileError, match=rf"{path.name} row 5: 4 cells"):
            read_keyed_file(path, _CB3)


_CB3 = Codebook((Variable("id", "integer", is_id=True), Variable("q1", "string"),
                 Variable("q2", "string")))
