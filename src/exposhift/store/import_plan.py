"""The import's store side: compare a file's records with the stored ones (new, changed,
unchanged), then write them in the caller's transaction.

Records are matched by natural key (:mod:`exposhift.keys`): new ones are bulk-inserted
(:class:`~exposhift.store.bulk.BulkWriter`, audited), changed ones go through
:meth:`Writer.update` (version checked, audited), unchanged ones are left alone. The service
(:mod:`exposhift.services.importing`) validates the file and decides; this module only reads
and writes.
"""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from exposhift.io.frames import FIELDS, PLURAL, EvidenceFrames, coerce, to_records
from exposhift.io.rules import same_values
from exposhift.keys import NATURAL_KEY
from exposhift.store.bulk import BulkWriter
from exposhift.store.evidence_frames import read_table, with_refs
from exposhift.store.records import TABLES
from exposhift.store.writer import Writer, keyed_ids

#: (stage, rows done, rows in total)
Progress = Callable[[str, int, int], None]

ENTITIES = ("exposure", "outcome", "event", "study", "estimate", "appraisal")
#: the column each entity is matched on (an appraisal's is made of study|reviewer|stage)
KEY_FIELD = {**NATURAL_KEY, "appraisal": "_key"}
#: fields whose blank value in a file means "not stated" rather than "clear it"
KEEP_WHEN_BLANK = {"exposure": {"agent_class"}, "outcome": {"outcome_group"}}
#: fields never compared: the natural key and what the key already encodes
NOT_COMPARED = {
    "exposure": {"name"},
    "outcome": {"name"},
    "event": {"key"},
    "study": {"key"},
    "estimate": {
        "key",
        "study",
        "event",
        "outcome",
        "measure",
        "estimate_kind",
        "subgroup",
        "time_window",
    },
    "appraisal": {"study", "reviewer", "stage"},
}
#: reference field -> (database column, referenced entity)
REFS = {
    "exposure": ("exposure_id", "exposure"),
    "study": ("study_id", "study"),
    "event": ("event_id", "event"),
    "outcome": ("outcome_id", "outcome"),
}
ESTIMATE_CHUNK = 5000
PAUSE_ENV = "EXPOSHIFT_TEST_PAUSE_AFTER_ROWS"
PAUSE_SECONDS_ENV = "EXPOSHIFT_TEST_PAUSE_SECONDS"


@dataclass
class EntityPlan:
    entity: str
    new: pd.DataFrame
    changes: list[tuple[dict, dict, str]]  # (row as stored, changed fields, natural key)
    unchanged: int


# ---------------------------------------------------------------------------------- planning
def _appraisal_key(frame: pd.DataFrame) -> pd.Series:
    return (
        frame["study"].fillna("").astype("str")
        + "|"
        + frame["reviewer"].astype("str")
        + "|"
        + frame["stage"].astype("str")
    )


def _stored(conn, entity: str, keys: list[str], cache: dict) -> pd.DataFrame:
    if entity == "appraisal":
        raw = read_table(conn, entity)
    else:
        raw = read_table(conn, entity, keys, KEY_FIELD[entity])
    stored = with_refs(conn, entity, raw, cache)
    if entity == "appraisal":
        stored["_key"] = _appraisal_key(stored)
    return stored


def plan_entity(conn, entity: str, frames: EvidenceFrames, cache: dict) -> EntityPlan:
    """Split the file's records of one entity into new, changed and unchanged."""
    new = frames.frame(entity)
    if entity == "appraisal":
        new = new.assign(_key=_appraisal_key(new))
    key = KEY_FIELD[entity]
    if new.empty:
        return EntityPlan(entity, new, [], 0)
    stored = _stored(conn, entity, new[key].tolist(), cache)
    given = frames.fields_given(entity)
    compared = [
        f
        for f in FIELDS[entity]
        if f in given and f in new.columns and f not in NOT_COMPARED[entity]
    ]
    stored_by_key = stored.set_index(key, drop=False)
    found = new[key].isin(stored_by_key.index).to_numpy()
    plan_new = new[~found].reset_index(drop=True)
    old_new = new[found].reset_index(drop=True)
    old = stored_by_key.loc[old_new[key].to_numpy()].reset_index(drop=True)
    differs = {}
    for f in compared:
        d = ~same_values(old_new[f], old[f])
        if f in KEEP_WHEN_BLANK.get(entity, ()):
            d &= old_new[f].notna().to_numpy()
        differs[f] = d
    any_diff = np.zeros(len(old_new), bool)
    for d in differs.values():
        any_diff |= d
    changes = []
    positions = np.flatnonzero(any_diff)
    if len(positions):
        rows_new = to_records(old_new.iloc[positions], compared)
        rows_old = to_records(old.iloc[positions])
        for pos, vals, before in zip(positions, rows_new, rows_old, strict=True):
            changed = {f: vals[f] for f in compared if differs[f][pos]}
            changes.append((before, changed, str(old_new[key].iat[pos])))
    return EntityPlan(entity, plan_new, changes, int(len(old_new) - any_diff.sum()))


