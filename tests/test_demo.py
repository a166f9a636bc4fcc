"""The invented demo: its files agree with what they claim, and the demo study builds."""

from __future__ import annotations

import argparse
import csv
import filecmp
import importlib.util
from pathlib import Path

import pytest

from core.codebook_io import load_codebook
from core.demo import KEYERS, STUDY_NAME, make_demo_study
from core.store import Study
from tui.commands import demo as demo_command

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "fixtures" / "demo"


def read(name: str) -> list[dict[str, str]]:
    # Reference reader: the standard library's csv module, not the project's importer.
    with (DEMO / name).open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def by_id(rows):
    return {r["member_id"]: r for r in rows}


def test_packaged_copy_equals_the_fixtures():
    packaged = ROOT / "core" / "data" / "demo"
    names = sorted(p.name for p in DEMO.iterdir())
    assert names == sorted(p.name for p in packaged.iterdir())
    match, mismatch, errors = filecmp.cmpfiles(DEMO, packaged, names, shallow=False)
    assert mismatch == [] and errors == []


def test_make_demo_script_reproduces_the_committed_files(tmp_path, monkeypatch):
    spec = importlib.util.spec_from_file_location("make_demo", ROOT / "fixtures" / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    monkeypatch.setattr(module, "OUT", tmp_path / "demo")
    monkeypatch.setattr(module, "PACKAGED", tmp_path / "packaged")
    module.main()
    for name in ("codebook.csv", "paper.csv", "pass1.csv", "pass2.csv", "slips.csv"):
        assert (tmp_path / "demo" / name).read_bytes() == (DEMO / name).read_bytes(), name
    # The XLSX holds the same codebook as the CSV (read by each format's own loader).
    assert load_codebook(DEMO / "codebook.xlsx") == load_codebook(DEMO / "codebook.csv")


def test_scenario_size_and_parts():
    # Issue 2 asks for about 60 forms and about 35 variables with these parts.
    codebook = load_codebook(DEMO / "codebook.csv")
    paper = read("paper.csv")
    assert 50 <= len(paper) <= 70 and 30 <= len(codebook) <= 40
    assert codebook.id_variable.name == "member_id"
    assert codebook.identifying_names == ["initials"]
    scales = codebook.scales
    assert len(scales) >= 2
    assert all(sum(v.reverse for v in items) == 1 for items in scales.values())
    assert any(v.applies_if for v in codebook)
    assert any(v.codes and v.missing for v in codebook)
    assert {v.type for v in codebook} == {"integer", "number", "string", "date"}


def test_slips_list_every_difference_between_paper_and_passes():
    paper = by_id(read("paper.csv"))
    passes = {1: read("pass1.csv"), 2: read("pass2.csv")}
    slips = read("slips.csv")
    listed = {(s["participant"], s["variable"], int(s["pass"])): s
              for s in slips if s["kind"] == "mismatch"}
    mistyped = {s["keyed"]: s["participant"] for s in slips
                if s["variable"] == "member_id" and s["pass"]}
    found = {}
    for pass_no, rows in passes.items():
        for row in rows:
            pid = mistyped.get(row["member_id"], row["member_id"]) if pass_no == 2 else row["member_id"]
            truth = paper[pid]
            for name, keyed in row.items():
                if name != "member_id" and keyed != truth[name]:
                    found[(pid, name, pass_no)] = (truth[name], keyed)
    assert found.keys() == listed.keys()
    for key, (on_paper, keyed) in found.items():
        assert (listed[key]["paper"], listed[key]["keyed"]) == (on_paper, keyed), key
    # The slips DESIGN.md names are all planted, each with a cause from its list.
    causes = {s["cause"] for s in listed.values()}
    assert causes <= {"transposed", "neighbour_key", "dropped_char", "extra_char",
                      "decimal_shift", "sign", "field_shift", "case_space", "omitted", "other"}
    assert {"transposed", "neighbour_key", "field_shift", "omitted", "decimal_shift",
            "dropped_char"} <= causes
    # A form keyed in pass 1 only, and a mistyped form number in pass 2.
    ids1 = {r["member_id"] for r in passes[1]}
    ids2 = {r["member_id"] for r in passes[2]}
    assert ids1 == set(paper)
    assert len(ids1 - ids2) == 2 and len(ids2 - ids1) == 1
    assert set(mistyped) == ids2 - ids1
    # A value outside its range is on the paper itself.
    codebook = load_codebook(DEMO / "codebook.csv")
    visits = codebook["visits_month"]
    assert any(int(r["visits_month"]) > visits.max for r in paper.values() if r["visits_month"])


def test_demo_study_holds_the_fixture_passes(tmp_path):
    path = make_demo_study(tmp_path / "here")
    assert path == tmp_path / "here" / STUDY_NAME and path.is_file()
    assert (path.parent / "codebook.csv").read_bytes() == (DEMO / "codebook.csv").read_bytes()
    assert (path.parent / "codebook.xlsx").is_file()
    with Study.open(path, readonly=True) as study:
        assert study.codebook == load_codebook(DEMO / "codebook.csv")
        for pass_no, keyer in KEYERS.items():
            data = study.load_pass(pass_no)
            expected = [list(r.values()) for r in read(f"pass{pass_no}.csv")]
            assert data.text.values.tolist() == expected
            assert set(data.keyer) == {keyer}
        assert study.audit().ok


def test_demo_refuses_an_existing_study(tmp_path):
    make_demo_study(tmp_path)
    with pytest.raises(Exception, match="garden.sqlite already exists"):
        make_demo_study(tmp_path)


def test_demo_command_says_where_and_does_not_open(tmp_path, capsys):
    args = argparse.Namespace(folder=str(tmp_path / "d"), no_open=True)
    assert demo_command.run(args) == 0
    out = capsys.readouterr().out
    assert str(tmp_path / "d" / STUDY_NAME) in out
    assert (tmp_path / "d" / STUDY_NAME).is_file()


def test_demo_command_line_twice_exits_2(tmp_path, capsys):
    from tui.cli import main

    assert main(["demo", str(tmp_path), "--no-open"]) == 0
    capsys.readouterr()
    assert main(["demo", str(tmp_path), "--no-open"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "already exists" in err and "Traceback" not in err


def test_demo_command_opens_the_app_on_the_new_study(tmp_path, monkeypatch):
    import tui.app

    opened = []
    monkeypatch.setattr(tui.app, "run_app", lambda path, **kw: opened.append(Path(path)) or 0)
    args = argparse.Namespace(folder=str(tmp_path), no_open=False)
    assert demo_command.run(args) == 0
    assert opened == [tmp_path / STUDY_NAME]
