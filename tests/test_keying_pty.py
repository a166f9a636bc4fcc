"""The keying screen in a real pseudo-terminal: type-ahead and crash safety.

The app runs as ``python -m tui.cli key ...`` under a pseudo-terminal (the
harness is ``bench/keying.py``'s ``PtyApp``) and gets bytes exactly as a
keyboard would send them. The reference is the key script itself: what was
typed, in order, is what the study must hold.
"""

from __future__ import annotations

import importlib.util
import random
import shutil
import sqlite3
import time
from pathlib import Path

import pytest

pytestmark = pytest.mark.slow

_spec = importlib.util.spec_from_file_location(
    "bench_keying", Path(__file__).resolve().parent.parent / "bench" / "keying.py")
bench = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(bench)


def test_burst_of_a_40_field_form_10_ms_apart(tmp_path):
    path = bench.make_form_study(tmp_path, 40)
    values = bench.form_values(40, seed=5)
    app, ready = bench.start(path)
    try:
        assert ready is not None, bytes(app.output[-400:])
        for key in bench.keys_of(values):
            t = time.perf_counter()
            app.write(key)
            # Pace only: 10 ms apart is the burst asked for (issue 4); nothing waits on the app.
            time.sleep(max(0.0, 0.01 - (time.perf_counter() - t)))
        assert bench.wait_stored(path, 40, timeout=30) is not None
    finally:
        app.quit()
    expected = [("pid" if i == 0 else f"f{i:03d}", v) for i, v in enumerate(values)]
    got = {var: (text if state == "keyed" else "") for var, text, state in
           bench.stored_values(path)}
    assert [(k, got.get(k)) for k, _ in expected] == expected


def _planned(forms: int) -> list[tuple]:
    """The journal rows a keyer's script produces, in order."""
    rows = []
    for n in range(forms):
        values = bench.form_values(12, seed=n)
        rows.append(("start_form", None, None, None))
        for i, v in enumerate(values):
            rows.append(("set_value", "pid" if i == 0 else f"f{i:03d}", v,
                         "keyed" if v else "blank"))
        rows.append(("finish_form", None, None, None))
    return rows


def _script(forms: int) -> list[bytes]:
    keys = []
    for n in range(forms):
        keys += bench.keys_of(bench.form_values(12, seed=n)) + [bench.ENTER]  # Enter finishes
    return keys


def test_sigkill_at_20_random_moments_loses_nothing_confirmed(tmp_path):
    template = bench.make_form_study(tmp_path, 12)
    planned, script = _planned(4), _script(4)
    rng = random.Random(20240521)
    reached = []
    paths = [tmp_path / f"run{run}.sqlite" for run in range(20)]
    for path in paths:
        shutil.copy(template, path)

    def spawn(path):
        return bench.PtyApp(["key", str(path), "--pass", "1", "--keyer", "AB"])

    # The next run's process starts while this one types: start-up (imports) is
    # most of each run's time, and the runs share nothing but the template.
    app = spawn(paths[0])
    for run, path in enumerate(paths):
        following = spawn(paths[run + 1]) if run + 1 < len(paths) else None
        try:
            assert app.wait_for(b"keyer AB", timeout=60) is not None, bytes(app.output[-400:])
            kill_after = rng.uniform(0.0, 1.5)  # seconds of typing, ~15 ms a key
            t0 = time.perf_counter()
            for key in script:
                if time.perf_counter() - t0 >= kill_after:
                    break
                app.write(key)
                time.sleep(0.015)
        finally:
            app.kill()
        app = following
        conn = sqlite3.connect(path)
        try:
            assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            journal = conn.execute(
                "SELECT action, form_id, variable, new_text, new_state FROM journal "
                "WHERE action IN ('start_form', 'set_value', 'finish_form') ORDER BY seq"
            ).fetchall()
            current = dict(((f, v), (t, s)) for f, v, t, s in conn.execute(
                "SELECT form_id, variable, text, state FROM form_values"))
        finally:
            conn.close()
        done = [(a, v, t, s) for a, _f, v, t, s in journal]
        # What was committed is exactly the start of what was typed: nothing skipped,
        # nothing out of order, nothing in a wrong field.
        assert done == planned[: len(done)], run
        # And the values table agrees with the journal's last word on every field.
        last = {(f, v): (t, s) for a, f, v, t, s in journal if a == "set_value"}
        assert current == last, run
        reached.append(len(done))
    # Most kills landed after fields were committed, not all before the first one.
    assert sum(1 for n in reached if n > 2) >= 10, reached


def test_keys_typed_before_the_screen_is_drawn_are_kept(tmp_path):
    path = bench.make_form_study(tmp_path, 12)
    app = bench.PtyApp(["key", str(path), "--pass", "1", "--keyer", "AB"])
    try:
        for key in bench.keys_of(["101", "5", "", "6"]):  # at once, while Python still starts
            app.write(key)
        assert app.wait_for(b"keyer AB", timeout=60) is not None
        assert bench.wait_stored(path, 4, timeout=30) is not None
    finally:
        app.quit()
    assert sorted(bench.stored_values(path)) == [
        ("f001", "5", "keyed"), ("f002", "", "blank"), ("f003", "6", "keyed"),
        ("pid", "101", "keyed")]
