"""``keyproof report STUDY --out FILE.html|FILE.md``: the verification report.

The study is opened read-only; the page is written atomically. A report can
be written at any time: open work is counted in it, not refused.
"""

from __future__ import annotations

import argparse
from pathlib import Path


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file")
    parser.add_argument(
        "--out", required=True, metavar="FILE.html|FILE.md",
        help="where to write the report: .html (printable page) or .md (Markdown)",
    )


def run(args: argparse.Namespace) -> int:
    from core.atomic import atomic_text
    from core.errors import ExportError
    from core.report import build_report, render_html, render_markdown
    from core.store import Study

    out = Path(args.out)
    suffix = out.suffix.lower()
    if suffix not in (".html", ".htm", ".md"):
        raise ExportError(
            f"{out}: cannot write a report as {suffix or 'a file without a suffix'} — "
            "choose a .html or .md file."
        )
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():
        raise ExportError(
            f"{out}: the folder {folder} does not exist — create it or choose another --out."
        )
    if out.resolve() == Path(args.study).resolve():
        raise ExportError(f"{out}: this is the study file — choose another name for the report.")
    with Study.open(args.study, readonly=True) as study:
        report = build_report(study)
    page = render_markdown(report) if suffix == ".md" else render_html(report)
    try:
        atomic_text(out, page)
    except OSError as exc:
        raise ExportError(
            f"{out}: could not be written ({exc.strerror or exc}) — check the folder is "
            "writable, then try again."
        ) from exc
    open_n = report.status["open"] + report.status["stale"]
    print(f"wrote {out}: {report.paired} participants compared, "
          f"{sum(report.status.values())} discrepancies ({open_n} still open), "
          f"{len(report.set_aside)} set aside")
    return 0
