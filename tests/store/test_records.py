"""Create/read/update/delete of every entity, version conflicts and the audit trail.

Runs on SQLite and on a real PostgreSQL server (fixture ``store``).
"""

from __future__ import annotations

import pytest

from exposhift.errors import ConflictError, DatabaseError, NotFoundError, VocabularyError
from exposhift.store import records
from exposhift.store.records import TABLES
from exposhift.store.writer import Writer, audit_rows


def _seed(store):
    with store.write() as conn:
        w = Writer(conn, store.user)
        exp = records.ensure_vocab(w, "exposure", "demo-agent", {"agent_class": "solvent"})
        out = records.ensure_vocab(w, "outcome", "wheeze", {"outcome_group": "respiratory"})
        ev = records.create(
            w,
            "event",
            {
                "key": "EV1",
                "exposure_id": exp,
                "change_kind": "ban",
                "change_direction": "decrease",
                "country": "NLD",
                "change_date": "2001-05",
                "demo": True,
            },
        )
        st = records.create(
            w,
            "study",
            {
                "key": "S1",
                "citation": "Demo A 2005",
                "year": 2005,
                "design": "its",
                "pre_points": 24,
                "post_points": 24,
                "demo": True,
            },
        )
        records.create(
            w,
            "estimate",
            {
                "key": "S1|EV1|wheeze|RR|change||",
                "study_id": st,
                "event_id": ev,
                "outcome_id": out,
                "measure": "RR",
                "point": 0.8,
                "ci_low": 0.7,
                "ci_high": 0.9,
                "primary": True,
            },
        )
        ap = records.create(
            w,
            "appraisal",
            {
                "study_id": st,
                "reviewer": "r1",
                "stage": "independent",
                "rubric_id": "x",
                "rubric_hash": "h",
            },
        )
        w.insert(TABLES["rating"], {"appraisal_id": ap, "domain": "origin", "level": 2})
        w.flush()


ENTITIES = [
    ("exposure", "demo-agent", {"agent_class": "pesticide"}),
    ("outcome", "wheeze", {"outcome_group": "airways"}),
    ("event", "EV1", {"change_size": 12.5, "change_unit": "ug/m3"}),
    ("study", "S1", {"citation": "Demo A et al. 2005"}),
    ("estimate", "S1|EV1|wheeze|RR|change||", {"point": 0.81}),
]


@pytest.mark.parametrize("entity,key,changes", ENTITIES)
def test_create_read_update(store, entity, key, changes):
    _seed(store)
    with store.read() as conn:
        row = records.get(conn, entity, key)
    assert row["version"] == 1
    with store.write() as conn:
        w = Writer(conn, "editor")
        assert records.update(w, entity, key, 1, changes) == 2
        w.flush()
    with store.read() as conn:
        row = records.get(conn, entity, key)
        audit = audit_rows(conn, row_key=key, table_name=entity)
    assert row["version"] == 2
    for col, val in changes.items():
        assert row[col] == val
    assert [a["action"] for a in audit] == ["insert", "update"]
    upd = audit[-1]
    assert upd["user"] == "editor" and upd["at"].endswith("Z")
    assert upd["after"]["version"] == 2 and upd["before"]["version"] == 1
    for col, val in changes.items():
        assert upd["after"][col] == val


def test_stale_update_is_refused_and_changes_nothing(store):
    _seed(store)
    with store.write() as conn:
        w = Writer(conn, "alice")
        records.update(w, "study", "S1", 1, {"citation": "Alice's edit"})
        w.flush()
    with pytest.raises(ConflictError) as err:
        with store.write() as conn:
            w = Writer(conn, "bob")
            records.update(w, "study", "S1", 1, {"citation": "Bob's stale edit"})
            w.flush()
    assert "version 1" in str(err.value) and "version 2" in str(err.value)
    with store.read() as conn:
        row = records.get(conn, "study", "S1")
        audit = audit_rows(conn, row_key="S1")
    assert row["citation"] == "Alice's edit" and row["version"] == 2
    assert all(a["user"] != "bob" for a in audit)


