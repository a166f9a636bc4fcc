"""The verified file: CSV, XLSX and Data Package exports, checked from outside.

Files are read back with pandas and openpyxl (reference readers), Data
Packages are checked with the frictionless library (the reference
implementation of the Frictionless Data Package / Table Schema open standard).
"""

from __future__ import annotations

import json
from datetime import UTC, datetime
from importlib.metadata import version
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from frictionless import validate

from core.atomic import AtomicFile, atomic_folder, atomic_write
from core.codebook import Code, Codebook, Variable
from core.errors import ExportError
from core.export import export, target_of
from core.verified import Verified

NAMES = ["Ada Quill", "Bo Lindqvist", "Cy Ortega", "Di Mbeki"]
EMAILS = ["ada@example.org", "bo@example.org", "cy@example.org", "di@example.org"]
FREQ = (Code("1", "never"), Code("2", "sometimes"), Code("3", "often"))

CODEBOOK = Codebook((
    Variable("pid", "string", is_id=True, required=True),
    Variable("name", "string", identifying=True),
    Variable("email", "string", identifying=True),
    Variable("age", "integer", min=18, max=99, missing=(Code("-9", "refused"),)),
    Variable("q1", "integer", label="How often?", codes=FREQ, missing=(Code("9", "n/a"),)),
    Variable("weight", "number", min=0, missing=(Code("-9", "refused"),)),
    Variable("visit", "date"),
    Variable("comment", "string"),
))


def _data(**overrides) -> pd.DataFrame:
    frame = pd.DataFrame({
        "pid": pd.array(["1", "2", "3", "10"], dtype="string"),
        "name": pd.array(NAMES, dtype="string"),
        "email": pd.array(EMAILS, dtype="string"),
        "age": pd.array([34, -9, 51, None], dtype="Int64"),
        "q1": pd.array([1, 3, 9, 2], dtype="Int64"),
        "weight": pd.array([61.5, -9.0, None, 80.25], dtype="Float64"),
        "visit": pd.to_datetime(["2024-05-01", "2024-05-02", None, "2024-06-30"]),
        "comment": pd.array(['said "fine", left', "two\nlines", None, "=1+1"], dtype="string"),
    })
    for name, values in overrides.items():
        frame[name] = pd.array(values, dtype=frame[name].dtype)
    return frame


def _verified(draft: bool = False, **overrides) -> Verified:
    set_aside = pd.DataFrame({
        "participant": ["7"], "reason": ["consent form unsigned"], "rule": [""],
        "keyer": ["RS"], "at": ["2024-07-01T10:00:00Z"],
    })
    decisions = pd.DataFrame({
        "participant": ["2", "3"], "variable": ["age", "name"], "kind": ["mismatch"] * 2,
        "pass1": ["-9", "Cy Ortgea"], "pass2": ["9", "Cy Ortega"], "value": ["-9", "Cy Ortega"],
        "reason": ["checked against paper: pass 1 right"] * 2, "keyer": ["RS", "RS"],
    })
    open_cells = pd.DataFrame({"participant": ["10"], "variable": ["age"], "kind": ["blank"]})
    return Verified(
        codebook=CODEBOOK,
        data=_data(**overrides),
        open_cells=open_cells if draft else pd.DataFrame(columns=["participant", "variable", "kind"]),
        set_aside=set_aside,
        decisions=decisions,
        head="ab" * 32,
        study="trial.sqlite",
        draft=draft,
    )


NOW = datetime(2024, 7, 2, 9, 30, tzinfo=UTC)


def _assert_valid(package: Path) -> None:
    """frictionless (the reference implementation of the Data Package standard) accepts it."""
    report = validate(package / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])


def _all_text(path: Path) -> str:
    """Every cell of every sheet, or the whole text, of an exported file or folder."""
    if path.is_dir():
        return "\n".join(p.read_text(encoding="utf-8") for p in sorted(path.iterdir()))
    if path.suffix == ".xlsx":
        wb = openpyxl.load_workbook(path, read_only=True)
        return "\n".join(
            str(cell) for ws in wb.worksheets for row in ws.iter_rows(values_only=True)
            for cell in row
        )
    return path.read_text(encoding="utf-8")


def test_csv_reads_back_equal_to_the_verified_table(tmp_path):
    result = export(_verified(), tmp_path / "verified.csv", now=NOW)
    # pandas' CSV reader is the reference reader here.
    back = pd.read_csv(result.path, dtype=str, keep_default_na=False)
    assert list(back.columns) == ["pid", "age", "q1", "weight", "visit", "comment"]
    assert list(back["pid"]) == ["1", "2", "3", "10"]
    assert list(back["age"]) == ["34", "-9", "51", ""]
    assert [float(x) if x else None for x in back["weight"]] == [61.5, -9.0, None, 80.25]
    assert list(back["visit"]) == ["2024-05-01", "2024-05-02", "", "2024-06-30"]
    assert list(back["comment"]) == ['said "fine", left', "two\nlines", "", "=1+1"]
    assert result.rows == 4 and result.columns == 6
    assert result.left_out == ("name", "email")
    assert result.path.read_bytes().decode("utf-8")  # UTF-8 throughout