def rating_changes(conn, frames: EvidenceFrames, plan: EntityPlan) -> dict[str, dict]:
    """Per stored appraisal key: ratings to add, replace and remove."""
    ratings = frames.ratings
    if ratings.empty and frames.appraisals.empty:
        return {}
    stored = read_table(conn, "rating")
    apps = read_table(conn, "appraisal")
    studies = with_refs(conn, "appraisal", apps, {})
    app_key = dict(zip(studies["id"].tolist(), _appraisal_key(studies).tolist(), strict=True))
    stored["_key"] = stored["appraisal_id"].map(app_key)
    existing = set(_appraisal_key(frames.appraisals)) - set(_appraisal_key(plan.new))
    out: dict[str, dict] = {}
    file_ratings = (
        ratings.assign(_key=_appraisal_key(ratings))
        if not ratings.empty
        else ratings.assign(_key=pd.Series([], dtype="str"))
    )
    by_key_file = {k: g for k, g in file_ratings.groupby("_key", sort=False)}
    by_key_db = {k: g for k, g in stored.groupby("_key", sort=False)}
    fields = ["level", "reporting", "justification", "suggested_level", "suggestion_reason"]
    for k in existing:
        f = by_key_file.get(k, file_ratings.iloc[0:0])
        d = by_key_db.get(k, stored.iloc[0:0])
        f_recs = {
            r["domain"]: r for r in to_records(coerce(f, FIELDS["rating"]), ["domain", *fields])
        }
        d_recs = {r["domain"]: r for r in d.to_dict("records")}
        add, replace, remove = [], [], []
        for dom, r in f_recs.items():
            if dom not in d_recs:
                add.append(r)
            elif any(_differ(r[x], d_recs[dom][x]) for x in fields):
                replace.append((d_recs[dom], r))
        remove = [d_recs[dom] for dom in d_recs if dom not in f_recs]
        if add or replace or remove:
            out[k] = {"add": add, "replace": replace, "remove": remove}
    return out


def _differ(a, b) -> bool:
    na = a is None or (isinstance(a, float) and a != a)
    nb = b is None or (isinstance(b, float) and b != b)
    if na or nb:
        return na != nb
    return a != b


def build_plans(conn, frames: EvidenceFrames) -> dict[str, EntityPlan]:
    cache: dict = {}
    return {e: plan_entity(conn, e, frames, cache) for e in ENTITIES}


# ---------------------------------------------------------------------------------- writing
def _test_pause(written: int) -> None:
    """Test hook: sleep inside the open transaction (to kill the process mid-import)."""
    sys.stderr.write(
        f"exposhift: test pause inside the import transaction after {written} "
        f"estimate rows ({PAUSE_ENV})\n"
    )
    sys.stderr.flush()
    time.sleep(float(os.environ.get(PAUSE_SECONDS_ENV, "60")))


def _with_ids(conn, frame: pd.DataFrame, entity: str, ids: dict) -> pd.DataFrame:
    out = frame.copy()
    for ref, (col, target) in REFS.items():
        if ref in out.columns and entity != target:
            if target not in ids:
                ids[target] = keyed_ids(conn, TABLES[target], KEY_FIELD[target])
            out[col] = out[ref].map(ids[target]).astype("int64")
    for f, kind in FIELDS[entity].items():  # fields a sheet left out: their defaults
        if f not in out.columns and kind == "bool":
            out[f] = False
    return out


def _db_changes(conn, entity: str, changes: dict, ids: dict) -> dict:
    out = {}
    for f, v in changes.items():
        if f in REFS and entity != REFS[f][1]:
            col, target = REFS[f]
            if target not in ids:
                ids[target] = keyed_ids(conn, TABLES[target], KEY_FIELD[target])
            out[col] = ids[target][v]
        else:
            out[f] = v
    return out


