"""The comparison engine: properties, a reference library, the demo's planted slips, the CLI."""

from __future__ import annotations

import argparse
import re
from pathlib import Path

import hypothesis.strategies as st
import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings

from core.codebook import Code, Codebook, Variable
from core.compare import COLUMNS, compare_passes, compare_study, natural_key, summarise
from core.passdata import PassData
from core.values import canonical_series

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "fixtures" / "demo"

LIKERT = tuple(Code(str(i)) for i in range(1, 6))
CODEBOOK = Codebook((
    Variable("pid", "integer", is_id=True, required=True),
    Variable("q1", "integer", codes=LIKERT, missing=(Code("9", "no answer"),), required=True),
    Variable("q2", "integer", codes=LIKERT),
    Variable("age", "integer", min=18, max=99),
    Variable("size", "number", min=0, max=100),
    Variable("note", "string"),
    Variable("q3", "integer", codes=LIKERT),
    Variable("q4", "integer", codes=LIKERT),
))

cell = st.one_of(st.sampled_from(["", "1", "2", "3", "07", "7", "3.5", "3,50", "x", " a ", "A",
                                  "9", "-1", "25"]), st.text(max_size=3))


def pass_of(no: int, rows: list[list[str]]) -> PassData:
    return PassData.from_texts(no, pd.DataFrame(rows, columns=CODEBOOK.names, dtype=object))


@st.composite
def two_passes(draw):
    n = draw(st.integers(1, 8))
    ids = draw(st.lists(st.integers(1, 40), min_size=n, max_size=n, unique=True))
    rows1 = [[str(i)] + draw(st.lists(cell, min_size=7, max_size=7)) for i in ids]
    rows2 = [list(r) for r in rows1]
    for r in rows2:  # change some cells of pass 2
        for j in range(1, 8):
            if draw(st.booleans()):
                r[j] = draw(cell)
    return pass_of(1, rows1), pass_of(2, rows2)


def typed(var: Variable, values: pd.Series) -> pd.Series:
    """The typed normalisation the engine promises (core.values), with blanks as ''."""
    canon, _ = canonical_series(var, values.astype(object))
    blank = values.astype(str).str.strip() == ""
    return canon.where(~blank, "").fillna("")


# --------------------------------------------------------------------------- properties


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(two_passes())
def test_a_pass_against_itself_has_no_mismatch(passes):
    p1, _ = passes
    table = compare_passes(CODEBOOK, p1, PassData(2, p1.text, p1.state, p1.keyer, p1.label))
    assert not (table["kind"] == "mismatch").any()
    assert not table["kind"].isin(["only_in_pass1", "only_in_pass2"]).any()


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(two_passes())
def test_swapping_the_passes_swaps_pass1_and_pass2_and_nothing_else(passes):
    p1, p2 = passes
    ab = compare_passes(CODEBOOK, p1, p2)
    ba = compare_passes(CODEBOOK, PassData(1, p2.text, p2.state, p2.keyer, p2.label),
                        PassData(2, p1.text, p1.state, p1.keyer, p1.label))
    swapped = ab.rename(columns={"pass1": "pass2", "pass2": "pass1", "_form1": "_form2",
                                 "_form2": "_form1"})
    swapped["kind"] = swapped["kind"].replace({"only_in_pass1": "only_in_pass2",
                                               "only_in_pass2": "only_in_pass1"})
    cols = ["participant", "variable", "kind", "pass1", "pass2", "cause"]
    pd.testing.assert_frame_equal(swapped[cols].reset_index(drop=True),
                                  ba[cols].reset_index(drop=True))
    # The detail names the passes: with their numbers swapped it says the same things.
    def clauses(text, swap):
        if swap:
            text = text.replace("pass 1", "pass @").replace("pass 2", "pass 1")
            text = text.replace("pass @", "pass 2")
        return sorted(re.split(r"[,;:] ", text))

    assert [clauses(d, True) for d in ab["detail"]] == [clauses(d, False) for d in ba["detail"]]


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(two_passes())
def test_every_cell_whose_typed_values_differ_appears_exactly_once(passes):
    p1, p2 = passes
    table = compare_passes(CODEBOOK, p1, p2)
    expected = set()
    for var in CODEBOOK.variables:
        a, b = typed(var, p1.text[var.name]), typed(var, p2.text[var.name])
        for i in np.flatnonzero((a != b).to_numpy()):
            expected.add((p1.text["pid"].iloc[i], var.name))
    rows = table[table["kind"] == "mismatch"]
    found = list(zip(rows["participant"], rows["variable"], strict=True))
    assert len(found) == len(set(found))
    assert set(found) == expected
    # One row per cell whatever its kind.
    cells = table[table["variable"] != ""][["participant", "variable"]]
    assert not cells.duplicated().any()


