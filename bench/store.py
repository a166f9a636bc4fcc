"""Benchmark of the study store: import, whole-pass load, audit, one-field commits.

Builds a double-keyed study of 5,000 forms x 300 fields (``--forms``,
``--fields`` to change) and prints each time next to a baseline measured in
the same run on the same machine, with the ratio between them (the machine is
often shared, so only the ratios travel):

- import of each pass (``Study.import_pass``, one transaction) against a bare
  ``executemany`` of the same (form, variable, text, state) rows into a
  table without keys or checks, same pragmas, one transaction;
- ``Study.load_pass`` against fetching those bare rows back (what reading one
  row per field would cost);
- a full ``audit`` against SHA-256 over the same journal rows' JSON with
  hashlib alone (the floor of recomputing the chain);
- the median and 95th percentile of ``Study.set_value`` (one durable commit
  with its journal row and hash) against a bare one-row SQLite commit with
  the same pragmas (WAL, synchronous=FULL).

Run: ``python bench/store.py`` (a minute or two on a small machine).
"""

from __future__ import annotations

import argparse
import hashlib
import json
import sqlite3
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from core.codebook import Codebook, Variable  # noqa: E402
from core.store import Study  # noqa: E402


def build(forms: int, fields: int, seed: int = 7) -> tuple[Codebook, pd.DataFrame, pd.DataFrame]:
    names = ["pid"] + [f"q{i:03d}" for i in range(1, fields)]
    variables = [Variable("pid", "integer", is_id=True)]
    variables += [Variable(n, "integer", min=1, max=7) for n in names[1:]]
    rng = np.random.default_rng(seed)
    grid = rng.integers(1, 8, size=(forms, fields)).astype(str).astype(object)
    grid[:, 0] = np.arange(1001, 1001 + forms).astype(str)
    pass1 = pd.DataFrame(grid, columns=names)
    slips = rng.random(grid.shape) < 0.005  # about one slip in 200 fields
    slips[:, 0] = False
    grid2 = grid.copy()
    grid2[slips] = rng.integers(1, 8, size=int(slips.sum())).astype(str)
    return Codebook(tuple(variables)), pass1, pd.DataFrame(grid2, columns=names)


def percentile(xs: list[float], q: float) -> float:
    return float(np.percentile(xs, q))


def _bare_connection(path: Path) -> sqlite3.Connection:
    con = sqlite3.connect(path, isolation_level=None)
    con.execute("PRAGMA journal_mode = WAL")
    con.execute("PRAGMA synchronous = FULL")
    con.execute("PRAGMA cache_size = -65536")  # as the store sets it
    return con


def bare_commit_table(folder: Path) -> sqlite3.Connection:
    """A database for one-row commits with the store's pragmas, its WAL already
    grown by one large transaction as the study's is after an import (a WAL
    that must grow costs extra at each fsync, which would flatter set_value)."""
    con = _bare_connection(folder / "bare.sqlite")
    con.execute("CREATE TABLE t (k INTEGER PRIMARY KEY, v TEXT)")
    con.execute("BEGIN IMMEDIATE")
    con.executemany("INSERT INTO t (k, v) VALUES (?, ?)", ((-i, "x" * 100) for i in range(1, 40_000)))
    con.execute("COMMIT")
    return con


def bare_commit(con: sqlite3.Connection, i: int) -> float:
    """One-row INSERT + COMMIT: the floor set_value stands on."""
    t = time.perf_counter()
    con.execute("BEGIN IMMEDIATE")
    con.execute("INSERT INTO t (k, v) VALUES (?, ?)", (i, str(i)))
    con.execute("COMMIT")
    return time.perf_counter() - t


def long_rows(frame: pd.DataFrame, first_id: int) -> list[tuple]:
    """The (form_id, variable, text, state) tuples one row per field, built before timing."""
    grid = frame.to_numpy(dtype=object)
    rows, cols = np.indices(grid.shape).reshape(2, -1)
    names = np.asarray(frame.columns, dtype=object)
    return list(zip((rows + first_id).tolist(), names[cols].tolist(), grid.ravel().tolist(),
                    ["keyed"] * grid.size, strict=True))  # fmt: skip


