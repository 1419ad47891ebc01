"""A record's history from the audit trail, as the dashboard shows it.

The entries of one study or event and everything keyed under it (a study's estimates,
appraisals and ratings: their keys start with ``STUDY|``), oldest first, each with who, when,
what and the fields it changed (by their labels; a reference to another record by that
record's natural key, never its integer id: :data:`exposhift.keys.NATURAL_KEY`). Blinding
holds here too: while a study's independent appraisals are hidden from the viewer
(:func:`exposhift.services.appraising.show_appraisals`), the values of another reviewer's
independent appraisal and ratings are not shown — only that an entry was written.
"""

from __future__ import annotations

import json

import pandas as pd

from exposhift.errors import NotFoundError
from exposhift.io.column_labels import field_label, label
from exposhift.services.appraising import show_appraisals
from exposhift.store.audit_chain import find_entries
from exposhift.store.database import Store
from exposhift.store.form_reads import ID_FIELDS, natural_keys, versions_of

HIDDEN = "hidden until both independent appraisals are in"
#: how a reference to another record is named in a change (its natural key beside it)
ID_LABELS = {
    "study": label("study_id"),
    "event": label("event_id"),
    "exposure": label("exposure"),
    "outcome": label("outcome"),
    "appraisal": "Appraisal",
}
COLUMNS = ["when", "who", "record type", "record", "action", "change"]


def _values(text: str | None) -> dict:
    return json.loads(text) if text else {}


def _ids(rows) -> dict[str, set[int]]:
    """Every record id the entries' values name, per entity (to show natural keys)."""
    wanted: dict[str, set[int]] = {}
    for r in rows:
        for values in (_values(r["before"]), _values(r["after"])):
            for f, entity in ID_FIELDS.items():
                if isinstance(values.get(f), int):
                    wanted.setdefault(entity, set()).add(values[f])
    return wanted


def _readable(table: str, values: dict, keys: dict[str, dict[int, str]]) -> dict[str, object]:
    """Field labels for field names, natural keys for integer ids (``event_id: 6`` ->
    ``Event key: DRV-AUS-2003``)."""
    out: dict[str, object] = {}
    for f, v in values.items():
        entity = ID_FIELDS.get(f)
        if entity is not None:
            name = ID_LABELS[entity]
            out[name] = keys.get(entity, {}).get(v, "(no longer in the evidence base)")
        else:
            out[field_label(table, f)] = ("yes" if v else "no") if isinstance(v, bool) else v
    return out


def _text(v) -> str:
    return "(empty)" if v is None or v == "" else str(v)


def _change(action: str, before: dict, after: dict) -> str:
    if action == "insert":
        return "; ".join(f"{k}: {v}" for k, v in sorted(after.items()) if v not in (None, ""))
    if action == "delete":
        return "deleted (was: " + "; ".join(f"{k}: {v}" for k, v in sorted(before.items())) + ")"
    keys = sorted(set(before) | set(after))
    return "; ".join(f"{k}: {_text(before.get(k))} → {_text(after.get(k))}" for k in keys)


def record_history(
    store: Store, key: str, viewer: str | None = None, limit: int = 2000
) -> pd.DataFrame:
    """The audit entries of study or event ``key`` and of the records keyed under it (newest
    ``limit``), with another reviewer's blinded values hidden from ``viewer``."""
    with store.read() as conn:
        is_study = bool(versions_of(conn, "study", [key]))
        if not is_study and not versions_of(conn, "event", [key]):
            raise NotFoundError(f"no study or event '{key}' in the evidence base")
        rows = find_entries(conn, row_key=key, limit=limit)
        keys = natural_keys(conn, _ids(rows))
    hidden: set[str] = set()
    if is_study:
        view = show_appraisals(store, key, viewer)
        hidden = {a.reviewer for a in view["appraisals"] if a.blinded}
    out = []
    for r in rows:
        parts = r["row_key"].split("|")
        blinded = (
            r["table_name"] in ("appraisal", "rating")
            and len(parts) >= 3
            and parts[2] == "independent"
            and parts[1] in hidden
        )
        table = r["table_name"]
        change = (
            HIDDEN
            if blinded
            else _change(
                r["action"],
                _readable(table, _values(r["before"]), keys),
                _readable(table, _values(r["after"]), keys),
            )
        )
        out.append(
            {
                "when": r["at"],
                "who": r["user"],
                "record type": r["table_name"],
                "record": r["row_key"],
                "action": r["action"],
                "change": change,
            }
        )
    return pd.DataFrame(out, columns=COLUMNS)