# --------------------------------------------------------------------------- reference


def test_mismatching_cells_equal_pandas_dataframe_compare_after_typed_normalisation():
    # Reference library: pandas' own DataFrame.compare on the same aligned frames,
    # after the typed normalisation of core.values (07 = 7, 3,50 = 3.5, trimmed text).
    rng = np.random.default_rng(3)
    values = ["1", "2", "3", "4", "5", "05", " 3", "", "9"]
    rows1 = [[str(i)] + list(rng.choice(values, 7)) for i in range(1, 61)]
    rows2 = [[r[0]] + [v if rng.random() < 0.8 else str(rng.choice(values)) for v in r[1:]]
             for r in rows1]
    p1, p2 = pass_of(1, rows1), pass_of(2, rows2)
    a = pd.DataFrame({v.name: typed(v, p1.text[v.name]) for v in CODEBOOK}).set_index("pid")
    b = pd.DataFrame({v.name: typed(v, p2.text[v.name]) for v in CODEBOOK}).set_index("pid")
    reference = a.compare(b, keep_shape=False).stack(level=0, future_stack=True)
    reference = reference.dropna(how="all")
    expected = {(pid, var) for pid, var in reference.index}
    table = compare_passes(CODEBOOK, p1, p2)
    mism = table[table["kind"] == "mismatch"]
    assert expected, "the generated passes should disagree somewhere"
    assert set(zip(mism["participant"], mism["variable"], strict=True)) == expected


# --------------------------------------------------------------------------- kinds


def test_agreed_values_are_checked_against_the_codebook():
    rows = [["1", "7", "", "15", "3,5", "a", "", ""],   # q1 not a code, age out of range
            ["2", "", "", "20", "abc", "", "", ""],     # q1 required blank, size not a number
            ["3", "9", "", "20", "200", "", "", ""]]    # 9 is a declared missing code
    table = compare_passes(CODEBOOK, pass_of(1, rows), pass_of(2, rows))
    got = set(zip(table["participant"], table["variable"], table["kind"], strict=True))
    assert got == {("1", "q1", "not_in_codes"), ("1", "age", "out_of_range"),
                   ("2", "q1", "blank"), ("2", "size", "invalid_type"),
                   ("3", "size", "out_of_range")}


def test_applies_if_gives_not_applicable_both_ways():
    cb = Codebook((Variable("pid", "integer", is_id=True), Variable("pet", "integer"),
                   Variable("kind", "string", applies_if="pet = 1", required=True)))
    frame = pd.DataFrame({"pid": ["1", "2", "3", "4"], "pet": ["1", "2", "1", "2"],
                          "kind": ["", "dog", "cat", ""]})
    p = PassData.from_texts(1, frame)
    table = compare_passes(cb, p, PassData(2, p.text, p.state))
    assert table[["participant", "variable", "kind"]].values.tolist() == [
        ["1", "kind", "not_applicable"], ["2", "kind", "not_applicable"]]


