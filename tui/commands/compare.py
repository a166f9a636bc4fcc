"""``keyproof compare``: the discrepancies of a study, or of two keyed files.

``keyproof compare STUDY [--out FILE]`` compares a study's two passes and
lists what is still open: a discrepancy settled by a decision is counted in
the summary but no longer listed (a stale one, whose pass changed after its
decision, is listed again);
``keyproof compare FILE1 FILE2 --codebook CB [--out FILE]`` two keyed files
without a study. The table goes to standard output (its first rows) or, with
``--out``, whole to a CSV or XLSX file; the summary goes to standard error.
Exit status: 0 nothing (left) to look at, 1 discrepancies open, 2 bad input.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

#: Above this many cells per pass the command says what it is doing on stderr.
LARGE = 200_000


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("inputs", nargs="+", metavar="FILE",
                        help="a study file, or two keyed files (.csv, .xlsx) of the same stack")
    parser.add_argument("--codebook", metavar="CB",
                        help="the codebook of the two keyed files (.csv, .xlsx, Table Schema .json)")
    parser.add_argument("--out", metavar="FILE",
                        help="write the whole discrepancy table to FILE (.csv or .xlsx)")
    parser.add_argument("--encoding", metavar="E",
                        help="text encoding of keyed CSV files (detected when left out)")
    parser.add_argument("--rows", type=int, default=40, metavar="N",
                        help="rows to print when there is no --out (default 40)")


def run(args: argparse.Namespace) -> int:
    from core.errors import UsageError

    out = Path(args.out) if args.out else None
    if out is not None and out.suffix.lower() not in (".csv", ".xlsx"):
        raise UsageError(f"--out {args.out}: write the table as .csv or .xlsx.")
    if len(args.inputs) == 1:
        if args.codebook:
            raise UsageError("--codebook is for two keyed files; a study has its own codebook.")
        table = _from_study(args.inputs[0])
    elif len(args.inputs) == 2:
        if not args.codebook:
            raise UsageError("two keyed files need their codebook: add --codebook CB.")
        table = _from_files(args.inputs[0], args.inputs[1], args.codebook, args.encoding)
    else:
        raise UsageError("give one study file, or two keyed files with --codebook CB.")

    from core.compare import COLUMNS, summarise

    found = table
    if "_status" in table:  # a study: decisions settle discrepancies
        table = table[table["_status"] != "settled"]
    public = table[list(COLUMNS)]
    if out is not None:
        _write(public, out)
    else:
        _print(public, max(args.rows, 0))
    for line in summarise(found).lines():
        sys.stderr.write(line + "\n")
    if found is not table:
        stale = int((table["_status"] == "stale").sum())
        sys.stderr.write(f"settled by decisions: {len(found) - len(table):,}; still open: "
                         f"{len(table):,}" + (f" ({stale:,} reopened)" if stale else "") + "\n")
    if out is not None:
        sys.stderr.write(f"wrote {len(public):,} rows to {out}\n")
    return 1 if len(table) else 0


def _progress_printer(label: str):
    """A progress callback that writes one updating line (only on a terminal)."""
    if not sys.stderr.isatty():
        return None

    def progress(done: int, total: int) -> None:
        end = "\n" if done >= total else ""
        sys.stderr.write(f"\rcomparing {label}: {100 * done // max(total, 1)}%{end}")
        sys.stderr.flush()

    return progress


def _say(text: str) -> None:
    sys.stderr.write(text + "\n")
    sys.stderr.flush()


def _from_study(path: str):
    from core.compare import compare_study
    from core.resolution import worklist
    from core.store import Study

    with Study.open(path, readonly=True) as study:
        forms = study.forms()
        large = len(forms) * len(study.codebook) > 2 * LARGE
        if large:
            _say(f"comparing {Path(path).name}: {len(forms):,} forms…")
        table = compare_study(study, _progress_printer(Path(path).name) if large else None)
        return worklist(study, table)


def _from_files(file1: str, file2: str, codebook_path: str, encoding: str | None):
    from core.codebook_io import load_codebook
    from core.compare import compare_passes
    from core.importer import read_pass_file

    codebook = load_codebook(codebook_path)
    large = Path(file1).exists() and Path(file1).stat().st_size > 4 * LARGE
    if large:
        _say(f"reading {Path(file1).name} and {Path(file2).name}…")
    notes: list[str] = []
    pass1 = read_pass_file(file1, codebook, 1, encoding, notes=notes)
    pass2 = read_pass_file(file2, codebook, 2, encoding, notes=notes)
    for note in notes:
        _say(note)
    large = large or pass1.forms * len(codebook) > LARGE
    progress = _progress_printer(f"{pass1.forms:,} and {pass2.forms:,} forms") if large else None
    return compare_passes(codebook, pass1, pass2, progress)


def _write(table, out: Path) -> None:
    from core.atomic import atomic_write

    if out.suffix.lower() == ".csv":
        atomic_write(out, lambda p: table.to_csv(p, index=False, encoding="utf-8"))
    else:
        atomic_write(out, lambda p: table.to_excel(p, index=False, sheet_name="discrepancies",
                                                   engine="openpyxl"))


def _print(table, rows: int) -> None:
    if len(table) == 0:
        return
    shown = table.head(rows).astype(str)
    widths = {"participant": 12, "variable": 14, "kind": 14, "pass1": 16, "pass2": 16,
              "cause": 13, "detail": 70}
    lines = ["  ".join(c.ljust(widths[c]) for c in table.columns).rstrip()]
    for row in shown.itertuples(index=False):
        lines.append("  ".join(_cut(v, widths[c]).ljust(widths[c])
                               for c, v in zip(table.columns, row, strict=True)).rstrip())
    if len(table) > rows:
        lines.append(f"… {len(table) - rows:,} more rows; write them all with --out FILE.csv")
    sys.stdout.write("\n".join(lines) + "\n")


def _cut(text: str, width: int) -> str:
    text = text.replace("\n", " ")
    return text if len(text) <= width else text[: width - 1] + "…"
