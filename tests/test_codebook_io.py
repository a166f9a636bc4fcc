"""Codebook loading, validation, Table Schema and update diff (core.codebook_io).

The corpus under tests/data/codebooks/ is written by make_codebooks.py there:
bad/ holds one broken codebook per rule, good/ holds awkward files as real
spreadsheets and other people save them.
"""

import json
from dataclasses import replace
from pathlib import Path

import hypothesis.strategies as st
import pytest
from frictionless import Resource, Schema
from hypothesis import given, settings

from core.codebook import Code, Codebook, Variable
from core.codebook_io import (
    codebook_from_grid,
    codebook_from_table_schema,
    diff_codebooks,
    load_codebook,
    to_table_schema,
    write_codebook_csv,
    write_table_schema,
)
from core.errors import CodebookError

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).parent / "data" / "codebooks"
BAD = DATA / "bad"
GOOD = DATA / "good"
DEMO = ROOT / "fixtures" / "demo"

# Every bad codebook with the full list of problems it must produce: file, row
# (or field) and variable, what is wrong and what to do, one sentence each.
EXPECTED = {
    "duplicate_name.csv": ['duplicate_name.csv row 7 ("Mood1"): the name repeats row 6 ("mood1"), '
                           "ignoring case — rename one of them."],
    "invalid_name.csv": ['invalid_name.csv row 8 ("2nd visit"): "2nd visit" is not a valid name — '
                         "start with a letter and use only letters, digits and _ (no spaces)."],
    "unknown_type.csv": ['unknown_type.csv row 3 ("age"): unknown type "int" — did you mean '
                         '"integer"? Write one of integer, number, string, date.'],
    # The wording STYLE.md gives as the house example.
    "min_greater_than_max.csv": ['min_greater_than_max.csv row 3 ("age"): min 99 is greater than '
                                 "max 16 — swap them or fix the typo."],
    "min_greater_than_max.xlsx": ['min_greater_than_max.xlsx row 3 ("age"): min 99 is greater than '
                                  "max 16 — swap them or fix the typo."],
    "unreadable_codes.csv": ['unreadable_codes.csv row 4 ("pet"): codes "0:no, 1:yes" cannot be read '
                             "— write them as 1=never; 2=sometimes; 3=often."],
    "code_not_of_type.csv": ['code_not_of_type.csv row 4 ("pet"): codes no, yes are not a '
                             "whole-number value — fix the code or make the type fit."],
    "code_outside_range.csv": ['code_outside_range.csv row 6 ("mood1"): code 6 is outside min–max '
                               "(1 to 5) — widen min/max or fix the code."],
    "missing_is_a_code.csv": ['missing_is_a_code.csv row 4 ("pet"): missing code 1 is also a valid '
                              "code — use a missing code the paper cannot mean as an answer, e.g. -9."],
    "missing_inside_range.csv": ['missing_inside_range.csv row 6 ("mood1"): missing code 3 is inside '
                                 "the valid range (1 to 5) — use a missing code outside min–max, e.g. -9."],
    "no_id.csv": ["no_id.csv marks no variable as the participant ID — write yes in the id column "
                  "of the one variable that holds the form's participant ID."],
    "two_ids.csv": ['two_ids.csv row 3 ("age"): a second participant ID (the first is "pid") — mark '
                    "only one variable with id = yes."],
    "applies_if_syntax.csv": ['applies_if_syntax.csv row 5 ("pet_kind"): applies_if "pet == 1" cannot '
                              'be read ("==" at position 5: write a single "=" for equality) — write it '
                              "like owns_pet = 1 or age >= 18 and smoker in (1, 2)."],
    "applies_if_unknown.csv": ['applies_if_unknown.csv row 5 ("pet_kind"): applies_if names "pets", '
                               'which is not in the codebook — did you mean "pet"? Fix the name '
                               "(names are case-sensitive)."],
    "applies_if_later.csv": ['applies_if_later.csv row 4 ("pet"): applies_if names "pet_kind", a later '
                             "variable — a condition may only use variables that come earlier on the form."],
    "applies_if_not_a_code.csv": ['applies_if_not_a_code.csv row 5 ("pet_kind"): applies_if compares '
                                  '"pet" with 2, which is not one of its codes (0, 1) — use one of its '
                                  "codes or declared missing codes."],
    "applies_if_quoted_number.csv": ['applies_if_quoted_number.csv row 5 ("pet_kind"): applies_if '
                                     'compares the integer "pet" with quoted text "yes" — write the '
                                     "number without quotes."],
    "unknown_column.csv": ['unknown_column.csv row 1: unknown column "lable" — did you mean "label"? '
                           "Rename it, or delete the column."],
    "unrelated_column.csv": ['unrelated_column.csv row 1: unknown column "notes" — keyproof reads only '
                             "name, label, type, id, min, max, codes, missing, required, identifying, "
                             "section, scale, reverse, applies_if, width, format, score, min_answered; "
                             "delete or rename it."],
    "bad_flag.csv": ['bad_flag.csv row 3 ("age"): required "maybe" is not a yes/no answer — write one '
                     "of yes/no/true/false/1/0, or leave it blank for no."],
    "reverse_without_scale.csv": ['reverse_without_scale.csv row 7 ("mood2"): reverse is yes but the '
                                  "variable has no scale — name its scale in the scale column, or set "
                                  "reverse to no."],
    "bad_min.csv": ['bad_min.csv row 3 ("age"): min "sixteen" is not a number — write a number such '
                    "as 1 or 2.5."],
    "bad_width.csv": ['bad_width.csv row 2 ("pid"): width "three" is not a whole number of characters '
                      "— write a whole number of 1 or more, or leave it blank."],
    "blank_name.csv": ["blank_name.csv row 5: the name is blank — give the variable a name or delete "
                       "the row."],
    "no_type_column.csv": ['no_type_column.csv row 1: there is no "type" column — add it to the '
                           "header row."],
    "bad_date_format.csv": ['bad_date_format.csv row 8 ("visit"): date format "%d.%m" cannot write '
                            "and read back a whole date — write it with %d, %m and %Y, e.g. %d.%m.%Y "
                            "or %Y-%m-%d."],
    "scale_settings_disagree.csv": ['scale_settings_disagree.csv row 7 ("mood2"): score sum differs '
                                    'from mean set at row 6 for scale "mood" — give every item of a '
                                    "scale the same setting, or leave all but one blank."],
    "min_answered_not_a_share.csv": ['min_answered_not_a_share.csv row 6 ("mood1"): min_answered "80" '
                                     "is not a share between 0 and 1 — write a share such as 0.8 or 80%."],
    "header_only.csv": ["header_only.csv lists no variables — add one row per variable under the header."],
    "duplicate_column.csv": ['duplicate_column.csv row 1: column "label" appears twice — keep one of them.'],
    "old_format.xls": ["old_format.xls: the old .xls format cannot be read — save it as .xlsx (Excel "
                       "workbook) or .csv and try again."],
    "workbook_named_csv.csv": ["workbook_named_csv.csv: is a spreadsheet workbook, not CSV text — "
                               "rename it to .xlsx, or save it from the spreadsheet as CSV."],
    "many_problems.csv": [
        'many_problems.csv row 3 ("age"): min 99 is greater than max 16 — swap them or fix the typo.',
        'many_problems.csv row 4 ("Age"): the name repeats row 3 ("age"), ignoring case — rename one '
        "of them.",
        'many_problems.csv row 5 ("pet_kind"): applies_if names "pet", which is not in the codebook '
        "— fix the name (names are case-sensitive).",
    ],
    "formula_without_result.xlsx": ["formula_without_result.xlsx row 3: cell F3 has a formula with no "
                                    "saved result — open the file in a spreadsheet, let it calculate, "
                                    "and save it again."],
    "merged_across_columns.xlsx": [
        "merged_across_columns.xlsx row 4: cells B4:C4 are merged across columns — unmerge them so "
        "each column has its own value.",
        'merged_across_columns.xlsx row 4 ("pet"): the type is blank — write one of integer, number, '
        "string, date.",
    ],
    "schema_problems.json": [
        "schema_problems.json: primaryKey names 2 fields (pid, age) — keyproof needs one "
        "participant-ID field; keep one.",
        'schema_problems.json field 2 ("smoker"): unknown type "boolean" — write one of integer, '
        "number, string, date.",
        'schema_problems.json field 3 ("age"): min 99 is greater than max 16 — swap them or fix the typo.',
        'schema_problems.json field 3 ("age"): a second participant ID (the first is "pid") — mark '
        "only one variable with id = yes.",
    ],
    "broken.json": ["broken.json line 3: not valid JSON (Expecting ',' delimiter at column 20) — fix "
                    "the JSON syntax."],
}