def test_form_level_rows_duplicates_and_partner_suggestion():
    base = [["132", "1", "2", "30", "1.5", "x", "3", "4"], ["5", "2", "2", "40", "2", "", "1", "1"]]
    rows1 = [list(r) for r in base] + [["5", "1", "1", "20", "1", "", "1", "1"]]
    rows2 = [list(r) for r in base]
    rows2[0][0] = "123"  # the ID keyed with two digits swapped
    table = compare_passes(CODEBOOK, pass_of(1, rows1), pass_of(2, rows2))
    kinds = dict(zip(table["participant"], table["kind"], strict=True))
    assert kinds == {"5": "duplicate_id", "123": "only_in_pass2", "132": "only_in_pass1"}
    assert (table["variable"] == "").all()
    row = table[table["participant"] == "132"].iloc[0]
    assert 'likely the same paper as pass 2 form "123" (ID 1 edit, 100% of fields agree)' \
        in row["detail"]
    assert row["_partner"] == 0  # pass 2's form 0 (row index)


def test_states_show_and_differ():
    cb = Codebook((Variable("pid", "integer", is_id=True), Variable("q", "integer")))
    text = pd.DataFrame({"pid": ["1", "2"], "q": ["", "4"]}, dtype=object)
    s1 = pd.DataFrame({"pid": ["keyed", "keyed"], "q": ["illegible", "keyed"]}, dtype=object)
    s2 = pd.DataFrame({"pid": ["keyed", "keyed"], "q": ["blank", "keyed"]}, dtype=object)
    t2 = text.copy()
    t2.loc[1, "q"] = "04"
    table = compare_passes(cb, PassData(1, text, s1), PassData(2, t2, s2))
    assert table[["participant", "pass1", "pass2"]].values.tolist() == [["1", "(illegible)", ""]]


def test_natural_order_and_form_rows_first():
    # Natural sort order as commonly practised: 2 < 10, then non-numeric IDs.
    assert sorted(["10", "2", "a10", "a9", "1"], key=natural_key) == ["1", "2", "10", "a9", "a10"]
    rows1 = [["10", "1", "", "", "", "", "", ""], ["2", "1", "", "", "", "", "", ""]]
    rows2 = [["10", "2", "", "", "", "", "", ""], ["2", "3", "", "", "", "", "", ""],
             ["2", "1", "", "", "", "", "", ""]]
    table = compare_passes(CODEBOOK, pass_of(1, rows1), pass_of(2, rows2))
    assert table["participant"].tolist() == ["2", "10"]
    assert table["kind"].tolist() == ["duplicate_id", "mismatch"]


def test_summary_counts_and_rate():
    table = pd.DataFrame({"kind": ["mismatch", "mismatch", "blank", "only_in_pass1"],
                          "cause": ["sign", "omitted", "", ""]})
    s = summarise(table, 1_000)
    assert s.by_kind == {"mismatch": 2, "blank": 1, "only_in_pass1": 1}
    assert s.by_cause == {"sign": 1, "omitted": 1}
    assert s.rate_per_10000 == pytest.approx(30.0)  # 3 field rows / 1,000 fields x 10,000
    assert "4 discrepancies" in s.lines()[0]


# --------------------------------------------------------------------------- demo fixtures


def demo_table():
    from core.codebook_io import load_codebook
    from core.importer import read_pass_file

    cb = load_codebook(DEMO / "codebook.csv")
    return compare_passes(cb, read_pass_file(DEMO / "pass1.csv", cb, 1),
                          read_pass_file(DEMO / "pass2.csv", cb, 2))


def test_every_planted_demo_slip_is_found_with_its_cause():
    # The fixtures are part of the repository: a missing file fails here, never skips.
    slips = pd.read_csv(DEMO / "slips.csv", dtype=str, keep_default_na=False)
    assert len(slips) > 0
    table = demo_table()
    for slip in slips.itertuples():
        if slip.kind == "only_in_pass1" and slip.variable == "member_id":
            # A mistyped form number: one form in each pass, each pointing at the other.
            hit = table[(table["participant"] == slip.participant) & (table["variable"] == "")]
            assert hit["detail"].str.contains(f'form "{slip.keyed}"').all(), slip
            continue
        hit = table[(table["participant"] == slip.participant)
                    & (table["variable"] == slip.variable) & (table["kind"] == slip.kind)]
        assert len(hit) == 1, slip
        assert hit["cause"].iloc[0] == slip.cause, slip


