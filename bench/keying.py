"""Keying speed through a real pseudo-terminal: echo, bursts, commits, start-up.

Run: ``python bench/keying.py`` (about a minute). Pilot cannot time this (it
sleeps about 40 ms per key), so the app runs as ``python -m tui.cli key ...``
under a pseudo-terminal and this script writes bytes to it as a keyboard
would and reads back what the app draws.

Prints, for a 30-field and a 300-field form:

- echo latency at a keyer's pace (keys 100 ms apart): from a key written to
  the first screen update read back, median and p95, for characters and for
  field advances (Enter);
- a burst of a whole form's keys 10 ms apart: fields right, and the time
  from the last key to every field committed;
- the durable commit per field (``Study.set_value``, journal and hash
  included) against a bare one-row SQLite commit with the same pragmas,
  measured in the same run;
- start to ready: from starting the process to the keying screen drawn.

Targets (issue 4): echo median <= 33 ms for characters, <= 50 ms for
advances, p95 <= 80 ms, alike for 30 and 300 fields; burst 100 % right;
commit median <= 1 ms; 300-field form ready in <= 0.5 s.

The :class:`PtyApp` harness is also used by ``tests/test_keying_pty.py``.
"""

from __future__ import annotations

import fcntl
import os
import signal
import sqlite3
import statistics
import struct
import subprocess
import sys
import tempfile
import termios
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

ENTER = b"\r"


class PtyApp:
    """A keyproof process on a pseudo-terminal, with everything it draws collected."""

    def __init__(self, args: list[str], cols: int = 120, rows: int = 40):
        master, slave = os.openpty()
        fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", rows, cols, 0, 0))
        env = dict(os.environ, TERM="xterm-256color", COLUMNS=str(cols), LINES=str(rows))
        self.started = time.perf_counter()
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "tui.cli", *args], stdin=slave, stdout=slave, stderr=slave,
            cwd=str(ROOT), env=env, start_new_session=True, close_fds=True,
        )
        os.close(slave)
        self.fd = master
        self.output = bytearray()
        self.chunks: list[tuple[float, int]] = []  # (time read, output length after it)
        self._lock = threading.Lock()
        self._reader = threading.Thread(target=self._read, daemon=True)
        self._reader.start()

    def _read(self) -> None:
        while True:
            try:
                data = os.read(self.fd, 65536)
            except OSError:
                return
            if not data:
                return
            now = time.perf_counter()
            with self._lock:
                self.output += data
                self.chunks.append((now, len(self.output)))

    def wait_for(self, marker: bytes, timeout: float = 20.0) -> float | None:
        """Seconds from start until ``marker`` was drawn; None on timeout."""
        end = time.perf_counter() + timeout
        while time.perf_counter() < end:
            with self._lock:
                at = self.output.find(marker)
                if at >= 0:
                    t = next(t for t, n in self.chunks if n > at)
                    return t - self.started
            if self.proc.poll() is not None:
                return None
            time.sleep(0.002)
        return None

    def size(self) -> int:
        with self._lock:
            return len(self.output)

    def first_update_after(self, length: int, since: float, timeout: float = 2.0) -> float | None:
        """Seconds from ``since`` to the first output beyond ``length``."""
        end = time.perf_counter() + timeout
        while time.perf_counter() < end:
            with self._lock:
                if self.chunks and self.chunks[-1][1] > length:
                    found = self.chunks[-1][0]
                    for t, n in reversed(self.chunks):
                        if n <= length:
                            break
                        found = t
                    return found - since
            time.sleep(0.0005)
        return None

    def write(self, data: bytes) -> None:
        os.write(self.fd, data)

    def kill(self) -> None:
        if self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait()
        self._close_fd()

    def quit(self) -> None:
        self.write(b"\x11")  # ctrl+q
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.kill()
        self._close_fd()

    def _close_fd(self) -> None:
        try:
            os.close(self.fd)
        except OSError:
            pass


