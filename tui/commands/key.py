"""``keyproof key STUDY --pass 1|2 --keyer NAME``: the keying screen for one pass."""

from __future__ import annotations

import argparse


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    parser.add_argument("--pass", dest="pass_no", type=int, choices=(1, 2), required=True,
                        help="which pass you are keying (1 or 2)")
    parser.add_argument("--keyer", required=True, help="your initials, recorded with every field")


def run(args: argparse.Namespace) -> int:
    from core.errors import UsageError

    keyer = (args.keyer or "").strip()
    if not keyer:
        raise UsageError("--keyer is empty — give your initials, e.g. --keyer AB.")
    from ..app import run_app

    return run_app(args.study, mode="key", pass_no=args.pass_no, keyer=keyer)
