"""Write the codebook test corpus: bad codebooks (bad/) and awkward real-world ones (good/).

Run from the repository root: ``python tests/data/codebooks/make_codebooks.py``.
The files are committed; this script documents how each was made (spreadsheet
quirks such as cached formula results are produced by editing the workbook's
XML, as a spreadsheet program would have saved it).
"""

from __future__ import annotations

import io
import json
import re
import zipfile
from pathlib import Path

import openpyxl

HERE = Path(__file__).parent
BAD = HERE / "bad"
GOOD = HERE / "good"

HEADER = "name,label,type,id,min,max,codes,missing,required,identifying,section,scale,reverse,applies_if,width"
# Rows 2-8 of every variant (the header is row 1).
BASE = [
    "pid,Participant number,string,yes,,,,,yes,no,1,,no,,",
    "age,Age in years,integer,no,16,99,,-9=refused,yes,no,1,,no,,",
    "pet,Do you own a pet,integer,no,,,0=no; 1=yes,,no,no,1,,no,,",
    "pet_kind,Which pet,string,no,,,,,no,no,1,,no,pet = 1,",
    "mood1,I feel calm,integer,no,1,5,,9=no answer,no,no,2,mood,no,,",
    "mood2,I feel tense,integer,no,1,5,,9=no answer,no,no,2,mood,yes,,",
    "visit,Date of visit,date,no,,,,,no,no,2,,no,,",
]


def variant(row: int, line: str | None = None, header: str = HEADER, extra: str = "") -> str:
    """The base codebook with the variable on ``row`` replaced by ``line``."""
    lines = list(BASE)
    if line is not None:
        lines[row - 2] = line
    return "\n".join([header, *lines]) + "\n" + extra


BAD_CSV = {
    "duplicate_name.csv": variant(7, "Mood1,I feel tense,integer,no,1,5,,9=no answer,no,no,2,mood,yes,,"),
    "invalid_name.csv": variant(8, "2nd visit,Date of visit,date,no,,,,,no,no,2,,no,,"),
    "unknown_type.csv": variant(3, "age,Age in years,int,no,16,99,,-9=refused,yes,no,1,,no,,"),
    "min_greater_than_max.csv": variant(3, "age,Age in years,integer,no,99,16,,-9=refused,yes,no,1,,no,,"),
    "unreadable_codes.csv": variant(4, 'pet,Do you own a pet,integer,no,,,"0:no, 1:yes",,no,no,1,,no,,'),
    "code_not_of_type.csv": variant(4, "pet,Do you own a pet,integer,no,,,no=0; yes=1,,no,no,1,,no,,"),
    "code_outside_range.csv": variant(
        6, "mood1,I feel calm,integer,no,1,5,1=never; 3=sometimes; 6=always,9=no answer,no,no,2,mood,no,,"),
    "missing_is_a_code.csv": variant(4, "pet,Do you own a pet,integer,no,,,0=no; 1=yes,1=refused,no,no,1,,no,,"),
    "missing_inside_range.csv": variant(6, "mood1,I feel calm,integer,no,1,5,,3=no answer,no,no,2,mood,no,,"),
    "no_id.csv": variant(2, "pid,Participant number,string,no,,,,,yes,no,1,,no,,"),
    "two_ids.csv": variant(3, "age,Age in years,integer,yes,16,99,,-9=refused,yes,no,1,,no,,"),
    "applies_if_syntax.csv": variant(5, "pet_kind,Which pet,string,no,,,,,no,no,1,,no,pet == 1,"),
    "applies_if_unknown.csv": variant(5, "pet_kind,Which pet,string,no,,,,,no,no,1,,no,pets = 1,"),
    "applies_if_later.csv": variant(4, "pet,Do you own a pet,integer,no,,,0=no; 1=yes,,no,no,1,,no,pet_kind = 'dog',"),
    "applies_if_not_a_code.csv": variant(5, "pet_kind,Which pet,string,no,,,,,no,no,1,,no,pet = 2,"),
    "applies_if_quoted_number.csv": variant(5, "pet_kind,Which pet,string,no,,,,,no,no,1,,no,pet = 'yes',"),
    "unknown_column.csv": variant(2, header=HEADER.replace("label", "lable")),
    "unrelated_column.csv": variant(2, header=HEADER + ",notes"),
    "bad_flag.csv": variant(3, "age,Age in years,integer,no,16,99,,-9=refused,maybe,no,1,,no,,"),
    "reverse_without_scale.csv": variant(7, "mood2,I feel tense,integer,no,1,5,,9=no answer,no,no,2,,yes,,"),
    "bad_min.csv": variant(3, "age,Age in years,integer,no,sixteen,99,,-9=refused,yes,no,1,,no,,"),
    "bad_width.csv": variant(2, "pid,Participant number,string,yes,,,,,yes,no,1,,no,,three"),
    "blank_name.csv": variant(5, ",Which pet,string,no,,,,,no,no,1,,no,pet = 1,"),
    "no_type_column.csv": "name,label,id\npid,Participant number,yes\n",
    "bad_date_format.csv": variant(
        8, "visit,Date of visit,date,no,,,,,no,no,2,,no,,,%d.%m", header=HEADER + ",format"),
    "scale_settings_disagree.csv": "\n".join([
        HEADER + ",score,min_answered", *(line + ",," for line in BASE[:4]),
        BASE[4] + ",mean,", BASE[5] + ",sum,", BASE[6] + ",,"]) + "\n",
    "min_answered_not_a_share.csv": "\n".join([
        HEADER + ",score,min_answered", *(line + ",," for line in BASE[:4]),
        BASE[4] + ",,80", BASE[5] + ",,", BASE[6] + ",,"]) + "\n",
    "header_only.csv": HEADER + "\n",
    "duplicate_column.csv": variant(2, header=HEADER.replace("section", "label")),
    "many_problems.csv": "\n".join([
        HEADER, BASE[0],
        "age,Age in years,integer,no,99,16,,-9=refused,yes,no,1,,no,,",
        "Age,Age again,number,no,,,,,no,no,1,,no,,",
        "pet_kind,Which pet,string,no,,,,,no,no,1,,no,pet = 1,",
    ]) + "\n",
}


