"""``keyproof codebook STUDY``: show the study's codebook; ``--update FILE``
shows what a new codebook changes and applies it; ``--schema OUT.json``
writes it as a Frictionless Table Schema.

An update may edit labels, ranges and codes and add variables. Dropping or
renaming a variable that holds keyed data is refused unless ``--force``; with
it, the values stay in the study, outside the codebook. ``--dry-run`` shows
the changes without applying them.
"""

from __future__ import annotations

import argparse
import getpass
import sys


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    group = parser.add_mutually_exclusive_group()
    group.add_argument("--update", metavar="FILE", help="a new codebook (.csv, .xlsx, .json) to apply")
    group.add_argument("--schema", metavar="OUT", help="write the codebook as Table Schema JSON to OUT")
    parser.add_argument("--force", action="store_true",
                        help="with --update: allow dropping or renaming variables that hold keyed data")
    parser.add_argument("--dry-run", action="store_true", help="with --update: show the changes only")
    parser.add_argument("--keyer", metavar="NAME", default=None,
                        help="initials recorded in the journal for an update (default: your login name)")


def run(args: argparse.Namespace) -> int:
    from core.errors import UsageError
    from core.store import Study

    if (args.force or args.dry_run) and not args.update:
        raise UsageError("--force and --dry-run go with --update FILE — add the new codebook file.")
    if args.update:
        return _update(args)
    with Study.open(args.study, readonly=True) as study:
        codebook = study.codebook
    if args.schema:
        from core.codebook_io import write_table_schema

        out = write_table_schema(codebook, args.schema)
        print(f"wrote {out}: Table Schema of {len(codebook)} variables.")
        return 0
    for line in _table(codebook):
        print(line)
    return 0


def _update(args: argparse.Namespace) -> int:
    from core.codebook_diff import diff_codebooks
    from core.codebook_io import load_codebook
    from core.errors import CodebookError
    from core.store import Study

    try:
        new = load_codebook(args.update)
    except CodebookError as exc:
        if len(exc.problems) > 1:  # all of them, so they can be fixed in one go
            for problem in exc.problems:
                sys.stderr.write(f"  {problem}\n")
        raise
    with Study.open(args.study, readonly=args.dry_run) as study:
        if args.dry_run:
            diff = diff_codebooks(study.codebook, new)
        else:
            diff = study.update_codebook(new, args.keyer or _login(), force=args.force)
    for line in diff.lines():
        print(f"  {line}")
    if diff.empty:
        print("the codebook is unchanged.")
    else:
        print("not applied (dry run)." if args.dry_run else f"applied to {args.study}.")
    return 0


def _table(codebook) -> list[str]:
    from core.values import allowed_text

    rows = [("name", "type", "allows", "flags", "label")]
    for v in codebook:
        flags = [f for f, on in (("id", v.is_id), ("required", v.required),
                                 ("identifying", v.identifying), ("reverse", v.reverse)) if on]
        if v.scale:
            flags.append(f"scale {v.scale}")
        if v.applies_if:
            flags.append(f"if {v.applies_if}")
        rows.append((v.name, v.type, allowed_text(v), ", ".join(flags), v.label))
    widths = [min(40, max(len(r[i]) for r in rows)) for i in range(4)]
    return ["  ".join(c.ljust(w) for c, w in zip(r[:4], widths, strict=True)) + "  " + r[4]
            for r in rows]


def _login() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "unknown"
