"""``keyproof init STUDY --codebook FILE``: a new study from a codebook.

Reads and checks the codebook (CSV, XLSX or Table Schema JSON); every problem
is listed at once, the first on the error line (exit 2). Refuses to touch an
existing STUDY, so a study can never be overwritten by accident.
"""

from __future__ import annotations

import argparse
import getpass
import sys


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file to create (e.g. study.sqlite); must not exist yet")
    parser.add_argument("--codebook", required=True, metavar="FILE",
                        help="the codebook: .csv, .xlsx (sheet 'codebook', else the first) or Table Schema .json")
    parser.add_argument("--keyer", metavar="NAME", default=None,
                        help="initials recorded in the journal as the study's creator (default: your login name)")


def run(args: argparse.Namespace) -> int:
    from core.codebook_io import load_codebook
    from core.errors import CodebookError
    from core.store import Study

    try:
        codebook = load_codebook(args.codebook)
    except CodebookError as exc:
        if len(exc.problems) > 1:
            for problem in exc.problems:
                sys.stderr.write(f"  {problem}\n")
        raise
    who = args.keyer or _login()
    with Study.create(args.study, codebook, who) as study:
        id_name = study.codebook.id_variable.name
    identifying = len(codebook.identifying_names)
    print(f"created {args.study}: {len(codebook)} variables, participant ID {id_name!r}, "
          f"{identifying} identifying.")
    print(f"next: keyproof key {args.study} --pass 1 --keyer NAME  "
          f"(or keyproof import {args.study} --pass 1 --keyer NAME FILE)")
    return 0


def _login() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):  # no login name in some containers
        return "unknown"
