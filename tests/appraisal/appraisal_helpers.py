"""Helpers for the appraisal tests: paths of the shipped rubric and editing a copy of it."""

from __future__ import annotations

from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
RUBRIC_FILE = REPO / "evidence" / "rubric.toml"
PACKAGED_FILE = REPO / "src" / "exposhift" / "data" / "rubric.toml"


def edited(text: str, old: str, new: str) -> str:
    """``text`` with the single occurrence of ``old`` replaced (fails if not exactly one)."""
    assert text.count(old) == 1, f"expected exactly one {old!r} in the rubric"
    return text.replace(old, new)


def line_of(text: str, marker: str) -> int:
    """1-based number of the only line containing ``marker``."""
    hits = [i for i, line in enumerate(text.splitlines(), start=1) if marker in line]
    assert len(hits) == 1, f"marker {marker!r} found on lines {hits}"
    return hits[0]


def write(tmp_path: Path, text: str, name: str = "rubric.toml") -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8"))
    return path
