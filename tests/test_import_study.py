"""Importing a keyed file into a study: all or nothing, journaled, duplicates kept."""

from __future__ import annotations

import csv

import pytest

from core.codebook import Code, Codebook, Variable
from core.errors import ImportFileError, UsageError
from core.importer import import_file
from core.store import Study
from tui.cli import main

CB = Codebook((
    Variable("pid", "integer", is_id=True, required=True),
    Variable("age", "integer", min=16, max=99),
    Variable("q1", "integer", codes=(Code("1", "no"), Code("2", "yes"))),
    Variable("note", "string"),
))
ROWS = [["pid", "age", "q1", "note"], ["1", "34", "2", "Genève"], ["2", "07", "", ""],
        ["2", "41", "1", "same ID again"]]


def write_csv(path, rows, encoding="utf-8"):
    with path.open("w", encoding=encoding, newline="") as fh:
        csv.writer(fh).writerows(rows)
    return path


@pytest.fixture
def study(tmp_path):
    with Study.create(tmp_path / "s.sqlite", CB, "AB") as s:
        yield s


def test_import_stores_exact_texts_and_journals_the_keyer(study, tmp_path):
    path = write_csv(tmp_path / "pass1.csv", ROWS)
    result = import_file(study, path, 1, "AB")
    assert result.forms == 3 and result.pass_no == 1 and result.keyer == "AB"
    data = study.load_pass(1)
    # Reference: the rows as the standard library's csv module writes them.
    assert data.text.values.tolist() == ROWS[1:]
    assert data.state.loc[result.form_ids[1], "q1"] == "blank"
    journal = study.journal()
    imported = journal[journal["form_id"].isin(result.form_ids)]
    assert set(imported["who"]) == {"AB"} and len(imported) >= 3
    assert study.audit().ok


def test_duplicate_ids_are_imported_and_named(study, tmp_path):
    result = import_file(study, write_csv(tmp_path / "p.csv", ROWS), 2, "JM")
    assert result.forms == 3
    assert result.duplicate_ids == ("2",)
    assert "IDs on more than one row: 2." in result.summary()
    assert len(study.find_forms(2, "2")) == 2


def test_refused_file_leaves_the_study_unchanged(study, tmp_path):
    import_file(study, write_csv(tmp_path / "ok.csv", ROWS), 1, "AB")
    head, forms = study.journal_head(), len(study.forms())
    bad = write_csv(tmp_path / "bad.csv", [["pid", "Age", "q1", "note"], ["3", "50", "1", ""]])
    with pytest.raises(ImportFileError, match='perhaps "age"'):
        import_file(study, bad, 2, "JM")
    ragged = write_csv(tmp_path / "ragged.csv", [ROWS[0], ["3", "50", "1", "", "x"]])
    with pytest.raises(ImportFileError, match="ragged.csv row 2"):
        import_file(study, ragged, 2, "JM")
    with pytest.raises(UsageError):
        import_file(study, tmp_path / "ok.csv", 3, "JM")
    with pytest.raises(UsageError):
        import_file(study, tmp_path / "ok.csv", 2, "  ")
    assert study.journal_head() == head
    assert len(study.forms()) == forms


def test_second_file_into_a_pass_is_added_and_said(study, tmp_path):
    path = write_csv(tmp_path / "p.csv", ROWS[:2])
    import_file(study, path, 1, "AB")
    result = import_file(study, path, 1, "AB")
    assert len(study.forms(1)) == 2
    assert any("already held 1 form" in n for n in result.notes)


def test_import_command_line(tmp_path, capsys):
    with Study.create(tmp_path / "s.sqlite", CB, "AB"):
        pass
    good = write_csv(tmp_path / "win.csv", ROWS, encoding="cp1252")
    status = main(["import", str(tmp_path / "s.sqlite"), "--pass", "1", "--keyer", "AB",
                   str(good)])
    out = capsys.readouterr().out
    assert status == 0
    assert out.splitlines()[0].startswith("win.csv: 3 forms imported into pass 1 (keyer AB).")
    assert "note: win.csv: not UTF-8, read as cp1252" in out
    with Study.open(tmp_path / "s.sqlite", readonly=True) as s:
        assert s.load_pass(1).text.loc[:, "note"].iloc[0] == "Genève"
        head = s.journal_head()

    bad = write_csv(tmp_path / "bad.csv", [["pid", "age", "q1"], ["3", "50", "1"]])
    status = main(["import", str(tmp_path / "s.sqlite"), "--pass", "2", "--keyer", "JM",
                   str(bad)])
    err = capsys.readouterr().err
    assert status == 2
    assert err == ('keyproof import: bad.csv row 1: no column for codebook variable "note" — '
                   "add the column (it may be empty) or correct the header.\n")
    with Study.open(tmp_path / "s.sqlite", readonly=True) as s:
        assert s.journal_head() == head

    status = main(["import", str(tmp_path / "s.sqlite"), "--pass", "1", "--keyer", "AB",
                   str(good), "--encoding", "utf-8"])
    assert status == 2
    assert "give the file's real encoding" in capsys.readouterr().err


def test_failure_half_way_through_leaves_nothing_behind(study, tmp_path, monkeypatch):
    # All or nothing: the forms and values are written before the journal rows;
    # a failure there must take the forms and values back out with it.
    import_file(study, write_csv(tmp_path / "ok.csv", ROWS), 1, "AB")
    head, forms = study.journal_head(), len(study.forms())

    def broken(*args, **kwargs):
        raise OSError("disk full")

    monkeypatch.setattr(study, "_journal_many", broken)
    with pytest.raises(OSError):
        import_file(study, write_csv(tmp_path / "two.csv", ROWS), 2, "JM")
    monkeypatch.undo()
    assert study.journal_head() == head
    assert len(study.forms()) == forms
    assert study.load_pass(2).forms == 0
    assert study.audit().ok