def make_form_study(folder: Path, fields: int, tag: str = "") -> Path:
    """A study with an ID and ``fields - 1`` integer fields 0..999, auto-advance off."""
    from core.codebook import Codebook, Variable
    from core.store import Study
    from tui.screens.keying_model import AUTO_ADVANCE_SETTING

    variables = [Variable("pid", "integer", is_id=True)] + [
        Variable(f"f{i:03d}", "integer", min=0, max=999, section=f"page {1 + i // 20}")
        for i in range(1, fields)
    ]
    path = Path(folder) / f"form{fields}{tag}.sqlite"
    with Study.create(path, Codebook(tuple(variables)), "LM") as study:
        study.set_setting(AUTO_ADVANCE_SETTING, "off", "LM")
    return path


def form_values(fields: int, seed: int = 0) -> list[str]:
    """Distinct-looking values, a blank every ninth field, the ID first."""
    values = [str(100 + seed)]
    for i in range(1, fields):
        values.append("" if i % 9 == 0 else str((i * 37 + seed * 11 + 7) % 1000))
    return values


def keys_of(values: list[str]) -> list[bytes]:
    out: list[bytes] = []
    for v in values:
        out += [c.encode() for c in v] + [ENTER]
    return out


def stored_values(path: Path) -> list[tuple[str, str, str]]:
    """(variable, text, state) of every field keyed, read on a fresh connection."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return conn.execute(
            "SELECT variable, text, state FROM form_values ORDER BY variable").fetchall()
    finally:
        conn.close()


def wait_stored(path: Path, n: int, timeout: float) -> float | None:
    start = time.perf_counter()
    while time.perf_counter() - start < timeout:
        try:
            if len(stored_values(path)) >= n:
                return time.perf_counter() - start
        except sqlite3.Error:
            pass
        time.sleep(0.005)
    return None


def start(path: Path) -> tuple[PtyApp, float | None]:
    app = PtyApp(["key", str(path), "--pass", "1", "--keyer", "AB"])
    return app, app.wait_for(b"keyer AB")


def burst_right(path: Path, values: list[str]) -> int:
    """How many fields hold exactly the value planned for them."""
    expected = {("pid" if i == 0 else f"f{i:03d}"): v for i, v in enumerate(values)}
    got = {var: (text if state == "keyed" else "") for var, text, state in stored_values(path)}
    return sum(1 for k, v in expected.items() if got.get(k) == v)


# ----------------------------------------------------------------------------- measures


def measure_echo(folder: Path, fields: int, keyed_fields: int) -> dict:
    path = make_form_study(folder, fields)
    app, ready = start(path)
    chars, advances, steps = [], [], []
    enters = 0
    try:
        for key in keys_of(form_values(fields)[:keyed_fields]):
            before = app.size()
            t = time.perf_counter()
            app.write(key)
            lat = app.first_update_after(before, t)
            if key == ENTER:
                # The ID's Enter opens the form and the last field's opens the review:
                # form-level steps, timed apart from field-to-field advances.
                step = enters == 0 or (keyed_fields == fields and enters == fields - 1)
                enters += 1
            if lat is not None:
                (chars if key != ENTER else steps if step else advances).append(lat * 1000)
            time.sleep(max(0.0, 0.1 - (time.perf_counter() - t)))
    finally:
        app.quit()
    return {"ready": ready, "chars": chars, "advances": advances, "steps": steps}


def measure_burst(folder: Path, fields: int) -> dict:
    path = make_form_study(folder, fields, "-burst")
    values = form_values(fields, seed=3)
    app, ready = start(path)
    try:
        keys = keys_of(values)
        for key in keys:
            t = time.perf_counter()
            app.write(key)
            time.sleep(max(0.0, 0.01 - (time.perf_counter() - t)))
        settle = wait_stored(path, fields, timeout=60)
    finally:
        app.quit()
    return {"ready": ready, "right": burst_right(path, values), "fields": fields,
            "settle": settle, "keys": len(keys)}


def measure_commit(folder: Path, n: int = 300) -> dict:
    from core.store import Study

    path = make_form_study(folder, n, "-commit")
    times = []
    with Study.open(path) as study:
        form = study.start_form(1, "AB")
        for i, v in enumerate(form_values(n)):
            name = "pid" if i == 0 else f"f{i:03d}"
            t = time.perf_counter()
            study.set_value(form, name, v, "keyed" if v else "blank", "AB")
            times.append((time.perf_counter() - t) * 1000)
    bare = []
    conn = sqlite3.connect(str(Path(folder) / "bare.sqlite"), isolation_level=None)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("CREATE TABLE t (k INTEGER PRIMARY KEY, v TEXT)")
    for i in range(n):
        t = time.perf_counter()
        conn.execute("BEGIN")
        conn.execute("INSERT INTO t (v) VALUES (?)", (str(i),))
        conn.execute("COMMIT")
        bare.append((time.perf_counter() - t) * 1000)
    conn.close()
    return {"set_value": times, "bare": bare}


def measure_mount(folder: Path, fields: int) -> float:
    """Seconds from creating the app (imports done) to the keying screen mounted, headless."""
    import asyncio

    from tui.app import make_app

    path = make_form_study(folder, fields, f"-mount{time.perf_counter_ns()}")

    async def run() -> float:
        t = time.perf_counter()
        app = make_app(path, mode="key", pass_no=1, keyer="AB")
        async with app.run_test(size=(120, 40)) as pilot:
            await pilot.pause()
            return time.perf_counter() - t

    return asyncio.run(run())


def measure_mount_baseline() -> float:
    """The same, for a bare Textual app with one Input: Textual's own start-up here."""
    import asyncio

    from textual.app import App
    from textual.widgets import Input

    class Bare(App):
        def compose(self):
            yield Input()

    async def run() -> float:
        t = time.perf_counter()
        async with Bare().run_test(size=(120, 40)) as pilot:
            await pilot.pause()
            return time.perf_counter() - t

    return asyncio.run(run())