def test_corpus_has_at_least_twenty_bad_codebooks_all_covered():
    files = sorted(p.name for p in BAD.iterdir())
    assert len(files) >= 20
    assert sorted(EXPECTED) == files


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_bad_codebook_lists_every_located_problem(name):
    with pytest.raises(CodebookError) as info:
        load_codebook(BAD / name)
    assert info.value.problems == EXPECTED[name]
    first = EXPECTED[name][0]
    more = len(EXPECTED[name]) - 1
    assert str(info.value) == (first if not more else f"{first} (and {more} more problem{'s' * (more > 1)})")


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_init_prints_every_problem_exits_2_and_creates_nothing(name, capsys, tmp_path):
    from tui.cli import main

    study = tmp_path / "study.sqlite"
    status = main(["init", str(study), "--codebook", str(BAD / name), "--keyer", "AB"])
    err = capsys.readouterr().err
    assert status == 2  # DESIGN.md: bad input exits 2 with a located one-line error
    assert all(problem in err for problem in EXPECTED[name]) and "Traceback" not in err
    assert not study.exists()


def test_date_in_a_condition_is_written_iso_whatever_the_paper_format():
    grid = [(1, ["name", "type", "id", "format", "applies_if"]),
            (2, ["pid", "string", "yes", "", ""]),
            (3, ["visit", "date", "", "%d.%m.%Y", ""]),
            (4, ["late", "string", "", "", "visit >= '01.02.2024'"]),
            (5, ["early", "string", "", "", "visit < '2024-02-01'"])]
    with pytest.raises(CodebookError) as info:
        codebook_from_grid(grid, "cb.csv")
    assert info.value.problems == [
        'cb.csv row 4 ("late"): applies_if compares the date "visit" with "01.02.2024" — write the '
        'date as "YYYY-MM-DD", whatever the date format on paper.'
    ]


