"""``keyproof decide STUDY --keyer NAME --from FILE``: decisions from a CSV or XLSX.

All or nothing: every row is checked first; one bad row refuses the file
(exit 2, naming the file, row and column) and nothing is applied. Exit 0
when nothing is left open afterwards, 1 when discrepancies remain.
"""

from __future__ import annotations

import argparse
import sys


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    parser.add_argument("--keyer", required=True, metavar="NAME",
                        help="initials of the person who checked the paper")
    parser.add_argument("--from", dest="source", required=True, metavar="FILE",
                        help="decisions file (.csv or .xlsx) with the columns participant, "
                        "variable, value, reason; an empty value means blank on paper; a value "
                        "outside the rule needs a reason starting with 'paper says:'")


def run(args: argparse.Namespace) -> int:
    from core.resolution import (
        apply_decisions_file,
        counts_by_status,
        keyed_by_resolver,
        worklist,
    )
    from core.store import Study

    with Study.open(args.study) as study:
        before = len(study.decisions())
        applied = apply_decisions_file(study, args.source, args.keyer)
        decided = study.decisions().iloc[before:]["participant"].unique()
        own = keyed_by_resolver(study, args.keyer, decided)
        left = counts_by_status(worklist(study))
    if own:
        # Barchard, Freeman, Ochoa & Stephens (2020): errors left after double entry
        # come from making the passes agree instead of checking the paper.
        shown = ", ".join(own[:10]) + (", ..." if len(own) > 10 else "")
        sys.stderr.write(
            f"keyproof decide: {args.keyer.strip()} keyed a pass of {len(own)} of these "
            f"participants ({shown}); check each value against the paper, not against the "
            "other pass, or ask someone else to resolve them.\n"
        )
    waiting = left["open"] + left["stale"]
    print(f"{applied} decision{'s' if applied != 1 else ''} recorded; "
          f"{waiting} discrepanc{'y' if waiting == 1 else 'ies'} still open.")
    if waiting:
        # DESIGN.md: exit 1 means it ran, but work is left open.
        sys.stderr.write("keyproof decide: work is still open — see keyproof status.\n")
        return 1
    return 0