def _workbook(rows: list[list], title: str = "codebook") -> openpyxl.Workbook:
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = title
    for row in rows:
        sheet.append(row)
    return book


def _grid(text: str) -> list[list]:
    import csv

    return [[_number(c) for c in rec] for rec in csv.reader(io.StringIO(text))]


def _number(cell: str):
    """Numbers as a spreadsheet stores them: every number a float."""
    if re.fullmatch(r"-?\d+(\.\d+)?", cell):
        return float(cell)
    return cell if cell else None


def _with_cached_results(book: openpyxl.Workbook, cached: dict[str, str]) -> bytes:
    """Save ``book`` and give formula cells a saved result, as a spreadsheet program would."""
    buffer = io.BytesIO()
    book.save(buffer)
    source = zipfile.ZipFile(buffer)
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as target:
        for item in source.infolist():
            data = source.read(item.filename)
            if item.filename.startswith("xl/worksheets/sheet"):
                text = data.decode("utf-8")
                for ref, value in cached.items():
                    text = re.sub(rf'(<c r="{ref}"[^>]*>(<f>[^<]*</f>))<v ?/>', rf"\1<v>{value}</v>", text)
                data = text.encode("utf-8")
            target.writestr(item, data)
    return out.getvalue()


def write_bad() -> None:
    BAD.mkdir(parents=True, exist_ok=True)
    for name, text in BAD_CSV.items():
        (BAD / name).write_text(text, encoding="utf-8")
    # The old binary spreadsheet format (the content does not matter: it is refused by name).
    (BAD / "old_format.xls").write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1")
    # XLSX: min > max with numbers stored as floats.
    _workbook(_grid(BAD_CSV["min_greater_than_max.csv"])).save(BAD / "min_greater_than_max.xlsx")
    # A workbook saved under a .csv name.
    (BAD / "workbook_named_csv.csv").write_bytes((BAD / "min_greater_than_max.xlsx").read_bytes())
    # XLSX: a formula the spreadsheet never calculated (openpyxl saves no result).
    rows = _grid(variant(2))
    rows[2][5] = "=90+9"
    _workbook(rows).save(BAD / "formula_without_result.xlsx")
    # XLSX: label and type merged across columns.
    book = _workbook(_grid(variant(2)))
    book.active.merge_cells("B4:C4")
    book.save(BAD / "merged_across_columns.xlsx")
    # Table Schema: a type keyproof has no equivalent for, and two key fields.
    schema = {
        "fields": [
            {"name": "pid", "type": "string"},
            {"name": "smoker", "type": "boolean"},
            {"name": "age", "type": "integer", "constraints": {"minimum": 99, "maximum": 16}},
        ],
        "primaryKey": ["pid", "age"],
    }
    (BAD / "schema_problems.json").write_text(json.dumps(schema, indent=2) + "\n", encoding="utf-8")
    (BAD / "broken.json").write_text('{\n  "fields": [\n    {"name": "pid" "type": "string"}\n  ]\n}\n',
                                     encoding="utf-8")


