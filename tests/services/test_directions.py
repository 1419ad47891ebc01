"""Expected directions on SQLite and PostgreSQL: set, change, clear and list, each audited and
version-checked; bad values refused with nothing written; directions sheets and archives.

Outside references: decided_at values are checked against Python's ``datetime`` (ISO 8601
parsing and UTC conversion); sheets are written with the ``csv`` module and archives parsed with
``json``.
"""

from __future__ import annotations

import csv
import json
import sys
from datetime import UTC, datetime
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "io"))
from io_helpers import row, table_dump, write_sheet  # noqa: E402

from exposhift.errors import ConfigError, ConflictError, InputFileError, NotFoundError  # noqa: E402
from exposhift.services.directions import (  # noqa: E402
    clear_direction,
    import_directions,
    list_directions,
    set_direction,
)
from exposhift.services.exporting import export_store  # noqa: E402
from exposhift.services.importing import import_into  # noqa: E402
from exposhift.services.setup import init_database, open_current  # noqa: E402
from exposhift.store.writer import audit_rows  # noqa: E402

WHY = "invented test rationale"


@pytest.fixture
def base(store, tmp_path):
    """An evidence base with exposure agent-x and outcomes wheeze and asthma."""
    import_into(store, write_sheet(tmp_path / "s.csv", [row(), row(outcome="asthma")]))
    return store


def _directions_file(tmp_path, rows, name="d.csv", columns=None):
    columns = columns or [
        "exposure",
        "outcome",
        "direction",
        "rationale",
        "decided_by",
        "decided_at",
    ]
    path = tmp_path / name
    with open(path, "w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(columns)
        w.writerows(rows)
    return path


def test_set_change_clear_are_versioned_and_audited(base):
    first = set_direction(
        base,
        "agent-x",
        "wheeze",
        "Raises ",
        f"  {WHY} ",
        decided_by="panel",
        decided_at="2026-01-15",
    )
    assert (first.action, first.version) == ("added", 1)
    assert first.record == {
        "direction": "raises",
        "rationale": WHY,
        "decided_by": "panel",
        "decided_at": "2026-01-15T00:00:00Z",
    }
    again = set_direction(
        base,
        "agent-x",
        "wheeze",
        "raises",
        WHY,
        decided_by="panel",
        decided_at="2026-01-15T00:00:00Z",
    )
    assert (again.action, again.version) == ("unchanged", 1)
    second = set_direction(
        base,
        "agent-x",
        "wheeze",
        "lowers",
        "new reading",
        decided_by="panel",
        decided_at="2026-02-01T10:00:00+01:00",
        expected_version=1,
    )
    assert (second.action, second.version) == ("updated", 2)
    frame = list_directions(base)
    assert list(frame.columns) == [
        "exposure",
        "outcome",
        "direction",
        "rationale",
        "decided_by",
        "decided_at",
        "version",
    ]
    assert frame.to_dict("records") == [
        {
            "exposure": "agent-x",
            "outcome": "wheeze",
            "direction": "lowers",
            "rationale": "new reading",
            "decided_by": "panel",
            "decided_at": "2026-02-01T09:00:00Z",
            "version": 2,
        }
    ]
    cleared = clear_direction(base, "agent-x", "wheeze", expected_version=2)
    assert (cleared.action, cleared.version) == ("cleared", 2)
    assert list_directions(base).empty
    with base.read() as conn:
        entries = audit_rows(conn, table_name="expected_direction")
    assert [(e["row_key"], e["action"], e["user"]) for e in entries] == [
        ("agent-x|wheeze", "insert", "tester"),
        ("agent-x|wheeze", "update", "tester"),
        ("agent-x|wheeze", "delete", "tester"),
    ]
    assert entries[0]["after"]["direction"] == "raises" and entries[0]["after"]["version"] == 1
    assert entries[1]["before"] == {
        "direction": "raises",
        "rationale": WHY,
        "decided_at": "2026-01-15T00:00:00Z",
        "version": 1,
    }
    assert entries[1]["after"] == {
        "direction": "lowers",
        "rationale": "new reading",
        "decided_at": "2026-02-01T09:00:00Z",
        "version": 2,
    }
    assert entries[2]["before"]["direction"] == "lowers" and entries[2]["after"] is None


def test_default_author_and_time(base):
    before = datetime.now(UTC)
    result = set_direction(base, "agent-x", "asthma", "raises", WHY)
    after = datetime.now(UTC)
    assert result.record["decided_by"] == "tester"
    at = result.record["decided_at"]
    assert at.endswith("Z")
    # reference: datetime.fromisoformat (Python 3.11 reads the Z suffix)
    assert before.replace(microsecond=0) <= datetime.fromisoformat(at) <= after


def test_stale_edits_conflict_and_change_nothing(base):
    set_direction(base, "agent-x", "wheeze", "raises", WHY)
    set_direction(base, "agent-x", "wheeze", "lowers", WHY, expected_version=1)  # now v2
    before = table_dump(base)
    with pytest.raises(ConflictError, match="version 1, it is now at version 2"):
        set_direction(base, "agent-x", "wheeze", "raises", "stale", expected_version=1)
    with pytest.raises(ConflictError, match="version 1, it is now at version 2"):
        clear_direction(base, "agent-x", "wheeze", expected_version=1)
    assert table_dump(base) == before
    clear_direction(base, "agent-x", "wheeze")
    before = table_dump(base)
    with pytest.raises(ConflictError, match="no longer exists"):
        set_direction(base, "agent-x", "wheeze", "raises", WHY, expected_version=2)
    with pytest.raises(ConflictError, match="cleared by someone else"):
        clear_direction(base, "agent-x", "wheeze", expected_version=2)
    assert table_dump(base) == before


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"exposure": "agent-z"}, NotFoundError, "no exposure 'agent-z'.*did you mean 'agent-x'"),
        ({"outcome": "wheezing"}, NotFoundError, "no outcome 'wheezing'.*did you mean 'wheeze'"),
        ({"direction": "up"}, ConfigError, "'up' is not one of raises, lowers"),
        ({"direction": ""}, ConfigError, "is not one of raises, lowers"),
        ({"rationale": "   "}, ConfigError, "needs a rationale"),
        ({"decided_at": "15/01/2026"}, ConfigError, "decided_at '15/01/2026' is not a date"),
        ({"decided_at": "2026-01-15T10:00:00"}, ConfigError, "is not a date"),  # no time zone
    ],
)
def test_bad_values_are_refused_and_nothing_is_written(base, kwargs, error, match):
    args = {
        "exposure": "agent-x",
        "outcome": "wheeze",
        "direction": "raises",
        "rationale": WHY,
        **kwargs,
    }
    decided_at = args.pop("decided_at", None)
    before = table_dump(base)
    with pytest.raises(error, match=match):
        set_direction(
            base,
            args["exposure"],
            args["outcome"],
            args["direction"],
            args["rationale"],
            decided_at=decided_at,
        )
    assert table_dump(base) == before