def test_csv_companions_set_aside_and_provenance(tmp_path):
    export(_verified(), tmp_path / "verified.csv", now=NOW)
    about = json.loads((tmp_path / "verified.about.json").read_text(encoding="utf-8"))
    assert about["study"] == "trial.sqlite"
    assert about["journal_head"] == "ab" * 32
    assert about["exported_at"] == "2024-07-02T09:30:00Z"
    # The version the package metadata reports (importlib.metadata, standard library).
    assert about["keyproof_version"] == version("keyproof")
    assert about["draft"] is False
    aside = pd.read_csv(tmp_path / "verified.set_aside.csv", dtype=str)
    assert list(aside["participant"]) == ["7"]
    assert list(aside["reason"]) == ["consent form unsigned"]
    assert "rule" in aside.columns


def test_xlsx_sheets_and_data_sheet_equals_the_csv(tmp_path):
    export(_verified(), tmp_path / "v.csv", now=NOW)
    result = export(_verified(), tmp_path / "v.xlsx", now=NOW)
    # openpyxl (the library that reads and writes the format) lists the sheets.
    wb = openpyxl.load_workbook(result.path, read_only=True)
    assert wb.sheetnames == ["data", "codebook", "decisions", "set aside", "kept values", "about"]
    about = dict(wb["about"].iter_rows(min_row=2, values_only=True))
    assert about["journal_head"] == "ab" * 32 and about["study"] == "trial.sqlite"
    assert about["keyproof_version"] == version("keyproof")
    # pandas reads both files; the data sheet must equal the CSV cell by cell.
    from_xlsx = pd.read_excel(result.path, sheet_name="data")
    from_csv = pd.read_csv(tmp_path / "v.csv")
    from_xlsx["visit"] = pd.to_datetime(from_xlsx["visit"])
    from_csv["visit"] = pd.to_datetime(from_csv["visit"])
    from_xlsx["pid"] = from_xlsx["pid"].astype(str)
    from_csv["pid"] = from_csv["pid"].astype(str)
    pd.testing.assert_frame_equal(from_xlsx, from_csv, check_dtype=False)
    # A keyed text starting with "=" stays text, never becomes a formula.
    cells = [row[-1] for row in wb["data"].iter_rows(min_row=2, values_only=True)]
    assert cells[-1] == "=1+1"
    wb_formulas = openpyxl.load_workbook(result.path)
    assert wb_formulas["data"].cell(row=5, column=6).data_type == "s"


