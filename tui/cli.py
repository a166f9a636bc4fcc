"""The ``keyproof`` command line: parse, dispatch, turn errors into exit status 2.

Exit status (DESIGN.md): 0 success and clean; 1 ran, but the answer is not
clean; 2 bad input or usage, with one sentence on stderr and no traceback.
Each command lives in ``tui/commands/<name>.py`` and is imported only when it
runs, so ``keyproof --help`` does not pay for pandas or Textual.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import sys

# name -> (module under tui.commands, one-line help). Order is the order shown.
COMMANDS: dict[str, tuple[str, str]] = {
    "demo": ("demo", "create the invented demo study, then open the app on it"),
    "init": ("init", "create a new study from a codebook (.csv, .xlsx, Table Schema .json)"),
    "codebook": ("codebook", "show a study's codebook, or update it from a file"),
    "home": ("home", "open the app's home screen on a study"),
    "key": ("key", "open the keying screen for one pass"),
    "import": ("import_", "bring in a pass keyed in a spreadsheet (.csv, .xlsx)"),
    "status": ("status", "progress of each pass and the work left open"),
    "compare": ("compare", "list the discrepancies of a study, or of two keyed files"),
    "resolve": ("resolve", "open the resolution screen"),
    "decide": ("decide", "apply decisions from a CSV or XLSX file"),
    "setaside": ("setaside", "set a participant aside (or back) with a reason"),
    "export": ("export", "write the verified file (.csv, .xlsx, or a Data Package folder)"),
    "report": ("report", "write the verification report (.html or .md)"),
    "screen": ("screen", "screening before analysis: scale scores, reliability, descriptives"),
    "audit": ("audit", "recompute the journal's hash chain and check the study against it"),
}


def package_version() -> str:
    # importlib.metadata costs a noticeable part of `keyproof --help`: load it only here.
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("keyproof")
    except PackageNotFoundError:  # running from a source tree that is not installed
        return "0+unknown"


class _VersionAction(argparse.Action):
    """--version, looked up only when asked for."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, **kwargs):
        super().__init__(option_strings, dest, nargs=0, help="show the version and exit")

    def __call__(self, parser, namespace, values, option_string=None):
        sys.stdout.write(f"keyproof {package_version()}\n")
        parser.exit()


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as one line and exit status 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"{self.prog}: {message}\n")
        sys.exit(2)


def _available() -> dict[str, tuple[str, str]]:
    found = {}
    for name, (module, text) in COMMANDS.items():
        if importlib.util.find_spec(f"tui.commands.{module}") is not None:
            found[name] = (module, text)
    return found


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="keyproof",
        description="Double entry of paper questionnaires: key twice, compare, "
        "resolve against the paper, export a verified file.",
    )
    parser.add_argument("--version", action=_VersionAction)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, (_module, text) in _available().items():
        sub.add_parser(name, help=text, description=text[0].upper() + text[1:] + ".", add_help=False)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status (also used by tests)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    if not argv:
        from .commands import home

        return home.run(None)
    if argv[0].startswith("-"):
        parser.parse_args(argv)  # --help / --version exit here
        parser.error(f"unknown option {argv[0]}")
    name = argv[0]
    commands = _available()
    if name not in commands:
        parser.error(f"unknown command {name!r}; see keyproof --help")
    module_name, text = commands[name]
    module = importlib.import_module(f"tui.commands.{module_name}")
    cmd = _Parser(prog=f"keyproof {name}", description=text[0].upper() + text[1:] + ".")
    module.configure(cmd)
    args = cmd.parse_args(argv[1:])
    from core.errors import KeyproofError

    try:
        return int(module.run(args) or 0)
    except KeyproofError as exc:
        sys.stderr.write(f"keyproof {name}: {exc}\n")
        return getattr(exc, "exit_status", 2)
    except KeyboardInterrupt:
        sys.stderr.write(f"keyproof {name}: interrupted.\n")
        return 130
    except BrokenPipeError:
        # Output piped into `head` or a pager that quit early: not an error of ours.
        # Point stdout at devnull so the interpreter's final flush stays quiet.
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


def entry() -> None:
    sys.exit(main())


if __name__ == "__main__":
    entry()
