"""Recording the committee's certainty judgements on SQLite and PostgreSQL: the justification
rule, one clear error per kind of bad input with nothing written, versions and audit entries.

Outside references: sheets are written with the ``csv`` module; timestamps checked with
``datetime``; audit JSON parsed with ``json``.
"""

from __future__ import annotations

import csv
import sys
from datetime import datetime
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "io"))
from io_helpers import row, table_dump, write_sheet  # noqa: E402

from exposhift.errors import InputFileError  # noqa: E402
from exposhift.services.certainty import certainty_for, record_judgements  # noqa: E402
from exposhift.services.importing import import_into  # noqa: E402
from exposhift.store.writer import audit_rows  # noqa: E402

HEADER = ["exposure", "outcome", "domain", "rating", "why", "decided_by"]


@pytest.fixture
def base(store, tmp_path):
    """agent-x x wheeze: three events (NLD, BEL, DNK); agent-y x asthma: one event; no
    agent-x x asthma evidence."""
    rows = [
        row(),
        row(
            study_id="S2",
            event_id="E2",
            country="BEL",
            estimate="0.75",
            ci_low="0.6",
            ci_high="0.94",
        ),
        row(
            study_id="S3",
            event_id="E3",
            country="DNK",
            estimate="0.85",
            ci_low="0.74",
            ci_high="0.98",
        ),
        row(study_id="S4", event_id="E4", exposure="agent-y", outcome="asthma"),
    ]
    import_into(store, write_sheet(tmp_path / "s.csv", rows))
    return store


