"""keyproof's core: codebook, values, store, comparison, decisions, export.

Importable and testable without a terminal; never imports Textual.
"""

from .codebook import Code, Codebook, Variable
from .errors import (
    CodebookError,
    CompareError,
    DecisionError,
    ExportError,
    ImportFileError,
    KeyproofError,
    StoreError,
    UsageError,
)

__all__ = [
    "Code",
    "Codebook",
    "CodebookError",
    "CompareError",
    "DecisionError",
    "ExportError",
    "ImportFileError",
    "KeyproofError",
    "StoreError",
    "UsageError",
    "Variable",
]
