"""The README's quick start works as written, run for real in a copy of the repository.

Slow: it builds two fresh virtual environments' worth of installs from the
package index. The demo command runs with ``--no-open`` (no terminal here) and
the test command only collects the suite (running the whole suite inside the
suite would recurse).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def quick_start_commands(readme: str) -> list[str]:
    """The commands in the fenced bash blocks of the README's "## Quick start" section."""
    section = re.search(r"^## Quick start\n(.*?)(?=^## |\Z)", readme, re.S | re.M)
    assert section, 'README.md has no "## Quick start" section'
    blocks = re.findall(r"^```bash\n(.*?)^```", section.group(1), re.S | re.M)
    commands = []
    for block in blocks:
        lines = [ln.strip() for ln in block.replace("\\\n", " ").splitlines()]
        commands += [ln for ln in lines if ln and not ln.startswith("#")]
    return commands


def test_quick_start_has_exactly_two_commands():
    # Issue 2: a newcomer's quick start has exactly two commands, one for the
    # demo and one for the tests.
    commands = quick_start_commands((ROOT / "README.md").read_text(encoding="utf-8"))
    assert len(commands) == 2, commands
    assert "keyproof demo" in commands[0]
    assert "pytest" in commands[1]


def copy_of_repository(dest: Path) -> Path:
    """The tracked files only, as a fresh clone would have them."""
    files = subprocess.run(
        ["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True
    ).stdout.decode().split("\0")
    for name in filter(None, files):
        src = ROOT / name
        if src.is_file():  # a tracked file deleted in the working tree is skipped
            target = dest / name
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, target)
    return dest


@pytest.mark.slow
def test_quick_start_commands_run(tmp_path):
    demo, tests = quick_start_commands((ROOT / "README.md").read_text(encoding="utf-8"))
    repo = copy_of_repository(tmp_path / "repo")
    scratch = tmp_path / "scratch"
    scratch.mkdir()
    env = dict(os.environ, TMPDIR=str(scratch), PIP_QUIET="1",
               PIP_DISABLE_PIP_VERSION_CHECK="1")
    env.pop("VIRTUAL_ENV", None)

    def run(command: str) -> subprocess.CompletedProcess:
        return subprocess.run(["bash", "-c", command], cwd=repo, env=env, capture_output=True,
                              text=True, timeout=1800)

    done = run(demo + " --no-open")
    assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-2000:]
    created = list(scratch.glob("*/garden.sqlite"))
    assert len(created) == 1, done.stdout
    assert str(created[0]) in done.stdout  # it says where the study is

    done = run(tests + " --collect-only -q")
    assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-2000:]
    # pytest -q --collect-only prints "N tests collected"; with the project's own
    # addopts (-q twice) it prints one "tests/test_x.py: N" line per file instead.
    collected = re.search(r"\d+ tests? collected", done.stdout) or re.search(
        r"^tests/test_demo\.py: \d+$", done.stdout, re.M)
    assert collected, done.stdout[-2000:]
