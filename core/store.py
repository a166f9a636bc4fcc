"""The study file: one SQLite database holding a study's codebook, keyed
forms, decisions, set-asides and the hash-chained journal.

Every change is written together with its journal row in ONE transaction, so
the journal and the current state can never disagree after a crash. The
database runs in WAL mode with ``synchronous=FULL``: a confirmed field is on
disk when :meth:`Study.set_value` returns, at the price of one fsync per
field (``bench/store.py`` measures it against a bare SQLite commit).

The current values live in their own table, one row per field, and each form
also keeps a copy of its values in paper order (texts joined by U+001F, one
letter per state) written in the same transaction. The copy is what makes
:meth:`Study.load_pass` fast: a pass of 5,000 forms x 300 fields is 5,000
rows to read instead of 1.5 million, and is split with one ``str.split``.
``audit`` checks the table and the copies against the journal. The journal
is append-only twice over: triggers refuse UPDATE and DELETE, and each row
carries a SHA-256 over its own content plus the previous row's hash, so
:meth:`Study.audit` can name the first row edited, deleted or reordered even
when someone dropped the triggers first.

An imported pass is one transaction: one ``executemany`` per table with
tuples prepared from numpy arrays, and ONE journal row per form whose
``detail`` holds the form's texts (and its illegible fields) as canonical
JSON. The trade-off, decided on purpose: a journal row per field would make
the journal 300 times longer (and the import and the audit as much slower)
without recording anything more, since the form's row names every value
written, who wrote it and when, and is hashed into the chain like any other.
What it costs is granularity of the journal, not of the proof: ``audit``
replays the import rows and the later ``set_value`` rows into the grid of
values the study must hold and compares it with the values table and with
the forms' copies, so a single value changed, added or removed behind the
journal's back is named by form and field. The values table itself still
has one row per field; ``bench/store.py`` compares the import with a bare
``executemany`` of those rows.

The audit is linear in the journal and the values: the chain is one pass of
SHA-256 over rows read in one query, the import details are parsed in one
``json.loads``, and the stored values arrive as one string per form
(``group_concat`` in SQL), compared with the same string built from the
replay; only when a form differs are the cells read one by one to name it.

All SQL of keyproof lives in this module. It is kept portable (standard DDL,
no SQLite-only functions besides ``group_concat``) except for PRAGMAs, the
trigger bodies, ``WITHOUT ROWID`` and ``BEGIN IMMEDIATE``, so a server
database can be added later. The file is
longer than the usual ~600 lines for that reason: it is the one place that
speaks SQL, and splitting the class would spread the SQL out.
"""

from __future__ import annotations

import gc
import json
import os
import sqlite3
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from urllib.parse import quote

import numpy as np
import pandas as pd

from .codebook import Codebook
from .codebook_diff import CodebookDiff, diff_codebooks
from .errors import DecisionError, StoreError
from .journal import COLUMNS as _JOURNAL_COLUMNS
from .journal import GENESIS, AuditResult, check_chain, first_difference, replay_grid, row_hash
from .passdata import PassData
from .values import BLANK, ILLEGIBLE, KEYED, STATES

#: Written to the meta table: tells a keyproof study from any other SQLite file.
APP_ID = "keyproof study"

#: Schema version kept in ``PRAGMA user_version``; MIGRATIONS[n] goes from n-1 to n.
SCHEMA_VERSION = 2

TRIGGER_NAMES = ("journal_no_update", "journal_no_delete")

MIGRATIONS: dict[int, list[str]] = {
    1: [
        "CREATE TABLE meta (key VARCHAR(64) PRIMARY KEY, value TEXT NOT NULL)",
        "CREATE TABLE settings (key VARCHAR(128) PRIMARY KEY, value TEXT NOT NULL)",
        "CREATE TABLE codebooks (version INTEGER PRIMARY KEY, at VARCHAR(32) NOT NULL, "
        "who TEXT NOT NULL, hash CHAR(64) NOT NULL, body TEXT NOT NULL)",
        "CREATE TABLE forms (form_id INTEGER PRIMARY KEY, pass_no INTEGER NOT NULL "
        "CHECK (pass_no IN (1, 2)), serial INTEGER NOT NULL, keyer TEXT NOT NULL, "
        "created_at VARCHAR(32) NOT NULL, updated_at VARCHAR(32) NOT NULL, "
        "finished_at VARCHAR(32), dropped INTEGER NOT NULL DEFAULT 0, "
        "source TEXT NOT NULL DEFAULT '', participant TEXT, entered INTEGER NOT NULL DEFAULT 0, "
        # texts/states: the form's current values in codebook order (texts
        # joined by U+001F; one character per state), repeated from
        # form_values so a whole pass loads in one read.
        "texts TEXT NOT NULL, states TEXT NOT NULL, UNIQUE (pass_no, serial))",
        "CREATE TABLE form_values (form_id INTEGER NOT NULL REFERENCES forms (form_id), "
        "variable VARCHAR(64) NOT NULL, text TEXT NOT NULL, state VARCHAR(16) NOT NULL "
        "CHECK (state IN ('keyed', 'blank', 'illegible')), PRIMARY KEY (form_id, variable))",
        "CREATE TABLE journal (seq INTEGER PRIMARY KEY, at VARCHAR(32) NOT NULL, "
        "who TEXT NOT NULL, action VARCHAR(32) NOT NULL, form_id INTEGER, variable VARCHAR(64), "
        "old_text TEXT, old_state VARCHAR(16), new_text TEXT, new_state VARCHAR(16), "
        "reason TEXT NOT NULL DEFAULT '', detail TEXT NOT NULL DEFAULT '{}', "
        "prev_hash CHAR(64) NOT NULL, hash CHAR(64) NOT NULL)",
        "CREATE TABLE decisions (decision_id INTEGER PRIMARY KEY, at VARCHAR(32) NOT NULL, "
        "keyer TEXT NOT NULL, participant TEXT NOT NULL, variable VARCHAR(64) NOT NULL, "
        "kind VARCHAR(32) NOT NULL, action VARCHAR(32) NOT NULL, pass1 TEXT, pass2 TEXT, "
        "value TEXT, state VARCHAR(16), reason TEXT NOT NULL, form1 INTEGER, form2 INTEGER)",
        "CREATE INDEX decisions_cell ON decisions (participant, variable, kind)",
        "CREATE INDEX forms_participant ON forms (pass_no, participant)",
        "CREATE TABLE set_asides (participant VARCHAR(64) PRIMARY KEY, reason TEXT NOT NULL, "
        "rule TEXT NOT NULL DEFAULT '', keyer TEXT NOT NULL, at VARCHAR(32) NOT NULL)",
        # Trigger bodies are the one dialect-specific DDL: RAISE is SQLite's way to refuse.
        "CREATE TRIGGER journal_no_update BEFORE UPDATE ON journal "
        "BEGIN SELECT RAISE(ABORT, 'journal is append-only: UPDATE refused'); END",
        "CREATE TRIGGER journal_no_delete BEFORE DELETE ON journal "
        "BEGIN SELECT RAISE(ABORT, 'journal is append-only: DELETE refused'); END",
    ],
    # Version 2 rebuilds form_values for import speed, same columns and rows:
    # - the state rule as three comparisons: SQLite builds a temporary table
    #   for an IN list on every execution of the INSERT, which made the CHECK
    #   alone cost about twice the insert itself (bench/store.py);
    # - WITHOUT ROWID (SQLite's clustered table): one B-tree keyed by
    #   (form_id, variable) instead of a table plus a separate key index.
    2: [
        "CREATE TABLE form_values_v2 (form_id INTEGER NOT NULL REFERENCES forms (form_id), "
        "variable VARCHAR(64) NOT NULL, text TEXT NOT NULL, state VARCHAR(16) NOT NULL "
        "CHECK (state = 'keyed' OR state = 'blank' OR state = 'illegible'), "
        "PRIMARY KEY (form_id, variable)) WITHOUT ROWID",
        "INSERT INTO form_values_v2 (form_id, variable, text, state) "
        "SELECT form_id, variable, text, state FROM form_values",
        "DROP TABLE form_values",
        "ALTER TABLE form_values_v2 RENAME TO form_values",
    ],
}

