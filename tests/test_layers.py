"""The house's shape: core never imports the terminal front end."""

import pkgutil
import subprocess
import sys
from pathlib import Path

import core

ROOT = Path(__file__).resolve().parents[1]


def test_core_never_imports_textual():
    modules = [f"core.{m.name}" for m in pkgutil.iter_modules(core.__path__)]
    assert modules, "core has no modules"
    code = (
        "import importlib, sys\n"
        f"for name in {modules!r}:\n"
        "    importlib.import_module(name)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('textual', 'rich', 'tui'))\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == ""
