"""End to end on the demo study: refuse while open, then resolve with the paper and export.

The demo's paper truth (fixtures/demo/paper.csv) and its list of planted slips
(fixtures/demo/slips.csv, written by fixtures/make_demo.py together with the
keyed passes) are the outside record: the verified file must equal the
paper, and the report's error attribution must find exactly the planted slips.
"""

from __future__ import annotations

import json

import openpyxl
import pandas as pd
import pytest
from demo_resolved import FIXTURES, resolved_demo
from frictionless import validate

from core.demo import KEYERS, make_demo_study
from core.report import build_report
from core.store import Study
from tui.cli import main


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """Two copies of the demo study: as keyed (open) and resolved with its paper."""
    folder = tmp_path_factory.mktemp("demo")
    open_study = make_demo_study(folder / "open")
    # Settled the way a resolver holding the paper would (tests/demo_resolved.py).
    return open_study, resolved_demo(folder / "resolved")


def test_export_refuses_while_anything_is_open(demo, tmp_path, capsys):
    open_study, _ = demo
    for out in ("v.csv", "v.xlsx", "pkg"):
        status = main(["export", str(open_study), "--out", str(tmp_path / out)])
        err = capsys.readouterr().err
        assert status == 1
        assert "open discrepanc" in err and "mismatch" in err  # counts by kind
        assert list(tmp_path.iterdir()) == []  # nothing written


def test_draft_export_of_the_open_study(demo, tmp_path, capsys):
    open_study, _ = demo
    assert main(["export", str(open_study), "--out", str(tmp_path / "v.csv"), "--draft"]) == 0
    assert (tmp_path / "v.DRAFT.csv").exists() and not (tmp_path / "v.csv").exists()
    open_cells = pd.read_csv(tmp_path / "v.DRAFT.open.csv", dtype=str)
    assert len(open_cells) > 0 and set(open_cells.columns) == {"participant", "variable", "kind"}


def _paper_frame(drop: list[str]) -> pd.DataFrame:
    # pandas' own CSV type inference on the paper truth is the reference here.
    paper = pd.read_csv(FIXTURES / "paper.csv")
    return paper.drop(columns=drop).sort_values("member_id").reset_index(drop=True)


