"""Codebook loading, validation, Table Schema and update diff (core.codebook_io)."""

import json
from pathlib import Path

import pytest
from frictionless import Schema

from core.codebook import Code, Codebook, Variable
from core.codebook_io import (
    codebook_from_table_schema,
    diff_codebooks,
    load_codebook,
    to_table_schema,
    write_table_schema,
)
from core.errors import CodebookError

ROOT = Path(__file__).resolve().parents[1]
DATA = Path(__file__).parent / "data" / "codebooks"
DEMO = ROOT / "fixtures" / "demo"


def test_demo_codebook_reads_the_same_from_csv_and_xlsx():
    csv_cb = load_codebook(DEMO / "codebook.csv")
    assert csv_cb == load_codebook(DEMO / "codebook.xlsx")
    assert csv_cb.id_variable.name == "member_id"


def test_table_schema_is_valid_for_frictionless_and_reads_back_equal(tmp_path):
    cb = load_codebook(DEMO / "codebook.csv")
    path = write_table_schema(cb, tmp_path / "schema.json")
    descriptor = json.loads(path.read_text(encoding="utf-8"))
    # frictionless: the reference implementation of the Table Schema open standard.
    report = Schema.validate_descriptor(descriptor)
    assert report.valid, report.flatten(["type", "note"])
    schema = Schema.from_descriptor(descriptor)
    assert schema.primary_key == ["member_id"]
    assert load_codebook(path) == cb
    assert load_codebook(path).hash == cb.hash


def test_min_greater_than_max_is_located(tmp_path):
    p = tmp_path / "codebook.csv"
    p.write_text("name,type,id,min,max\npid,string,yes,,\nx,integer,,1,2\n"
                 "y,integer,,3,4\nz,integer,,5,6\nw,integer,,7,8\nage,integer,,99,16\n")
    with pytest.raises(CodebookError) as info:
        load_codebook(p)
    # The wording STYLE.md gives as the house example.
    assert info.value.problems == [
        'codebook.csv row 7 ("age"): min 99 is greater than max 16 — swap them or fix the typo.'
    ]


def test_diff_lists_added_removed_and_changed():
    old = Codebook((Variable("pid", is_id=True), Variable("age", "integer", max=99),
                    Variable("gone")))
    new = Codebook((Variable("pid", is_id=True), Variable("age", "integer", max=120),
                    Variable("town", label="Town")))
    diff = diff_codebooks(old, new)
    assert diff.added == ("town",) and diff.removed == ("gone",) and diff.renamed == ()
    assert diff.changed[0].changes == (("max", 99.0, 120.0),)
    assert "changed age: max 99 -> 120" in diff.lines()
    assert diff_codebooks(old, old).empty and diff_codebooks(old, old).lines() == ["no changes"]


def test_codes_with_labels_become_categories_and_missing_values():
    # The loader makes the participant ID required, so the model built here says so too.
    cb = Codebook((Variable("pid", is_id=True, required=True),
                   Variable("q", "integer", codes=(Code("1", "never"), Code("2", "often")),
                            missing=(Code("-9", "refused"),))))
    d = to_table_schema(cb)
    q = d["fields"][1]
    assert q["categories"] == [{"value": 1, "label": "never"}, {"value": 2, "label": "often"}]
    assert q["constraints"]["enum"] == [1, 2] and q["missingValues"] == ["", "-9"]
    assert codebook_from_table_schema(d) == cb