def test_clear_without_a_direction_is_not_found(base):
    with pytest.raises(NotFoundError, match="no expected direction is set"):
        clear_direction(base, "agent-x", "wheeze")


def test_import_sheet_adds_updates_and_is_idempotent(base, tmp_path):
    path = _directions_file(
        tmp_path,
        [
            ["agent-x", "wheeze", "raises", WHY, "panel", "2026-01-15"],
            ["agent-x", "asthma", "LOWERS", WHY, "", ""],
        ],
    )
    result = import_directions(base, path)
    assert (result.added, result.updated, result.unchanged) == (2, 0, 0)
    frame = list_directions(base).set_index("outcome")
    assert frame.loc["asthma", "direction"] == "lowers"
    assert frame.loc["asthma", "decided_by"] == "tester"  # blank: the importing user
    stamped = frame.loc["asthma", "decided_at"]
    before = table_dump(base)
    again = import_directions(base, path)
    assert (again.added, again.updated, again.unchanged) == (0, 0, 2)
    assert table_dump(base) == before  # blank decided_at keeps the stored time: no churn
    assert list_directions(base).set_index("outcome").loc["asthma", "decided_at"] == stamped
    changed = _directions_file(
        tmp_path, [["agent-x", "wheeze", "lowers", "rethought", "", ""]], name="e.csv"
    )
    dry = import_directions(base, changed, dry_run=True)
    assert (dry.added, dry.updated, dry.unchanged) == (0, 1, 0) and dry.dry_run
    assert table_dump(base) == before
    done = import_directions(base, changed)
    assert (done.added, done.updated, done.unchanged) == (0, 1, 0)
    rec = list_directions(base).set_index("outcome").loc["wheeze"]
    assert (rec["direction"], rec["decided_by"], rec["version"]) == ("lowers", "panel", 2)


