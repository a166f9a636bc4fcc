"""``keyproof setaside STUDY``: keep a participant out of the analysis file, or back.

``--participant ID --reason TEXT --keyer NAME [--rule NAME]`` sets aside;
``--undo`` brings the participant back (a new journal entry, never a
deletion); ``--list`` shows who is set aside now and why.
"""

from __future__ import annotations

import argparse


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    parser.add_argument("--participant", metavar="ID", help="the participant's ID")
    parser.add_argument("--reason", metavar="TEXT", help="why (recorded in the journal and report)")
    parser.add_argument("--keyer", metavar="NAME", help="your initials")
    parser.add_argument("--rule", default="", metavar="NAME",
                        help="optional name of the rule applied, so it is applied consistently")
    parser.add_argument("--undo", action="store_true", help="bring the participant back")
    parser.add_argument("--list", action="store_true", help="list the participants set aside now")


def run(args: argparse.Namespace) -> int:
    from core.errors import UsageError
    from core.resolution import restore, set_aside, set_aside_list
    from core.store import Study

    if args.list:
        with Study.open(args.study, readonly=True) as study:
            table = set_aside_list(study)
        if table.empty:
            print("No participant is set aside.")
            return 0
        for row in table.itertuples(index=False):
            rule = f" [rule: {row.rule}]" if str(row.rule or "").strip() else ""
            print(f"{row.participant}\t{row.reason}{rule}\t({row.keyer}, {row.at})")
        print(f"{len(table)} participant{'s' if len(table) != 1 else ''} set aside.")
        return 0
    for option in ("participant", "reason", "keyer"):
        if not str(getattr(args, option) or "").strip():
            raise UsageError(f"--{option} is missing — give --participant ID --reason TEXT "
                             "--keyer NAME (or --list).")
    with Study.open(args.study) as study:
        if args.undo:
            restore(study, args.participant, args.reason, args.keyer)
            print(f"Participant {args.participant} is back in the analysis file.")
        else:
            set_aside(study, args.participant, args.reason, args.keyer, rule=args.rule)
            print(f"Participant {args.participant} is set aside: {args.reason}.")
    return 0
