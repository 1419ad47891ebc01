"""Series records through the store (SQLite and PostgreSQL): import with audit, every bad
input refused with series, row and column and nothing written, the archive round trip, and a
stored re-estimate that pools and counts once per event."""

from __future__ import annotations

import json

import pytest
from series_helpers import count, demo_series, load_evidence, write_series

from exposhift.errors import InputFileError
from exposhift.series import fit as F
from exposhift.services.exporting import export_store
from exposhift.services.importing import import_into
from exposhift.services.pooling import pool_evidence
from exposhift.services.series import estimate_series, import_series_into
from exposhift.store import records
from exposhift.store.writer import audit_rows

NAGY = ("NagyFarkas2014-asthma", "NagyFarkas2014-asthma-svk")


@pytest.fixture
def base(store):
    load_evidence(store)
    return store


def test_import_writes_series_and_points_with_audit_entries(base, tmp_path):
    path = write_series(tmp_path / "series.csv", demo_series())
    rep = import_series_into(base, path)
    assert rep.counts == {"added": 5, "updated": 0, "unchanged": 0}
    assert count(base, "series") == 5 and count(base, "series_point") == len(demo_series())
    with base.read() as conn:
        assert len(audit_rows(conn, table_name="series")) == 5
        pts = audit_rows(conn, table_name="series_point")
        assert len(pts) == len(demo_series())
        assert audit_rows(conn, row_key="Santos2009-mortality|1990")[0]["after"]["value"] > 0
    again = import_series_into(base, path)
    assert again.counts == {"added": 0, "updated": 0, "unchanged": 5}
    with base.read() as conn:
        assert len(audit_rows(conn, table_name="series_point")) == len(demo_series())


def _bad(frame, mask_col, value, rows):
    f = frame.copy()
    for r in rows:
        f.loc[r, mask_col] = value
    return f


def _cases():
    f = demo_series(NAGY)
    n = int((f["series_id"] == NAGY[0]).sum())  # exposed rows first (sorted keys)
    swapped = f.copy()
    swapped.loc[[3, 4], "period"] = swapped.loc[[4, 3], "period"].to_numpy()
    dup = _bad(f, "period", f.loc[4, "period"], [5])
    outside = _bad(f, "change_at", "2015-01", range(n))
    negative = _bad(f, "value", -3.0, [7])
    zero = _bad(f, "denominator", 0.0, [9])
    mixed = _bad(f, "period", "2004", [13])
    other_unit = f.copy()
    comp = other_unit.index[other_unit["series_id"] == NAGY[1]]
    other_unit.loc[comp, "time_unit"] = "year"
    other_unit.loc[comp, "period"] = [str(1900 + i) for i in range(len(comp))]
    other_unit.loc[comp, "change_at"] = "1950"
    no_overlap = f.copy()
    no_overlap.loc[comp, "period"] = [
        f"{2030 + i // 12}-{i % 12 + 1:02d}" for i in range(len(comp))
    ]
    no_overlap.loc[comp, "change_at"] = "2033-01"
    unknown_study = _bad(f, "study_id", "NoSuchStudy2001", range(n))
    # (frame, spreadsheet row, column, words in the message)
    return {
        "out of order": (swapped, 6, "period", "comes after"),
        "duplicated period": (dup, 7, "period", "appears twice"),
        "change outside": (outside, 2, "change_at", "outside series"),
        "negative count": (negative, 9, "value", "cannot be negative"),
        "zero denominator": (zero, 11, "denominator", "must be above 0"),
        "mixed units": (mixed, 15, "period", "use one time unit"),
        "comparison unit": (other_unit, n + 2, "time_unit", "use one time unit"),
        "comparison overlap": (no_overlap, n + 2, "period", "no period in common"),
        "unknown study": (unknown_study, 2, "study_id", "no study 'NoSuchStudy2001'"),
    }


