"""``keyproof export STUDY --out FILE.csv|FILE.xlsx|DIR [--draft] [--identifying FILE]``.

Builds the verified table from the study (opened read-only) and writes it
with ``core.export``. While anything is open it refuses (exit 1, counts by
kind) and writes nothing, unless ``--draft``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file")
    parser.add_argument(
        "--out", required=True, metavar="FILE.csv|FILE.xlsx|DIR",
        help="where to write: a .csv or .xlsx file, or a folder for a Data Package",
    )
    parser.add_argument(
        "--draft", action="store_true",
        help="export even while discrepancies are open: open cells stay empty and are listed "
        "in a separate file; the name and metadata say DRAFT",
    )
    parser.add_argument(
        "--identifying", metavar="FILE",
        help="write identifying variables with the participant ID to this separate file "
        "(.csv or .xlsx), to be stored apart",
    )


class _ProgressLine:
    """One line on stderr, rewritten in place on a terminal; silent otherwise."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.live = bool(getattr(self.stream, "isatty", lambda: False)())
        self.shown = False

    def __call__(self, what: str, done: int, total: int) -> None:
        if not self.live or total < 1:
            return
        self.stream.write(f"\r{what}: {done:,} of {total:,}   ")
        self.stream.flush()
        self.shown = True

    def end(self) -> None:
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()
            self.shown = False


def run(args: argparse.Namespace) -> int:
    from core.errors import ExportError
    from core.export import export, target_of
    from core.resolution import verified_table
    from core.store import Study

    study_path = Path(args.study)
    _, target = target_of(args.out, bool(args.draft))
    for given in (target, Path(args.identifying) if args.identifying else None):
        if given is not None and given.resolve() == study_path.resolve():
            raise ExportError(
                f"{given}: this is the study file — choose another name for the export."
            )
    line = _ProgressLine()
    try:
        with Study.open(study_path, readonly=True) as study:
            verified = verified_table(
                study, draft=bool(args.draft),
                progress=lambda d, t: line("reading variables", d, t),
            )
        line.end()
        result = export(
            verified, args.out, identifying=args.identifying,
            progress=lambda d, t: line("writing rows", d, t),
        )
    finally:
        line.end()
    print(_summary(result, args.identifying))
    return 0


def _summary(result, identifying: str | None) -> str:
    lines = [
        f"wrote {result.path}: {result.rows} participant{'s' if result.rows != 1 else ''}, "
        f"{result.columns} variable{'s' if result.columns != 1 else ''}"
        + (f" + {len(result.computed)} computed scale score(s)" if result.computed else "")
        + (" (DRAFT)" if result.provenance and result.provenance.draft else "")
    ]
    if result.open_cells:
        lines.append(f"  {result.open_cells} open cell(s) left empty; listed beside it (*.open.csv)")
    lines.append(f"  {result.set_aside} participant(s) set aside, listed with their reasons")
    if result.left_out:
        names = ", ".join(result.left_out)
        where = f"written to {identifying}" if identifying else (
            "written nowhere (use --identifying FILE to keep them apart)"
        )
        lines.append(f"  identifying variables left out ({names}): {where}")
    if result.provenance:
        lines.append(f"  journal head {result.provenance.journal_head[:12]}")
    return "\n".join(lines)