#: Decision actions (DEVELOPERS.md "Store"); ``reopen`` undoes an earlier decision.
ACTIONS = ("value", "pair", "drop", "one_pass_only", "keep", "reopen")

_DECISION_COLUMNS = [
    "decision_id", "at", "keyer", "participant", "variable", "kind", "action",
    "pass1", "pass2", "value", "state", "reason", "form1", "form2",
]  # fmt: skip
_FORM_COLUMNS = [
    "form_id", "pass", "serial", "participant", "keyer", "created_at", "updated_at",
    "finished_at", "dropped", "entered", "source",
]  # fmt: skip


def utc_now() -> str:
    """The current UTC time as ISO 8601 with microseconds and a ``Z``.

    >>> utc_now().endswith("Z")
    True
    """
    return datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


@dataclass(frozen=True)
class FormRecord:
    """One form of one pass, with what has been keyed in it so far."""

    form_id: int
    pass_no: int
    serial: int
    """Number of the form within its pass, 1, 2, ... in the order keyed."""
    keyer: str
    created_at: str
    updated_at: str
    finished_at: str | None
    """UTC time the keyer finished the form; None while it is being keyed."""
    dropped: bool
    participant: str | None
    """Text of the ID variable; None while it is not keyed."""
    texts: dict[str, str] = field(default_factory=dict)
    """Variable -> exact keyed text (``""`` for blank or illegible); absent = not keyed."""
    states: dict[str, str] = field(default_factory=dict)
    """Variable -> ``keyed``, ``blank`` or ``illegible``; absent = not keyed."""


