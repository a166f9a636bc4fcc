"""The store's commands: init, status, audit, codebook — exit statuses and messages.

Exit statuses follow DESIGN.md's command-line contract (0 clean, 1 not clean,
2 bad input). Expected counts come from reading the input files with pandas,
not from the store.
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import pandas as pd
import pytest

from core.store import Study
from tui.cli import main

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "core" / "data" / "demo"

CODEBOOK_CSV = """name,label,type,id,min,max,codes,missing
pid,Form number,integer,yes,,,,
age,Age,integer,,16,99,,-9=refused
q1,Garden visits,integer,,,,1=never; 2=sometimes; 3=often,
note,Comment,string,,,,,
"""


@pytest.fixture
def codebook(tmp_path) -> Path:
    path = tmp_path / "codebook.csv"
    path.write_text(CODEBOOK_CSV, encoding="utf-8")
    return path


@pytest.fixture
def study(tmp_path, codebook) -> Path:
    path = tmp_path / "study.sqlite"
    assert main(["init", str(path), "--codebook", str(codebook), "--keyer", "AB"]) == 0
    return path


def keyed(rows: list[list[str]]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=["pid", "age", "q1", "note"])


def test_init_creates_and_refuses_existing(tmp_path, codebook, capsys):
    path = tmp_path / "s.sqlite"
    assert main(["init", str(path), "--codebook", str(codebook), "--keyer", "AB"]) == 0
    out = capsys.readouterr().out
    assert "4 variables" in out and "'pid'" in out
    assert main(["init", str(path), "--codebook", str(codebook)]) == 2
    assert "s.sqlite already exists" in capsys.readouterr().err
    with Study.open(path, readonly=True) as s:
        assert s.codebook.names == ["pid", "age", "q1", "note"]
        assert s.journal()["who"].tolist() == ["AB"]


def test_init_bad_codebook_is_exit_2_with_located_message(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("name,type,id,min,max\npid,integer,yes,,\nage,integer,,99,16\n", encoding="utf-8")
    assert main(["init", str(tmp_path / "s.sqlite"), "--codebook", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "bad.csv" in err and "age" in err and "Traceback" not in err
    assert not (tmp_path / "s.sqlite").exists()


def test_missing_study_is_exit_2(tmp_path, capsys):
    for command in ("status", "audit", "codebook"):
        assert main([command, str(tmp_path / "nope.sqlite")]) == 2
        assert "nope.sqlite does not exist" in capsys.readouterr().err


def test_status_empty_study_is_open_work(study, capsys):
    assert main(["status", str(study)]) == 1
    out = capsys.readouterr().out
    assert "pass 1 has no forms yet" in out


def test_status_counts_and_exit(study, capsys):
    with Study.open(study) as s:
        s.import_pass(1, "AB", keyed([["1", "30", "2", ""], ["2", "41", "1", "x"]]))
        s.import_pass(2, "CD", keyed([["1", "30", "2", ""], ["2", "41", "1", "x"]]))
        f = s.start_form(2, "EF")
        s.set_value(f, "pid", "3", "keyed", "EF")
    assert main(["status", str(study), "--json"]) == 1
    d = json.loads(capsys.readouterr().out)
    p1, p2 = d["passes"]
    assert (p1["forms"], p1["finished"], p1["fields_keyed"], p1["keyers"]) == (2, 2, 8, ["AB"])
    assert (p2["forms"], p2["finished"], p2["fields_keyed"], p2["keyers"]) == (3, 2, 9, ["CD", "EF"])
    assert "pass 2: 1 forms not finished" in d["open_work"]
    with Study.open(study) as s:
        s.drop_form(f, "started by mistake", "EF")
    assert main(["status", str(study)]) == 0
    out = capsys.readouterr().out
    assert "1 dropped" in out and "nothing left to do." in out


def test_status_counts_open_discrepancies(study, capsys):
    with Study.open(study) as s:
        s.import_pass(1, "AB", keyed([["1", "30", "2", ""]]))
        s.import_pass(2, "CD", keyed([["1", "31", "2", ""]]))
    assert main(["status", str(study), "--json"]) == 1
    d = json.loads(capsys.readouterr().out)
    assert d["discrepancies"]["open"] == 1 and "1 discrepancies to resolve" in d["open_work"]


def test_status_on_demo_passes(tmp_path, capsys):
    path = tmp_path / "demo.sqlite"
    assert main(["init", str(path), "--codebook", str(DEMO / "codebook.csv")]) == 0
    passes = [pd.read_csv(DEMO / f"pass{n}.csv", dtype=str, keep_default_na=False) for n in (1, 2)]
    with Study.open(path) as s:
        for n, frame in enumerate(passes, start=1):
            s.import_pass(n, f"K{n}", frame)
        width = len(s.codebook)
    capsys.readouterr()
    assert main(["status", str(path), "--json", "--quick"]) == 0  # all imported forms finished
    d = json.loads(capsys.readouterr().out)
    for p, frame in zip(d["passes"], passes, strict=True):
        assert p["forms"] == len(frame) and p["fields_expected"] == len(frame) * width


def test_audit_exit_statuses(study, capsys):
    with Study.open(study) as s:
        f = s.start_form(1, "AB")
        s.set_value(f, "age", "30", "keyed", "AB")
    assert main(["audit", str(study)]) == 0
    assert "journal intact" in capsys.readouterr().out
    con = sqlite3.connect(study)
    con.execute("DROP TRIGGER journal_no_update")
    con.execute("UPDATE journal SET new_text = '31' WHERE action = 'set_value'")
    con.commit()
    con.close()
    assert main(["audit", str(study)]) == 1
    assert "journal row 3" in capsys.readouterr().out


def test_codebook_show_and_schema(study, tmp_path, capsys):
    assert main(["codebook", str(study)]) == 0
    out = capsys.readouterr().out
    for name in ("pid", "age", "q1", "note"):
        assert name in out
    schema = tmp_path / "schema.json"
    assert main(["codebook", str(study), "--schema", str(schema)]) == 0
    # The frictionless library is the reference implementation of Table Schema.
    from frictionless import Schema

    names = [f.name for f in Schema.from_descriptor(str(schema)).fields]
    assert names == ["pid", "age", "q1", "note"]


def test_codebook_update_refuses_then_forces(study, tmp_path, capsys):
    with Study.open(study) as s:
        f = s.start_form(1, "AB")
        s.set_value(f, "note", "hello", "keyed", "AB")
    renamed = tmp_path / "v2.csv"
    renamed.write_text(CODEBOOK_CSV.replace("note,Comment", "comment,Comment")
                       .replace("age,Age,integer,,16,99", "age,Age,integer,,16,120"),
                       encoding="utf-8")  # fmt: skip
    assert main(["codebook", str(study), "--update", str(renamed)]) == 2
    assert 'drops "note", which holds 1 keyed value' in capsys.readouterr().err
    assert main(["codebook", str(study), "--update", str(renamed), "--dry-run"]) == 0
    assert "not applied" in capsys.readouterr().out
    with Study.open(study, readonly=True) as s:
        assert s.codebook.names[-1] == "note"
    assert main(["codebook", str(study), "--update", str(renamed), "--force"]) == 0
    out = capsys.readouterr().out
    assert "age" in out and "applied" in out
    with Study.open(study, readonly=True) as s:
        assert s.codebook.names[-1] == "comment" and s.codebook["age"].max == 120
        assert s.journal()["action"].tolist()[-1] == "codebook_update"
    assert main(["codebook", str(study), "--force"]) == 2


@pytest.mark.parametrize("command", ["init", "status", "audit", "codebook"])
def test_help(command, capsys):
    with pytest.raises(SystemExit) as exc:
        main([command, "--help"])
    assert exc.value.code == 0
    assert "STUDY" in capsys.readouterr().out
