"""The layers as DEVELOPERS.md states them hold in the source (import scan), and the scan
catches a planted violation of each rule."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))
from layer_rules import check_tree  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def test_the_source_keeps_its_layers():
    problems = check_tree(ROOT)
    assert not problems, "\n".join(map(str, problems))


def _tree(tmp_path: Path, rel: str, text: str) -> Path:
    for folder in ("src/exposhift/store", "src/exposhift/synthesis", "app"):
        (tmp_path / folder).mkdir(parents=True, exist_ok=True)
    (tmp_path / "src/exposhift/store/ok.py").write_text("import sqlalchemy\n")
    (tmp_path / "app/page.py").write_text("import streamlit as st\n")
    path = tmp_path / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return tmp_path


@pytest.mark.parametrize(
    ("rel", "text", "rule"),
    [
        ("src/exposhift/services/x.py", "def f():\n    import sqlite3\n", "database"),
        ("src/exposhift/cli/x.py", "from sqlmodel import Session\n", "database"),
        ("src/exposhift/services/x.py", "from alembic import command\n", "database"),
        ("src/exposhift/services/x.py", "import streamlit\n", "streamlit"),
        ("src/exposhift/synthesis/x.py", "from exposhift.store import queries\n", "pure"),
        ("src/exposhift/io/x.py", "import exposhift.services.pooling\n", "pure"),
        ("src/exposhift/series/x.py", "def g():\n    from exposhift.cli.common import a\n", "pure"),
    ],
)
def test_a_planted_violation_is_caught(tmp_path, rel, text, rule):
    root = _tree(tmp_path, rel, text)
    problems = check_tree(root)
    assert len(problems) == 1, problems
    assert problems[0].file == rel
    assert rule in problems[0].rule


def test_allowed_imports_are_not_flagged(tmp_path):
    root = _tree(
        tmp_path, "src/exposhift/synthesis/x.py", "import numpy\nfrom exposhift import vocab\n"
    )
    assert check_tree(root) == []