def sheet(tmp_path, rows, name="j.csv", header=HEADER):
    p = tmp_path / name
    with open(p, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return p


def suggested(store, domain):
    cell = certainty_for(store, "agent-x", "wheeze", sensitivity=False).cells[0].suggestions
    return cell.suggested_rating(domain), cell


def test_confirm_and_override_are_recorded_versioned_and_audited(base, tmp_path):
    imp, cell = suggested(base, "imprecision")
    other = "down-two" if imp != "down-two" else "none"
    res = record_judgements(
        base,
        sheet(
            tmp_path,
            [
                ["agent-x", "wheeze", "imprecision", imp, "", "panel A"],
                ["agent-x", "wheeze", "bias", cell.suggested_rating("bias"), "fine", ""],
            ],
        ),
    )
    assert (res.added, res.updated, res.overrides) == (2, 0, 0)
    rep = certainty_for(base, "agent-x", "wheeze", sensitivity=False).cells[0]
    j = rep.judgements.set_index("domain")
    assert j.loc["imprecision", "why"].startswith("confirms the suggestion: ")
    assert j.loc["bias", "decided_by"] == "tester"  # blank: the importing user
    assert j.loc["imprecision", "settings_hash"] == cell.settings_fingerprint
    datetime.fromisoformat(j.loc["imprecision", "decided_at"].replace("Z", "+00:00"))
    # override with a reason: updated, version 2, audited before/after
    res2 = record_judgements(
        base,
        sheet(tmp_path, [["agent-x", "wheeze", "imprecision", other, "committee view", "panel A"]]),
    )
    assert (res2.updated, res2.overrides) == (1, 1)
    with base.read() as conn:
        entries = audit_rows(conn, table_name="certainty_judgement")
    keys = [(e["row_key"], e["action"]) for e in entries]
    assert keys == [
        ("agent-x|wheeze|imprecision", "insert"),
        ("agent-x|wheeze|bias", "insert"),
        ("agent-x|wheeze|imprecision", "update"),
    ]
    upd = entries[-1]
    assert upd["before"]["rating"] == imp and upd["after"]["rating"] == other
    assert upd["after"]["version"] == 2 and upd["after"]["overrides"] is True
    assert upd["user"] == "tester"
    # the same sheet again: unchanged, no new audit entry
    res3 = record_judgements(
        base,
        sheet(tmp_path, [["agent-x", "wheeze", "imprecision", other, "committee view", "panel A"]]),
    )
    assert res3.unchanged == 1
    with base.read() as conn:
        assert len(audit_rows(conn, table_name="certainty_judgement")) == 3


def test_final_level_follows_the_recorded_domain_ratings(base, tmp_path):
    _, cell = suggested(base, "certainty")
    rec = [[s.domain, s.rating] for s in cell.domains]
    # rate imprecision one step further down than suggested, with a reason, and the final
    # level that follows: no reason needed for it
    from exposhift.certainty.domains import move

    imp = cell.suggested_rating("imprecision")
    harsher = {"none": "down-one", "not-assessable": "down-one", "down-one": "down-two"}.get(imp)
    others = [s.steps for s in cell.domains if s.domain != "imprecision"]
    down = sum(x for x in others if x < 0) + {"down-one": -1, "down-two": -2}[harsher]
    up = min(sum(x for x in others if x > 0), 2)  # max_steps_up of the packaged settings
    final = move(cell.start_level, down + up)
    rows = [
        ["agent-x", "wheeze", "imprecision", harsher, "committee: too wide", "panel"],
        ["agent-x", "wheeze", "certainty", final, "", "panel"],
    ]
    assert rec  # the cell has suggestions for every domain
    res = record_judgements(base, sheet(tmp_path, rows))
    assert res.added == 2 and res.overrides == 1


BAD = [
    (
        ["agent-x", "wheeze", "imprecision", "down-three", "x", "p"],
        "rating",
        "not a rating of the imprecision domain",
    ),
    (
        ["agent-x", "wheeze", "precision", "down-one", "x", "p"],
        "domain",
        "did you mean 'imprecision'",
    ),
    (["agent-x", "wheeze", "certainty", "moderate", "x", "p"], "rating", "not a certainty level"),
    (["agent-x", "asthma", "bias", "none", "x", "p"], "outcome", "has no evidence"),
    (["agent-z", "wheeze", "bias", "none", "x", "p"], "exposure", "no exposure 'agent-z'"),
]


@pytest.mark.parametrize("bad,column,words", BAD)
def test_bad_input_one_clear_error_nothing_written(base, tmp_path, bad, column, words):
    before = table_dump(base)
    good = ["agent-x", "wheeze", "bias", suggested(base, "bias")[0], "", "p"]
    with pytest.raises(InputFileError) as err:
        record_judgements(base, sheet(tmp_path, [good, bad]))
    problems = err.value.problems
    assert len(problems) == 1
    p = problems[0]
    assert (p.file.endswith("j.csv"), p.row, p.column) == (True, 3, column)
    assert words in p.message
    assert table_dump(base) == before


def test_override_without_a_reason_is_refused(base, tmp_path):
    imp = suggested(base, "imprecision")[0]
    other = "down-two" if imp != "down-two" else "none"
    before = table_dump(base)
    with pytest.raises(InputFileError) as err:
        record_judgements(
            base, sheet(tmp_path, [["agent-x", "wheeze", "imprecision", other, " ", "p"]])
        )
    (p,) = err.value.problems
    assert p.column == "why" and "departs from the suggestion" in p.message
    assert table_dump(base) == before


def test_header_problems_and_duplicates(base, tmp_path):
    with pytest.raises(InputFileError) as err:
        record_judgements(
            base,
            sheet(tmp_path, [["agent-x", "wheeze", "x"]], header=["exposure", "outcome", "domian"]),
        )
    cols = {(p.row, p.column) for p in err.value.problems}
    assert (1, "domain") in cols and (1, "rating") in cols and (1, "domian") in cols
    r = ["agent-x", "wheeze", "bias", suggested(base, "bias")[0], "", "p"]
    with pytest.raises(InputFileError, match="already given in row 2"):
        record_judgements(base, sheet(tmp_path, [r, r]))


def test_dry_run_writes_nothing(base, tmp_path):
    before = table_dump(base)
    r = ["agent-x", "wheeze", "bias", suggested(base, "bias")[0], "", "p"]
    res = record_judgements(base, sheet(tmp_path, [r]), dry_run=True)
    assert res.dry_run and res.added == 1
    assert table_dump(base) == before