def _insert(
    w: BulkWriter,
    entity: str,
    frame: pd.DataFrame,
    ids: dict,
    progress: Progress | None,
    pause_after: int | None,
) -> None:
    if frame.empty:
        return
    table = TABLES[entity]
    frame = _with_ids(w.conn, frame, entity, ids)
    cols = [
        c.name for c in table.columns if c.name not in ("id", "version", "created_at", "updated_at")
    ]
    for c in cols:  # every column is written (and audited), missing values as NULL
        if c not in frame.columns:
            frame[c] = None
    keys = frame[KEY_FIELD[entity]].astype("str").tolist()
    total = len(frame)
    done = 0
    paused = False
    for start in range(0, total, ESTIMATE_CHUNK):
        part = frame.iloc[start : start + ESTIMATE_CHUNK]
        w.insert_frame(table, part[cols], keys[start : start + ESTIMATE_CHUNK])
        done += len(part)
        if progress is not None:
            progress(PLURAL[entity], done, total)
        if pause_after is not None and not paused and done >= pause_after:
            _test_pause(done)
            paused = True


def _update(w: Writer, entity: str, plan: EntityPlan, ids: dict) -> None:
    table = TABLES[entity]
    for before, changes, key in plan.changes:
        w.update(
            table,
            int(before["id"]),
            int(before["version"]),
            _db_changes(w.conn, entity, changes, ids),
            before=before,
            row_key=key,
        )


def _apply_ratings(w: Writer, rating_plan: dict[str, dict], plan: EntityPlan) -> None:
    """Replace changed ratings of stored appraisals; bump those appraisals' versions."""
    if not rating_plan:
        return
    table = TABLES["rating"]
    apps = with_refs(w.conn, "appraisal", read_table(w.conn, "appraisal"), {})
    apps["_key"] = _appraisal_key(apps)
    by_key = apps.set_index("_key")
    updated = {key for _, _, key in plan.changes}
    for key, todo in rating_plan.items():
        app = by_key.loc[key]
        for old in todo["remove"] + [o for o, _ in todo["replace"]]:
            w.delete(table, int(old["id"]))
        new = todo["add"] + [n for _, n in todo["replace"]]
        if new:
            w.insert_many(
                table,
                [dict(r, appraisal_id=int(app["id"])) for r in new],
                row_keys=[f"{key}|{r['domain']}" for r in new],
            )
        if key not in updated:
            w.update(
                TABLES["appraisal"],
                int(app["id"]),
                int(app["version"]),
                {},
                before=app.to_dict(),
                row_key=key,
            )


def _insert_ratings(w: Writer, frames: EvidenceFrames, plan: EntityPlan) -> None:
    if plan.new.empty or frames.ratings.empty:
        return
    new_keys = set(plan.new["_key"])
    ratings = frames.ratings.assign(_key=_appraisal_key(frames.ratings))
    ratings = ratings[ratings["_key"].isin(new_keys)]
    if ratings.empty:
        return
    apps = with_refs(w.conn, "appraisal", read_table(w.conn, "appraisal"), {})
    app_ids = dict(zip(_appraisal_key(apps).tolist(), apps["id"].tolist(), strict=True))
    ratings = ratings.assign(appraisal_id=ratings["_key"].map(app_ids).astype("int64"))
    cols = [
        "appraisal_id",
        "domain",
        "level",
        "reporting",
        "justification",
        "suggested_level",
        "suggestion_reason",
    ]
    w.insert_many(
        TABLES["rating"],
        to_records(ratings, cols),
        row_keys=(ratings["_key"] + "|" + ratings["domain"]).tolist(),
    )


def apply_plans(
    w: BulkWriter,
    frames: EvidenceFrames,
    plans: dict[str, EntityPlan],
    progress: Progress | None = None,
) -> None:
    pause = os.environ.get(PAUSE_ENV)
    pause_after = int(pause) if pause else None
    ids: dict = {}
    rating_plan = rating_changes(w.conn, frames, plans["appraisal"])
    for entity in ENTITIES:
        plan = plans[entity]
        _insert(
            w,
            entity,
            plan.new,
            ids,
            progress if entity == "estimate" else None,
            pause_after if entity == "estimate" else None,
        )
        ids.pop(entity, None)
        _update(w, entity, plan, ids)
    _insert_ratings(w, frames, plans["appraisal"])
    _apply_ratings(w, rating_plan, plans["appraisal"])
    w.flush()
