"""keyproof's core: codebook, values, store, comparison, decisions, export.

Importable and testable without a terminal; never imports Textual. This is
the public face: callers use the names below; everything else is a helper.
Names other than the errors load on first use (PEP 562), so a command that
needs one module does not pay for importing all of them.
"""

from __future__ import annotations

import importlib

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

# public name -> the module under core that defines it. Not `export` itself:
# that name would hide the core.export module.
_LAZY = {
    "AuditResult": "journal",
    "Code": "codebook",
    "Codebook": "codebook",
    "CodebookDiff": "codebook_io",
    "Condition": "conditions",
    "ExportResult": "export",
    "FormRecord": "store",
    "ImportResult": "importer",
    "PassData": "passdata",
    "Report": "report",
    "Screening": "screening",
    "Study": "store",
    "Summary": "compare",
    "Variable": "codebook",
    "Verified": "verified",
    "apply_decisions_file": "resolution",
    "build_report": "report",
    "compare_passes": "compare",
    "compare_study": "compare",
    "diff_codebooks": "codebook_io",
    "import_file": "importer",
    "load_codebook": "codebook_io",
    "make_demo_study": "demo",
    "parse_condition": "conditions",
    "read_keyed_file": "importer",
    "read_pass_file": "importer",
    "screen": "screening",
    "summarise": "compare",
    "verified_table": "resolution",
    "worklist": "resolution",
}


def __getattr__(name: str):
    if name in _LAZY:
        value = getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
        globals()[name] = value  # later lookups no longer come here
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


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