@pytest.mark.parametrize("case", list(_cases()))
def test_bad_series_input_names_series_row_and_column_and_writes_nothing(base, tmp_path, case):
    frame, row, column, words = _cases()[case]
    path = write_series(tmp_path / "bad.csv", frame)
    with pytest.raises(InputFileError) as err:
        import_series_into(base, path)
    hits = [p for p in err.value.problems if p.row == row and p.column == column]
    assert hits, [str(p) for p in err.value.problems]
    assert words in hits[0].message
    assert "NagyFarkas2014-asthma" in hits[0].message or case in (
        "negative count",
        "zero denominator",
        "unknown study",
    )
    assert all(p.file == "bad.csv" for p in err.value.problems)
    assert count(base, "series") == 0 and count(base, "series_point") == 0


def test_stored_re_estimate_pools_and_counts_once_per_event(base, tmp_path):
    import_series_into(base, write_series(tmp_path / "s.csv", demo_series()))
    before = pool_evidence(base, "corvane", "asthma emergency visits")
    n_est = count(base, "estimate")
    out = estimate_series(base, "NagyFarkas2014-asthma", horizon=12, save=True)
    duarte = estimate_series(base, "Duarte1999-asthma", horizon=12, save=True)
    assert count(base, "estimate") == n_est + 2 and count(base, "series_fit") == 2
    after = pool_evidence(base, "corvane", "asthma emergency visits")
    change = [g for g in after.groups if g["estimate_kind"] == "change"][0]
    change_before = [g for g in before.groups if g["estimate_kind"] == "change"][0]
    # Duarte1999 published only level and slope changes: its re-estimate adds one study
    assert change["k"] == change_before["k"] + 1
    rows = after.pooled_rows
    assert rows["re_estimated"].sum() == 1
    assert rows.loc[rows["re_estimated"], "estimate_uid"].iat[0] == duarte.stored_estimate
    # NagyFarkas2014's re-estimate is the same event as its published estimate: counted once
    assert rows["event_id"].tolist().count("CRV-HUN-2008") == 1
    left = {e["estimate_uid"]: e["reason"] for e in after.excluded}
    assert "same event CRV-HUN-2008" in left[out.stored_estimate]
    with base.read() as conn:
        est = records.get(conn, "estimate", out.stored_estimate)
        study = records.get(conn, "study", "NagyFarkas2014")
        fit = audit_rows(conn, table_name="series_fit")
    assert est["measure"] == "IRR" and est["estimate_kind"] == "change" and not est["primary"]
    assert est["point"] == pytest.approx(out.analysis.its.ratio[0])
    assert "placebo-date" in study["checks"].split(";") and out.checks_added == ["placebo-date"]
    figures = json.loads(fit[0]["after"]["figures"])
    assert figures["placebo_dates"]["status"] == "passed"


def test_a_model_that_does_not_converge_stores_nothing(base, tmp_path, monkeypatch):
    import_series_into(base, write_series(tmp_path / "s.csv", demo_series(NAGY)))
    monkeypatch.setattr(F, "MAX_ITER", 1)
    n = count(base, "estimate")
    with pytest.raises(F.NotConverged, match="did not converge"):
        estimate_series(base, "NagyFarkas2014-asthma", model="poisson", horizon=12, save=True)
    assert count(base, "estimate") == n and count(base, "series_fit") == 0


def test_archive_round_trip_with_series_and_stored_fits_is_byte_identical(base, tmp_path, db_url):
    import_series_into(base, write_series(tmp_path / "s.csv", demo_series()))
    estimate_series(base, "Duarte1999-asthma", horizon=12, save=True)
    first = tmp_path / "a.json"
    export_store(base, first)
    doc = json.loads(first.read_text(encoding="utf-8"))
    assert len(doc["series"]) == 5 and len(doc["series_fits"]) == 1
    from exposhift.services.setup import init_database, open_current

    other = f"sqlite:///{tmp_path / 'other.db'}"
    init_database(other)
    s2 = open_current(other)
    try:
        rep = import_into(s2, first)
        assert any("series: 5 added" in n for n in rep.notes)
        second = tmp_path / "b.json"
        export_store(s2, second)
    finally:
        s2.dispose()
    assert first.read_bytes() == second.read_bytes()
