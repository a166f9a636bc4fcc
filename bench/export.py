"""Benchmark: export a 5,000 x 300 verified table to CSV, XLSX and a Data Package.

Prints each export's time (median of a few runs) next to a baseline measured
in the same run on the same frame: pandas' own ``DataFrame.to_csv`` to a
plain file (no atomic write, no companions, no schema). The XLSX is compared
with the same baseline and, for scale, with openpyxl's write-only mode fed the
same rows by a minimal loop (the floor for that library).

    python bench/export.py [--rows 5000] [--cols 300] [--runs 3]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from core.codebook import Code, Codebook, Variable
from core.export import export
from core.verified import Verified


def build(rows: int, cols: int, seed: int = 7) -> Verified:
    """A verified table like a long questionnaire: mostly coded items, some numbers, dates, text."""
    rng = np.random.default_rng(seed)
    variables = [Variable("pid", "integer", is_id=True)]
    data: dict[str, object] = {"pid": pd.array(np.arange(1, rows + 1), dtype="Int64")}
    likert = tuple(Code(str(i), f"level {i}") for i in range(1, 6))
    for i in range(cols - 1):
        name = f"v{i:03d}"
        kind = i % 20
        if kind < 15:  # coded items with a declared missing code, a few blanks
            variables.append(Variable(name, "integer", codes=likert, missing=(Code("9", "n/a"),)))
            values = rng.integers(1, 6, rows).astype(float)
            values[rng.random(rows) < 0.02] = 9
            values[rng.random(rows) < 0.01] = np.nan
            data[name] = pd.array(values, dtype="Float64").astype("Int64")
        elif kind < 18:
            variables.append(Variable(name, "number", min=0, max=500))
            data[name] = pd.array(np.round(rng.random(rows) * 500, 1), dtype="Float64")
        elif kind == 18:
            variables.append(Variable(name, "date"))
            days = rng.integers(0, 3650, rows)
            data[name] = pd.Timestamp("2015-01-01") + pd.to_timedelta(days, unit="D")
        else:
            variables.append(Variable(name, "string"))
            words = np.array(["fine", "more shade please", "water, tools", "", "none"])
            data[name] = pd.array(words[rng.integers(0, len(words), rows)], dtype="string")
    frame = pd.DataFrame(data)
    return Verified(Codebook(tuple(variables)), frame, head="0" * 64, study="bench.sqlite")


def median_time(fn, runs: int) -> float:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def openpyxl_floor(frame: pd.DataFrame, path: Path) -> None:
    from openpyxl import Workbook

    wb = Workbook(write_only=True)
    ws = wb.create_sheet("data")
    ws.append(list(frame.columns))
    columns = [frame[c].astype(object).where(frame[c].notna(), None).tolist()
               for c in frame.columns]
    for row in zip(*columns, strict=True):
        ws.append(row)
    wb.save(path)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=5000)
    parser.add_argument("--cols", type=int, default=300)
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    verified = build(args.rows, args.cols)
    frame = verified.data
    print(f"verified table: {args.rows:,} participants x {args.cols} variables "
          f"({args.rows * args.cols:,} cells); median of {args.runs} runs")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        base = median_time(lambda: frame.to_csv(folder / "plain.csv", index=False), args.runs)
        results = [
            ("pandas to_csv (baseline)", base),
            ("keyproof export .csv", median_time(lambda: export(verified, folder / "v.csv"),
                                                 args.runs)),
            ("keyproof export Data Package",
             median_time(lambda: export(verified, folder / "pkg"), args.runs)),
        ]
        xlsx_runs = max(1, args.runs // 2)
        floor = median_time(lambda: openpyxl_floor(frame, folder / "floor.xlsx"), xlsx_runs)
        results.append(("openpyxl write-only, bare loop (floor)", floor))
        results.append(("keyproof export .xlsx",
                        median_time(lambda: export(verified, folder / "v.xlsx"), xlsx_runs)))
    width = max(len(name) for name, _ in results)
    for name, seconds in results:
        print(f"  {name:<{width}}  {seconds:8.2f} s   {seconds / base:6.2f} x baseline")
    xlsx = results[-1][1]
    print(f"  .xlsx against the bare openpyxl loop: {xlsx / floor:.2f} x")


if __name__ == "__main__":
    main()
