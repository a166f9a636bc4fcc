"""``keyproof screen`` on a small study built here: output, files, rules, exit status."""

from __future__ import annotations

import json

import pandas as pd
import pingouin as pg
import pytest
from sklearn.metrics import cohen_kappa_score

from core.codebook import Code, Codebook, Variable
from core.store import Study
from tui.cli import main

AGES = [30, 31, 29, 32, 30, 31, 28, 30, 33, 29, 30, 31, 30, 29, 31, 95, -9, 30]
A1 = [1, 2, 3, 4, 5, 2, 3, 4, 1, 5, 3, 2, 4, 3, 2, 1, 4, 5]
A2 = [5, 4, 2, 2, 1, 4, 3, 1, 5, 2, 3, 4, 2, 3, 4, 5, 2, 1]  # reverse-keyed
A3 = [2, 2, 3, 5, 4, 1, 3, 4, 2, 5, 2, 2, 5, 3, 1, 1, 4, 4]
PETS = ["1", "2", "1", "1", "2", "2", "1", "9", "1", "2", "1", "1", "2", "1", "2", "1", "1", "2"]


def codebook() -> Codebook:
    likert = dict(type="integer", min=1, max=5, scale="A")
    return Codebook(
        (
            Variable("pid", "string", is_id=True),
            Variable("age", "integer", min=0, max=120, missing=(Code("-9", "refused"),)),
            Variable("a1", **likert),
            Variable("a2", reverse=True, **likert),
            Variable("a3", **likert),
            Variable("pet", "integer", codes=(Code("1", "cat"), Code("2", "dog")),
                     missing=(Code("9", "no answer"),)),
        )
    )  # fmt: skip


def texts(pets) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "pid": [f"P{i:02d}" for i in range(len(AGES))],
            "age": [str(a) for a in AGES],
            "a1": [str(v) for v in A1],
            "a2": [str(v) for v in A2],
            "a3": [str(v) for v in A3],
            "pet": pets,
        }
    )


def build(path, changes):
    """A study whose pass 2 differs from pass 1 at ``changes`` ((row, column) -> text)."""
    second = texts(PETS)
    for (row, column), text in changes.items():
        second.loc[row, column] = text
    with Study.create(path, codebook(), "FF") as study:
        study.import_pass(1, "AB", texts(PETS))
        study.import_pass(2, "JM", second)
    return path


@pytest.fixture
def study_path(tmp_path):
    # One disagreement, left open: the screening is a draft.
    return build(tmp_path / "tiny.sqlite", {(3, "pet"): "2"})


def items_frame() -> pd.DataFrame:
    return pd.DataFrame({"a1": A1, "a2": [6 - v for v in A2], "a3": A3})


def test_json_matches_reference_libraries(study_path, capsys):
    assert main(["screen", str(study_path), "--json"]) == 1  # an open cell: not clean
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    # Reference library computed in the same test: pingouin on the items,
    # a2 reverse-scored by hand as 6 - x.
    expected_alpha, _ = pg.cronbach_alpha(items_frame())
    assert doc["scales"]["A"]["alpha"] == pytest.approx(expected_alpha, abs=1e-12)
    assert doc["scales"]["A"]["n"] == len(AGES)
    assert doc["variables"]["age"]["missing"] == {"-9": 1}
    assert doc["variables"]["age"]["outliers_z"] == ["P15"]
    # Kappa between the passes against scikit-learn, the missing code (9) left out.
    pets2 = list(PETS)
    pets2[3] = "2"
    pairs = [(a, b) for a, b in zip(PETS, pets2, strict=True) if "9" not in (a, b)]
    expected_kappa = cohen_kappa_score([a for a, _ in pairs], [b for _, b in pairs])
    assert doc["variables"]["pet"]["kappa"]["kappa"] == pytest.approx(expected_kappa)
    assert "open cell" in captured.err


def test_text_and_files(study_path, tmp_path, capsys):
    md, csv = tmp_path / "screen.md", tmp_path / "screen.csv"
    assert main(["screen", str(study_path), "--out", str(md)]) == 1
    out = capsys.readouterr().out
    assert "Scales" in out and "Cohen's kappa" in out and "open cell" in out
    assert "cat" in out and "dog" in out  # frequencies carry the code labels
    assert "## Items of A" in md.read_text(encoding="utf-8")
    assert main(["screen", str(study_path), "--out", str(csv)]) == 1
    table = pd.read_csv(csv).set_index("name")
    expected_alpha, _ = pg.cronbach_alpha(items_frame())  # reference library
    assert table.loc["A", "alpha"] == pytest.approx(expected_alpha)
    assert table.loc["age", "n"] == len(AGES) - 1


def test_rule_preview_then_apply(study_path, capsys):
    assert main(["screen", str(study_path), "--rule", "z:age"]) == 1
    assert "would set aside 1: P15" in capsys.readouterr().out
    with Study.open(study_path, readonly=True) as study:
        assert study.set_asides().empty  # a preview changes nothing
    assert main(["screen", str(study_path), "--rule", "z:age", "--apply", "--keyer", "FF"]) == 1
    out = capsys.readouterr().out
    assert "It set aside 1: P15" in out
    assert "With and without set-aside participants" in out
    with Study.open(study_path, readonly=True) as study:
        aside = study.set_asides()
    assert aside["participant"].tolist() == ["P15"]
    assert aside["rule"].tolist() == ["z>3.29:age"]
    assert "3.29" in aside["reason"].iloc[0]
    main(["screen", str(study_path), "--json"])
    age = json.loads(capsys.readouterr().out)["variables"]["age"]
    assert (age["n"], age["with_set_aside"]["n"]) == (len(AGES) - 2, len(AGES) - 1)


def test_apply_refuses_while_rule_variables_are_open(tmp_path, capsys):
    path = build(tmp_path / "open.sqlite", {(4, "a2"): "3"})
    status = main(["screen", str(path), "--rule", "blank:A:0", "--apply", "--keyer", "FF"])
    assert status == 1
    assert "settle them" in capsys.readouterr().err
    with Study.open(path, readonly=True) as study:
        assert study.set_asides().empty
    assert main(["screen", str(path), "--rule", "z:pet"]) == 2  # coded: no z
    assert "coded" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("extra", "words"),
    [
        (["--rule", "age>3"], "z:VARIABLE"),
        (["--rule", "z:nope"], "no variable or scale 'nope'"),
        (["--rule", "z:age", "--apply"], "--keyer"),
        (["--out", "screen.txt"], ".csv or .md"),
    ],
)
def test_bad_input_is_one_line_and_exit_2(study_path, capsys, extra, words):
    assert main(["screen", str(study_path), *extra]) == 2
    err = capsys.readouterr().err
    assert words in err and err.count("\n") == 1 and "Traceback" not in err


def test_json_with_rule_keeps_stdout_one_object(study_path, capsys):
    assert main(["screen", str(study_path), "--json", "--rule", "z:age"]) == 1
    captured = capsys.readouterr()
    assert set(json.loads(captured.out)) == {"scales", "variables"}
    assert "would set aside 1: P15" in captured.err


def test_empty_study_says_so(tmp_path, capsys):
    path = tmp_path / "empty.sqlite"
    Study.create(path, codebook(), "FF").close()
    assert main(["screen", str(path)]) == 0
    assert "No participant in the verified table yet" in capsys.readouterr().out
