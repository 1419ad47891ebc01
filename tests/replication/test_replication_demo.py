"""The invented demo evidence base (seed_records/), loaded through the import services, shows
each kind of replication the scenario was written to show."""

from __future__ import annotations

from pathlib import Path

import pytest

from exposhift.services.appraising import import_appraisals
from exposhift.services.importing import import_into
from exposhift.services.replicating import gap_report, replication_for

SEED = Path(__file__).resolve().parents[2] / "seed_records"


@pytest.fixture
def demo_store(sqlite_store):
    import_into(sqlite_store, SEED / "evidence.csv")
    import_into(sqlite_store, SEED / "registered_events.csv", events_only=True)
    import_appraisals(sqlite_store, SEED / "appraisals.csv")
    return sqlite_store


def test_demo_shows_each_kind_of_replication_and_gaps(demo_store):
    rep = gap_report(demo_store)
    cells = rep.cells
    statuses = set(cells["status"])
    assert "replicated-place" in statuses  # dravonil bans in many countries
    assert statuses & {"replicated-time", "convergent"}  # corvane standard in Portugal
    assert statuses & {"weak-only", "single-event"}  # trelomene, quorinate
    assert len(rep.opportunities) >= 1
    assert set(rep.opportunities["event_id"]) == {
        "DRV-PRY-2019",
        "DRV-LKA-2020",
        "CRV-GRC-2017",
        "CRV-PRT-2023",
        "VEL-ZMB-2017",
    }
    assert (rep.opportunities["family_events_evaluated"] > 0).all()
    c = cells.set_index(["exposure", "outcome_group"])
    assert c.loc[("trelomene", "hepatic"), "status"] == "weak-only"


def test_demo_reports(demo_store):
    corvane = replication_for(demo_store, "corvane", "asthma emergency visits")
    assert corvane.status in {"convergent", "replicated-time"}
    assert any(
        r["increase_event"] == "CRV-PRT-2019" and r["outcome_moved_back"] for r in corvane.reversals
    )
    dravonil = replication_for(demo_store, "dravonil", "preterm birth")
    assert dravonil.status in {"replicated-place", "convergent"}
    assert dravonil.sign_test["n"] >= 6
    # several papers on one ban count once
    assert dravonil.events["event_id"].nunique() == dravonil.events["represents_event"].sum()
    assert len(dravonil.excluded) >= 1
    # the dravonil bans report the size of the change: the dose-response regression runs
    assert dravonil.dose_response.run and dravonil.dose_response.k >= 5
    assert (
        replication_for(demo_store, "quorinate", "persistent respiratory symptoms").status
        == "single-event"
    )


def test_demo_families_of_change(demo_store):
    corvane = replication_for(demo_store, "corvane", "asthma emergency visits")
    (fam,) = corvane.families  # the removal carries the standard's explicit family key
    assert fam["family"] == "corvane-vehicle-standard"
    assert fam["directions"] == ["decrease", "increase"] and "PRT" in fam["places"]
    vellium = replication_for(demo_store, "vellium", "child respiratory admissions")
    assert {f["family"] for f in vellium.families} >= {"vellium-smelter"}
    strike = replication_for(
        demo_store, "vellium", "child respiratory admissions", family="vellium-strike-shutdown"
    )
    assert strike.events["event_id"].unique().tolist() == ["VEL-NAM-2005"]
    from exposhift.errors import NotFoundError

    with pytest.raises(NotFoundError, match="did you mean 'vellium-smelter'"):
        replication_for(
            demo_store, "vellium", "child respiratory admissions", family="vellium-smelters"
        )
