"""keyproof's core: codebook, values, store, comparison, decisions, export.

Importable and testable without a terminal; never imports Textual. This is
the public face: callers use the names below; everything else is a helper.
"""

from .codebook import Code, Codebook, Variable
from .codebook_io import CodebookDiff, diff_codebooks, load_codebook
from .compare import Summary, compare_passes, compare_study, summarise
from .conditions import Condition, parse_condition
from .demo import make_demo_study
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
from .export import ExportResult  # not `export`: it would hide the core.export module
from .importer import ImportResult, import_file, read_keyed_file, read_pass_file
from .journal import AuditResult
from .passdata import PassData
from .report import Report, build_report
from .resolution import apply_decisions_file, verified_table, worklist
from .screening import Screening, screen
from .store import FormRecord, Study
from .verified import Verified

__all__ = [
    "AuditResult",
    "Code",
    "Codebook",
    "CodebookDiff",
    "CodebookError",
    "CompareError",
    "Condition",
    "DecisionError",
    "ExportError",
    "ExportResult",
    "FormRecord",
    "ImportFileError",
    "ImportResult",
    "KeyproofError",
    "OpenWorkError",
    "PassData",
    "Report",
    "Screening",
    "StoreError",
    "Study",
    "Summary",
    "UsageError",
    "Variable",
    "Verified",
    "apply_decisions_file",
    "build_report",
    "compare_passes",
    "compare_study",
    "diff_codebooks",
    "import_file",
    "load_codebook",
    "make_demo_study",
    "parse_condition",
    "read_keyed_file",
    "read_pass_file",
    "screen",
    "summarise",
    "verified_table",
    "worklist",
]
