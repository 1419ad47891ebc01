"""The evidence base read as DataFrames keyed by natural keys (database ids mapped to the keys
users see): the reading side of export, of the import's comparison and of the demo check.
"""

from __future__ import annotations

import pandas as pd

from exposhift.io.frames import FIELDS, EvidenceFrames, coerce
from exposhift.store.records import TABLES

#: rows per ``IN (...)`` query when only some keys are read
KEY_CHUNK = 500
#: above this many keys the whole table is read instead
WHOLE_TABLE_ABOVE = 5000


def read_table(
    conn, entity: str, keys: list[str] | None = None, key_col: str | None = None
) -> pd.DataFrame:
    """All rows of a table (or those whose ``key_col`` is in ``keys``) as a DataFrame."""
    table = TABLES[entity]
    names = [c.name for c in table.columns]
    stmts = [table.select()]
    if keys is not None and len(keys) <= WHOLE_TABLE_ABOVE:
        col = table.c[key_col or "key"]
        stmts = [
            table.select().where(col.in_(keys[i : i + KEY_CHUNK]))
            for i in range(0, len(keys), KEY_CHUNK)
        ]
    rows = [r for stmt in stmts for r in conn.execute(stmt).all()]
    frame = pd.DataFrame.from_records(rows, columns=names)
    return frame


def _names(frame: pd.DataFrame, col: str) -> dict[int, str]:
    return dict(zip(frame["id"].tolist(), frame[col].tolist(), strict=True))


def with_refs(conn, entity: str, frame: pd.DataFrame, cache: dict) -> pd.DataFrame:
    """Add the natural-key reference columns (``exposure``, ``study``, ...) to a table frame."""

    def ids(ref: str, col: str) -> dict[int, str]:
        if ref not in cache:
            cache[ref] = _names(read_table(conn, ref), col)
        return cache[ref]

    out = frame.copy()
    if entity == "event":
        out["exposure"] = out["exposure_id"].map(ids("exposure", "name"))
    elif entity == "estimate":
        out["study"] = out["study_id"].map(ids("study", "key"))
        out["event"] = out["event_id"].map(ids("event", "key"))
        out["outcome"] = out["outcome_id"].map(ids("outcome", "name"))
    elif entity == "appraisal":
        out["study"] = out["study_id"].map(ids("study", "key"))
    kinds = dict(FIELDS[entity])
    return coerce(out, kinds)


def load_evidence(conn) -> EvidenceFrames:
    """The whole evidence base as frames keyed by natural keys (no ids)."""
    cache: dict = {}
    frames = {}
    for entity in ("exposure", "outcome", "event", "study", "estimate", "appraisal"):
        table = with_refs(conn, entity, read_table(conn, entity), cache)
        frames[entity] = table
    apps = frames["appraisal"]
    ratings = read_table(conn, "rating")
    lookup = apps.set_index("id")[["study", "reviewer", "stage"]]
    ratings = ratings.join(lookup, on="appraisal_id")
    frames["rating"] = coerce(ratings, FIELDS["rating"])
    out = EvidenceFrames(
        directions=_directions(conn),
        **{
            plural: frames[e][list(FIELDS[e])].reset_index(drop=True)
            for e, plural in (
                ("exposure", "exposures"),
                ("outcome", "outcomes"),
                ("event", "events"),
                ("study", "studies"),
                ("estimate", "estimates"),
                ("appraisal", "appraisals"),
                ("rating", "ratings"),
            )
        },
    )
    out.series = load_series(conn)
    out.method = _method(conn)
    out.certainty = _certainty(conn)
    return out


def _certainty(conn) -> list[dict]:
    """The committee's certainty judgements, as archive records
    (:mod:`exposhift.io.certainty_archive`)."""
    from exposhift.io.certainty_archive import judgement_records
    from exposhift.store.certainty_records import judgements_frame

    return judgement_records(judgements_frame(conn)) or []


def _method(conn) -> list[dict]:
    """Every stored method version, as archive records (:mod:`exposhift.io.method_archive`)."""
    from exposhift.io.method_archive import records_of
    from exposhift.store.method_records import method_versions

    return records_of(method_versions(conn))


def load_series(conn):
    """Series records from the store as :class:`SeriesFrames` (natural keys, no ids)."""
    from exposhift.io.series_sheet import FIT_FIELDS, POINT_FIELDS, SERIES_FIELDS, SeriesFrames
    from exposhift.store.series_records import fit_rows, point_rows, series_rows

    series = pd.DataFrame(series_rows(conn), columns=["id", *SERIES_FIELDS])
    return SeriesFrames(
        series=series[list(SERIES_FIELDS)],
        points=pd.DataFrame(point_rows(conn), columns=list(POINT_FIELDS)),
        fits=pd.DataFrame(fit_rows(conn), columns=list(FIT_FIELDS)),
    )


def _directions(conn) -> pd.DataFrame:
    """The expected directions, in the fields the archive writes (no versions)."""
    from exposhift.io.directions import FIELDS as DIRECTION_FIELDS
    from exposhift.store.directions import directions_frame

    return directions_frame(conn)[list(DIRECTION_FIELDS)]