# --------------------------------------------------------------------------- awkward files


def test_codebook_in_design_format_written_by_someone_else():
    cb = load_codebook(GOOD / "design_format.csv")
    # Expected values read by eye from the file (DESIGN.md's column list and syntax).
    assert cb.names == ["respondent", "full_name", "age", "smoker", "cigs_day", "stress_1",
                        "stress_2", "weight"]
    assert cb.id_variable.name == "respondent" and cb["respondent"].label == "Respondent ID"
    assert cb["respondent"].width == 4 and cb["smoker"].width == 1
    assert cb.identifying_names == ["full_name"]
    age = cb["age"]
    assert (age.type, age.min, age.max, age.required) == ("integer", 18, 120, True)
    assert age.missing == (Code("-9", "refused"), Code("-8", "don't know"))
    assert cb["smoker"].codes == (Code("1", "daily"), Code("2", "sometimes"), Code("3", "never"))
    assert cb["smoker"].required is True and cb["smoker"].identifying is False
    assert cb["cigs_day"].applies_if == "age >= 18 and smoker in (1, 2)"
    assert [c.label for c in cb["stress_1"].codes] == ["never", "almost never", "sometimes",
                                                       "fairly often", "very often"]
    assert cb["stress_2"].reverse and not cb["stress_1"].reverse
    assert [v.name for v in cb.scales["stress"]] == ["stress_1", "stress_2"]
    assert cb["weight"].max == 250.5 and cb["weight"].type == "number"
    # Unset scale settings take the documented defaults (0.8 is common practice).
    assert (cb["stress_1"].score, cb["stress_1"].min_answered) == ("mean", 0.8)


def test_utf8_with_byte_order_mark():
    cb = load_codebook(GOOD / "bom.csv")
    assert cb.names[0] == "pid"  # not "\ufeffpid"
    assert cb["pet_kind"].label == "Welches Haustier? (Hund/Katze/Vögel …)"


def test_windows_1252_with_semicolons_and_decimal_commas():
    cb = load_codebook(GOOD / "cp1252_semicolon.csv")
    # "–" and "€" are bytes 0x96 and 0x80 in Windows-1252 (Python's cp1252 codec wrote them).
    assert cb["age"].label == "Alter – in Jahren (€-frei)"
    assert cb["pet"].codes == (Code("0", "no"), Code("1", "yes"))  # ";" inside a quoted cell
    assert (cb["mood1"].min, cb["mood1"].max) == (0.5, 5.5)