def test_import_reports_every_problem_with_row_and_column(base, tmp_path):
    path = _directions_file(
        tmp_path,
        [
            ["agent-x", "wheeze", "raises", WHY, "", ""],  # row 2: fine
            ["agent-q", "wheez", "up", "", "", "yesterday"],  # row 3: five problems
            ["agent-x", "wheeze", "lowers", WHY, "", ""],  # row 4: same pair as row 2
        ],
        name="bad.csv",
    )
    before = table_dump(base)
    with pytest.raises(InputFileError) as exc:
        import_directions(base, path)
    got = [(p.file, p.row, p.column) for p in exc.value.problems]
    assert got == [
        ("bad.csv", 3, "exposure"),
        ("bad.csv", 3, "outcome"),
        ("bad.csv", 3, "rationale"),
        ("bad.csv", 3, "direction"),
        ("bad.csv", 3, "decided_at"),
        ("bad.csv", 4, "outcome"),
    ]
    text = str(exc.value)
    assert "did you mean 'agent-x'" in text and "did you mean 'wheeze'" in text
    assert "already given in row 2" in text and "nothing was written" in text
    assert table_dump(base) == before


def test_import_header_problems(base, tmp_path):
    path = _directions_file(
        tmp_path,
        [["agent-x", "wheeze", "raises", "x"]],
        name="h.csv",
        columns=["exposure", "outcome", "direction", "reason"],
    )
    with pytest.raises(InputFileError) as exc:
        import_directions(base, path)
    got = [(p.row, p.column) for p in exc.value.problems]
    assert got == [(1, "rationale"), (1, "reason")]
    assert "required column 'rationale' is missing" in str(exc.value)


def test_import_xlsx(base, tmp_path):
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.append(["exposure", "outcome", "direction", "rationale"])
    ws.append(["agent-x", "wheeze", "raises", WHY])
    wb.save(tmp_path / "d.xlsx")
    assert import_directions(base, tmp_path / "d.xlsx").added == 1


def test_archive_round_trip_with_directions(base, tmp_path):
    set_direction(
        base, "agent-x", "wheeze", "raises", WHY, decided_by="panel", decided_at="2026-01-15"
    )
    set_direction(base, "agent-x", "asthma", "lowers", 'ünïcode rationale, "quoted"')
    export_store(base, tmp_path / "a.json")
    doc = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    assert [(d["outcome"], d["direction"]) for d in doc["expected_directions"]] == [
        ("asthma", "lowers"),
        ("wheeze", "raises"),
    ]
    assert "version" not in doc["expected_directions"][0]
    url = f"sqlite:///{tmp_path / 'fresh.db'}"
    init_database(url)
    fresh = open_current(url)
    try:
        report = import_into(fresh, tmp_path / "a.json")
        assert vars(report.counts["expected directions"]) == {
            "added": 2,
            "updated": 0,
            "unchanged": 0,
        }
        export_store(fresh, tmp_path / "b.json")
        assert (tmp_path / "b.json").read_bytes() == (tmp_path / "a.json").read_bytes()
        again = import_into(fresh, tmp_path / "a.json")
        assert vars(again.counts["expected directions"]) == {
            "added": 0,
            "updated": 0,
            "unchanged": 2,
        }
    finally:
        fresh.dispose()


def test_archive_without_the_section_imports_and_keeps_stored_directions(base, tmp_path):
    set_direction(base, "agent-x", "wheeze", "raises", WHY)
    export_store(base, tmp_path / "a.json")
    doc = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    del doc["expected_directions"]
    (tmp_path / "old.json").write_text(json.dumps(doc), encoding="utf-8")
    report = import_into(base, tmp_path / "old.json")
    assert "expected directions" not in report.counts and not report.changed
    assert len(list_directions(base)) == 1


def test_archive_directions_are_checked(base, tmp_path):
    export_store(base, tmp_path / "a.json")
    doc = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    doc["expected_directions"] = [
        {
            "exposure": "agent-x",
            "outcome": "wheeze",
            "direction": "sideways",
            "rationale": "",
            "decided_by": "panel",
            "decided_at": "2026-01-15T00:00:00Z",
        },
        {
            "exposure": "agent-y",
            "outcome": "wheeze",
            "direction": "raises",
            "rationale": WHY,
            "decided_by": None,
            "decided_at": "2026-01-15T00:00:00Z",
            "extra": 1,
        },
    ]
    (tmp_path / "bad.json").write_text(json.dumps(doc), encoding="utf-8")
    before = table_dump(base)
    with pytest.raises(InputFileError) as exc:
        import_into(base, tmp_path / "bad.json")
    got = [(p.file, p.row, p.column) for p in exc.value.problems]
    sec = "bad.json: expected_directions"
    assert got == [
        (sec, 1, "rationale"),
        (sec, 1, "direction"),
        (sec, 2, "exposure"),
        (sec, 2, "extra"),
        (sec, 2, "decided_by"),
    ]
    assert table_dump(base) == before
