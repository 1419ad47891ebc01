"""Read queries for appraisals and their ratings (the write path is the audited Writer)."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Connection, select

from exposhift.store.models import Appraisal, Rating, Study

AP, RA, ST = Appraisal.__table__, Rating.__table__, Study.__table__
APPRAISAL_TABLE, RATING_TABLE = AP, RA


def studies_by_key(conn: Connection) -> dict[str, dict[str, Any]]:
    """Every study as a dict, keyed by its natural key."""
    return {r["key"]: dict(r) for r in conn.execute(select(ST)).mappings()}


def existing_appraisals(conn: Connection) -> dict[tuple[str, str, str], dict[str, Any]]:
    """Existing appraisals keyed by (study, reviewer, stage), with their ratings."""
    rows = conn.execute(
        select(
            AP.c.id,
            ST.c.key,
            AP.c.reviewer,
            AP.c.stage,
            RA.c.domain,
            RA.c.level,
            RA.c.justification,
        )
        .join(ST, AP.c.study_id == ST.c.id)
        .outerjoin(RA, RA.c.appraisal_id == AP.c.id)
    ).all()
    out: dict[tuple[str, str, str], dict[str, Any]] = {}
    for ap_id, study, reviewer, stage, domain, level, why in rows:
        entry = out.setdefault((study, reviewer, stage), {"id": ap_id, "ratings": {}, "why": {}})
        if domain is not None:
            entry["ratings"][domain] = level
            if why:
                entry["why"][domain] = why
    return out


def appraisals_of_study(conn: Connection, study_id: int) -> list[dict[str, Any]]:
    """A study's appraisals (consensus first, then by reviewer), each with its ratings."""
    aps = (
        conn.execute(
            select(AP).where(AP.c.study_id == study_id).order_by(AP.c.stage.desc(), AP.c.reviewer)
        )
        .mappings()
        .all()
    )
    ratings = (
        conn.execute(select(RA).where(RA.c.appraisal_id.in_([a["id"] for a in aps])))
        .mappings()
        .all()
    )
    by_ap: dict[int, list[dict[str, Any]]] = {}
    for r in ratings:
        by_ap.setdefault(r["appraisal_id"], []).append(dict(r))
    return [dict(a, ratings=by_ap.get(a["id"], [])) for a in aps]


def independent_ratings(conn: Connection) -> list[dict[str, Any]]:
    """Long rows (study_id, reviewer, domain, level) of every independent appraisal."""
    return [
        dict(r)
        for r in conn.execute(
            select(ST.c.key.label("study_id"), AP.c.reviewer, RA.c.domain, RA.c.level)
            .join(AP, AP.c.study_id == ST.c.id)
            .join(RA, RA.c.appraisal_id == AP.c.id)
            .where(AP.c.stage == "independent")
        ).mappings()
    ]


def independent_overall_levels(conn: Connection) -> list[dict[str, Any]]:
    """Rows (study_id, reviewer, overall) of every independent appraisal."""
    return [
        dict(r)
        for r in conn.execute(
            select(ST.c.key.label("study_id"), AP.c.reviewer, AP.c.overall)
            .join(AP, AP.c.study_id == ST.c.id)
            .where(AP.c.stage == "independent")
        ).mappings()
    ]


def rubrics_held(conn: Connection) -> set[tuple[str, str]]:
    """Every (rubric id, content hash) that stored appraisals were made with."""
    return {(i, h) for i, h in conn.execute(select(AP.c.rubric_id, AP.c.rubric_hash).distinct())}


def review_states(conn: Connection) -> dict[str, tuple[set[str], bool]]:
    """Per appraised study key: its independent reviewers and whether a consensus exists."""
    out: dict[str, tuple[set[str], bool]] = {}
    rows = conn.execute(
        select(ST.c.key, AP.c.reviewer, AP.c.stage).join(AP, AP.c.study_id == ST.c.id)
    ).all()
    for study, reviewer, stage in rows:
        reviewers, consensus = out.get(study, (set(), False))
        if stage == "independent":
            reviewers.add(reviewer)
        out[study] = (reviewers, consensus or stage == "consensus")
    return out
