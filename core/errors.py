"""The errors keyproof raises.

One root, :class:`KeyproofError`, and one subclass per area. Every message is
one sentence that quotes the thing at fault (file, row, column) and says what
to do. Foreign errors (sqlite3, pandas, openpyxl) are translated into these
where they enter ``core``; the command line prints the message and exits 2.
"""

from __future__ import annotations


class KeyproofError(Exception):
    """Root of every error keyproof reports to a person."""


class CodebookError(KeyproofError):
    """A codebook could not be read or breaks the rules.

    ``problems`` holds every problem found, one sentence each, so a user can
    fix them all in one go; ``str(error)`` is the first one (plus a count).
    """

    def __init__(self, problems: list[str] | str):
        if isinstance(problems, str):
            problems = [problems]
        self.problems: list[str] = list(problems)
        first = self.problems[0] if self.problems else "the codebook is not valid."
        more = len(self.problems) - 1
        text = first if more == 0 else f"{first} (and {more} more problem{'s' if more > 1 else ''})"
        super().__init__(text)


class StoreError(KeyproofError):
    """The study file could not be opened, read or written."""


class ImportFileError(KeyproofError):
    """A keyed file could not be imported; the study is unchanged."""


class CompareError(KeyproofError):
    """Two keyed files could not be compared."""


class DecisionError(KeyproofError):
    """A decision or set-aside could not be applied; nothing was applied."""


class ExportError(KeyproofError):
    """A verified file or report could not be written."""


class UsageError(KeyproofError):
    """The command line was used in a way it cannot be (bad option or value)."""


class OpenWorkError(KeyproofError):
    """Work is still open (e.g. discrepancies), so the answer is not clean.

    Unlike the other errors this is not bad input: the command line prints it
    and exits 1. ``counts`` maps what is open (a discrepancy kind) to a count.
    """

    exit_status = 1

    def __init__(self, message: str, counts: dict[str, int] | None = None):
        self.counts: dict[str, int] = dict(counts or {})
        super().__init__(message)
