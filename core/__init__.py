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
    OpenWorkError,
    StoreError,
    UsageError,
)
from .passdata import PassData

__all__ = [
    "Code",
    "Codebook",
    "CodebookError",
    "CompareError",
    "DecisionError",
    "ExportError",
    "ImportFileError",
    "KeyproofError",
    "OpenWorkError",
    "PassData",
    "StoreError",
    "UsageError",
    "Variable",
]
