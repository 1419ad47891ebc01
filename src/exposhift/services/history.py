"""A record's history from the audit trail, as the dashboard shows it.

The entries of one study or event and everything keyed under it (a study's estimates,
appraisals and ratings: their keys start with ``STUDY|``), oldest first, each with who, when,
what and the fields it changed. Blinding holds here too: while a study's independent
appraisals are hidden from the viewer (:func:`exposhift.services.appraising.show_appraisals`),
the values of another reviewer's independent appraisal and ratings are not shown — only that
an entry was written.
"""

from __future__ import annotations

import json

import pandas as pd

from exposhift.errors import NotFoundError
from exposhift.services.appraising import show_appraisals
from exposhift.store.audit_chain import find_entries
from exposhift.store.database import Store
from exposhift.store.form_reads import versions_of

HIDDEN = "hidden until both independent appraisals are in"
COLUMNS = ["when", "who", "record type", "record", "action", "change"]


def _values(text: str | None) -> dict:
    return json.loads(text) if text else {}


def _change(action: str, before: dict, after: dict) -> str:
    if action == "insert":
        return "; ".join(f"{k}: {v}" for k, v in sorted(after.items()) if v not in (None, ""))
    if action == "delete":
        return "deleted (was: " + "; ".join(f"{k}: {v}" for k, v in sorted(before.items())) + ")"
    keys = sorted(set(before) | set(after))
    return "; ".join(f"{k}: {before.get(k)} → {after.get(k)}" for k in keys)


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
        change = (
            HIDDEN if blinded else _change(r["action"], _values(r["before"]), _values(r["after"]))
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
