"""docs/extraction-sheet.md stays in step with the code, and its example sheet imports cleanly."""

from __future__ import annotations

import re
from pathlib import Path

from exposhift.io.columns import COLUMNS
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into, read_input
from exposhift.vocab import CHANGE_KINDS, DESIGNS

DOCS = Path(__file__).resolve().parents[2] / "docs"


def test_every_column_is_documented_as_in_the_code():
    text = (DOCS / "extraction-sheet.md").read_text(encoding="utf-8")
    table = re.findall(r"^\| `(\w+)` \| (\w+) \| ?(yes)? ?\|", text, flags=re.M)
    assert [(name, entity, req == "yes") for name, entity, req in table] == [
        (c.name, c.entity, c.required) for c in COLUMNS
    ]
    for code in (*DESIGNS, *CHANGE_KINDS):
        assert f"`{code}`" in text


def test_example_sheet_imports_and_round_trips(sqlite_store, tmp_path):
    example = DOCS / "example-sheet.csv"
    _, frames = read_input(example)
    assert frames.studies["demo"].all()  # invented records, flagged demo
    report = import_into(sqlite_store, example)
    assert report.counts["estimates"].added == 4
    export_store(sqlite_store, tmp_path / "out.csv")
    assert (tmp_path / "out.csv").read_text(encoding="utf-8").splitlines()[0] == example.read_text(
        encoding="utf-8"
    ).splitlines()[0]
