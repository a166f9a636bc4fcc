"""``keyproof demo [DIR] [--no-open]``: the invented demo study, then the app on it.

Builds ``garden.sqlite`` (a garden co-operative's members' survey, keyed
twice with realistic slips) in DIR, or in a fresh temporary folder, and
prints where it is. Without ``--no-open`` the app opens on it.
"""

from __future__ import annotations

import argparse


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("folder", metavar="DIR", nargs="?", default=None,
                        help="folder for the demo study (default: a new temporary folder)")
    parser.add_argument("--no-open", action="store_true",
                        help="only create the study; do not open the app")


def run(args: argparse.Namespace) -> int:
    import tempfile

    from core.demo import make_demo_study

    folder = args.folder or tempfile.mkdtemp(prefix="keyproof-demo-")
    path = make_demo_study(folder)
    print(f"Demo study created: {path}")
    if args.no_open:
        return 0
    from tui.app import run_app

    return int(run_app(path) or 0)