class Study:
    """A study: the one SQLite file. Use :meth:`create` or :meth:`open`.

    >>> from core.codebook import Codebook, Variable
    >>> import tempfile, os
    >>> cb = Codebook((Variable("pid", "integer", is_id=True), Variable("q1", "integer")))
    >>> path = os.path.join(tempfile.mkdtemp(), "s.sqlite")
    >>> with Study.create(path, cb, "AB") as study:
    ...     form = study.start_form(1, "AB")
    ...     study.set_value(form, "pid", "7", "keyed", "AB")
    ...     study.form(form).participant
    True
    '7'
    """

    def __init__(self, path: Path, conn: sqlite3.Connection, readonly: bool):
        self.path = Path(path)
        self.readonly = readonly
        self._conn = conn
        self._lock = threading.RLock()
        self._depth = 0
        self._codebook: Codebook | None = None
        self._codebook_version = 0
        self._positions: dict[str, int] = {}

    # -- opening ---------------------------------------------------------

    @property
    def name(self) -> str:
        """The study file's name, as messages quote it."""
        return self.path.name

    @classmethod
    def create(cls, path: str | os.PathLike, codebook: Codebook, who: str) -> Study:
        """Create a new study file with ``codebook``; refuses an existing file.

        >>> # Study.create("study.sqlite", load_codebook("codebook.csv"), "AB")
        """
        path = Path(path)
        if path.exists():
            raise StoreError(f"{path.name} already exists — choose a new file name, or open it.")
        if not path.parent.is_dir():
            raise StoreError(f"{path.parent} is not a folder — create it first.")
        try:
            conn = _connect(path, readonly=False)
        except sqlite3.Error as exc:
            raise StoreError(f"{path.name} could not be created ({exc}) — check the folder.") from exc
        study = cls(path, conn, readonly=False)
        with study._errors():
            with study.transaction() as cur:
                _migrate(cur, 0)
                at = utc_now()
                cur.execute("INSERT INTO meta (key, value) VALUES (?, ?)", ("app", APP_ID))
                cur.execute("INSERT INTO meta (key, value) VALUES (?, ?)", ("created_at", at))
                cur.execute("INSERT INTO meta (key, value) VALUES (?, ?)", ("journal_head", ""))
                cur.execute(
                    "INSERT INTO codebooks (version, at, who, hash, body) VALUES (1, ?, ?, ?, ?)",
                    (at, who, codebook.hash, codebook.to_json()),
                )
                study._journal(
                    cur, who, "create_study",
                    detail={"codebook": codebook.hash, "schema": SCHEMA_VERSION},
                )  # fmt: skip
        return study

    @classmethod
    def open(cls, path: str | os.PathLike, readonly: bool = False) -> Study:
        """Open an existing study; ``readonly=True`` opens it without write access.

        >>> # with Study.open("study.sqlite", readonly=True) as study: ...
        """
        path = Path(path)
        if not path.is_file():
            raise StoreError(
                f"{path.name} does not exist in {path.parent} — check the path, "
                "or create a study with keyproof init."
            )
        try:
            conn = _connect(path, readonly=readonly)
            version = conn.execute("PRAGMA user_version").fetchone()[0]
            tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        except sqlite3.DatabaseError as exc:
            raise StoreError(
                f"{path.name} is not a SQLite file ({exc}) — check the file name."
            ) from exc
        if not {"meta", "journal", "forms"} <= tables:
            conn.close()
            raise StoreError(f"{path.name} is not a keyproof study (no keyproof tables) — check the file name.")
        study = cls(path, conn, readonly=readonly)
        if version > SCHEMA_VERSION:
            conn.close()
            raise StoreError(
                f"{path.name} was written by a newer keyproof (schema {version}, this one "
                f"reads up to {SCHEMA_VERSION}) — upgrade keyproof."
            )
        if version < SCHEMA_VERSION:
            if readonly:
                conn.close()
                raise StoreError(
                    f"{path.name} uses an older schema ({version}) — open it once without "
                    "read-only so keyproof can upgrade it."
                )
            with study._errors(), study.transaction() as cur:
                _migrate(cur, version)
        return study

    def close(self) -> None:
        """Close the file (further calls fail)."""
        self._conn.close()

    def __enter__(self) -> Study:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Study({str(self.path)!r}{', readonly' if self.readonly else ''})"

    # -- transactions and errors ----------------------------------------

    @contextmanager
    def transaction(self) -> Iterator[sqlite3.Cursor]:
        """Group writes into one transaction: all of them are kept, or none.

        Writes called inside (``set_value``, ``add_decision``, ``drop_form``
        ...) join the outer transaction instead of committing; a nested
        ``transaction()`` is a savepoint, undone alone if it raises.

        >>> # with study.transaction():
        >>> #     study.set_value(f, "q1", "3", "keyed", "LM")
        >>> #     study.add_decision(...)
        """
        if self.readonly:
            raise StoreError(f"{self.name} is open read-only — open it for writing to change it.")
        with self._lock, self._errors():
            cur = self._conn.cursor()
            if self._depth == 0:
                # IMMEDIATE takes the write lock now, so a second process waits
                # here (busy_timeout) instead of failing halfway through.
                cur.execute("BEGIN IMMEDIATE")
                self._depth = 1
                try:
                    yield cur
                    self._depth = 0
                    cur.execute("COMMIT")
                except BaseException:
                    self._depth = 0
                    if self._conn.in_transaction:
                        self._conn.execute("ROLLBACK")
                    raise
            else:
                point = f"kp_{self._depth}"
                cur.execute(f"SAVEPOINT {point}")
                self._depth += 1
                try:
                    yield cur
                except BaseException:
                    cur.execute(f"ROLLBACK TO SAVEPOINT {point}")
                    cur.execute(f"RELEASE SAVEPOINT {point}")
                    raise
                finally:
                    self._depth -= 1
                cur.execute(f"RELEASE SAVEPOINT {point}")

    @contextmanager
    def _errors(self) -> Iterator[None]:
        """Translate sqlite3 errors into one-sentence StoreErrors naming the file."""
        try:
            yield
        except sqlite3.IntegrityError as exc:
            text = str(exc)
            if "append-only" in text:
                raise StoreError(
                    f"{self.name}: the journal is append-only ({text}) — record a new entry instead."
                ) from exc
            raise StoreError(f"{self.name}: the change breaks a rule of the study file ({text}) — nothing was written.") from exc
        except sqlite3.OperationalError as exc:
            text = str(exc)
            if "locked" in text or "busy" in text:
                raise StoreError(
                    f"{self.name} is busy: another keyproof is writing to it — try again in a moment."
                ) from exc
            if "readonly" in text or "read-only" in text:
                raise StoreError(f"{self.name} cannot be written ({text}) — check the file's permissions.") from exc
            if "no such table" in text or "no such column" in text:
                raise StoreError(f"{self.name} is not a keyproof study or is damaged ({text}) — check the file name.") from exc
            raise StoreError(f"{self.name} could not be read or written ({text}) — check the disk and the file.") from exc
        except sqlite3.DatabaseError as exc:
            raise StoreError(f"{self.name} is damaged or not a SQLite file ({exc}) — check the file name.") from exc

    def _query(self, sql: str, params: tuple | list = ()) -> list[tuple]:
        with self._lock, self._errors():
            return self._conn.execute(sql, params).fetchall()

    # -- the journal ---------------------------------------------------

    def _journal(
        self,
        cur: sqlite3.Cursor,
        who: str,
        action: str,
        form_id: int | None = None,
        variable: str | None = None,
        old: tuple[str | None, str | None] = (None, None),
        new: tuple[str | None, str | None] = (None, None),
        reason: str = "",
        detail: dict | None = None,
    ) -> int:
        """Append one journal row inside the current transaction; returns its seq."""
        return self._journal_many(
            cur, [(who, action, form_id, variable, *old, *new, reason, detail or {})]
        )[-1]

    def _journal_many(self, cur: sqlite3.Cursor, entries: list[tuple]) -> list[int]:
        """Append rows (who, action, form_id, variable, old_text, old_state,
        new_text, new_state, reason, detail) chained onto the journal's last row."""
        last = cur.execute("SELECT seq, hash FROM journal ORDER BY seq DESC LIMIT 1").fetchone()
        seq, prev = (last[0], last[1]) if last else (0, GENESIS)
        at = utc_now()
        rows = []
        for who, action, form_id, variable, ot, os_, nt, ns, reason, detail in entries:
            seq += 1
            detail_text = detail if isinstance(detail, str) else _dumps(detail)
            row = [seq, at, who, action, form_id, variable, ot, os_, nt, ns, reason, detail_text, prev]
            prev = row_hash(row)
            rows.append((*row, prev))
        cur.executemany(
            "INSERT INTO journal (seq, at, who, action, form_id, variable, old_text, old_state, "
            "new_text, new_state, reason, detail, prev_hash, hash) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            rows,
        )
        cur.execute("UPDATE meta SET value = ? WHERE key = 'journal_head'", (f"{seq}:{prev}",))
        return [r[0] for r in rows]

    def journal(self) -> pd.DataFrame:
        """Every journal row, oldest first (the table's columns, ``detail`` as JSON text).

        >>> # study.journal().tail(3)[["seq", "who", "action", "variable", "new_text"]]
        """
        rows = self._query(f"SELECT {', '.join(_JOURNAL_COLUMNS)} FROM journal ORDER BY seq")
        df = pd.DataFrame(rows, columns=_JOURNAL_COLUMNS, dtype=object)
        df["seq"] = df["seq"].astype("int64")
        df["form_id"] = df["form_id"].astype("Int64")
        return df

    def journal_head(self) -> str:
        """Hash of the newest journal row: names the exact state of the study.

        >>> # study.journal_head()[:12]
        """
        row = self._query("SELECT hash FROM journal ORDER BY seq DESC LIMIT 1")
        return row[0][0] if row else GENESIS

    def audit(self) -> AuditResult:
        """Recompute the hash chain and check the stored values against the journal.

        Names the first journal row that was edited, deleted or moved, also
        when the guard triggers were dropped beforehand, and reports missing
        guard triggers and values changed behind the journal's back.

        >>> # result = study.audit(); print(result.message)
        """
        rows = self._query(f"SELECT {', '.join(_JOURNAL_COLUMNS)} FROM journal ORDER BY seq")
        head = self._query("SELECT value FROM meta WHERE key = 'journal_head'")
        bad = check_chain(rows, head[0][0] if head else "")
        if bad is None:
            bad = self._check_values(rows)
        if bad is not None:
            return AuditResult(False, len(rows), bad[0], f"{self.name}: {bad[1]}")
        triggers = {r[0] for r in self._query("SELECT name FROM sqlite_master WHERE type = 'trigger'")}
        gone = [t for t in TRIGGER_NAMES if t not in triggers]
        if gone:
            return AuditResult(
                False, len(rows), None,
                f"{self.name}: the journal's guard trigger {gone[0]} was removed — the file was "
                "changed outside keyproof; compare it with a backup.",
            )  # fmt: skip
        top = rows[-1][13][:12] if rows else GENESIS[:12]
        return AuditResult(True, len(rows), None, f"{self.name}: journal intact — {len(rows)} rows, head {top}.")

    def _check_values(self, rows: list[tuple]) -> tuple[int | None, str] | None:
        """Replay the journal's value changes; compare with form_values and with
        the forms' copies (codebook variables only)."""
        index = pd.Index([r[0] for r in self._query("SELECT form_id FROM forms ORDER BY form_id")],
                         dtype="int64")  # fmt: skip
        names = self.codebook.names
        imports = [r for r in rows if r[3] == "import_form"]
        # One parse for all import rows: their detail is JSON the chain check
        # has just vouched for, and one call saves a call's overhead per form.
        parsed = json.loads("[" + ",".join(r[11] for r in imports) + "]")
        details = {r[0]: d for r, d in zip(imports, parsed, strict=True)}
        seen = {r[5] for r in rows if r[3] == "set_value"}
        for keys in {tuple(d["text"]) for d in parsed}:
            seen.update(keys)
        universe = names + sorted(seen - set(names))
        expected = replay_grid(rows, index, universe, details)
        with self._lock, self._errors():
            same = _values_agree(self._conn.cursor(), expected, index, universe)
        if not same:
            # Something differs: read every cell to name the first one that does.
            try:
                with self._lock, self._errors():
                    cells = _read_values(self._conn.cursor(), self.name)
            except StoreError:
                return None, ("the values table holds a value that is not text, or text with the "
                              "control character U+001F — the file was changed outside keyproof; "
                              "compare it with a backup.")  # fmt: skip
            extra = sorted(set(pd.unique(cells[1])) - set(universe))
            if extra:  # variables the journal never wrote
                universe = universe + extra
                expected = replay_grid(rows, index, universe, details)
            bad = first_difference(expected, _grid(index, universe, cells), index, universe,
                                   "the values table")  # fmt: skip
            if bad is not None:
                return bad
        try:
            copies = [self.load_pass(n, include_dropped=True) for n in (1, 2)]
        except StoreError:
            return None, ("a form's copy of its values does not fit the codebook — the file was "
                          "changed outside keyproof; compare it with a backup.")  # fmt: skip
        text = pd.concat([c.text for c in copies]).reindex(index)
        state = pd.concat([c.state for c in copies]).reindex(index)
        width = len(names)
        return first_difference(
            tuple(g[:, :width] for g in expected),
            (text.to_numpy(dtype=object), state.to_numpy(dtype=object)),
            index, names, "the forms' copies",
        )  # fmt: skip

    # -- settings and codebook -----------------------------------------

    @property
    def codebook(self) -> Codebook:
        """The study's current codebook."""
        if self._codebook is None:
            self._load_codebook(self._conn.cursor())
        return self._codebook

    def _load_codebook(self, cur: sqlite3.Cursor) -> None:
        with self._lock, self._errors():
            row = cur.execute(
                "SELECT version, body FROM codebooks ORDER BY version DESC LIMIT 1"
            ).fetchone()
        if not row:
            raise StoreError(f"{self.name} has no codebook — the file is damaged; restore a backup.")
        self._codebook_version = row[0]
        self._codebook = Codebook.from_dict(json.loads(row[1]), source=self.name)
        self._positions = {n: i for i, n in enumerate(self._codebook.names)}

    def _fresh_codebook(self, cur: sqlite3.Cursor) -> Codebook:
        """The codebook as of now inside a transaction: another process may have
        updated it, and the forms' value copies follow its order."""
        version = cur.execute("SELECT MAX(version) FROM codebooks").fetchone()[0]
        if self._codebook is None or version != self._codebook_version:
            self._load_codebook(cur)
        return self._codebook

    def codebook_versions(self) -> pd.DataFrame:
        """Every codebook the study has had: version, at, who, hash (oldest first)."""
        rows = self._query("SELECT version, at, who, hash FROM codebooks ORDER BY version")
        return pd.DataFrame(rows, columns=["version", "at", "who", "hash"])

    def get_setting(self, key: str, default=None):
        """A study setting (any JSON value), or ``default`` when unset.

        >>> # study.get_setting("reasons", ["checked against paper"])
        """
        row = self._query("SELECT value FROM settings WHERE key = ?", (key,))
        return json.loads(row[0][0]) if row else default

    def set_setting(self, key: str, value, who: str) -> None:
        """Set a study setting (JSON-serialisable), journaled with its old value.

        >>> # study.set_setting("reasons", ["checked against paper: pass 1 right"], "LM")
        """
        text = _dumps(value)
        with self.transaction() as cur:
            old = cur.execute("SELECT value FROM settings WHERE key = ?", (key,)).fetchone()
            if old and old[0] == text:
                return
            if old:
                cur.execute("UPDATE settings SET value = ? WHERE key = ?", (text, key))
            else:
                cur.execute("INSERT INTO settings (key, value) VALUES (?, ?)", (key, text))
            self._journal(cur, who, "setting", old=(old[0] if old else None, None),
                          new=(text, None), detail={"key": key})  # fmt: skip

    def update_codebook(self, new: Codebook, who: str, force: bool = False) -> CodebookDiff:
        """Replace the codebook, refusing to drop (or rename) a variable holding
        keyed data unless ``force``; journaled. Values of a dropped variable
        stay stored, outside the codebook.

        >>> # change = study.update_codebook(load_codebook("codebook-v2.csv"), "AB")
        >>> # print("\\n".join(change.lines()))
        """
        with self.transaction() as cur:
            old = self._fresh_codebook(cur)
            change = diff_codebooks(old, new)
            if new.hash == old.hash:
                return change
            held = []
            # A rename is a drop as far as keyed data goes: its values would lose their column.
            for name in [n for n in old.names if n not in new]:
                n = cur.execute(
                    "SELECT COUNT(*) FROM form_values WHERE variable = ?", (name,)
                ).fetchone()[0]
                if n:
                    held.append((name, n))
            if held and not force:
                name, n = held[0]
                raise StoreError(
                    f"{self.name}: the new codebook{_source(new)} drops \"{name}\", which holds "
                    f"{n} keyed value{'s' if n != 1 else ''} — keep the variable (a rename counts "
                    "as a drop), or use --force to keep its values stored but out of the codebook."
                )
            version = cur.execute("SELECT MAX(version) FROM codebooks").fetchone()[0] + 1
            cur.execute(
                "INSERT INTO codebooks (version, at, who, hash, body) VALUES (?, ?, ?, ?, ?)",
                (version, utc_now(), who, new.hash, new.to_json()),
            )
            self._journal(cur, who, "codebook_update", old=(old.hash, None), new=(new.hash, None),
                          reason="forced" if held else "",
                          detail={"version": version, "added": list(change.added),
                                  "removed": list(change.removed),
                                  "renamed": [list(r) for r in change.renamed],
                                  "changed": [c.name for c in change.changed],
                                  "forced": [h[0] for h in held]})  # fmt: skip
            self._load_codebook(cur)
            self._rebuild_copies(cur)
        return change

    def _rebuild_copies(self, cur: sqlite3.Cursor) -> None:
        """Rewrite every form's value copies (and participant) from form_values in
        the current codebook's order; a rare, whole-study step."""
        names = self.codebook.names
        ids = [r[0] for r in cur.execute("SELECT form_id FROM forms ORDER BY form_id")]
        index = pd.Index(ids, dtype="int64")
        text, state = _grid(index, names, _read_values(cur, self.name))
        id_name = self._id_name()
        participant = text[:, names.index(id_name)] if id_name in names else [None] * len(ids)
        entered = (state != None).sum(axis=1)  # noqa: E711 - elementwise on an object array
        cur.executemany(
            "UPDATE forms SET texts = ?, states = ?, participant = ?, entered = ? WHERE form_id = ?",
            zip(_join_rows(text), _state_codes(state), list(participant),
                entered.tolist(), ids, strict=True),
        )  # fmt: skip

    # -- forms and values ------------------------------------------------

    def start_form(self, pass_no: int, keyer: str) -> int:
        """Open a new form in pass ``pass_no``; returns its form id.

        >>> # form_id = study.start_form(1, "AB")
        """
        _check_pass(pass_no)
        with self.transaction() as cur:
            form_id = self._new_forms(cur, pass_no, keyer, 1, "", finished=False)[0]
            self._journal(cur, keyer, "start_form", form_id=form_id, detail={"pass": pass_no})
        return form_id

    def _new_forms(
        self, cur, pass_no: int, keyer: str, n: int, source: str, finished: bool
    ) -> list[int]:
        top = cur.execute("SELECT MAX(serial) FROM forms WHERE pass_no = ?", (pass_no,)).fetchone()[0]
        first_id = (cur.execute("SELECT MAX(form_id) FROM forms").fetchone()[0] or 0) + 1
        top = top or 0
        at = utc_now()
        done = at if finished else None  # an imported form arrives complete
        width = len(self._fresh_codebook(cur))
        texts, states = _SEP.join([""] * width), _NOT_KEYED * width
        rows = [
            (first_id + i, pass_no, top + 1 + i, keyer, at, at, done, source, texts, states)
            for i in range(n)
        ]
        cur.executemany(
            "INSERT INTO forms (form_id, pass_no, serial, keyer, created_at, updated_at, "
            "finished_at, dropped, source, entered, texts, states) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, 0, ?, 0, ?, ?)",
            rows,
        )
        return [r[0] for r in rows]

    def set_value(self, form_id: int, variable: str, text: str, state: str, keyer: str) -> bool:
        """Commit one field and its journal row at once; returns False when
        nothing changed (no journal row then).

        A blank or illegible field stores ``""``; keyed text that is empty or
        only spaces is stored as blank.

        >>> # study.set_value(form_id, "age", "34", "keyed", "AB")
        """
        text, state = _normalise(text, state, variable, self.name)
        with self.transaction() as cur:
            codebook = self._fresh_codebook(cur)
            if variable not in codebook:
                raise StoreError(f"{self.name}: \"{variable}\" is not in the codebook — check the variable name.")
            form = cur.execute(
                "SELECT dropped, texts, states FROM forms WHERE form_id = ?", (form_id,)
            ).fetchone()
            if form is None:
                raise StoreError(f"{self.name}: form {form_id} does not exist — start the form first.")
            if form[0]:
                raise StoreError(f"{self.name}: form {form_id} is dropped — restore it before changing it.")
            old = cur.execute(
                "SELECT text, state FROM form_values WHERE form_id = ? AND variable = ?",
                (form_id, variable),
            ).fetchone()
            if old is not None and tuple(old) == (text, state):
                return False
            if old is None:
                cur.execute(
                    "INSERT INTO form_values (form_id, variable, text, state) VALUES (?, ?, ?, ?)",
                    (form_id, variable, text, state),
                )
            else:
                cur.execute(
                    "UPDATE form_values SET text = ?, state = ? WHERE form_id = ? AND variable = ?",
                    (text, state, form_id, variable),
                )
            at = self._positions[variable]
            texts = form[1].split(_SEP)
            texts[at] = text
            states = form[2][:at] + _STATE_CODE[state] + form[2][at + 1 :]
            is_id = codebook[variable].is_id
            cur.execute(
                "UPDATE forms SET updated_at = ?, texts = ?, states = ?, entered = ?"
                + (", participant = ?" if is_id else "") + " WHERE form_id = ?",
                (utc_now(), _SEP.join(texts), states, len(states) - states.count(_NOT_KEYED),
                 *((text,) if is_id else ()), form_id),
            )  # fmt: skip
            self._journal(cur, keyer, "set_value", form_id=form_id, variable=variable,
                          old=tuple(old) if old else (None, None), new=(text, state))  # fmt: skip
        return True

    def finish_form(self, form_id: int, keyer: str) -> None:
        """Mark a form finished by its keyer (journaled); a later correction keeps it finished.

        >>> # study.finish_form(form_id, "AB")
        """
        with self.transaction() as cur:
            self._form_row(cur, form_id)
            at = utc_now()
            cur.execute("UPDATE forms SET finished_at = ?, updated_at = ? WHERE form_id = ?", (at, at, form_id))
            self._journal(cur, keyer, "finish_form", form_id=form_id)

    def drop_form(self, form_id: int, reason: str, keyer: str) -> None:
        """Mark a form as keyed twice and leave it out (journaled; never deleted).

        >>> # study.drop_form(17, "same form keyed twice in pass 2", "LM")
        """
        self._set_dropped(form_id, True, reason, keyer)

    def restore_form(self, form_id: int, reason: str, keyer: str) -> None:
        """Take a dropped form back in (journaled).

        >>> # study.restore_form(17, "dropped the wrong copy", "LM")
        """
        self._set_dropped(form_id, False, reason, keyer)

    def _set_dropped(self, form_id: int, dropped: bool, reason: str, keyer: str) -> None:
        _need_reason(reason, "drop" if dropped else "restore", f"form {form_id}")
        with self.transaction() as cur:
            row = self._form_row(cur, form_id)
            if bool(row[0]) == dropped:
                raise StoreError(
                    f"{self.name}: form {form_id} is {'already' if dropped else 'not'} dropped — nothing to do."
                )
            cur.execute("UPDATE forms SET dropped = ?, updated_at = ? WHERE form_id = ?",
                        (1 if dropped else 0, utc_now(), form_id))  # fmt: skip
            self._journal(cur, keyer, "drop_form" if dropped else "restore_form",
                          form_id=form_id, reason=reason)  # fmt: skip

    def _form_row(self, cur, form_id: int) -> tuple:
        row = cur.execute("SELECT dropped FROM forms WHERE form_id = ?", (form_id,)).fetchone()
        if row is None:
            raise StoreError(f"{self.name}: form {form_id} does not exist — check the form number.")
        return row

    def form(self, form_id: int) -> FormRecord:
        """One form with its keyed texts and states.

        >>> # study.form(3).texts["age"]
        """
        row = self._query(
            "SELECT form_id, pass_no, serial, keyer, created_at, updated_at, finished_at, dropped "
            "FROM forms WHERE form_id = ?",
            (form_id,),
        )
        if not row:
            raise StoreError(f"{self.name}: form {form_id} does not exist — check the form number.")
        values = self._query(
            "SELECT variable, text, state FROM form_values WHERE form_id = ?", (form_id,)
        )
        texts = {v: t for v, t, _ in values}
        states = {v: s for v, _, s in values}
        f = row[0]
        return FormRecord(
            form_id=f[0], pass_no=f[1], serial=f[2], keyer=f[3], created_at=f[4], updated_at=f[5],
            finished_at=f[6], dropped=bool(f[7]), participant=texts.get(self._id_name()),
            texts=texts, states=states,
        )  # fmt: skip

    def _id_name(self) -> str:
        try:
            return self.codebook.id_variable.name
        except KeyError:
            return ""

    def forms(self, pass_no: int | None = None) -> pd.DataFrame:
        """The forms of one pass (or both), oldest first: form_id, pass, serial,
        participant (ID text, None if not keyed), keyer, created_at, updated_at,
        finished_at (None while open), dropped (bool), entered (fields keyed),
        source (the file a form was imported from; ``""`` when keyed on screen).

        >>> # study.forms(1).query("finished_at.isna()")
        """
        where, params = ("WHERE f.pass_no = ?", [pass_no]) if pass_no is not None else ("", [])
        rows = self._query(
            "SELECT f.form_id, f.pass_no, f.serial, f.participant, f.keyer, f.created_at, "
            f"f.updated_at, f.finished_at, f.dropped, f.entered, f.source FROM forms f {where} "
            "ORDER BY f.form_id",
            params,
        )
        df = pd.DataFrame(rows, columns=_FORM_COLUMNS, dtype=object)
        for col in ("form_id", "pass", "serial", "entered"):
            df[col] = df[col].astype("int64")
        df["dropped"] = df["dropped"].astype(bool)
        return df

    def find_forms(self, pass_no: int, participant: str, include_dropped: bool = False) -> list[int]:
        """Form ids of pass ``pass_no`` whose ID field reads ``participant`` (trimmed).

        >>> # study.find_forms(1, "1042")
        """
        rows = self._query(
            "SELECT form_id FROM forms WHERE pass_no = ? AND TRIM(participant) = ? "
            + ("" if include_dropped else "AND dropped = 0 ")
            + "ORDER BY form_id",
            (pass_no, str(participant).strip()),
        )
        return [r[0] for r in rows]

    def import_pass(
        self,
        pass_no: int,
        keyer: str,
        texts: pd.DataFrame,
        states: pd.DataFrame | None = None,
        source: str = "",
    ) -> list[int]:
        """Store a whole keyed pass (one form per row) in one transaction.

        ``texts`` has codebook variables as columns (a subset is fine), one
        str per cell: ``""`` (or only spaces) is blank on paper, None/NA is
        not keyed. ``states`` optionally gives each cell's state (e.g.
        ``illegible``). Each form gets one journal row holding its texts.
        Returns the new form ids in row order.

        >>> # ids = study.import_pass(1, "AB", pd.DataFrame({"pid": ["1"], "q1": ["3"]}))
        """
        _check_pass(pass_no)
        what = source or "the imported table"
        unknown = [c for c in texts.columns if c not in self.codebook]
        if unknown:
            raise StoreError(
                f"{self.name}: column \"{unknown[0]}\" of {what} is not in the codebook — "
                "rename or remove the column."
            )
        if states is not None and (
            list(states.columns) != list(texts.columns) or len(states) != len(texts)
        ):
            raise StoreError(
                f"{self.name}: the states of {what} do not have the same rows and columns as "
                "its texts — pass both tables with the same shape."
            )
        names = list(texts.columns)
        raw = texts.to_numpy(dtype=object)
        present = ~pd.isna(raw)
        text_arr = np.empty(raw.shape, dtype=object)
        empty = np.zeros(raw.shape, dtype=bool)
        # Column by column with numpy's string functions (C loops): pandas' own
        # string methods call Python once per cell.
        for j, c in enumerate(names):
            col = np.where(present[:, j], raw[:, j], "").astype(str)
            hit = np.strings.find(col, _SEP) >= 0
            if hit.any():
                raise StoreError(
                    f"{self.name}: {what} row {int(np.argmax(hit)) + 1} column \"{c}\" contains "
                    "the control character U+001F — remove it from the file and import again."
                )
            empty[:, j] = np.strings.strip(col) == ""
            text_arr[:, j] = col.astype(object)
        if states is None:
            state_arr = np.full(text_arr.shape, KEYED, dtype=object)
        else:
            state_arr = states.astype(object).where(states.notna(), KEYED).to_numpy(dtype=object)
            bad = ~np.isin(state_arr, STATES) & present
            if bad.any():
                r, c = (int(x[0]) for x in np.nonzero(bad))
                raise StoreError(
                    f"{self.name}: {what} row {r + 1} column \"{names[c]}\" has state "
                    f"\"{state_arr[r, c]}\" — use keyed, blank or illegible."
                )
        # The rule of set_value: blank and illegible store "", empty keyed text is blank.
        state_arr = np.where(empty & (state_arr == KEYED), BLANK, state_arr)
        text_arr = np.where(state_arr == KEYED, text_arr, "")
        text_arr = np.where(present, text_arr, None)
        state_arr = np.where(present, state_arr, None)
        # One journal row per form holding all its texts: a row per cell would make
        # the journal 300 times longer for no extra safety.
        lines = pd.DataFrame(text_arr, columns=names, dtype=object).to_json(
            orient="records", lines=True, force_ascii=False
        ).splitlines()
        illegible: dict[int, list[str]] = {}
        for r, c in zip(*np.nonzero(state_arr == ILLEGIBLE), strict=True):
            illegible.setdefault(int(r), []).append(names[c])
        with self.transaction() as cur:
            codebook = self._fresh_codebook(cur)
            ids = self._new_forms(cur, pass_no, keyer, len(texts), source, finished=True)
            rr, cc = np.nonzero(present)
            cur.executemany(
                "INSERT INTO form_values (form_id, variable, text, state) VALUES (?, ?, ?, ?)",
                zip(
                    np.asarray(ids, dtype=np.int64)[rr].tolist(),
                    np.asarray(names, dtype=object)[cc].tolist(),
                    text_arr[rr, cc].tolist(),
                    state_arr[rr, cc].tolist(),
                    strict=True,
                ),
            )
            full_text = np.full((len(ids), len(codebook)), None, dtype=object)
            full_state = full_text.copy()
            where = [self._positions[n] for n in names]
            full_text[:, where], full_state[:, where] = text_arr, state_arr
            id_name = self._id_name()
            participant = (
                full_text[:, self._positions[id_name]] if id_name in self._positions
                else np.full(len(ids), None, dtype=object)
            )  # fmt: skip
            cur.executemany(
                "UPDATE forms SET texts = ?, states = ?, participant = ?, entered = ? "
                "WHERE form_id = ?",
                zip(_join_rows(full_text), _state_codes(full_state), participant.tolist(),
                    present.sum(axis=1).tolist(), ids, strict=True),
            )  # fmt: skip
            src = _dumps(source)
            entries = [
                (keyer, "import_form", fid, None, None, None, None, None, "",
                 f'{{"illegible":{_dumps(illegible.get(i, []))},"pass":{pass_no},'
                 f'"row":{i + 1},"source":{src},"text":{lines[i]}}}')
                for i, fid in enumerate(ids)
            ]  # fmt: skip
            self._journal_many(cur, entries)
        return ids

    def load_pass(self, pass_no: int, include_dropped: bool = False) -> PassData:
        """One pass as text and state tables, indexed by form id (oldest first),
        with the codebook's columns in paper order. Dropped forms are left out
        unless ``include_dropped``. Reads each form's value copies (two JSON
        arrays) in one query: no Python work per cell.

        >>> # p = study.load_pass(1); p.text.loc[form_id, "age"]
        """
        _check_pass(pass_no)
        drop = "" if include_dropped else " AND dropped = 0"
        with self._lock, self._errors():
            cur = self._conn.cursor()
            # Read the codebook and the copies in one snapshot so their orders match.
            own = not self._conn.in_transaction
            if own:
                cur.execute("BEGIN")
            try:
                names = self._fresh_codebook(cur).names
                forms = cur.execute(
                    f"SELECT form_id, serial, keyer, texts, states FROM forms WHERE pass_no = ?{drop} "
                    "ORDER BY form_id",
                    (pass_no,),
                ).fetchall()
            finally:
                if own:
                    cur.execute("COMMIT")
        index = pd.Index([f[0] for f in forms], name="form_id", dtype="int64")
        columns = pd.Index(names)
        state, unkeyed = _decode_states([f[4] for f in forms], len(names), self.name)
        text = _split_rows([f[3] for f in forms], len(names), self.name)
        text[unkeyed] = None  # not keyed yet, as opposed to "" (blank)
        serial = pd.Series([f[1] for f in forms], index=index, dtype="int64")
        return PassData(
            pass_no=pass_no,
            # dtype=object keeps None (not keyed yet) apart from "" (blank).
            text=pd.DataFrame(text, index=index, columns=columns, dtype=object, copy=False),
            state=pd.DataFrame(state, index=index, columns=columns, dtype=object, copy=False),
            keyer=pd.Series([f[2] for f in forms], index=index, dtype="string"),
            label=("pass " + str(pass_no) + " form " + serial.astype(str)).astype("string"),
        )

    # -- decisions and set-asides -----------------------------------------

    def add_decision(
        self,
        participant: str,
        variable: str,
        action: str,
        value: str | None,
        state: str | None,
        reason: str,
        keyer: str,
        pass1: str | None,
        pass2: str | None,
        kind: str,
        form1: int | None = None,
        form2: int | None = None,
    ) -> int:
        """Record one decision (journaled) and return its id. ``variable`` is
        ``""`` for form-level decisions; the newest decision per (participant,
        variable, kind) is the one that counts.

        >>> # study.add_decision("1042", "q7", "value", "4", "keyed",
        >>> #     "checked against paper: pass 1 right", "LM", "4", "5", "mismatch")
        """
        if action not in ACTIONS:
            raise DecisionError(
                f"{self.name}: decision action \"{action}\" for participant {participant} is "
                f"unknown — use one of {', '.join(ACTIONS)}."
            )
        _need_reason(reason, "decision on", f"participant {participant} {variable}".strip())
        if state is not None and state not in STATES:
            raise DecisionError(f"{self.name}: state \"{state}\" is unknown — use keyed, blank or illegible.")
        at = utc_now()
        with self.transaction() as cur:
            values = (at, keyer, str(participant), variable or "", kind, action, pass1, pass2,
                      value, state, reason, _opt_int(form1), _opt_int(form2))  # fmt: skip
            cur.execute(
                "INSERT INTO decisions (at, keyer, participant, variable, kind, action, pass1, "
                "pass2, value, state, reason, form1, form2) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                values,
            )
            decision_id = cur.lastrowid
            self._journal(cur, keyer, "decision", form_id=_opt_int(form1 if form1 is not None else form2),
                          variable=variable or None, old=(pass1, None), new=(value, state), reason=reason,
                          detail={"decision": decision_id, "participant": str(participant), "kind": kind,
                                  "action": action, "pass1": pass1, "pass2": pass2,
                                  "form1": _opt_int(form1), "form2": _opt_int(form2)})  # fmt: skip
        return int(decision_id)

    def decisions(self) -> pd.DataFrame:
        """Every decision ever made, oldest first (columns as in DEVELOPERS.md).

        >>> # study.decisions().groupby(["participant", "variable", "kind"]).tail(1)
        """
        rows = self._query(f"SELECT {', '.join(_DECISION_COLUMNS)} FROM decisions ORDER BY decision_id")
        df = pd.DataFrame(rows, columns=_DECISION_COLUMNS)
        for col in ("form1", "form2"):
            df[col] = df[col].astype("Int64")
        return df

    def set_aside(self, participant: str, reason: str, keyer: str, rule: str = "") -> None:
        """Keep a participant out of the analysis file, with the reason (journaled).
        Setting aside again replaces the reason.

        >>> # study.set_aside("1042", "consent withdrawn", "LM", rule="consent")
        """
        participant = str(participant).strip()
        _need_reason(reason, "set aside", f"participant {participant}")
        with self.transaction() as cur:
            old = cur.execute("SELECT reason FROM set_asides WHERE participant = ?", (participant,)).fetchone()
            if old:
                cur.execute("UPDATE set_asides SET reason = ?, rule = ?, keyer = ?, at = ? WHERE participant = ?",
                            (reason, rule, keyer, utc_now(), participant))  # fmt: skip
            else:
                cur.execute("INSERT INTO set_asides (participant, reason, rule, keyer, at) VALUES (?, ?, ?, ?, ?)",
                            (participant, reason, rule, keyer, utc_now()))  # fmt: skip
            self._journal(cur, keyer, "set_aside", old=(old[0] if old else None, None), reason=reason,
                          detail={"participant": participant, "rule": rule})  # fmt: skip

    def restore_participant(self, participant: str, reason: str, keyer: str) -> None:
        """Take a set-aside participant back into the analysis (journaled).

        >>> # study.restore_participant("1042", "set aside by mistake", "LM")
        """
        participant = str(participant).strip()
        _need_reason(reason, "restore", f"participant {participant}")
        with self.transaction() as cur:
            old = cur.execute("SELECT reason FROM set_asides WHERE participant = ?", (participant,)).fetchone()
            if not old:
                raise DecisionError(f"{self.name}: participant {participant} is not set aside — nothing to restore.")
            cur.execute("DELETE FROM set_asides WHERE participant = ?", (participant,))
            self._journal(cur, keyer, "restore_participant", old=(old[0], None), reason=reason,
                          detail={"participant": participant})  # fmt: skip

    def set_asides(self) -> pd.DataFrame:
        """Participants set aside now: participant, reason, rule, keyer, at (oldest first).

        >>> # study.set_asides()["participant"].tolist()
        """
        rows = self._query("SELECT participant, reason, rule, keyer, at FROM set_asides ORDER BY at, participant")
        return pd.DataFrame(rows, columns=["participant", "reason", "rule", "keyer", "at"])