def test_a_sep_line_names_the_delimiter_and_is_not_counted(tmp_path):
    # Spreadsheets honour and hide a first line "sep=;" (a spreadsheet convention,
    # stated from memory); rows are numbered as the user sees them there.
    p = tmp_path / "cb.csv"
    p.write_text("sep=;\nname;type;id;min;max\npid;string;yes;;\nage;integer;no;99;16\n")
    with pytest.raises(CodebookError) as info:
        load_codebook(p)
    assert info.value.problems == ['cb.csv row 3 ("age"): min 99 is greater than max 16 — swap them '
                                   "or fix the typo."]


def test_utf16_tab_separated_unicode_text():
    cb = load_codebook(GOOD / "unicode_text.txt")
    assert cb.names == ["pid", "age", "pet", "pet_kind", "mood1", "mood2", "visit"]
    assert cb["pet_kind"].applies_if == "pet = 1"


def test_awkward_workbook():
    cb = load_codebook(GOOD / "awkward.xlsx")
    assert cb.names[0] == "pid"  # the sheet named "Codebook", though another sheet comes first
    assert cb["pid"].label == "2024-05-01"  # an Excel date cell reads as ISO text
    assert cb["age"].max == 99  # a formula, by its saved result
    assert cb["pet"].required is True  # a TRUE cell
    assert cb["mood1"].missing == (Code("9", ""),)  # 9.0 stored as a float reads as "9"
    assert cb["mood1"].section == "2"  # not "2.0"
    # The section merged down K2:K5 belongs to each of those rows.
    assert [cb[n].section for n in ("pid", "age", "pet", "pet_kind")] == ["page 1"] * 4


def test_sheet_named_codebook_else_the_first(tmp_path):
    import openpyxl

    book = openpyxl.Workbook()
    book.active.title = "variables"
    book.active.append(["name", "type", "id"])
    book.active.append(["pid", "string", "yes"])
    book.create_sheet("other").append(["nothing", "here"])
    book.save(tmp_path / "cb.xlsx")
    assert load_codebook(tmp_path / "cb.xlsx").names == ["pid"]


# --------------------------------------------------------------------------- Table Schema


@pytest.mark.parametrize("path", [DEMO / "codebook.csv", GOOD / "design_format.csv",
                                  GOOD / "awkward.xlsx", GOOD / "cp1252_semicolon.csv"])
def test_written_table_schema_is_valid_and_reads_back_equal(path, tmp_path):
    cb = load_codebook(path)
    written = write_table_schema(cb, tmp_path / "schema.json")
    descriptor = json.loads(written.read_text(encoding="utf-8"))
    # frictionless: the reference implementation of the Table Schema open standard.
    report = Schema.validate_descriptor(descriptor)
    assert report.valid, report.flatten(["type", "note"])
    back = load_codebook(written)
    assert back == cb and back.hash == cb.hash
    assert load_codebook(write_codebook_csv(cb, tmp_path / "again.csv")) == cb


def test_table_schema_means_what_the_codebook_means(tmp_path):
    # frictionless checks a small data file against the written schema: what it
    # accepts and refuses must match the codebook's rules.
    cb = load_codebook(GOOD / "design_format.csv")
    (tmp_path / "schema.json").write_text(json.dumps(to_table_schema(cb)), encoding="utf-8")
    (tmp_path / "data.csv").write_text(
        "respondent,full_name,age,smoker,cigs_day,stress_1,stress_2,weight\n"
        "R001,Ann,30,1,10,0,4,70.5\n"          # fine
        "R002,Bob,-9,3,,2,2,80\n"              # -9 is a declared missing code: fine
        "R003,Cy,17,4,,5,1,300\n"              # age 17 < 18; smoker 4 not a code; stress 5 > 4; weight > 250.5
        ",Di,40,2,5,1,1,60\n",                 # the ID is required
        encoding="utf-8")
    resource = Resource(path="data.csv", schema="schema.json", basepath=str(tmp_path))
    report = resource.validate()
    errors = {tuple(e) for e in report.flatten(["rowNumber", "fieldName", "type"])}
    assert errors == {
        (4, "age", "constraint-error"),
        (4, "smoker", "constraint-error"),
        (4, "stress_1", "constraint-error"),
        (4, "weight", "constraint-error"),
        (5, "respondent", "constraint-error"),
        (5, None, "primary-key"),
    }