def _q(xs: list[float], p: float) -> float:
    if not xs:
        return float("nan")
    xs = sorted(xs)
    return xs[min(len(xs) - 1, int(round(p * (len(xs) - 1))))]


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        print("keying benchmark (through a pseudo-terminal)")
        print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores\n")
        measure_mount_baseline()  # warm-up: first Textual start pays one-off imports
        measure_mount(folder, 12)  # and so does the first keying screen (its modules)
        base = measure_mount_baseline()
        print(f"baseline: a bare Textual app with one Input ready in {base:.2f} s")
        commit = measure_commit(folder)
        med, bare = statistics.median(commit["set_value"]), statistics.median(commit["bare"])
        print(f"commit per field: median {med:.2f} ms, p95 {_q(commit['set_value'], .95):.2f} ms;"
              f" bare one-row commit median {bare:.2f} ms; ratio {med / bare:.1f}x"
              "  (target median <= 1 ms)")
        for fields, keyed in ((30, 30), (300, 40)):
            echo = measure_echo(folder, fields, keyed)
            c, a = echo["chars"], echo["advances"]
            print(f"\n{fields}-field form")
            print(f"  process start to screen drawn (Python imports included): "
                  f"{echo['ready']:.2f} s" if echo["ready"] else "  ready: not seen")
            mount = measure_mount(folder, fields)
            print(f"  app created to keying screen ready (imports done, headless): "
                  f"{mount:.2f} s, {mount / base:.1f}x the bare app  (target 0.5 s at 300)")
            print(f"  echo, characters ({len(c)}): median {_q(c, .5):.1f} ms, "
                  f"p95 {_q(c, .95):.1f} ms  (targets 33 / 80)")
            print(f"  echo, advances ({len(a)}): median {_q(a, .5):.1f} ms, "
                  f"p95 {_q(a, .95):.1f} ms  (targets 50 / 80)")
            print("  form steps (ID opens the form; last field opens the review): "
                  + ", ".join(f"{x:.0f} ms" for x in echo["steps"]))
            b = measure_burst(folder, fields)
            settle = f"{b['settle']:.2f} s" if b["settle"] is not None else "did not settle"
            print(f"  burst of {b['keys']} keys 10 ms apart: {b['right']}/{b['fields']} fields "
                  f"right; all committed {settle} after the last key")


if __name__ == "__main__":
    main()
