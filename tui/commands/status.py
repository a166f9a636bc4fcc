"""``keyproof status STUDY``: progress of each pass and the work left open.

Exit status: 0 when nothing is left to do (both passes keyed and finished,
every discrepancy settled); 1 when work is left open, as DESIGN.md says for
"ran, but the answer is not clean". ``--json`` prints the same as JSON.
Discrepancies are counted only once both passes have forms; ``--quick``
skips that count (it runs a whole comparison).
"""

from __future__ import annotations

import argparse
import json


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite); opened read-only")
    parser.add_argument("--json", action="store_true", help="print the status as JSON")
    parser.add_argument("--quick", action="store_true",
                        help="skip counting discrepancies (no comparison is run)")
    parser.epilog = "exit status: 0 nothing left to do, 1 work left open, 2 bad input"


def run(args: argparse.Namespace) -> int:
    from core.status import study_status
    from core.store import Study

    with Study.open(args.study, readonly=True) as study:
        status = study_status(study, discrepancies=not args.quick)
    if args.json:
        print(json.dumps(status.to_dict(), indent=2, ensure_ascii=False))
    else:
        for line in _lines(status):
            print(line)
    return 1 if status.open_work else 0


def _lines(status) -> list[str]:
    out = [f"{status.study}: {status.variables} variables"]
    for p in status.passes:
        share = f"{100 * p.fields_keyed / p.fields_expected:.0f} %" if p.fields_expected else "-"
        keyers = ", ".join(p.keyers) or "nobody yet"
        dropped = f", {p.dropped} dropped" if p.dropped else ""
        out.append(f"pass {p.pass_no}: {p.forms} forms, {p.finished} finished{dropped}; "
                   f"{p.fields_keyed:,} of {p.fields_expected:,} fields keyed ({share}); "
                   f"keyed by {keyers}")
    if status.discrepancies:
        d = status.discrepancies
        out.append(f"discrepancies: {d.get('open', 0)} open, {d.get('stale', 0)} reopened, "
                   f"{d.get('settled', 0)} settled")
    out.append(f"set aside: {status.set_aside} participants")
    todo = status.open_work
    out.append("open work: " + "; ".join(todo) if todo else "nothing left to do.")
    return out