# -- helpers -------------------------------------------------------------


#: Separates the texts in a form's copy; refused inside keyed text (U+001F, "unit separator").
_SEP = "\x1f"

#: Field states in a form's copy: one ASCII character each, "." = not keyed yet.
_STATE_CODE = {KEYED: "k", BLANK: "b", ILLEGIBLE: "i"}
_NOT_KEYED = "."
_STATE_LOOKUP = np.full(256, None, dtype=object)
for _state, _code in _STATE_CODE.items():
    _STATE_LOOKUP[ord(_code)] = _state


def _join_rows(grid: np.ndarray) -> list[str]:
    """One string per row of a text grid: the texts joined by _SEP, None as ""."""
    filled = np.where(pd.isna(grid), "", grid)
    return [_SEP.join(row) for row in filled.tolist()]


def _split_rows(blobs: list[str], width: int, name: str) -> np.ndarray:
    """The inverse of :func:`_join_rows` for many rows with one ``str.split``."""
    grid = np.full(len(blobs) * width, None, dtype=object)
    if blobs and width:
        # Millions of new strings would wake the cyclic collector again and again
        # for nothing (strings hold no references); pause it meanwhile.
        was = gc.isenabled()
        gc.disable()
        try:
            flat = _SEP.join(blobs).split(_SEP)
        finally:
            if was:
                gc.enable()
        if len(flat) != len(grid):
            raise StoreError(f"{name}: a form's stored values do not fit the codebook — run keyproof audit.")
        grid[:] = flat
    return grid.reshape(len(blobs), width)


