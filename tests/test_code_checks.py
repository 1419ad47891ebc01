"""The code checks of CI, run by the suite (so the README's test command runs them): ruff's
lint rules and formatter over src, app, tests, benchmarks and scripts, and mypy on the library
(configured in pyproject.toml, with the baseline of error codes listed there)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
BIN = Path(sys.executable).parent
TREES = ["src", "app", "tests", "benchmarks", "scripts"]


def _run(*cmd: str) -> subprocess.CompletedProcess:
    tool = BIN / cmd[0]
    assert tool.is_file(), f"{tool} is missing; install the test extra (pip install -e '.[test]')"
    return subprocess.run(
        [str(tool), *cmd[1:]], cwd=ROOT, capture_output=True, text=True, check=False
    )


def test_ruff_check_passes():
    out = _run("ruff", "check", *TREES)
    assert out.returncode == 0, out.stdout + out.stderr


def test_ruff_format_leaves_everything_as_it_is():
    out = _run("ruff", "format", "--check", *TREES)
    assert out.returncode == 0, out.stdout + out.stderr


def test_mypy_passes_on_the_library():
    out = _run("mypy")  # files and options: [tool.mypy] in pyproject.toml
    assert out.returncode == 0, out.stdout + out.stderr