def test_codes_with_labels_become_categories_and_missing_values():
    # The loader makes the participant ID required, so the model built here says so too.
    cb = Codebook((Variable("pid", is_id=True, required=True),
                   Variable("q", "integer", codes=(Code("1", "never"), Code("2", "often")),
                            missing=(Code("-9", "refused"),)),
                   Variable("when", "date", format="%d.%m.%Y", label="Visit date")))
    d = to_table_schema(cb)
    q, when = d["fields"][1], d["fields"][2]
    # Table Schema: categories as {value, label}; enum of typed values; field missingValues.
    assert q["categories"] == [{"value": 1, "label": "never"}, {"value": 2, "label": "often"}]
    assert q["constraints"]["enum"] == [1, 2] and q["missingValues"] == ["", "-9"]
    assert (when["type"], when["format"], when["title"]) == ("date", "%d.%m.%Y", "Visit date")
    assert d["primaryKey"] == ["pid"]
    assert codebook_from_table_schema(d) == cb


def test_table_schema_from_elsewhere():
    # A schema as another tool would write it: no keyproof keys, shared missingValues.
    d = {
        "fields": [
            {"name": "id", "type": "string"},
            {"name": "sex", "type": "string", "constraints": {"enum": ["f", "m", "d"]}},
            {"name": "mail", "type": "string", "format": "email"},
            {"name": "born", "type": "date", "format": "%d/%m/%Y"},
            {"name": "score", "type": "integer", "constraints": {"minimum": 0, "maximum": 40}},
            {"name": "grade", "type": "integer", "categories": [{"value": 1, "label": "pass"},
                                                               {"value": 2, "label": "fail"}]},
        ],
        "primaryKey": "id",
        "missingValues": ["", "NA", "-99"],
    }
    cb = codebook_from_table_schema(d, "other.json")
    assert cb.id_variable.name == "id" and cb["id"].required
    assert cb["sex"].codes == (Code("f"), Code("m"), Code("d"))
    assert cb["score"].missing == (Code("-99"),)  # "NA" is not an integer, so not its missing code
    assert cb["sex"].missing == (Code("NA"), Code("-99"))
    assert cb["grade"].codes == (Code("1", "pass"), Code("2", "fail"))
    # Table Schema: a string's format ("email") is not a date pattern; a date's is.
    assert (cb["mail"].format, cb["born"].format) == ("", "%d/%m/%Y")


def test_scale_settings_survive_the_round_trip():
    cb = load_codebook(DEMO / "codebook.csv")
    sharing = cb.scales["sharing"]
    # Read by eye from fixtures/demo/codebook.csv.
    assert {v.score for v in sharing} == {"sum"} and {v.min_answered for v in sharing} == {0.75}
    assert codebook_from_table_schema(to_table_schema(cb)).scales["sharing"] == sharing


# --------------------------------------------------------------------------- diff


def test_diff_lists_added_removed_and_changed():
    old = Codebook((Variable("pid", is_id=True), Variable("age", "integer", max=99),
                    Variable("gone")))
    new = Codebook((Variable("pid", is_id=True), Variable("age", "integer", max=120),
                    Variable("town", label="Town")))
    diff = diff_codebooks(old, new)
    assert diff.added == ("town",) and diff.removed == ("gone",) and diff.renamed == ()
    assert diff.changed[0].changes == (("max", 99.0, 120.0),)
    assert diff.lines() == ["added town (string)", "removed gone", "changed age: max 99 -> 120"]
    assert diff_codebooks(old, old).empty and diff_codebooks(old, old).lines() == ["no changes"]


def test_diff_guesses_a_rename_in_place_and_reports_codes_and_order():
    yes_no = (Code("0", "no"), Code("1", "yes"))
    old = Codebook((Variable("pid", is_id=True), Variable("q1", "integer", label="Mood", codes=yes_no),
                    Variable("a"), Variable("b")))
    new = Codebook((Variable("pid", is_id=True),
                    Variable("mood", "integer", label="Mood", codes=(*yes_no, Code("9", "n/a"))),
                    Variable("b"), Variable("a")))
    diff = diff_codebooks(old, new)
    assert diff.renamed == (("q1", "mood"),) and not diff.added and not diff.removed
    assert diff.reordered
    assert diff.lines() == [
        "renamed? q1 -> mood",
        "changed mood: codes (0=no; 1=yes) -> (0=no; 1=yes; 9=n/a)",
        "paper order of existing variables changed",
    ]