# --------------------------------------------------------------------------- study and CLI


def test_compare_study_leaves_out_dropped_forms(tmp_path):
    from core.store import Study

    with Study.create(tmp_path / "s.sqlite", CODEBOOK, "t") as study:
        row = ["1", "2", "", "30", "", "", "", ""]
        study.import_pass(1, "AB", pd.DataFrame([row], columns=CODEBOOK.names))
        other = list(row)
        other[1] = "3"
        ids = study.import_pass(2, "CD", pd.DataFrame([other, row], columns=CODEBOOK.names))
        assert compare_study(study)["kind"].tolist() == ["duplicate_id"]
        study.drop_form(ids[1], "keyed twice", "CD")
        table = compare_study(study)
    assert table[["participant", "variable", "pass1", "pass2"]].values.tolist() == [
        ["1", "q1", "2", "3"]]


def cli(*argv):
    from tui.cli import main

    return main(["compare", *map(str, argv)])


def test_cli_exit_status_out_file_and_errors(tmp_path, capsys):
    cb = tmp_path / "cb.csv"
    pd.DataFrame({"name": ["pid", "q"], "type": ["integer", "integer"], "id": ["yes", "no"],
                  "codes": ["", "1=a; 2=b"]}).to_csv(cb, index=False)
    f1, f2 = tmp_path / "p1.csv", tmp_path / "p2.csv"
    f1.write_text("pid,q\n1,1\n2,2\n")
    f2.write_text("pid,q\n01,1\n2,2\n")
    assert cli(f1, f2, "--codebook", cb) == 0
    f2.write_text("pid,q\n1,1\n2,1\n")
    out = tmp_path / "d.csv"
    assert cli(f1, f2, "--codebook", cb, "--out", out) == 1
    written = pd.read_csv(out, dtype=str, keep_default_na=False)
    assert list(written.columns) == list(COLUMNS)
    assert written[["participant", "variable", "kind"]].values.tolist() == [["2", "q", "mismatch"]]
    # Counted by hand: 2 paired forms × 1 variable besides the ID (which pairs them).
    assert "1 discrepancy in 2 fields compared" in capsys.readouterr().err
    assert cli(f1, f2, "--codebook", cb, "--out", tmp_path / "d.xlsx") == 1
    assert list(pd.read_excel(tmp_path / "d.xlsx").columns) == list(COLUMNS)
    f2.write_text("pid,x\n1,1\n")
    capsys.readouterr()
    assert cli(f1, f2, "--codebook", cb) == 2
    err = capsys.readouterr().err.strip()
    assert "p2.csv" in err and "Traceback" not in err and len(err.splitlines()) == 1
    assert cli(f1, f2) == 2
    assert cli(f1, f2, "--codebook", cb, "--out", tmp_path / "d.txt") == 2


def test_run_with_namespace_prints_the_table(tmp_path, capsys):
    from tui.commands import compare as command

    cb = tmp_path / "cb.csv"
    pd.DataFrame({"name": ["pid", "q"], "type": ["integer", "integer"],
                  "id": ["yes", "no"]}).to_csv(cb, index=False)
    (tmp_path / "a.csv").write_text("pid,q\n1,12\n")
    (tmp_path / "b.csv").write_text("pid,q\n1,21\n")
    args = argparse.Namespace(inputs=[str(tmp_path / "a.csv"), str(tmp_path / "b.csv")],
                              codebook=str(cb), out=None, encoding=None, rows=40)
    assert command.run(args) == 1
    out = capsys.readouterr()
    assert "transposed" in out.out and "mismatch" in out.out
    assert "1 discrepancy in 1 field compared" in out.err  # 1 form × 1 non-ID variable


