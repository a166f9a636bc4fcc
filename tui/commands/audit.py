"""``keyproof audit STUDY``: recompute the journal's hash chain and check the
stored values against it.

Exit 0 when the journal is intact, 1 when it is not (the message names the
first bad row). The study is opened read-only.
"""

from __future__ import annotations

import argparse


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite); opened read-only")


def run(args: argparse.Namespace) -> int:
    from core.store import Study

    with Study.open(args.study, readonly=True) as study:
        result = study.audit()
    print(result.message)
    return 0 if result.ok else 1