# A codebook in DESIGN.md's tabular form written by someone else: capitalised
# flags, TRUE/FALSE, extra spaces, quoted cells, Windows line ends.
FOREIGN = (
    'name,label,type,id,min,max,codes,missing,required,identifying,section,scale,reverse,applies_if,width\r\n'
    'respondent, "Respondent ID" ,string,Yes,,,,,Yes,No,A,,,,4\r\n'
    'full_name,Name (first and last),string,No,,,,,No,Yes,A,,,,\r\n'
    'age,Age in years,integer,No,18,  120 ,,"-9=refused; -8=don\'t know",TRUE,FALSE,A,,,,\r\n'
    'smoker,Do you smoke?,integer,No,,,"1=daily; 2=sometimes; 3=never",-9=refused,1,0,B,,,,1\r\n'
    'cigs_day,Cigarettes a day,integer,No,0,80,,,No,No,B,,,"age >= 18 and smoker in (1, 2)",\r\n'
    'stress_1,Felt nervous,integer,No,0,4,"0=never;1=almost never;2=sometimes;3=fairly often;4=very often",,No,No,C,stress,No,,\r\n'
    'stress_2,Felt on top of things,integer,No,0,4,"0=never;1=almost never;2=sometimes;3=fairly often;4=very often",,No,No,C,stress,Yes,,\r\n'
    'weight,Weight in kg,number,No,30,250.5,,,No,No,C,,,,\r\n'
)


def write_good() -> None:
    GOOD.mkdir(parents=True, exist_ok=True)
    (GOOD / "design_format.csv").write_bytes(FOREIGN.encode("utf-8"))
    # UTF-8 with a byte-order mark, as "CSV UTF-8" from a spreadsheet.
    text = variant(2).replace("Which pet", "Welches Haustier? (Hund/Katze/Vögel …)")
    (GOOD / "bom.csv").write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    # Windows-1252, semicolons, decimal commas: a German-language spreadsheet's CSV.
    semi = _delimited([HEADER, *BASE], ";")
    semi = semi.replace("Age in years", "Alter – in Jahren (€-frei)")
    semi = semi.replace("mood1;I feel calm;integer;no;1;5", "mood1;I feel calm;number;no;0,5;5,5")
    (GOOD / "cp1252_semicolon.csv").write_bytes(semi.encode("cp1252"))
    # Tab-separated UTF-16 with a byte-order mark: a spreadsheet's "Unicode text".
    tabbed = _delimited([HEADER, *BASE], "\t")
    (GOOD / "unicode_text.txt").write_bytes(tabbed.encode("utf-16"))
    # XLSX: another sheet first, numbers as floats, an Excel date, a formula with
    # its saved result, a section merged down its rows, a TRUE cell.
    rows = _grid(variant(2))
    rows[2][5] = "=90+9"  # age max, saved result 99
    rows[1][1] = None
    book = _workbook(rows, title="Codebook")
    notes = book.create_sheet("read me", 0)
    notes["A1"] = "Variables are on the sheet called Codebook."
    sheet = book["Codebook"]
    import datetime

    sheet["B2"] = datetime.datetime(2024, 5, 1)  # a label a spreadsheet turned into a date
    sheet["I4"] = True  # pet required, as a spreadsheet TRUE
    sheet["H6"] = 9.0  # mood1's missing code, a bare number stored as a float
    sheet["K2"] = "page 1"
    for ref in ("K3", "K4", "K5"):
        sheet[ref] = None
    sheet.merge_cells("K2:K5")
    (GOOD / "awkward.xlsx").write_bytes(_with_cached_results(book, {"F3": "99"}))


def _delimited(lines: list[str], delimiter: str) -> str:
    """Comma-separated lines rewritten with another delimiter, quoted where needed."""
    import csv

    out = io.StringIO()
    writer = csv.writer(out, delimiter=delimiter, lineterminator="\n")
    for line in lines:
        writer.writerow(next(csv.reader(io.StringIO(line))))
    return out.getvalue()


if __name__ == "__main__":
    write_bad()
    write_good()