def test_read_pass_file_states_follow_the_text_cell_by_cell(tmp_path):
    # The reference is the file itself, read with the standard library's csv
    # module: an empty or whitespace-only cell is blank on paper, anything else keyed.
    import csv

    from core.codebook_io import load_codebook
    from core.importer import read_pass_file

    cb = load_codebook(DEMO / "codebook.csv")
    spaced = tmp_path / "spaced.csv"
    lines = (DEMO / "pass2.csv").read_text(encoding="utf-8").splitlines()
    lines[1] = ",".join(c if i == 0 else "  " for i, c in enumerate(lines[1].split(",")))
    spaced.write_text("\n".join(lines) + "\n", encoding="utf-8")
    for path in (DEMO / "pass2.csv", spaced):
        with open(path, newline="", encoding="utf-8") as handle:
            rows = list(csv.reader(handle))[1:]
        ours = read_pass_file(path, cb, 2)
        assert ours.text.astype(object).values.tolist() == rows
        assert ours.state.astype(object).values.tolist() == [
            ["keyed" if cell.strip() else "blank" for cell in row] for row in rows]
        assert ours.label.tolist() == [f"{path.name} row {i}" for i in range(2, len(rows) + 2)]
    assert (read_pass_file(spaced, cb, 2).state.iloc[0, 1:] == "blank").all()


def test_categorical_passes_compare_as_plain_ones(tmp_path):
    # Keyed files arrive as categorical tables; the engine reads their codes
    # instead of hashing cells. The object tables of PassData.from_texts are
    # the reference: both must give the same discrepancy table.
    from core.codebook_io import load_codebook
    from core.importer import read_keyed_file, read_pass_file
    from core.passdata import PassData

    cb = load_codebook(DEMO / "codebook.csv")
    lines = (DEMO / "pass2.csv").read_text(encoding="utf-8").splitlines()
    # Drop a form and repeat another, so pairing works on a subset in another order.
    shuffled = tmp_path / "pass2.csv"
    shuffled.write_text("\n".join([lines[0], *reversed(lines[3:]), lines[3]]) + "\n",
                        encoding="utf-8")
    for second in (DEMO / "pass2.csv", shuffled):
        plain = [PassData.from_texts(n, read_keyed_file(path, cb)[0],
                                     label_prefix=f"{path.name} row")
                 for n, path in ((1, DEMO / "pass1.csv"), (2, second))]
        coded = [read_pass_file(path, cb, n) for n, path in ((1, DEMO / "pass1.csv"), (2, second))]
        assert isinstance(coded[0].text.dtypes.iloc[0], pd.CategoricalDtype)
        expected = compare_passes(cb, *plain)
        got = compare_passes(cb, *coded)
        assert len(expected) > 0
        pd.testing.assert_frame_equal(got, expected)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(two_passes())
def test_random_passes_give_the_same_table_held_as_categories(passes):
    # The object tables are the reference; the categorical copies (as read_pass_file
    # gives them) go through the engine's code-reading path.
    p1, p2 = passes

    def coded(p):
        return PassData(p.pass_no, p.text.astype("category"), p.state.astype("category"),
                        p.keyer, p.label)

    pd.testing.assert_frame_equal(compare_passes(CODEBOOK, coded(p1), coded(p2)),
                                  compare_passes(CODEBOOK, p1, p2))


@settings(max_examples=50, deadline=None)
@given(st.lists(st.from_regex(r"-?[0-9]{1,4}|[a-c]?[0-9]{0,2}", fullmatch=True), max_size=12))
def test_natural_order_of_participants_is_natural_key_order(ids):
    # natural_key (the documented order) is the reference for the quicker sort.
    from core.compare import _natural_sorted, natural_key

    assert _natural_sorted(ids) == sorted(ids, key=natural_key)
