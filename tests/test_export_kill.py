"""SIGKILL during an export: the target is either the old export or the complete new one.

A forked child process exports a generated verified table over an earlier export and is
killed at random moments while writing. Afterwards the target must hold the
old content or the new content in full: never a half-written file, never a
half-built Data Package folder. The "new" reference is the same export run to
completion elsewhere; pandas reads the XLSX (whose zip metadata carries the
time) for the comparison.
"""

from __future__ import annotations

import os
import random
import shutil
import signal
import time
from pathlib import Path

import pandas as pd
import pytest
from frictionless import validate

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[1]

BUILD = r"""
from datetime import UTC, datetime
import numpy as np, pandas as pd
from core.codebook import Codebook, Variable
from core.export import export
from core.verified import Verified

NOW = datetime(2024, 1, 1, tzinfo=UTC)

def build(rows, cols, seed):
    rng = np.random.default_rng(seed)
    cb = Codebook((Variable("pid", is_id=True),)
                  + tuple(Variable(f"v{i}", "integer", min=0, max=9) for i in range(cols)))
    data = pd.DataFrame({f"v{i}": pd.array(rng.integers(0, 10, rows), dtype="Int64")
                         for i in range(cols)})
    data.insert(0, "pid", [str(i) for i in range(1, rows + 1)])
    return Verified(cb, data, head="f" * 64, study="kill.sqlite")
"""

# rows, columns per format: big enough that a write takes a while, small enough to stay quick.
SIZES = {"v.csv": (10_000, 20), "v.xlsx": (1_000, 20), "pkg": (10_000, 20)}
OLD, NEW = 1, 2


def _export_here(out: Path, seed: int, rows: int, cols: int) -> float:
    """The same export in this process (the reference); returns its running time."""
    ns: dict = {}
    exec(BUILD, ns)  # noqa: S102 - our own constant code, shared with the subprocess
    verified = ns["build"](rows, cols, seed)
    start = time.perf_counter()
    ns["export"](verified, out, now=ns["NOW"])
    return time.perf_counter() - start


def _fork_export(out: Path, seed: int, rows: int, cols: int) -> tuple[int, bool]:
    """Start the export in a forked child (pandas already imported: no start-up wait).

    Returns the child's pid once it has built its table and begun writing.
    """
    ns: dict = {}
    exec(BUILD, ns)  # noqa: S102 - our own constant code
    verified = ns["build"](rows, cols, seed)
    read, write = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: signal, export, leave without running pytest's exit code
        try:
            os.close(read)
            os.write(write, b"s")
            ns["export"](verified, out, now=ns["NOW"])
        finally:
            os._exit(0)
    os.close(write)
    started = os.read(read, 1) == b"s"
    os.close(read)
    return pid, started


def _content(path: Path):
    """What a reader sees at ``path``: bytes of a CSV, every file of a folder, the XLSX data."""
    if path.is_dir():
        return {p.name: p.read_bytes() for p in sorted(path.iterdir())}
    if path.suffix == ".xlsx":
        return pd.read_excel(path, sheet_name="data", dtype=str).to_csv(index=False)
    return path.read_bytes()


def test_sigkill_leaves_the_old_or_the_complete_new_export(tmp_path):
    rng = random.Random(20240101)
    refs: dict[str, tuple] = {}
    for name, (rows, cols) in SIZES.items():
        (tmp_path / "old").mkdir(exist_ok=True)
        (tmp_path / "new").mkdir(exist_ok=True)
        _export_here(tmp_path / "old" / name, OLD, rows, cols)
        seconds = _export_here(tmp_path / "new" / name, NEW, rows, cols)
        refs[name] = (_content(tmp_path / "old" / name), _content(tmp_path / "new" / name),
                      seconds)
        if name == "pkg":
            for which in ("old", "new"):
                # frictionless: the reference implementation of the Data Package standard.
                report = validate(tmp_path / which / name / "datapackage.json")
                assert report.valid, report.flatten(["rowNumber", "fieldName", "type"])
    names = list(SIZES)
    outcomes = []
    for moment in range(10):
        name = names[moment % len(names)]
        rows, cols = SIZES[name]
        old, new, seconds = refs[name]
        work = tmp_path / f"run{moment}"
        work.mkdir()
        target = work / name
        source = tmp_path / "old" / name
        if source.is_dir():
            shutil.copytree(source, target)
        else:
            shutil.copy2(source, target)
        pid, started = _fork_export(target, NEW, rows, cols)
        # A random moment inside the export's own running time (measured above).
        time.sleep(rng.uniform(0, seconds * 1.2))
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        assert started
        seen = _content(target)
        assert seen in (old, new), f"{name} after a kill at moment {moment} is neither"
        if name == "pkg" and seen == new:
            assert validate(target / "datapackage.json").valid
        outcomes.append("new" if seen == new else "old")
    print("kills that left the old export / the new one:",
          outcomes.count("old"), "/", outcomes.count("new"))