def _state_codes(grid: np.ndarray) -> list[str]:
    """One string per row of a state grid, one character per field (see _STATE_CODE)."""
    codes = np.full(grid.shape, _NOT_KEYED, dtype="<U1")
    for state, code in _STATE_CODE.items():
        codes[grid == state] = code
    return ["".join(row) for row in codes.tolist()]


def _decode_states(blobs: list[str], width: int, name: str) -> tuple[np.ndarray, np.ndarray]:
    """State grid from per-form code strings, and where nothing is keyed yet;
    byte arithmetic, no per-cell Python."""
    if any(len(b) != width for b in blobs):
        raise StoreError(f"{name}: a form's stored states do not fit the codebook — run keyproof audit.")
    codes = np.frombuffer("".join(blobs).encode("ascii"), dtype=np.uint8).reshape(len(blobs), width)
    return _STATE_LOOKUP[codes], codes == ord(_NOT_KEYED)


#: Each form's stored cells as one string: variable, text, state, all joined by U+001F.
_CELLS_PER_FORM = (
    "SELECT form_id, COUNT(*), group_concat(variable || ? || text || ? || state, ?) "
    "FROM form_values GROUP BY form_id"
)


def _values_agree(
    cur: sqlite3.Cursor, expected: tuple[np.ndarray, ...], index: pd.Index, names: list[str]
) -> bool:
    """Whether form_values holds exactly the ``expected`` (text, state) grids.

    The audit's fast path: SQLite joins each form's cells into one string
    (:data:`_CELLS_PER_FORM`) and the same string is built from the replayed
    journal, so one string comparison per form stands for 300 cell
    comparisons and no per-cell object crosses from SQLite. The cells of a
    form come in key order (variable names by code point) when SQLite reads
    the clustered table; if it ever concatenated in another order this says
    False and the caller falls back to reading every cell, which is slower
    but never wrong. Equal strings with equal counts mean equal cells: a text
    cannot hold U+001F (the store refuses it), and one smuggled in would add
    pieces, which the count gives away.
    """
    text, state = expected[0], expected[1]
    order = np.argsort(np.asarray(names, dtype=object), kind="stable")
    sorted_names = np.asarray(names, dtype=object)[order]
    text, state = text[:, order], state[:, order]
    keyed = state != None  # noqa: E711 - elementwise on an object array
    stored = {r[0]: (r[1], r[2]) for r in cur.execute(_CELLS_PER_FORM, (_SEP, _SEP, _SEP))}
    counts = keyed.sum(axis=1)
    if len(stored) != int((counts > 0).sum()):
        return False
    triples = np.empty((*text.shape, 3), dtype=object)
    triples[:, :, 0], triples[:, :, 1], triples[:, :, 2] = sorted_names, text, state
    for i, form_id in enumerate(index.tolist()):
        if not counts[i]:
            continue
        got = stored.get(form_id)
        if got is None or got[0] != counts[i] or got[1] != _SEP.join(triples[i][keyed[i]].ravel().tolist()):
            return False
    return True


