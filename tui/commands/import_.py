"""``keyproof import STUDY --pass 1|2 --keyer NAME FILE``: a pass keyed in a spreadsheet.

Reads a CSV or XLSX file whose header holds the codebook's names and adds each
row as a form of the pass, all in one transaction. Prints one line saying
what came in, then anything the reader had to interpret (encoding, formulas,
merged cells, hidden rows). A bad file is refused with one located sentence
(exit 2) and the study is left as it was.
"""

from __future__ import annotations

import argparse


def configure(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study", metavar="STUDY", help="the study file (.sqlite)")
    parser.add_argument("file", metavar="FILE", help="the keyed pass (.csv or .xlsx)")
    parser.add_argument("--pass", dest="pass_no", type=int, choices=(1, 2), required=True,
                        help="which pass the file holds")
    parser.add_argument("--keyer", required=True, metavar="NAME",
                        help="initials of the person who keyed the file")
    parser.add_argument("--encoding", metavar="E", default=None,
                        help="the CSV file's text encoding (default: UTF-8, else cp1252 detected)")


def run(args: argparse.Namespace) -> int:
    from core.importer import import_file
    from core.store import Study

    with Study.open(args.study) as study:
        result = import_file(study, args.file, args.pass_no, args.keyer, encoding=args.encoding)
    print(result.summary())
    for note in result.notes:
        print(f"  note: {note}")
    return 0
