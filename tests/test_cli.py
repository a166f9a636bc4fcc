"""The command line's own contract: every command listed, --help, --version, exit 2 on misuse."""

from __future__ import annotations

import subprocess
import sys
from importlib.metadata import version

import pytest

from tui.cli import COMMANDS, main

# DESIGN.md's command-line contract: these names are stable; outside checks rely on them.
CONTRACT = ["demo", "init", "key", "import", "status", "compare", "resolve", "decide",
            "setaside", "export", "report", "screen", "audit"]


def test_every_contract_command_exists_and_is_listed(capsys):
    with pytest.raises(SystemExit) as done:
        main(["--help"])
    assert done.value.code == 0
    listed = capsys.readouterr().out
    for name in CONTRACT:
        assert name in COMMANDS
        assert f"    {name} " in listed or f"    {name}\n" in listed, name


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_every_command_answers_help(name, capsys):
    with pytest.raises(SystemExit) as done:
        main([name, "--help"])
    assert done.value.code == 0
    assert f"keyproof {name}" in capsys.readouterr().out


def test_version_is_the_installed_distribution(capsys):
    # importlib.metadata (standard library) is the outside record of what is installed.
    with pytest.raises(SystemExit) as done:
        main(["--version"])
    assert done.value.code == 0
    assert capsys.readouterr().out.strip() == f"keyproof {version('keyproof')}"


def test_unknown_command_and_option_exit_2_with_one_line(capsys):
    assert_exit_2 = []
    for argv in (["no-such-command"], ["--no-such-option"], ["status"]):
        with pytest.raises(SystemExit) as done:
            main(argv)
        assert_exit_2.append(done.value.code)
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "Traceback" not in err, err
    assert assert_exit_2 == [2, 2, 2]


def test_help_loads_neither_pandas_nor_textual():
    # `keyproof --help` must answer at once: the heavy libraries load only in run().
    code = ("import sys, contextlib, io\n"
            "from tui.cli import main\n"
            "with contextlib.suppress(SystemExit), contextlib.redirect_stdout(io.StringIO()):\n"
            "    main(['--help'])\n"
            "print(sorted(m for m in ('pandas', 'textual', 'numpy') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == "[]"
