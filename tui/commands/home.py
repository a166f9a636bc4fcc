"""``keyproof home STUDY`` (and ``keyproof`` with no command): the app's home screen.

With no study named there is nothing to show, and guessing one from the
current folder could open the wrong study, so ``keyproof`` alone prints how
to start (try the demo, or open a study by name) and exits 2.
"""

from __future__ import annotations

import argparse
import sys

HINT = (
    "keyproof: no study given — try the invented demo with `keyproof demo`, "
    "open a study with `keyproof home STUDY`, or see `keyproof --help`.\n"
)


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")


def run(args: argparse.Namespace | None) -> int:
    if args is None or not getattr(args, "study", None):
        sys.stderr.write(HINT)
        return 2
    from ..app import run_app

    return run_app(args.study, mode="home")