def _read_values(cur: sqlite3.Cursor, name: str) -> tuple[np.ndarray, ...]:
    """Every row of form_values as four arrays (form_id, variable, text, state).

    SQLite joins each form's cells into one string (``group_concat``), so
    Python receives one row per form instead of one per field and splits them
    all with one ``str.split``: a double-keyed 5,000 x 300 study is 10,000
    rows to fetch rather than 3 million tuples. Each cell carries its variable
    name, so the order SQL concatenates in does not matter.
    """
    per_form = cur.execute(_CELLS_PER_FORM, (_SEP, _SEP, _SEP)).fetchall()
    ids = np.array([r[0] for r in per_form], dtype=np.int64)
    counts = np.array([r[1] for r in per_form], dtype=np.int64)
    blobs = [r[2] for r in per_form]
    if not per_form:
        empty = np.array([], dtype=object)
        return ids, empty, empty, empty
    # A NULL text or state would drop its cell from the string (group_concat
    # skips NULL) and a U+001F inside a text would add pieces: both show as a
    # count that does not fit.
    if any(b is None for b in blobs):
        raise StoreError(f"{name}: a stored value is not text — run keyproof audit.")
    was = gc.isenabled()
    gc.disable()  # millions of new strings, no cycles: see _split_rows
    try:
        flat = np.array(_SEP.join(blobs).split(_SEP), dtype=object)
    finally:
        if was:
            gc.enable()
    if len(flat) != 3 * int(counts.sum()):
        raise StoreError(f"{name}: the stored values do not split into fields — run keyproof audit.")
    cells = flat.reshape(-1, 3)
    return np.repeat(ids, counts), cells[:, 0], cells[:, 1], cells[:, 2]


