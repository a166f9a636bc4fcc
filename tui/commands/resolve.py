"""``keyproof resolve STUDY --keyer NAME``: the resolution screen."""

from __future__ import annotations

import argparse


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    parser.add_argument("--keyer", required=True,
                        help="your initials, recorded with every decision")


def run(args: argparse.Namespace) -> int:
    from core.errors import UsageError

    keyer = (args.keyer or "").strip()
    if not keyer:
        raise UsageError("--keyer is empty — give your initials, e.g. --keyer LM.")
    from ..app import run_app

    return run_app(args.study, mode="resolve", keyer=keyer)
