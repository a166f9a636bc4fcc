"""Crash safety: a writer killed with SIGKILL loses nothing it reported committed.

A subprocess keys values one short transaction at a time and prints each
counter after ``set_value`` returns. It is killed (SIGKILL, no clean-up) right
after the parent has read a random number of those lines, i.e. at a random
point of a later write. Afterwards every reported value must be in the study,
SQLite's own ``PRAGMA integrity_check`` must say ``ok`` (the reference check of
the file format), and the journal's chain must still verify.
"""

from __future__ import annotations

import os
import random
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from core.codebook import Codebook, Variable
from core.store import Study

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[1]
NAMES = ["pid", "a", "b", "c", "d", "e"]

WRITER = """
import sys
from core.store import Study
path, form, start = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
names = sys.argv[4].split(",")
study = Study.open(path)
print("ready", flush=True)
i = start
while True:
    i += 1
    study.set_value(form, names[i % len(names)], str(i), "keyed", "AB")
    print(i, flush=True)
"""


def test_sigkill_at_random_moments_loses_nothing_committed(tmp_path):
    cb = Codebook(tuple(Variable(n, "integer", is_id=(n == "pid")) for n in NAMES))
    path = tmp_path / "crash.sqlite"
    with Study.create(path, cb, "AB") as study:
        form = study.start_form(1, "AB")
    rng = random.Random(20261202)
    reported: dict[str, int] = {}
    top = 0
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    for _ in range(20):
        proc = subprocess.Popen(
            [sys.executable, "-c", WRITER, str(path), str(form), str(top), ",".join(NAMES)],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env, cwd=ROOT,
        )  # fmt: skip
        assert proc.stdout.readline().strip() == "ready", proc.stderr.read()
        lines = []
        for _ in range(rng.randint(1, 60)):
            lines.append(proc.stdout.readline())
            assert lines[-1], proc.stderr.read()
        proc.send_signal(signal.SIGKILL)
        rest, _ = proc.communicate()
        assert proc.returncode == -signal.SIGKILL
        lines += rest.split()
        for n in (int(x) for x in lines if x.strip()):
            reported[NAMES[n % len(NAMES)]] = n
            top = max(top, n)
        # Whatever the writer had in flight may or may not have landed.
        with Study.open(path) as study:
            texts = study.form(form).texts
            for name, n in reported.items():
                assert top + 1 >= int(texts[name]) >= n, (name, texts[name], n)
            landed = max(int(t) for t in texts.values())
            top = max(top, landed)
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()
    with Study.open(path) as study:
        result = study.audit()
        assert result.ok, result.message
        assert result.rows >= len(reported)
