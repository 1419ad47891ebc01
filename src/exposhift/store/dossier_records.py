"""Read exactly the records one exposure's dossier uses, each with its version.

The dossier's fingerprint is a hash over these records (see :mod:`exposhift.dossier.manifest`),
so what is read here defines what "the records used" are:

- the exposure itself, and the outcomes asked for (all outcomes with an estimate of the exposure
  when none is named);
- every event of the exposure (events without a study feed the gaps section);
- every estimate of those events for those outcomes;
- every study with such an estimate;
- the consensus appraisal of each of those studies, with its domain ratings.

Records are plain dicts keyed by column name; integer ids and timestamps are left out (they
differ between two copies of one evidence base), references are natural keys.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import Connection, select

from exposhift.store.models import Appraisal, Estimate, Event, Exposure, Outcome, Rating, Study

EX, OU, EV = Exposure.__table__, Outcome.__table__, Event.__table__
ST, ES, AP, RA = Study.__table__, Estimate.__table__, Appraisal.__table__, Rating.__table__

#: columns never part of a record's content
_SKIP = frozenset(
    {
        "id",
        "created_at",
        "updated_at",
        "exposure_id",
        "study_id",
        "event_id",
        "outcome_id",
        "appraisal_id",
    }
)


def _clean(row: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in row.items() if k not in _SKIP}


def outcomes_of_exposure(conn: Connection, exposure: str) -> list[str]:
    """Sorted names of the outcomes that have at least one estimate of ``exposure``."""
    stmt = (
        select(OU.c.name)
        .distinct()
        .join(ES, ES.c.outcome_id == OU.c.id)
        .join(EV, ES.c.event_id == EV.c.id)
        .join(EX, EV.c.exposure_id == EX.c.id)
        .where(EX.c.name == exposure)
    )
    return sorted(n for (n,) in conn.execute(stmt))


def records_used(conn: Connection, exposure: str, outcomes: list[str]) -> dict[str, list[dict]]:
    """The records of one exposure's dossier, by kind, each list sorted by natural key."""
    ex = conn.execute(select(EX).where(EX.c.name == exposure)).mappings().all()
    ou = conn.execute(select(OU).where(OU.c.name.in_(outcomes))).mappings().all()
    ex_ids = [r["id"] for r in ex]
    events = conn.execute(select(EV).where(EV.c.exposure_id.in_(ex_ids))).mappings().all()
    event_key = {r["id"]: r["key"] for r in events}
    outcome_name = {r["id"]: r["name"] for r in ou}
    estimates = (
        conn.execute(
            select(ES).where(
                ES.c.event_id.in_(list(event_key)), ES.c.outcome_id.in_(list(outcome_name))
            )
        )
        .mappings()
        .all()
        if event_key and outcome_name
        else []
    )
    study_ids = sorted({r["study_id"] for r in estimates})
    studies = (
        conn.execute(select(ST).where(ST.c.id.in_(study_ids))).mappings().all() if study_ids else []
    )
    study_key = {r["id"]: r["key"] for r in studies}
    apps = (
        conn.execute(select(AP).where(AP.c.study_id.in_(study_ids), AP.c.stage == "consensus"))
        .mappings()
        .all()
        if study_ids
        else []
    )
    ratings = (
        conn.execute(select(RA).where(RA.c.appraisal_id.in_([a["id"] for a in apps])))
        .mappings()
        .all()
        if apps
        else []
    )
    by_app: dict[int, list[dict]] = {}
    for r in ratings:
        by_app.setdefault(r["appraisal_id"], []).append(_clean(dict(r)))

    out: dict[str, list[dict]] = {
        "exposure": [_clean(dict(r)) for r in ex],
        "outcome": [_clean(dict(r)) for r in ou],
        "event": [dict(_clean(dict(r)), exposure=exposure) for r in events],
        "study": [_clean(dict(r)) for r in studies],
        "estimate": [
            dict(
                _clean(dict(r)),
                study=study_key[r["study_id"]],
                event=event_key[r["event_id"]],
                outcome=outcome_name[r["outcome_id"]],
            )
            for r in estimates
        ],
        "appraisal": [
            dict(
                _clean(dict(a)),
                study=study_key[a["study_id"]],
                ratings=sorted(by_app.get(a["id"], []), key=lambda x: x["domain"]),
            )
            for a in apps
        ],
    }
    keys = {
        "exposure": "name",
        "outcome": "name",
        "event": "key",
        "study": "key",
        "estimate": "key",
        "appraisal": "study",
    }
    for kind, rows in out.items():
        rows.sort(key=lambda r, k=keys[kind]: str(r[k]))
    return out