def bare_insert(con: sqlite3.Connection, rows: list[tuple]) -> float:
    """Seconds for one executemany of ``rows`` into a plain table, in one transaction."""
    t = time.perf_counter()
    con.execute("BEGIN IMMEDIATE")
    con.executemany("INSERT INTO v (form_id, variable, text, state) VALUES (?, ?, ?, ?)", rows)
    con.execute("COMMIT")
    return time.perf_counter() - t


def bare_hashes(rows: list[tuple]) -> float:
    """Seconds for SHA-256 over each journal row's canonical JSON, nothing else."""
    t = time.perf_counter()
    for r in rows:
        hashlib.sha256(json.dumps(list(r[:13]), ensure_ascii=False,
                                  separators=(",", ":")).encode("utf-8")).hexdigest()  # fmt: skip
    return time.perf_counter() - t


def line(what: str, took: float, base: float, base_what: str) -> str:
    return f"{what}: {took:.3f} s | {base_what}: {base:.3f} s | ratio {took / base:.2f}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--forms", type=int, default=5000)
    parser.add_argument("--fields", type=int, default=300)
    parser.add_argument("--commits", type=int, default=300)
    args = parser.parse_args()
    codebook, pass1, pass2 = build(args.forms, args.fields)
    cells = args.forms * args.fields
    print(f"{args.forms:,} forms x {args.fields} fields = {cells:,} fields per pass")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        bare = _bare_connection(folder / "bare-import.sqlite")
        bare.execute("CREATE TABLE v (form_id INTEGER, variable TEXT, text TEXT, state TEXT)")
        with Study.create(folder / "bench.sqlite", codebook, "bench") as study:
            for pass_no, frame in ((1, pass1), (2, pass2)):
                t = time.perf_counter()
                study.import_pass(pass_no, f"K{pass_no}", frame)
                took = time.perf_counter() - t
                base = bare_insert(bare, long_rows(frame, 1 + (pass_no - 1) * args.forms))
                print(line(f"import pass {pass_no} ({cells / took:,.0f} fields/s)", took, base,
                           "bare executemany of the same rows"))  # fmt: skip
            loads, reads = [], []
            for _ in range(3):
                t = time.perf_counter()
                loaded = study.load_pass(1)
                loads.append(time.perf_counter() - t)
                t = time.perf_counter()
                bare.execute("SELECT form_id, variable, text, state FROM v WHERE form_id <= ?",
                             (args.forms,)).fetchall()  # fmt: skip
                reads.append(time.perf_counter() - t)
            assert loaded.text.shape == (args.forms, args.fields)
            print(line("load_pass (median of 3)", statistics.median(loads), statistics.median(reads),
                       "bare fetch of the pass's rows"))  # fmt: skip
            journal = study._query("SELECT * FROM journal ORDER BY seq")
            t = time.perf_counter()
            result = study.audit()
            took = time.perf_counter() - t
            print(line(f"audit ({result.rows:,} journal rows, {2 * cells:,} fields; "
                       f"{'ok' if result.ok else result.message})", took, bare_hashes(journal),
                       "hashlib over the same journal rows"))  # fmt: skip
            form = study.start_form(1, "bench")
            names = codebook.names
            sets, commits = [], []
            commit_con = bare_commit_table(folder)
            # Alternate the two so both see the same load on a shared machine.
            for i in range(args.commits):
                t = time.perf_counter()
                study.set_value(form, names[i % len(names)], str(i), "keyed", "bench")
                sets.append(time.perf_counter() - t)
                commits.append(bare_commit(commit_con, i))
            commit_con.close()
        bare.close()
        ms = 1000
        print(f"set_value commit: median {statistics.median(sets) * ms:.2f} ms, "
              f"p95 {percentile(sets, 95) * ms:.2f} ms | bare SQLite commit (same pragmas): "
              f"median {statistics.median(commits) * ms:.2f} ms, p95 {percentile(commits, 95) * ms:.2f} ms"
              f" | ratio median {statistics.median(sets) / statistics.median(commits):.2f}, "
              f"p95 {percentile(sets, 95) / percentile(commits, 95):.2f}")

if __name__ == "__main__":
    main()