def _grid(
    index: pd.Index, names: list[str], cells: tuple[np.ndarray, ...]
) -> tuple[np.ndarray, np.ndarray]:
    """(form_id, variable, text, state) arrays -> text and state grids over index x names."""
    text = np.full((len(index), len(names)), None, dtype=object)
    state = text.copy()
    form_ids, variables, texts, states = cells
    if len(form_ids):
        rows = index.get_indexer(form_ids)
        cols = pd.Index(names).get_indexer(variables)
        keep = (rows >= 0) & (cols >= 0)  # variables dropped from the codebook stay out
        text[rows[keep], cols[keep]] = texts[keep]
        state[rows[keep], cols[keep]] = states[keep]
    return text, state


def _connect(path: Path, readonly: bool) -> sqlite3.Connection:
    if readonly:
        uri = f"file:{quote(str(path.resolve()))}?mode=ro"
        conn = sqlite3.connect(uri, uri=True, isolation_level=None, check_same_thread=False)
    else:
        conn = sqlite3.connect(str(path), isolation_level=None, check_same_thread=False)
    conn.execute("PRAGMA busy_timeout = 5000")
    if not readonly:
        conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("PRAGMA foreign_keys = ON")
    # A whole imported pass is one transaction; a larger page cache keeps it
    # from spilling to disk halfway (the default is 2 MB).
    conn.execute("PRAGMA cache_size = -65536")
    return conn


