"""Benchmark of the study store: import, whole-pass load, one-field commits.

Builds a double-keyed study of 5,000 forms x 300 fields (``--forms``,
``--fields`` to change), then prints:

- the time to import each pass (``Study.import_pass``, one transaction);
- the time to load a whole pass into DataFrames (``Study.load_pass``);
- the median and 95th percentile of ``Study.set_value`` (one durable commit
  with its journal row and hash), next to a bare one-row SQLite commit with
  the same pragmas (WAL, synchronous=FULL) measured in the same run, and the
  ratio between them;
- the time of a full ``audit``.

Run: ``python bench/store.py`` (about a minute on a small machine).
"""

from __future__ import annotations

import argparse
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


def bare_commits(folder: Path, n: int) -> list[float]:
    """One-row INSERT + COMMIT with the store's pragmas: the floor set_value stands on."""
    con = sqlite3.connect(folder / "bare.sqlite", isolation_level=None)
    con.execute("PRAGMA journal_mode = WAL")
    con.execute("PRAGMA synchronous = FULL")
    con.execute("CREATE TABLE t (k INTEGER PRIMARY KEY, v TEXT)")
    times = []
    for i in range(n):
        t = time.perf_counter()
        con.execute("BEGIN IMMEDIATE")
        con.execute("INSERT INTO t (k, v) VALUES (?, ?)", (i, str(i)))
        con.execute("COMMIT")
        times.append(time.perf_counter() - t)
    con.close()
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--forms", type=int, default=5000)
    parser.add_argument("--fields", type=int, default=300)
    parser.add_argument("--commits", type=int, default=300)
    args = parser.parse_args()
    codebook, pass1, pass2 = build(args.forms, args.fields)
    cells = args.forms * args.fields
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        with Study.create(folder / "bench.sqlite", codebook, "bench") as study:
            for pass_no, frame in ((1, pass1), (2, pass2)):
                t = time.perf_counter()
                study.import_pass(pass_no, f"K{pass_no}", frame)
                took = time.perf_counter() - t
                print(f"import pass {pass_no}: {args.forms:,} forms x {args.fields} fields "
                      f"in {took:.2f} s ({cells / took:,.0f} fields/s)")
            loads = []
            for _ in range(3):
                t = time.perf_counter()
                loaded = study.load_pass(1)
                loads.append(time.perf_counter() - t)
            assert loaded.text.shape == (args.forms, args.fields)
            print(f"load_pass: median {statistics.median(loads):.3f} s, best {min(loads):.3f} s "
                  f"(of 3)")
            form = study.start_form(1, "bench")
            names = codebook.names
            sets = []
            for i in range(args.commits):
                t = time.perf_counter()
                study.set_value(form, names[i % len(names)], str(i), "keyed", "bench")
                sets.append(time.perf_counter() - t)
            bare = bare_commits(folder, args.commits)
            ms = 1000
            print(f"set_value commit: median {statistics.median(sets) * ms:.2f} ms, "
                  f"p95 {percentile(sets, 95) * ms:.2f} ms (target: median <= 1 ms)")
            print(f"bare SQLite commit (same pragmas): median {statistics.median(bare) * ms:.2f} ms, "
                  f"p95 {percentile(bare, 95) * ms:.2f} ms")
            print(f"ratio set_value / bare: median {statistics.median(sets) / statistics.median(bare):.2f}, "
                  f"p95 {percentile(sets, 95) / percentile(bare, 95):.2f}")
            t = time.perf_counter()
            result = study.audit()
            print(f"audit: {time.perf_counter() - t:.2f} s ({result.rows:,} journal rows; "
                  f"{'ok' if result.ok else result.message})")


if __name__ == "__main__":
    main()
