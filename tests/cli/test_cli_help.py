"""``--help`` of every command, and what ``exposhift --help`` loads.

Every command (found by walking the click command tree, so a new command is swept too) has
help without typer's ``<bool>``/``<str>`` type labels or ``{file}`` braces, with an example
line, and with no sentence broken by a line break of the source file. ``--help`` and
``--version`` run in a fresh interpreter and must not import pandas, scipy, SQLAlchemy or
Alembic (the services are imported inside each command).
"""

from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest
import typer.main
from typer.testing import CliRunner

from exposhift.cli.main import app

runner = CliRunner()
HEAVY = ("pandas", "scipy", "sqlalchemy", "alembic", "sqlmodel", "statsmodels", "numpy")


def _paths(command, prefix=()) -> list[tuple[str, ...]]:
    out = [prefix]
    for name, sub in sorted(getattr(command, "commands", {}).items()):
        out += _paths(sub, (*prefix, name))
    return out


COMMANDS = _paths(typer.main.get_command(app))


def test_the_sweep_finds_every_command():
    names = {" ".join(p) for p in COMMANDS}
    for expected in (
        "import",
        "export",
        "demo",
        "list",
        "show",
        "pool",
        "replication",
        "gaps",
        "agreement",
        "init",
        "info",
        "dashboard",
        "appraise import",
        "appraise show",
        "events import",
    ):
        assert expected in names


@pytest.mark.parametrize("path", COMMANDS, ids=lambda p: " ".join(p) or "exposhift")
def test_help_reads_plainly(path):
    result = runner.invoke(app, [*path, "--help"], env={"COLUMNS": "1000"})
    assert result.exit_code == 0, result.output
    text = result.stdout
    assert "<bool>" not in text and "<str>" not in text and "<path>" not in text
    assert not re.search(r"\{\w+\}", text), "arguments are shown as FILE, not {file}"
    assert "Example: exposhift" in text
    # a 1000-column terminal: a paragraph of help is one line unless the terminal wraps it, so
    # a description line inside the box never ends in the middle of a sentence
    for line in text.splitlines():
        body = line.strip(" │╭╮╰╯─")
        if body and not body.startswith(("-", "*", "Usage", "Example")) and "  " not in body:
            assert body.endswith((".", ":", ")", "?", "]")) or len(body) < 40, line


def test_pool_help_lists_every_stratum():
    from exposhift.services.pooling import STRATA

    text = runner.invoke(app, ["pool", "--help"], env={"COLUMNS": "1000"}).stdout
    for key in STRATA:
        assert key in text


@pytest.mark.parametrize(
    "args", [["--help"], ["--version"], ["import", "--help"], ["pool", "--help"]]
)
def test_help_and_version_import_no_heavy_library(args):
    code = (
        "import json, sys\n"
        "from exposhift.cli.main import app\n"
        "try:\n"
        f"    app({args!r})\n"
        "except SystemExit:\n"
        "    pass\n"
        f"sys.stderr.write(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(proc.stderr.strip().splitlines()[-1]) == []


def test_pool_rho_default_is_the_library_default():
    from exposhift.cli.synthesis_cmds import _DEFAULT_RHO
    from exposhift.synthesis.events import DEFAULT_RHO

    assert _DEFAULT_RHO == DEFAULT_RHO


def _modules_after(code: str, cwd=None) -> list[str]:
    proc = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=cwd
    )
    return json.loads(proc.stderr.strip().splitlines()[-1])


def test_no_command_help_imports_a_heavy_library():
    # every command's --help in one process: none of them may pull in the heavy libraries
    code = (
        "import json, sys\n"
        "from exposhift.cli.main import app\n"
        f"for path in {[list(p) for p in COMMANDS]!r}:\n"
        "    try:\n"
        "        app([*path, '--help'])\n"
        "    except SystemExit:\n"
        "        pass\n"
        f"sys.stderr.write(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))\n"
    )
    assert _modules_after(code) == []


def test_info_imports_no_computation_library(tmp_path):
    # info opens the evidence base (SQLAlchemy, Alembic for the revision) and computes nothing
    runner.invoke(app, ["--db", str(tmp_path / "e.db"), "init"])
    code = (
        "import json, sys\n"
        "from exposhift.cli.main import app\n"
        "try:\n"
        f"    app(['--db', {str(tmp_path / 'e.db')!r}, 'info', '--json'])\n"
        "except SystemExit:\n"
        "    pass\n"
        "heavy = ('pandas', 'scipy', 'numpy', 'statsmodels', 'plotly', 'openpyxl')\n"
        "sys.stderr.write(json.dumps([m for m in heavy if m in sys.modules]))\n"
    )
    assert _modules_after(code) == []