def test_delete_in_dependency_order_with_audit(store):
    _seed(store)
    with store.read() as conn:
        appraisal_id = conn.execute(TABLES["appraisal"].select()).mappings().one()["id"]
    with store.write() as conn:
        w = Writer(conn, "tester")
        w.delete(TABLES["appraisal"], appraisal_id, 1)  # ratings go with it (cascade)
        records.delete(w, "estimate", "S1|EV1|wheeze|RR|change||", 1)
        records.delete(w, "study", "S1", 1)
        records.delete(w, "event", "EV1", 1)
        records.delete(w, "exposure", "demo-agent", 1)
        records.delete(w, "outcome", "wheeze", 1)
        w.flush()
    with store.read() as conn:
        for entity in ("study", "event", "estimate", "exposure", "outcome"):
            assert store.count(conn, TABLES[entity]) == 0
        assert store.count(conn, TABLES["rating"]) == 0
        deleted = audit_rows(conn, row_key="S1", table_name="study")[-1]
    assert deleted["action"] == "delete" and deleted["before"]["citation"] == "Demo A 2005"


def test_stale_delete_is_refused(store):
    _seed(store)
    with pytest.raises(ConflictError), store.write() as conn:
        records.delete(Writer(conn, "t"), "event", "EV1", 7)
    with store.read() as conn:
        assert records.get(conn, "event", "EV1")["version"] == 1


def test_foreign_keys_are_enforced(store):
    _seed(store)
    # deleting a study that estimates still point to is refused by the database
    with pytest.raises(DatabaseError, match="refused the change"), store.write() as conn:
        records.delete(Writer(conn, "t"), "study", "S1", 1)
    # an estimate pointing at a study that does not exist is refused
    with pytest.raises(DatabaseError, match="refused the change"), store.write() as conn:
        records.create(
            Writer(conn, "t"),
            "estimate",
            {
                "key": "ghost",
                "study_id": 999_999,
                "event_id": 999_999,
                "outcome_id": 999_999,
                "measure": "RR",
                "point": 1.0,
            },
        )
    with store.read() as conn:
        assert records.get(conn, "study", "S1")["version"] == 1
        assert records.find(conn, "estimate", "ghost") is None


def test_vocabulary_codes_are_checked(store):
    with pytest.raises(VocabularyError) as err, store.write() as conn:
        records.create(
            Writer(conn, "t"),
            "study",
            {"key": "S9", "citation": "x", "year": 2000, "design": "cohort-ish"},
        )
    assert "accepted:" in str(err.value) and "synthetic-control" in str(err.value)


def test_missing_record_names_itself(store):
    with pytest.raises(NotFoundError, match="no study 'nope'"), store.read() as conn:
        records.get(conn, "study", "nope")


def test_event_keeps_date_precision(store):
    _seed(store)
    with store.read() as conn:
        row = records.get(conn, "event", "EV1")
    assert row["change_date"] == "2001-05" and row["date_precision"] == "month"


def test_appraisal_and_rating_update_with_version_and_audit(store):
    _seed(store)
    ap, ra = TABLES["appraisal"], TABLES["rating"]
    with store.read() as conn:
        row = dict(conn.execute(ap.select()).mappings().one())
        rating = dict(conn.execute(ra.select()).mappings().one())
    with store.write() as conn:
        w = Writer(conn, "chair")
        assert w.update(ap, row["id"], 1, {"overall": 2}, row_key="S1|r1|independent") == 2
        # ratings carry no version of their own: they change only with their appraisal,
        # replaced as a whole (delete + insert), both audited
        w.delete(ra, rating["id"])
        w.insert(ra, {"appraisal_id": row["id"], "domain": "origin", "level": 3})
        w.flush()
    with pytest.raises(ConflictError), store.write() as conn:
        Writer(conn, "late").update(ap, row["id"], 1, {"overall": 0})
    with store.read() as conn:
        assert conn.execute(ap.select()).mappings().one()["overall"] == 2
        assert conn.execute(ra.select()).mappings().one()["level"] == 3
        audit = audit_rows(conn, row_key="S1|r1|independent")
        rating_audit = audit_rows(conn, table_name="rating")
    assert audit[-1]["action"] == "update" and audit[-1]["after"] == {"overall": 2, "version": 2}
    assert [a["action"] for a in rating_audit] == ["insert", "delete", "insert"]
    assert rating_audit[1]["before"]["level"] == 2 and rating_audit[2]["after"]["level"] == 3