def test_data_package_is_valid_for_frictionless(tmp_path):
    result = export(_verified(), tmp_path / "package", now=NOW)
    assert result.format == "datapackage"
    names = sorted(p.name for p in result.path.iterdir())
    assert names == ["data.csv", "datapackage.json", "decisions.csv", "schema.json",
                     "set_aside.csv"]
    # frictionless: the reference implementation of the Data Package standard.
    report = validate(result.path / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    descriptor = json.loads((result.path / "datapackage.json").read_text())
    assert descriptor["created"] == "2024-07-02T09:30:00Z"
    assert descriptor["keyproof:provenance"]["journal_head"] == "ab" * 32
    schema = json.loads((result.path / "schema.json").read_text())
    assert schema["primaryKey"] == ["pid"]
    q1 = next(f for f in schema["fields"] if f["name"] == "q1")
    assert {"value": 2, "label": "sometimes"} in q1["categories"]
    assert "9" in q1["missingValues"]


@pytest.mark.parametrize(
    ("column", "values"),
    [("age", [34, 17, 51, None]), ("q1", [1, 3, 7, 2]), ("weight", [61.5, -1.0, None, 2.0])],
)
def test_frictionless_refuses_a_value_the_codebook_forbids(tmp_path, column, values):
    # The schema must carry the codebook's range and codes: frictionless (the
    # reference implementation) then flags a value outside them.
    result = export(_verified(**{column: values}), tmp_path / "pkg", now=NOW)
    report = validate(result.path / "datapackage.json")
    assert not report.valid
    errors = report.flatten(["fieldName", "type"])
    assert [column, "constraint-error"] in errors


def _validate_csv(csv_path: Path, schema_path: Path):
    # frictionless: the reference implementation of the Table Schema standard,
    # reading the CSV with the schema written beside it.
    from frictionless import Resource, Schema

    schema = Schema.from_descriptor(json.loads(schema_path.read_text(encoding="utf-8")))
    return validate(Resource(path=csv_path.name, basepath=str(csv_path.parent), schema=schema))


def test_csv_export_writes_its_table_schema_beside_it(tmp_path):
    result = export(_verified(), tmp_path / "verified.csv", now=NOW)
    schema_path = tmp_path / "verified.schema.json"
    assert schema_path in result.files
    about = json.loads((tmp_path / "verified.about.json").read_text(encoding="utf-8"))
    assert about["files"]["schema"] == "verified.schema.json"
    report = _validate_csv(result.path, schema_path)
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    schema = json.loads(schema_path.read_text(encoding="utf-8"))
    assert [f["name"] for f in schema["fields"]] == list(pd.read_csv(result.path).columns)


@pytest.mark.parametrize(
    ("column", "values"),
    [("age", [34, 17, 51, None]), ("q1", [1, 3, 7, 2]), ("weight", [61.5, -1.0, None, 2.0])],
)
def test_csv_schema_lets_frictionless_refuse_a_value_the_codebook_forbids(tmp_path, column,
                                                                          values):
    result = export(_verified(**{column: values}), tmp_path / "v.csv", now=NOW)
    report = _validate_csv(result.path, tmp_path / "v.schema.json")
    assert not report.valid
    assert [column, "constraint-error"] in report.flatten(["fieldName", "type"])


def test_no_analysis_file_holds_an_identifying_variable(tmp_path):
    ident = tmp_path / "apart" / "identifying.csv"
    ident.parent.mkdir()
    for out in ("v.csv", "v.xlsx", "pkg"):
        result = export(_verified(), tmp_path / out, identifying=ident, now=NOW)
        if result.format == "datapackage":
            _assert_valid(result.path)
        texts = [_all_text(p) for p in [*result.files, result.path] if p != ident]
        for text in texts:
            for value in (*NAMES, *EMAILS, "Cy Ortgea"):
                assert value not in text, (out, value)
        for header in _headers(result.path):
            assert "name" not in header and "email" not in header, (out, header)
    back = pd.read_csv(ident, dtype=str)
    assert list(back.columns) == ["pid", "name", "email"]
    assert list(back["name"]) == NAMES


def _headers(path: Path) -> list[list[str]]:
    if path.is_dir():
        return [pd.read_csv(path / "data.csv", nrows=0).columns.tolist()]
    if path.suffix == ".xlsx":
        wb = openpyxl.load_workbook(path, read_only=True)
        return [list(next(wb["data"].iter_rows(values_only=True)))]
    return [pd.read_csv(path, nrows=0).columns.tolist()]


def test_identifying_file_as_xlsx(tmp_path):
    export(_verified(), tmp_path / "v.csv", identifying=tmp_path / "who.xlsx", now=NOW)
    back = pd.read_excel(tmp_path / "who.xlsx", sheet_name="identifying", dtype=str)
    assert list(back["email"]) == EMAILS


def test_draft_is_marked_in_name_and_metadata_and_lists_open_cells(tmp_path):
    result = export(_verified(draft=True), tmp_path / "verified.csv", now=NOW)
    assert result.path.name == "verified.DRAFT.csv"
    assert not (tmp_path / "verified.csv").exists()
    about = json.loads((tmp_path / "verified.DRAFT.about.json").read_text())
    assert about["draft"] is True and about["open_cells"] == 1
    open_cells = pd.read_csv(tmp_path / "verified.DRAFT.open.csv", dtype=str)
    assert open_cells.to_dict("records") == [
        {"participant": "10", "variable": "age", "kind": "blank"}
    ]
    package = export(_verified(draft=True), tmp_path / "pkg", now=NOW)
    assert package.path.name == "pkg.DRAFT"
    _assert_valid(package.path)
    assert "(draft)" in json.loads((package.path / "datapackage.json").read_text())["title"]
    assert (tmp_path / "pkg.DRAFT.open.csv").exists()
    book = export(_verified(draft=True), tmp_path / "v.xlsx", now=NOW)
    assert book.path.name == "v.DRAFT.xlsx"


def test_target_names():
    assert target_of("a/b.csv", False) == ("csv", Path("a/b.csv"))
    assert target_of("b.XLSX", True) == ("xlsx", Path("b.DRAFT.XLSX"))
    assert target_of("b.DRAFT.csv", True) == ("csv", Path("b.DRAFT.csv"))
    with pytest.raises(ExportError, match=r"out\.json: cannot export to a \.json file"):
        target_of("out.json", False)


def test_bad_targets_are_one_sentence_errors(tmp_path):
    with pytest.raises(ExportError, match="does not exist — create it"):
        export(_verified(), tmp_path / "nowhere" / "v.csv")
    with pytest.raises(ExportError, match="stored apart"):
        export(_verified(), tmp_path / "pkg", identifying=tmp_path / "pkg" / "who.csv")
    assert list(tmp_path.iterdir()) == []


def test_a_second_export_replaces_the_first_completely(tmp_path):
    export(_verified(), tmp_path / "pkg", now=NOW)
    export(_verified(age=[40, 41, 42, 43]), tmp_path / "pkg", now=NOW)
    _assert_valid(tmp_path / "pkg")
    back = pd.read_csv(tmp_path / "pkg" / "data.csv")
    assert list(back["age"]) == [40, 41, 42, 43]
    # Nothing of the swap is left beside the target.
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pkg"]


def test_failed_write_leaves_the_old_file(tmp_path):
    target = tmp_path / "v.csv"
    target.write_text("old\n")

    def half_then_fail(tmp: Path) -> None:
        tmp.write_text("half")
        raise RuntimeError("disk full")

    with pytest.raises(RuntimeError):
        atomic_write(target, half_then_fail)
    assert target.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["v.csv"]
    with pytest.raises(RuntimeError), AtomicFile(target) as tmp:
        tmp.write_text("new")
        raise RuntimeError("interrupted")
    assert target.read_text() == "old\n"
    (tmp_path / "pkg").mkdir()
    (tmp_path / "pkg" / "a.txt").write_text("old")
    with pytest.raises(RuntimeError):
        atomic_folder(tmp_path / "pkg", lambda folder: half_then_fail(folder / "a.txt"))
    assert (tmp_path / "pkg" / "a.txt").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pkg", "v.csv"]


def test_progress_reaches_every_row(tmp_path):
    rows = 2500
    codebook = Codebook((Variable("pid", is_id=True), Variable("x", "integer")))
    data = pd.DataFrame({"pid": [str(i) for i in range(rows)],
                         "x": pd.array(range(rows), dtype="Int64")})
    seen = []
    for out in ("v.csv", "v.xlsx", "pkg"):
        seen.clear()
        result = export(Verified(codebook, data), tmp_path / out,
                        progress=lambda d, t: seen.append((d, t)))
        if result.format == "datapackage":
            _assert_valid(result.path)
        assert seen[-1] == (rows, rows), out
        assert [d for d, _ in seen] == sorted(d for d, _ in seen)


def test_values_the_paper_really_shows_still_validate(tmp_path):
    # age 150 is outside 18..99 but kept because the paper says so; "required"
    # is a keying rule, so a blank on paper must not make the package invalid.
    cb = Codebook((
        Variable("pid", is_id=True),
        Variable("age", "integer", min=18, max=99, required=True),
        Variable("q1", "integer", codes=FREQ),
    ))
    data = pd.DataFrame({"pid": ["1", "2", "3"], "age": pd.array([150, None, 40], dtype="Int64"),
                         "q1": pd.array([1, 2, 4], dtype="Int64")})
    kept = pd.DataFrame({"participant": ["1", "3"], "variable": ["age", "q1"],
                         "value": ["150", "4"], "reason": ["paper says: 150"] * 2})
    result = export(Verified(cb, data, kept=kept), tmp_path / "pkg")
    # frictionless: the reference implementation of the Data Package standard.
    report = validate(result.path / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    fields = {f["name"]: f for f in json.loads((result.path / "schema.json").read_text())["fields"]}
    assert fields["age"]["constraints"]["maximum"] == 150
    assert fields["age"]["keyproof:kept"] == [{"participant": "1", "value": "150"}]
    assert 4 in fields["q1"]["constraints"]["enum"]
    assert fields["pid"]["constraints"]["required"] is True
    # Without the kept record the same value is refused: the widening is what lets it pass.
    bare = export(Verified(cb, data.assign(age=pd.array([150, 20, 40], dtype="Int64"))),
                  tmp_path / "bare")
    assert not validate(bare.path / "datapackage.json").valid


def test_schema_fields_equal_the_codebook_modules_own_writer():
    # Fields copied between variables that share a rule must be exactly what
    # core.codebook_io.to_table_schema writes for each variable on its own.
    from core.codebook_io import to_table_schema
    from core.export import _codebook_schema

    many = Codebook((*CODEBOOK.variables,
                     Variable("q2", "integer", codes=FREQ, missing=(Code("9", "n/a"),)),
                     Variable("q3", "integer", label="Again?", codes=FREQ,
                              missing=(Code("9", "n/a"),))))
    _, ours = _codebook_schema(many)
    theirs = {f["name"]: f for f in to_table_schema(many)["fields"]}
    assert ours == theirs
