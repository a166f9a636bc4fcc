"""Benchmark: ``keyproof compare`` on two keyed files against a plain pandas script.

Generates two keyed passes of 20,000 forms x 200 fields (Likert items, a few
integers with ranges, numbers with decimals, dates, free text) where pass 2
carries keying slips in about 0.5 % of fields, then times, in the same run and
alternating, ``keyproof compare FILE1 FILE2 --codebook CB --out OUT`` and a
plain hand-written pandas script (read both CSVs, align on the ID,
``DataFrame.compare``, write the differences). Prints the median wall time and
peak memory (max RSS of the child process) of each and their ratios.

Also times comparing a 5,000 x 300 double-keyed study from its file (open and
compare, inside the process, target 2 s), beside the plain script on the same
data as CSV files. Three more commands show the floors any comparison in
Python starts from: starting Python and importing pandas; that and reading
both files as text with pandas; and reading them with pyarrow's CSV reader
(what keyproof uses), one thread, as keyproof does.

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


READ_ONLY = """\
import sys
import pandas as pd
for path in sys.argv[1:3]:
    pd.read_csv(path, dtype=object, na_filter=False)
"""

READ_ARROW = """\
import sys
import pandas as pd
import pyarrow as pa
from pyarrow import csv
text = pa.dictionary(pa.int32(), pa.string())
for path in sys.argv[1:3]:
    names = open(path, encoding="utf-8").readline().rstrip("\\n").split(",")
    csv.read_csv(path, read_options=csv.ReadOptions(use_threads=False),
                 convert_options=csv.ConvertOptions(column_types=dict.fromkeys(names, text),
                                                    strings_can_be_null=False))
"""

STUDY = """\
import sys
import time
from core.compare import compare_study
from core.store import Study
start = time.perf_counter()
with Study.open(sys.argv[1], readonly=True) as study:
    table = compare_study(study)
print(time.perf_counter() - start, len(table))
"""


def _runs(commands: dict[str, list[str]], tmp: Path, runs: int) -> dict[str, list]:
    """Each command ``runs`` times, alternating, so load from others falls on all alike."""
    results: dict[str, list] = {name: [] for name in commands}
    for _ in range(runs):
        for name, cmd in commands.items():
            wall, rss, code = timed(cmd, tmp)
            if code not in (0, 1):
                sys.exit(f"{name} failed with exit status {code}")
            results[name].append((wall, rss))
    return results


def _print_medians(results: dict[str, list]) -> dict[str, tuple[float, float]]:
    med = {k: (statistics.median(w for w, _ in v), max(r for _, r in v))
           for k, v in results.items()}
    for name, (wall, rss) in med.items():
        print(f"  {name:22s} median {wall:6.2f} s   peak memory {rss:7.1f} MB")
    return med


def _write_files(tmp: Path, forms: int, fields: int, seed: int, tag: str):
    codebook = make_codebook(fields)
    pass1, pass2 = make_passes(codebook, forms, seed=seed)
    cb, f1, f2 = tmp / f"codebook{tag}.csv", tmp / f"pass1{tag}.csv", tmp / f"pass2{tag}.csv"
    codebook.to_csv(cb, index=False)
    pass1.to_csv(f1, index=False)
    pass2.to_csv(f2, index=False)
    return codebook, pass1, pass2, cb, f1, f2


def bench_files(tmp: Path, forms: int, fields: int, runs: int) -> None:
    _, _, _, cb, f1, f2 = _write_files(tmp, forms, fields, 7, "")
    (tmp / "plain.py").write_text(PLAIN)
    (tmp / "read_only.py").write_text(READ_ONLY)
    (tmp / "read_arrow.py").write_text(READ_ARROW)
    commands = {
        "keyproof compare": [sys.executable, "-m", "tui.cli", "compare", str(f1), str(f2),
                             "--codebook", str(cb), "--out", str(tmp / "out.csv")],
        "plain pandas script": [sys.executable, str(tmp / "plain.py"), str(f1), str(f2),
                                str(tmp / "plain_out.csv")],
        # The floors: starting Python and importing pandas; that and reading both files
        # as text with pandas, or with pyarrow into numbered texts.
        "start + import pandas": [sys.executable, "-c", "import pandas"],
        "read both files only": [sys.executable, str(tmp / "read_only.py"), str(f1), str(f2)],
        "read both with pyarrow": [sys.executable, str(tmp / "read_arrow.py"), str(f1), str(f2)],
    }
    results = _runs(commands, tmp, runs)
    found = len(pd.read_csv(tmp / "out.csv", dtype=str, keep_default_na=False))
    print(f"{forms:,} forms x {fields} fields, {runs} runs each; keyproof found {found:,} rows")
    med = _print_medians(results)
    kp, plain, start, floor, arrow = (med[k] for k in commands)
    print(f"  ratio keyproof / plain: time {kp[0] / plain[0]:.2f} (target <= 0.50), "
          f"memory {kp[1] / plain[1]:.2f} (target <= 1.00)")
    print(f"  floors / plain: start + import pandas {start[0] / plain[0]:.2f}, reading "
          f"with pandas {floor[0] / plain[0]:.2f}, with pyarrow {arrow[0] / plain[0]:.2f}")
    left = 0.5 * plain[0] - arrow[0]
    print(f"  at the target, after starting and reading with pyarrow, {left:.2f} s would be "
          "left for the typed comparison, causes and writing")


def bench_study(tmp: Path, forms: int = 5000, fields: int = 300, runs: int = 3) -> None:
    from core.codebook_io import load_codebook
    from core.store import Study

    _, pass1, pass2, cb, f1, f2 = _write_files(tmp, forms, fields, 11, "300")
    study_path = tmp / "study.sqlite"
    with Study.create(study_path, load_codebook(cb), "bench") as study:
        study.import_pass(1, "AB", pass1)
        study.import_pass(2, "CD", pass2)
    del pass1, pass2
    (tmp / "study.py").write_text(STUDY)
    root = str(Path(__file__).resolve().parent.parent)
    commands = {
        "keyproof study compare": [sys.executable, "-c",
                                   f"import sys; sys.path.insert(0, {root!r}); "
                                   f"sys.argv[1:] = [{str(study_path)!r}]; "
                                   f"exec(open({str(tmp / 'study.py')!r}).read())"],
        "plain pandas script": [sys.executable, str(tmp / "plain.py"), str(f1), str(f2),
                                str(tmp / "plain_out300.csv")],
    }
    inner = []
    for _ in range(runs):
        out = subprocess.run(commands["keyproof study compare"], capture_output=True, text=True,
                             check=True).stdout.split()
        inner.append(float(out[0]))
    results = _runs(commands, tmp, runs)
    print(f"study {forms:,} x {fields}, {runs} runs each; {int(out[1]):,} rows")
    med = _print_medians(results)
    print(f"  open + compare inside the process: median {statistics.median(inner):.2f} s "
          "(target <= 2 s)")
    kp, plain = med["keyproof study compare"], med["plain pandas script"]
    print(f"  ratio keyproof / plain on the same data as CSV: time {kp[0] / plain[0]:.2f}, "
          f"memory {kp[1] / plain[1]:.2f}")


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
