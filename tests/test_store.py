"""The study store: API round trips, the journal's guards and hash chain, audit.

Checks read the SQLite file directly with the standard library's sqlite3 (the
reference reader of the file format) and recompute hashes with hashlib, rather
than asking the store about itself.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3

import pandas as pd
import pytest

from core.codebook import Code, Codebook, Variable
from core.errors import DecisionError, StoreError
from core.store import Study

CB = Codebook(
    (
        Variable("pid", "integer", is_id=True),
        Variable("age", "integer", min=18, max=99),
        Variable("q1", "integer", codes=(Code("1", "never"), Code("2", "often"))),
        Variable("note", "string"),
    )
)


@pytest.fixture
def study(tmp_path):
    s = Study.create(tmp_path / "study.sqlite", CB, "AB")
    yield s
    s.close()


def raw(study) -> sqlite3.Connection:
    return sqlite3.connect(study.path)


def sha256_row(row) -> str:
    # The documented canonical form: compact JSON of seq..prev_hash, UTF-8, SHA-256
    # (FIPS 180-4 via Python's hashlib), recomputed here independently of the store.
    text = json.dumps(list(row), ensure_ascii=False, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_pragmas_as_promised(study):
    con = raw(study)
    # SQLite documentation: journal_mode is persistent in the file once WAL is set.
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert con.execute("PRAGMA user_version").fetchone()[0] >= 1
    # synchronous and foreign_keys are per connection: ask the store's own.
    assert study._conn.execute("PRAGMA synchronous").fetchone()[0] == 2  # 2 = FULL
    assert study._conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1


def test_set_value_round_trip_and_journal(study):
    f = study.start_form(1, "AB")
    assert study.set_value(f, "pid", "0042", "keyed", "AB") is True
    assert study.set_value(f, "pid", "0042", "keyed", "AB") is False  # no-op, no journal row
    study.set_value(f, "age", "  ", "keyed", "AB")  # spaces only -> blank on paper
    study.set_value(f, "note", "whatever", "illegible", "AB")  # illegible stores ""
    rows = raw(study).execute(
        "SELECT variable, text, state FROM form_values WHERE form_id = ? ORDER BY variable", (f,)
    ).fetchall()
    assert rows == [("age", "", "blank"), ("note", "", "illegible"), ("pid", "0042", "keyed")]
    record = study.form(f)
    assert record.participant == "0042" and record.texts["pid"] == "0042"
    j = raw(study).execute(
        "SELECT action, variable, old_text, new_text, new_state, who FROM journal "
        "WHERE action = 'set_value' ORDER BY seq"
    ).fetchall()
    assert j == [
        ("set_value", "pid", None, "0042", "keyed", "AB"),
        ("set_value", "age", None, "", "blank", "AB"),
        ("set_value", "note", None, "", "illegible", "AB"),
    ]
    study.set_value(f, "pid", "42", "keyed", "CD")
    last = raw(study).execute(
        "SELECT old_text, new_text, who FROM journal ORDER BY seq DESC LIMIT 1"
    ).fetchone()
    assert last == ("0042", "42", "CD")


def test_hash_chain_recomputes_independently(study):
    f = study.start_form(1, "AB")
    study.set_value(f, "pid", "1", "keyed", "AB")
    study.set_value(f, "note", "café ☕", "keyed", "AB")
    rows = raw(study).execute("SELECT * FROM journal ORDER BY seq").fetchall()
    prev = "0" * 64
    for r in rows:
        assert r[12] == prev
        assert r[13] == sha256_row(r[:13])
        prev = r[13]
    assert study.journal_head() == prev
    assert study.audit().ok


def test_journal_refuses_update_and_delete(study):
    con = raw(study)
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        con.execute("UPDATE journal SET who = 'ZZ' WHERE seq = 1")
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        con.execute("DELETE FROM journal WHERE seq = 1")


def _three_values(study):
    f = study.start_form(1, "AB")
    for var, text in [("pid", "1"), ("age", "30"), ("q1", "2"), ("note", "x")]:
        study.set_value(f, var, text, "keyed", "AB")
    return f


def _tamper(study, *sql):
    con = raw(study)
    con.execute("DROP TRIGGER journal_no_update")
    con.execute("DROP TRIGGER journal_no_delete")
    for statement in sql:
        con.execute(statement)
    con.commit()
    con.close()


def test_audit_names_an_edited_row_after_triggers_dropped(study):
    _three_values(study)
    _tamper(study, "UPDATE journal SET new_text = '31' WHERE seq = 4")
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and result.first_bad_seq == 4
    assert "journal row 4" in result.message and "edited" in result.message


def test_audit_names_a_deleted_row(study):
    _three_values(study)
    _tamper(study, "DELETE FROM journal WHERE seq = 3")
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and result.first_bad_seq == 3
    assert "journal row 3 is missing" in result.message


def test_audit_names_reordered_rows(study):
    _three_values(study)
    # Swap rows 4 and 5 by renumbering them: each keeps its old hash.
    _tamper(
        study,
        "UPDATE journal SET seq = 1000 WHERE seq = 4",
        "UPDATE journal SET seq = 4 WHERE seq = 5",
        "UPDATE journal SET seq = 5 WHERE seq = 1000",
    )
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and result.first_bad_seq == 4


def test_audit_catches_deleted_tail_and_missing_triggers(study):
    _three_values(study)
    last = raw(study).execute("SELECT MAX(seq) FROM journal").fetchone()[0]
    _tamper(study, f"DELETE FROM journal WHERE seq = {last}")
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and result.first_bad_seq == last
    assert "last rows were deleted" in result.message


def test_audit_catches_value_changed_behind_journal(study):
    f = _three_values(study)
    con = raw(study)
    con.execute(f"UPDATE form_values SET text = '99' WHERE form_id = {f} AND variable = 'age'")
    con.commit()
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and 'field "age"' in result.message and '"99"' in result.message


@pytest.mark.parametrize(
    ("sql", "words"),
    [
        ("INSERT INTO form_values VALUES ({b}, 'note', 'sneaked in', 'keyed')", "never recorded it"),
        ("DELETE FROM form_values WHERE form_id = {b} AND variable = 'q1'", "is missing"),
        # A separator character inside a text must not shift the other fields.
        ("UPDATE form_values SET text = 'a' || char(31) || 'b' WHERE form_id = {a} AND variable = 'q1'",
         "changed outside keyproof"),
    ],
)  # fmt: skip
def test_audit_catches_values_added_deleted_or_split_behind_journal(study, sql, words):
    _three_values(study)
    a, b = study.import_pass(2, "CD", pd.DataFrame({"pid": ["5", "6"], "q1": ["1", "2"]}))
    assert study.audit().ok
    con = raw(study)
    con.execute(sql.format(a=a, b=b))
    con.commit()
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and words in result.message


def test_audit_fast_path_agrees_with_reading_every_cell(study, monkeypatch):
    import core.store as store

    # A study with every kind of value write: import (with an illegible cell),
    # keyed changes over it, and a variable later dropped from the codebook.
    extra = Codebook(CB.variables + (Variable("gone", "string"),))
    study.update_codebook(extra, "AB")
    texts = pd.DataFrame({"pid": ["1", "2"], "age": ["30", ""], "note": ["é", None], "gone": ["g", "h"]})
    states = pd.DataFrame({c: [None, None] for c in texts.columns})
    states.loc[0, "note"] = "illegible"
    a, _ = study.import_pass(1, "AB", texts, states)
    study.set_value(a, "age", "31", "keyed", "AB")
    study.update_codebook(CB, "AB", force=True)
    calls = []
    real = store._values_agree
    monkeypatch.setattr(store, "_values_agree", lambda *x: calls.append(real(*x)) or calls[-1])
    assert study.audit().ok and calls == [True]  # healthy: the per-form strings match
    con = raw(study)
    con.execute(f"UPDATE form_values SET text = '32' WHERE form_id = {a} AND variable = 'age'")
    con.commit()
    result = study.audit()
    assert calls[-1] is False and not result.ok and '"32"' in result.message


def test_audit_reports_dropped_triggers_alone(study):
    _three_values(study)
    _tamper(study)
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and "trigger" in result.message


def test_import_and_load_pass_match_pandas_pivot(study):
    texts = pd.DataFrame(
        {"pid": ["1", "2", "3"], "age": ["30", "", None], "q1": ["07", "2", "1"], "note": ["a", "b", ""]}
    )
    states = pd.DataFrame({c: [None] * 3 for c in texts.columns})
    states.loc[1, "note"] = "illegible"
    ids = study.import_pass(2, "CD", texts, states, source="p2.csv")
    loaded = study.load_pass(2)
    # Reference: the long table read with sqlite3 and pivoted by pandas.
    long = pd.read_sql("SELECT form_id, variable, text, state FROM form_values", raw(study))
    for col in ("text", "state"):
        wide = long.pivot(index="form_id", columns="variable", values=col)
        wide = wide.reindex(index=ids, columns=CB.names).astype(object)
        wide = wide.where(wide.notna(), None)
        got = getattr(loaded, col)
        assert got.index.tolist() == ids and got.columns.tolist() == CB.names
        assert got.to_numpy().tolist() == wide.to_numpy().tolist()
    assert loaded.text.loc[ids[1], "note"] == "" and loaded.state.loc[ids[1], "note"] == "illegible"
    assert loaded.text.loc[ids[2], "age"] is None  # not keyed, unlike blank ""
    assert loaded.state.loc[ids[1], "age"] == "blank"
    assert loaded.keyer.tolist() == ["CD"] * 3
    forms = study.forms(2)
    assert forms["participant"].tolist() == ["1", "2", "3"]
    assert forms["finished_at"].notna().all()  # an imported form arrives complete
    assert study.find_forms(2, " 2 ") == [ids[1]]
    assert study.audit().ok


def test_import_refuses_unknown_column_and_leaves_study_unchanged(study):
    before = raw(study).execute("SELECT COUNT(*) FROM journal").fetchone()[0]
    with pytest.raises(StoreError, match='column "agee" of p1.csv is not in the codebook'):
        study.import_pass(1, "AB", pd.DataFrame({"pid": ["1"], "agee": ["3"]}), source="p1.csv")
    assert raw(study).execute("SELECT COUNT(*) FROM journal").fetchone()[0] == before
    assert raw(study).execute("SELECT COUNT(*) FROM forms").fetchone()[0] == 0


def test_transaction_all_or_nothing_and_nested(study):
    f = study.start_form(1, "AB")
    with pytest.raises(RuntimeError):
        with study.transaction():
            study.set_value(f, "pid", "5", "keyed", "AB")
            study.add_decision("5", "age", "value", "30", "keyed", "paper", "LM", "30", "31", "mismatch")
            raise RuntimeError("stop")
    assert study.form(f).texts == {}
    assert study.decisions().empty
    with study.transaction():
        study.set_value(f, "pid", "5", "keyed", "AB")
        # Another connection cannot see the write before the outer block ends.
        assert raw(study).execute("SELECT COUNT(*) FROM form_values").fetchone()[0] == 0
        with pytest.raises(ValueError):
            with study.transaction():
                study.set_value(f, "age", "40", "keyed", "AB")
                raise ValueError
    assert study.form(f).texts == {"pid": "5"}
    assert study.audit().ok


def test_decisions_set_asides_and_drops_round_trip(study):
    ids = study.import_pass(1, "AB", pd.DataFrame({"pid": ["1", "1"], "age": ["30", "30"]}))
    d1 = study.add_decision("1", "age", "value", "31", "keyed", "paper says 31", "LM", "30", "31",
                            "mismatch", form1=ids[0], form2=None)  # fmt: skip
    d2 = study.add_decision("1", "", "drop", None, None, "keyed twice", "LM", None, None, "duplicate_id")
    dec = study.decisions()
    assert dec["decision_id"].tolist() == [d1, d2]
    assert dec.loc[0, ["participant", "variable", "value", "pass1", "pass2", "kind"]].tolist() == [
        "1", "age", "31", "30", "31", "mismatch"
    ]
    assert dec.loc[0, "form1"] == ids[0] and pd.isna(dec.loc[0, "form2"])
    study.drop_form(ids[1], "keyed twice", "LM")
    assert study.load_pass(1).text.index.tolist() == [ids[0]]
    assert study.load_pass(1, include_dropped=True).text.index.tolist() == ids
    with pytest.raises(StoreError, match="already dropped"):
        study.drop_form(ids[1], "again", "LM")
    study.restore_form(ids[1], "wrong one", "LM")
    assert not study.forms(1)["dropped"].any()
    study.set_aside("1", "consent withdrawn", "LM", rule="consent")
    assert study.set_asides()[["participant", "reason", "rule"]].values.tolist() == [
        ["1", "consent withdrawn", "consent"]
    ]
    study.restore_participant("1", "set aside by mistake", "LM")
    assert study.set_asides().empty
    with pytest.raises(DecisionError, match="not set aside"):
        study.restore_participant("1", "again", "LM")
    with pytest.raises(DecisionError, match="reason"):
        study.set_aside("1", "  ", "LM")
    actions = [r[0] for r in raw(study).execute("SELECT action FROM journal ORDER BY seq")]
    assert actions[-6:] == ["decision", "decision", "drop_form", "restore_form", "set_aside",
                            "restore_participant"]  # fmt: skip
    assert study.audit().ok


def test_settings_are_journaled(study):
    assert study.get_setting("reasons", ["x"]) == ["x"]
    study.set_setting("reasons", ["checked against paper"], "LM")
    assert study.get_setting("reasons") == ["checked against paper"]
    row = raw(study).execute(
        "SELECT action, new_text, who FROM journal ORDER BY seq DESC LIMIT 1"
    ).fetchone()
    assert row == ("setting", '["checked against paper"]', "LM")


def test_codebook_update_refuses_dropping_keyed_variable(study):
    f = study.start_form(1, "AB")
    study.set_value(f, "note", "hello", "keyed", "AB")
    renamed = Codebook(CB.variables[:3] + (Variable("comment", "string"),))
    with pytest.raises(StoreError, match='drops "note", which holds 1 keyed value'):
        study.update_codebook(renamed, "AB")
    assert study.codebook == CB
    study.update_codebook(renamed, "AB", force=True)
    assert study.codebook.names == ["pid", "age", "q1", "comment"]
    assert study.load_pass(1).text.columns.tolist() == ["pid", "age", "q1", "comment"]
    # The value stays stored, out of the codebook.
    assert raw(study).execute("SELECT text FROM form_values WHERE variable = 'note'").fetchone() == ("hello",)
    reopened = Study.open(study.path, readonly=True)
    assert reopened.codebook.names == ["pid", "age", "q1", "comment"]
    assert reopened.audit().ok


def test_codebook_update_accepts_new_variable_and_label(study):
    more = Codebook(
        (Variable("pid", "integer", is_id=True, label="Form number"),) + CB.variables[1:]
        + (Variable("extra", "integer"),)
    )  # fmt: skip
    f = study.start_form(1, "AB")
    study.set_value(f, "pid", "3", "keyed", "AB")
    study.update_codebook(more, "AB")
    study.set_value(f, "extra", "9", "keyed", "AB")
    assert study.load_pass(1).text.loc[f].tolist() == ["3", None, None, None, "9"]
    assert study.codebook_versions()["version"].tolist() == [1, 2]


def test_error_messages(tmp_path, study):
    with pytest.raises(StoreError, match="missing.sqlite does not exist"):
        Study.open(tmp_path / "missing.sqlite")
    with pytest.raises(StoreError, match="study.sqlite already exists"):
        Study.create(study.path, CB, "AB")
    other = tmp_path / "other.sqlite"
    sqlite3.connect(other).execute("CREATE TABLE t (x)").connection.commit()
    with pytest.raises(StoreError, match=r"other.sqlite is not a keyproof study \(no keyproof tables\)"):
        Study.open(other)
    junk = tmp_path / "junk.sqlite"
    junk.write_text("this is not a database, just text " * 100)
    with pytest.raises(StoreError, match="junk.sqlite is not a SQLite file"):
        Study.open(junk)
    ro = Study.open(study.path, readonly=True)
    with pytest.raises(StoreError, match="read-only"):
        ro.start_form(1, "AB")
    with pytest.raises(StoreError, match='"agee" is not in the codebook'):
        study.set_value(study.start_form(1, "AB"), "agee", "1", "keyed", "AB")
    with pytest.raises(StoreError, match="form 999 does not exist"):
        study.set_value(999, "age", "1", "keyed", "AB")
    with pytest.raises(StoreError, match="pass 3 does not exist"):
        study.start_form(3, "AB")


def test_audit_catches_a_forms_copy_changed_behind_journal(study):
    ids = study.import_pass(1, "AB", pd.DataFrame({"pid": ["1"], "age": ["30"], "note": ["x"]}))
    con = raw(study)
    # The copy holds the texts in codebook order (pid, age, q1, note) joined by U+001F.
    con.execute("UPDATE forms SET texts = ? WHERE form_id = ?", ("\x1f".join(["1", "31", "", "x"]), ids[0]))
    con.commit()
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and 'field "age"' in result.message and "copies" in result.message
    con.execute("UPDATE forms SET texts = 'garbage' WHERE form_id = ?", (ids[0],))
    con.commit()
    result = Study.open(study.path, readonly=True).audit()
    assert not result.ok and "does not fit the codebook" in result.message


def test_unit_separator_refused_in_keyed_text(study):
    f = study.start_form(1, "AB")
    with pytest.raises(StoreError, match="U\\+001F"):
        study.set_value(f, "note", "a\x1fb", "keyed", "AB")
    with pytest.raises(StoreError, match='row 2 column "note" contains the control character'):
        study.import_pass(1, "AB", pd.DataFrame({"pid": ["1", "2"], "note": ["ok", "a\x1fb"]}))


def test_forward_migration_and_newer_schema(study, monkeypatch):
    import core.store as store

    study.close()
    # A made-up next version that adds a column: opening the old file migrates it.
    nxt = store.SCHEMA_VERSION + 1
    monkeypatch.setitem(store.MIGRATIONS, nxt, ["ALTER TABLE forms ADD COLUMN page INTEGER"])
    monkeypatch.setattr(store, "SCHEMA_VERSION", nxt)
    with pytest.raises(StoreError, match="older schema"):
        Study.open(study.path, readonly=True)
    Study.open(study.path).close()
    con = raw(study)
    assert con.execute("PRAGMA user_version").fetchone()[0] == nxt
    assert "page" in [r[1] for r in con.execute("PRAGMA table_info(forms)")]
    con.execute("PRAGMA user_version = 9")
    con.close()
    with pytest.raises(StoreError, match=r"newer keyproof \(schema 9"):
        Study.open(study.path)


def test_version_1_file_is_migrated_with_its_values(tmp_path, monkeypatch):
    import core.store as store

    # Write a study as schema version 1 did (form_values with a rowid and an IN check).
    monkeypatch.setattr(store, "SCHEMA_VERSION", 1)
    with Study.create(tmp_path / "old.sqlite", CB, "AB") as old:
        old.import_pass(1, "AB", pd.DataFrame({"pid": ["1", "2"], "age": ["30", ""], "note": ["x", None]}))
        f = old.start_form(2, "CD")
        old.set_value(f, "q1", "2", "keyed", "CD")
    con = sqlite3.connect(tmp_path / "old.sqlite")
    before = con.execute("SELECT form_id, variable, text, state FROM form_values ORDER BY 1, 2").fetchall()
    con.close()
    monkeypatch.undo()
    with Study.open(tmp_path / "old.sqlite") as study:
        assert study.audit().ok
    con = sqlite3.connect(tmp_path / "old.sqlite")
    assert con.execute("PRAGMA user_version").fetchone()[0] == 2
    sql = con.execute("SELECT sql FROM sqlite_master WHERE name = 'form_values'").fetchone()[0]
    assert "WITHOUT ROWID" in sql and " IN (" not in sql
    after = con.execute("SELECT form_id, variable, text, state FROM form_values ORDER BY 1, 2").fetchall()
    assert after == before and len(after) == 6
    # sqlite3 is the reference reader of the file format: the rebuilt file is sound.
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert con.execute("PRAGMA foreign_key_check").fetchall() == []


def test_two_open_studies_keep_one_chain(study):
    other = Study.open(study.path)
    f = study.start_form(1, "AB")
    for i in range(5):
        (study if i % 2 else other).set_value(f, "age", str(20 + i), "keyed", "AB")
    # A codebook change made through one handle is seen by the other's next write.
    more = Codebook(CB.variables + (Variable("extra", "integer"),))
    other.update_codebook(more, "AB")
    study.set_value(f, "extra", "1", "keyed", "AB")
    assert other.load_pass(1).text.loc[f, "extra"] == "1"
    other.close()
    assert study.audit().ok


def test_sqlite_errors_inside_a_transaction_become_store_errors(study):
    f = study.start_form(1, "AB")
    # Breaking a table rule (CHECK on the state column) surfaces as one sentence.
    with pytest.raises(StoreError, match="study.sqlite: the change breaks a rule"):
        with study.transaction() as cur:
            cur.execute("INSERT INTO form_values (form_id, variable, text, state) VALUES (?, 'age', '', 'odd')", (f,))
    assert study.form(f).texts == {}
