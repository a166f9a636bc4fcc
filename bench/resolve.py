"""Resolution screen speed with 50,000 open discrepancies.

Run: ``python bench/resolve.py`` (about a minute). Targets (issue 5): the
worklist opens in at most 1 s and moving to the next item takes at most
20 ms of handling time. Pilot cannot time that (it sleeps between keys), so:

- **load**: the screen's side of opening, headless: a computed worklist
  handed to the screen, until the first paint is done. Baseline in the same
  run: a stock Textual DataTable given the same columns for 10,000 rows (it
  measures every cell on its first paint; 50,000 would take far longer),
  through the same harness.
- **worklist**: ``core.resolution.worklist`` on the big study (the
  comparison plus the decisions join; it runs in a worker thread, so the
  screen never waits on it, but the resolver does).
- **move, in process**: the handler of one "next" key (cursor, detail pane
  with the neighbouring fields read from the study, header) plus drawing
  the worklist's visible lines and the detail text, timed with
  ``perf_counter``; baseline: the same on a study with 100 discrepancies.
- **move, through a terminal**: the app under a pseudo-terminal
  (``bench/keying.py``'s harness); a "next" key written every 100 ms and
  the time to the first screen update read back; baseline: the same app on
  the 100-discrepancy study.
"""

from __future__ import annotations

import asyncio
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

from core.codebook import Codebook, Variable  # noqa: E402
from core.store import Study  # noqa: E402

FIELDS = 20
SIZE = (120, 40)


def make_study(folder: Path, forms: int, tag: str) -> Path:
    """``forms`` forms of ``FIELDS`` items (1-5); pass 2 differs in every item: forms x FIELDS open."""
    codebook = Codebook((Variable("pid", "integer", is_id=True),
                         *(Variable(f"q{j:02d}", "integer", label=f"item {j}", min=1, max=5)
                           for j in range(1, FIELDS + 1))))
    rng = np.random.default_rng(5)
    values = rng.integers(1, 6, size=(forms, FIELDS))
    ids = [str(100000 + i) for i in range(forms)]
    pass1 = pd.DataFrame(values.astype(str), columns=codebook.names[1:])
    pass2 = pd.DataFrame((values % 5 + 1).astype(str), columns=codebook.names[1:])
    pass1.insert(0, "pid", ids)
    pass2.insert(0, "pid", ids)
    path = folder / f"resolve-{tag}.sqlite"
    with Study.create(path, codebook, "LM") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, "JM", pass2)
    return path


def measure_worklist(path: Path) -> tuple[float, pd.DataFrame]:
    from core.resolution import worklist

    with Study.open(path, readonly=True) as study:
        t = time.perf_counter()
        rows = worklist(study)
        return time.perf_counter() - t, rows


async def _load_screen(path: Path, rows: pd.DataFrame) -> tuple[float, list[float]]:
    """Seconds from handing ``rows`` to the screen to its first paint; then per-move ms."""
    from tui.app import make_app
    from tui.screens.resolve import ResolveScreen

    app = make_app(path, mode="resolve", keyer="LM")
    ResolveScreen.load_worklist = lambda self: None  # the rows come from this script
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        screen = app.screen
        t = time.perf_counter()
        screen.show_worklist(rows, None, set())
        await pilot.pause()  # the first paint after the rows arrived
        load = time.perf_counter() - t
        moves = []
        view = screen.worklist
        detail = screen.query_one("#resolve-detail")
        for _ in range(200):
            t = time.perf_counter()
            screen.action_next_open(1)
            for y in range(view.size.height):
                view.render_line(y)
            detail.render()
            moves.append((time.perf_counter() - t) * 1000)
    return load, moves


async def _datatable_baseline(rows: pd.DataFrame) -> float:
    from textual.app import App
    from textual.widgets import DataTable

    class Table(App):
        def compose(self):
            yield DataTable()

    app = Table()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        table = app.query_one(DataTable)
        cols = ["participant", "variable", "kind", "pass1", "pass2", "cause", "_status"]
        table.add_columns(*cols)
        t = time.perf_counter()
        table.add_rows(rows[cols].astype(str).itertuples(index=False, name=None))
        await pilot.pause()
        return time.perf_counter() - t


def measure_pty(path: Path, open_marker: bytes, moves: int = 40) -> tuple[float | None, list[float]]:
    from bench.keying import PtyApp

    app = PtyApp(["resolve", str(path), "--keyer", "LM"], cols=SIZE[0], rows=SIZE[1])
    times = []
    try:
        ready = app.wait_for(open_marker, timeout=60)
        time.sleep(0.5)
        for _ in range(moves):
            before = app.size()
            t = time.perf_counter()
            app.write(b"n")
            lat = app.first_update_after(before, t)
            if lat is not None:
                times.append(lat * 1000)
            time.sleep(max(0.0, 0.1 - (time.perf_counter() - t)))
    finally:
        app.quit()
    return ready, times


def _ms(xs: list[float]) -> str:
    if not xs:
        return "no data"
    p95 = float(np.percentile(xs, 95))
    return f"median {statistics.median(xs):6.1f} ms, p95 {p95:6.1f} ms"


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        big = make_study(folder, 50_000 // FIELDS, "big")
        small = make_study(folder, 100 // FIELDS, "small")
        wl_big, rows_big = measure_worklist(big)
        wl_small, rows_small = measure_worklist(small)
        assert int((rows_big["_status"] == "open").sum()) == 50_000, "the big study must have 50,000 open"
        load_big, moves_big = asyncio.run(_load_screen(big, rows_big))
        load_small, moves_small = asyncio.run(_load_screen(small, rows_small))
        table_10k = asyncio.run(_datatable_baseline(rows_big.iloc[:10_000]))
        print(f"worklist (core, in a worker): 50,000 rows {wl_big:.2f} s; 100 rows {wl_small:.3f} s")
        print(f"load + first paint: 50,000 rows {load_big:.3f} s (target <= 1 s); "
              f"100 rows {load_small:.3f} s")
        print(f"  baseline, stock DataTable with 10,000 rows: {table_10k:.3f} s "
              f"-> this list with 5x the rows takes {load_big / table_10k:.2f}x its time")
        print(f"move to next, in process (handler + drawing): 50,000 rows {_ms(moves_big)}")
        print(f"  baseline, 100 rows: {_ms(moves_small)} -> ratio of medians "
              f"{statistics.median(moves_big) / statistics.median(moves_small):.2f}")
        open_big, pty_big = measure_pty(big, b"open of 50000")
        open_small, pty_small = measure_pty(small, b"open of 100")
        print("through a terminal (start to worklist drawn: "
              f"50,000 rows {open_big or float('nan'):.2f} s, 100 rows {open_small or float('nan'):.2f} s)")
        print(f"  move to next, key to first update: 50,000 rows {_ms(pty_big)}")
        print(f"  baseline, 100 rows: {_ms(pty_small)}"
              + (f" -> ratio of medians {statistics.median(pty_big) / statistics.median(pty_small):.2f}"
                 if pty_big and pty_small else ""))


if __name__ == "__main__":
    main()
