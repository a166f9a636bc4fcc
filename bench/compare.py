"""Benchmark: ``keyproof compare`` on two keyed files against a plain pandas script.

Generates two keyed passes of 20,000 forms x 200 fields (Likert items, a few
integers with ranges, numbers with decimals, dates, free text) where pass 2
carries keying slips in about 0.5 % of fields, then times, in the same run and
alternating, ``keyproof compare FILE1 FILE2 --codebook CB --out OUT`` and a
plain hand-written pandas script (read both CSVs, align on the ID,
``DataFrame.compare``, write the differences). Prints the median wall time and
peak memory (max RSS of the child process) of each and their ratios.

Also times comparing a 5,000 x 300 double-keyed study from its file.

    python bench/compare.py [--forms 20000] [--fields 200] [--runs 5] [--no-study]
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

PLAIN = """\
import sys
import pandas as pd
a = pd.read_csv(sys.argv[1]).set_index("pid")
b = pd.read_csv(sys.argv[2]).set_index("pid")
a, b = a.align(b, join="outer")
a.compare(b).to_csv(sys.argv[3])
"""


def make_codebook(fields: int) -> pd.DataFrame:
    rows = [{"name": "pid", "type": "integer", "id": "yes", "required": "yes"}]
    for j in range(1, fields):
        kind = j % 20
        if kind == 1:
            rows.append({"name": f"age{j}", "type": "integer", "min": 18, "max": 99})
        elif kind == 2:
            rows.append({"name": f"size{j}", "type": "number", "min": 0, "max": 500})
        elif kind == 3:
            rows.append({"name": f"day{j}", "type": "date"})
        elif kind == 4:
            rows.append({"name": f"note{j}", "type": "string"})
        else:
            rows.append({"name": f"q{j}", "type": "integer", "codes": "1=a; 2=b; 3=c; 4=d; 5=e",
                         "missing": "9=no answer", "required": "yes"})
    return pd.DataFrame(rows)


def make_passes(codebook: pd.DataFrame, forms: int, seed: int = 7):
    rng = np.random.default_rng(seed)
    cols = {}
    for row in codebook.itertuples():
        if row.name == "pid":
            cols[row.name] = np.arange(1, forms + 1).astype(str)
        elif row.type == "number":
            cols[row.name] = np.char.mod("%.1f", rng.uniform(1, 400, forms))
        elif row.type == "date":
            days = rng.integers(0, 3000, forms)
            cols[row.name] = (pd.Timestamp("2015-01-01") + pd.to_timedelta(days, "D")
                              ).strftime("%Y-%m-%d").to_numpy()
        elif row.type == "string":
            words = np.array(["fine", "ok", "more shade please", "", "Thanks"], dtype=object)
            cols[row.name] = words[rng.integers(0, len(words), forms)]
        elif str(row.name).startswith("age"):
            cols[row.name] = rng.integers(18, 90, forms).astype(str)
        else:
            cols[row.name] = rng.integers(1, 6, forms).astype(str)
    pass1 = pd.DataFrame(cols).astype(object)
    pass2 = pass1.copy()
    values = pass2.to_numpy(dtype=object).copy()
    n, m = values.shape
    slips = np.argwhere(rng.random((n, m - 1)) < 0.005) + [0, 1]
    for i, j in slips:  # building the input, not the thing measured
        v = str(values[i, j])
        kind = rng.integers(0, 4)
        if kind == 0 and len(v) >= 2:
            values[i, j] = v[1] + v[0] + v[2:]
        elif kind == 1:
            values[i, j] = ""
        elif kind == 2:
            values[i, j] = v + v[-1:]
        else:
            values[i, j] = "3" if v != "3" else "2"
    return pass1, pd.DataFrame(values, columns=pass1.columns)


def timed(cmd: list[str], tmp: Path) -> tuple[float, float, int]:
    """Wall seconds, peak RSS in MB of the command, exit status.

    The command runs under ``/usr/bin/time`` when it exists: a child forked
    straight from this (large) process would report this process's memory
    as its own peak, since the peak survives ``exec``.
    """
    report = tmp / "time.txt"
    wrapper = ["/usr/bin/time", "-o", str(report), "-f", "%M"] if Path("/usr/bin/time").exists() \
        else []
    start = time.perf_counter()
    pid = subprocess.Popen(wrapper + cmd, stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL).pid
    _, status, usage = os.wait4(pid, 0)
    wall = time.perf_counter() - start
    peak = usage.ru_maxrss / 1024
    if wrapper:
        lines = report.read_text().split()
        peak = int(lines[-1]) / 1024 if lines and lines[-1].isdigit() else float("nan")
    return wall, peak, os.waitstatus_to_exitcode(status)


def bench_files(tmp: Path, forms: int, fields: int, runs: int) -> None:
    codebook = make_codebook(fields)
    pass1, pass2 = make_passes(codebook, forms)
    cb, f1, f2 = tmp / "codebook.csv", tmp / "pass1.csv", tmp / "pass2.csv"
    codebook.to_csv(cb, index=False)
    pass1.to_csv(f1, index=False)
    pass2.to_csv(f2, index=False)
    plain = tmp / "plain.py"
    plain.write_text(PLAIN)
    keyproof = [sys.executable, "-m", "tui.cli", "compare", str(f1), str(f2),
                "--codebook", str(cb), "--out", str(tmp / "out.csv")]
    script = [sys.executable, str(plain), str(f1), str(f2), str(tmp / "plain_out.csv")]
    results = {"keyproof": [], "plain": []}
    for _ in range(runs):
        for name, cmd in (("keyproof", keyproof), ("plain", script)):
            wall, rss, code = timed(cmd, tmp)
            if name == "keyproof" and code not in (0, 1):
                sys.exit(f"keyproof compare failed with exit status {code}")
            if name == "plain" and code != 0:
                sys.exit(f"the plain script failed with exit status {code}")
            results[name].append((wall, rss))
    found = len(pd.read_csv(tmp / "out.csv", dtype=str, keep_default_na=False))
    print(f"{forms:,} forms x {fields} fields, {runs} runs each; keyproof found {found:,} rows")
    med = {k: (statistics.median(w for w, _ in v), max(r for _, r in v))
           for k, v in results.items()}
    for name, (wall, rss) in med.items():
        print(f"  {name:9s} median {wall:6.2f} s   peak memory {rss:7.1f} MB")
    print(f"  ratio keyproof / plain: time {med['keyproof'][0] / med['plain'][0]:.2f} "
          f"(target <= 0.50), memory {med['keyproof'][1] / med['plain'][1]:.2f} (target <= 1.00)")


def bench_study(tmp: Path, forms: int = 5000, fields: int = 300, runs: int = 3) -> None:
    from core.codebook_io import load_codebook
    from core.compare import compare_study
    from core.store import Study

    codebook = make_codebook(fields)
    path = tmp / "codebook300.csv"
    codebook.to_csv(path, index=False)
    pass1, pass2 = make_passes(codebook, forms, seed=11)
    study_path = tmp / "study.sqlite"
    with Study.create(study_path, load_codebook(path), "bench") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, "CD", pass2)
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        with Study.open(study_path, readonly=True) as study:
            table = compare_study(study)
        times.append(time.perf_counter() - start)
    print(f"study {forms:,} x {fields}: open + compare median {statistics.median(times):.2f} s "
          f"(target <= 2 s), {len(table):,} rows")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--forms", type=int, default=20_000)
    parser.add_argument("--fields", type=int, default=200)
    parser.add_argument("--runs", type=int, default=5)
    parser.add_argument("--no-study", action="store_true")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        bench_files(Path(tmp), args.forms, args.fields, args.runs)
        if not args.no_study:
            bench_study(Path(tmp))
    print(f"(this process peaked at {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB)")


if __name__ == "__main__":
    main()