def _migrate(cur: sqlite3.Cursor, version: int) -> None:
    """Bring the schema forward from ``version`` to SCHEMA_VERSION (inside a transaction)."""
    for target in range(version + 1, SCHEMA_VERSION + 1):
        for statement in MIGRATIONS[target]:
            cur.execute(statement)
        cur.execute(f"PRAGMA user_version = {int(target)}")


def _dumps(value) -> str:
    return json.dumps(value, ensure_ascii=False, sort_keys=True, separators=(",", ":"))


def _check_pass(pass_no: int) -> None:
    if pass_no not in (1, 2):
        raise StoreError(f"pass {pass_no!r} does not exist — use pass 1 or 2.")


def _normalise(text: str | None, state: str, variable: str, name: str) -> tuple[str, str]:
    if state not in STATES:
        raise StoreError(
            f"{name}: state \"{state}\" for \"{variable}\" is unknown — use keyed, blank or illegible."
        )
    text = "" if text is None else str(text)
    if _SEP in text:
        raise StoreError(
            f"{name}: the text for \"{variable}\" contains the control character U+001F — "
            "remove it and key the value again."
        )
    if state == KEYED and not text.strip():
        return "", BLANK
    if state in (BLANK, ILLEGIBLE):
        return "", state
    return text, state


def _need_reason(reason: str, what: str, thing: str) -> None:
    if not str(reason or "").strip():
        raise DecisionError(f"no reason given to {what} {thing} — every such change needs a written reason.")


def _opt_int(x) -> int | None:
    return None if x is None or pd.isna(x) else int(x)


def _source(cb: Codebook) -> str:
    return f" ({cb.source})" if cb.source else ""
