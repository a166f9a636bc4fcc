"""Crash safety: a writer killed with SIGKILL loses nothing it reported committed.

A child process (forked, so it starts at once) keys values one short
transaction at a time and writes each counter to a pipe after ``set_value``
returns. It is killed (SIGKILL, no clean-up) right
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
from pathlib import Path

import pytest

from core.codebook import Codebook, Variable
from core.store import Study

pytestmark = pytest.mark.slow

NAMES = ["pid", "a", "b", "c", "d", "e"]


def writer(path: Path, form: int, start: int, out: int) -> None:
    """The child: key values one commit at a time, report each after it returns."""
    try:
        study = Study.open(path)
        os.write(out, b"ready\n")
        i = start
        while True:
            i += 1
            study.set_value(form, NAMES[i % len(NAMES)], str(i), "keyed", "AB")
            os.write(out, f"{i}\n".encode())
    finally:
        os._exit(1)  # never return into pytest in the child


def test_sigkill_at_random_moments_loses_nothing_committed(tmp_path):
    cb = Codebook(tuple(Variable(n, "integer", is_id=(n == "pid")) for n in NAMES))
    path = tmp_path / "crash.sqlite"
    with Study.create(path, cb, "AB") as study:
        form = study.start_form(1, "AB")
    rng = random.Random(20261202)
    reported: dict[str, int] = {}
    top = 0
    for _ in range(20):
        # A forked child starts at once (no interpreter start-up, nothing to import)
        # and holds no connection of the parent's: the study is closed before forking.
        read, write = os.pipe()
        pid = os.fork()
        if pid == 0:
            os.close(read)
            writer(path, form, top, write)
        os.close(write)
        with os.fdopen(read) as pipe:
            assert pipe.readline().strip() == "ready"
            lines = []
            for _ in range(rng.randint(1, 60)):
                lines.append(pipe.readline())
                assert lines[-1], "the writer stopped before it was killed"
            os.kill(pid, signal.SIGKILL)
            _, status = os.waitpid(pid, 0)
            assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
            lines += pipe.read().split()
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