def test_different_type_is_not_taken_for_a_rename():
    old = Codebook((Variable("pid", is_id=True), Variable("q1", "integer", label="Mood")))
    new = Codebook((Variable("pid", is_id=True), Variable("q2", "string", label="Mood")))
    diff = diff_codebooks(old, new)
    assert (diff.added, diff.removed, diff.renamed) == (("q2",), ("q1",), ())


# --------------------------------------------------------------------------- random round trips

_words = st.text(alphabet="abcdefgh ÄéžЖ-?!'\"", min_size=0, max_size=12).map(str.strip)


@st.composite
def _variable(draw, i: int, earlier: list[str]):
    type_ = draw(st.sampled_from(["integer", "number", "string", "date"]))
    kw: dict = {"label": draw(_words), "required": draw(st.booleans()),
                "identifying": draw(st.booleans()), "section": draw(st.sampled_from(["", "1", "p 2"])),
                "width": draw(st.one_of(st.none(), st.integers(1, 9)))}
    if earlier and draw(st.booleans()):
        kw["applies_if"] = f"{draw(st.sampled_from(earlier))} is {draw(st.sampled_from(['', 'not ']))}blank"
    if type_ == "integer":
        low, high = sorted(draw(st.lists(st.integers(-50, 50), min_size=2, max_size=2)))
        low = draw(st.sampled_from([None, low]))
        high = draw(st.sampled_from([None, high]))
        kw["min"], kw["max"] = (None if low is None else float(low)), (None if high is None else float(high))
        if low is not None and high is not None:
            picks = draw(st.lists(st.integers(low, high), unique=True, max_size=4))
            kw["codes"] = tuple(Code(str(p), draw(_words)) for p in picks)
            if draw(st.booleans()):
                kw["scale"] = draw(st.sampled_from(["calm", "tense"]))
                kw["reverse"] = draw(st.booleans())
        outside = [m for m in (-99, 999) if (low is None or m < low) or (high is None or m > high)]
        outside = [m for m in outside if not ((low is None or m >= low) and (high is None or m <= high))]
        kw["missing"] = tuple(Code(str(m), draw(_words)) for m in draw(st.lists(
            st.sampled_from(outside), unique=True, max_size=2))) if outside else ()
    elif type_ == "number":
        low, high = sorted(draw(st.lists(st.floats(-100, 100).map(lambda x: round(x, 2)),
                                         min_size=2, max_size=2)))
        kw["min"], kw["max"] = low, high
    elif type_ == "string":
        kw["codes"] = tuple(Code(c, draw(_words)) for c in draw(st.lists(
            st.sampled_from(["a", "b", "x y", "Z"]), unique=True, max_size=3)))
        kw["missing"] = (Code("NA", "not asked"),) if draw(st.booleans()) else ()
    else:
        kw["format"] = draw(st.sampled_from(["", "%d.%m.%Y", "%m/%d/%Y"]))
    return Variable(f"v{i}", type_, **kw)


@st.composite
def _codebooks(draw):
    variables = [Variable("pid", "string", is_id=True, required=True, label="ID")]
    for i in range(draw(st.integers(1, 8))):
        variables.append(draw(_variable(i, [v.name for v in variables[1:]])))
    # Every item of a scale shares its scale's settings.
    scale_settings = {s: (draw(st.sampled_from(["mean", "sum"])), draw(st.sampled_from([0.5, 0.8, 1.0])))
                      for s in ("calm", "tense")}
    variables = [replace(v, score=scale_settings[v.scale][0], min_answered=scale_settings[v.scale][1])
                 if v.scale else v for v in variables]
    return Codebook(tuple(variables))


@settings(max_examples=25, deadline=None)
@given(_codebooks())
def test_any_valid_codebook_survives_the_tabular_form(tmp_path_factory, cb):
    # Labels here hold neither ";" nor "=", which the tabular codes syntax reserves.
    path = write_codebook_csv(cb, tmp_path_factory.mktemp("cb") / "codebook.csv")
    assert load_codebook(path) == cb


@settings(max_examples=40, deadline=None)
@given(_codebooks())
def test_any_valid_codebook_survives_table_schema(cb):
    descriptor = json.loads(json.dumps(to_table_schema(cb)))
    # frictionless: the reference implementation of the Table Schema open standard.
    report = Schema.validate_descriptor(descriptor)
    assert report.valid, report.flatten(["type", "note"])
    assert codebook_from_table_schema(descriptor, "schema.json") == cb