def test_resolved_demo_exports_the_paper_in_every_format(demo, tmp_path, capsys):
    _, resolved = demo
    ident = tmp_path / "apart" / "who.csv"
    ident.parent.mkdir()
    assert main(["export", str(resolved), "--out", str(tmp_path / "v.csv"),
                 "--identifying", str(ident)]) == 0
    out = capsys.readouterr().out
    assert "60 participants" in out and "initials" in out
    expected = _paper_frame(drop=["initials"])
    whole = pd.read_csv(tmp_path / "v.csv")
    # The verified file ends with one computed score per scale (issue 7).
    assert set(whole.columns) - set(expected.columns) == {"belonging", "workdays", "sharing"}
    got = whole[list(expected.columns)]
    pd.testing.assert_frame_equal(got, expected, check_dtype=False)
    who = pd.read_csv(ident)
    assert list(who.columns) == ["member_id", "initials"]
    assert main(["export", str(resolved), "--out", str(tmp_path / "v.xlsx")]) == 0
    from_xlsx = pd.read_excel(tmp_path / "v.xlsx", sheet_name="data")
    from_xlsx["joined"] = from_xlsx["joined"].dt.strftime("%Y-%m-%d")
    pd.testing.assert_frame_equal(from_xlsx, whole, check_dtype=False)
    assert "initials" not in next(openpyxl.load_workbook(tmp_path / "v.xlsx", read_only=True)
                                  ["data"].iter_rows(values_only=True))
    assert main(["export", str(resolved), "--out", str(tmp_path / "pkg")]) == 0
    # frictionless: the reference implementation of the Data Package standard.
    report = validate(tmp_path / "pkg" / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    package = json.loads((tmp_path / "pkg" / "datapackage.json").read_text())
    with Study.open(resolved, readonly=True) as study:
        head = study.journal_head()
    assert package["keyproof:provenance"]["journal_head"] == head
    assert package["keyproof:provenance"]["study"] == "garden.sqlite"


def test_report_finds_exactly_the_planted_slips(demo, tmp_path, capsys):
    _, resolved = demo
    with Study.open(resolved, readonly=True) as study:
        report = build_report(study)
        variables = len(study.codebook) - 1
    slips = pd.read_csv(FIXTURES / "slips.csv", dtype=str, keep_default_na=False)
    # Field slips of one pass (the ID slip is a pairing problem, counted apart).
    field_slips = slips[slips["pass"].isin(["1", "2"]) & (slips["variable"] != "member_id")
                        & (slips["kind"] == "mismatch")]
    planted = field_slips.groupby("pass").size().rename(index=lambda p: KEYERS[int(p)])
    rates = report.keyer_rates.set_index("keyer")
    assert rates["errors"].to_dict() == planted.to_dict()
    assert rates["fields"].to_dict() == {"AB": 60 * variables, "JM": 60 * variables}
    assert report.status["open"] == 0 and report.status["stale"] == 0
    kept = slips[slips["kind"] == "out_of_range"]
    assert report.kept[["participant", "variable"]].values.tolist() == kept[
        ["participant", "variable"]].values.tolist()
    # The screening hook is filled from core.screening: the codebook's three scales.
    assert report.screening is not None
    assert sorted(report.screening["scale"]) == ["belonging", "sharing", "workdays"]
    assert main(["report", str(resolved), "--out", str(tmp_path / "r.html")]) == 0
    html = (tmp_path / "r.html").read_text(encoding="utf-8")
    for keyer, errors in planted.items():
        assert f"<td>{keyer}</td>" in html and f'<td class="n">{errors}</td>' in html
    assert main(["report", str(resolved), "--out", str(tmp_path / "r.md")]) == 0
    assert (tmp_path / "r.md").read_text(encoding="utf-8").startswith("# Verification report")


def test_report_command_refuses_an_unknown_format(demo, tmp_path, capsys):
    open_study, _ = demo
    assert main(["report", str(open_study), "--out", str(tmp_path / "r.pdf")]) == 2
    assert "r.pdf: cannot write a report as .pdf — choose a .html or .md file." in (
        capsys.readouterr().err)


def test_export_leaves_the_study_untouched_and_never_writes_over_it(demo, tmp_path, capsys):
    import hashlib

    _, resolved = demo
    before = hashlib.sha256(resolved.read_bytes()).hexdigest()
    with Study.open(resolved, readonly=True) as study:
        head = study.journal_head()
    assert main(["export", str(resolved), "--out", str(tmp_path / "v.csv")]) == 0
    assert main(["export", str(resolved), "--out", str(resolved.with_suffix(".csv"))]) == 0
    # A target that is the study file itself is bad input: exit 2, one sentence.
    capsys.readouterr()
    sneaky = resolved.parent / "garden.sqlite"
    assert main(["export", str(resolved), "--out", str(tmp_path / "v.csv"),
                 "--identifying", str(sneaky)]) == 2
    err = capsys.readouterr().err
    assert "this is the study file — choose another name" in err and "Traceback" not in err
    assert hashlib.sha256(resolved.read_bytes()).hexdigest() == before
    with Study.open(resolved, readonly=True) as study:
        assert study.journal_head() == head


def test_export_bad_target_is_exit_2(demo, tmp_path, capsys):
    _, resolved = demo
    assert main(["export", str(resolved), "--out", str(tmp_path / "v.json")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "choose a .csv or .xlsx file, or a folder" in err


def test_progress_line_on_a_terminal_only():
    import io

    from tui.commands.export import _ProgressLine

    class Tty(io.StringIO):
        def isatty(self):
            return True

    tty, pipe = Tty(), io.StringIO()
    for stream in (tty, pipe):
        line = _ProgressLine(stream)
        line("writing rows", 1000, 5000)
        line("writing rows", 5000, 5000)
        line.end()
    assert tty.getvalue() == "\rwriting rows: 1,000 of 5,000   \rwriting rows: 5,000 of 5,000   \n"
    assert pipe.getvalue() == ""
