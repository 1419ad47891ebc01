"""The dossier's fingerprint, its manifest and its data tables (the bundle's content).

Fingerprint: SHA-256 (FIPS 180-4) over one canonical serialisation of

- exactly the records used (exposure, outcomes, events, studies, estimates and consensus
  appraisals with their ratings; see :mod:`exposhift.store.dossier_records`), each with its
  version and without database ids or timestamps;
- the rubric's content hash, the settings in force (pooling options, replication thresholds,
  the outcomes asked for, the content hash and declared version of each method part) and the
  software version.

The manifest also names each method part's stored version in the evidence base (number,
source, who and when) and any one-run override (``--rubric`` / ``--settings``).

The canonical serialisation is JSON with keys sorted, no whitespace, UTF-8, floats written as
Python's shortest round-trip ``repr`` and NaN refused (RFC 8785 in spirit; not its number
format). The same evidence base therefore gives the same fingerprint on SQLite and PostgreSQL;
any edit of a record used changes it; an edit of another exposure's record does not.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from typing import Any

import numpy as np

from exposhift.dossier.content import Dossier

FORMAT = "exposhift-dossier-bundle"
FORMAT_VERSION = 1
MANIFEST = "manifest.json"
RECORDS = "records.json"
#: the data tables of a bundle, each written as CSV and JSON
TABLES = ("estimates_used", "exclusions", "pooled", "statuses", "appraisals", "opportunities")
#: natural-key column of each kind of record
KEY_OF = {
    "exposure": "name",
    "outcome": "name",
    "event": "key",
    "study": "key",
    "estimate": "key",
    "appraisal": "study",
}


def _plain(value: Any) -> Any:
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    return value


def canonical_json(value: Any) -> str:
    """The canonical serialisation (sorted keys, no whitespace, NaN as null)."""
    return json.dumps(
        _plain(value), sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )


def pretty_json(value: Any) -> str:
    """Deterministic, readable JSON (sorted keys, 1-space indent, final newline)."""
    return (
        json.dumps(_plain(value), sort_keys=True, indent=1, ensure_ascii=False, allow_nan=False)
        + "\n"
    )


def record_key(kind: str, record: dict[str, Any]) -> str:
    """``kind:natural-key``; a consensus appraisal is named by its study."""
    return f"{kind}:{record[KEY_OF[kind]]}"


def record_index(records: dict[str, list[dict]]) -> dict[str, dict[str, Any]]:
    """natural key -> record, over every kind."""
    return {record_key(kind, r): r for kind, rows in records.items() for r in rows}


def record_versions(records: dict[str, list[dict]]) -> dict[str, int]:
    return {k: int(r.get("version") or 0) for k, r in sorted(record_index(records).items())}


def fingerprint(
    records: dict[str, list[dict]],
    rubric_hash: str,
    settings: dict[str, Any],
    software_version: str,
) -> str:
    payload = {
        "records": records,
        "rubric_hash": rubric_hash,
        "settings": settings,
        "exposhift_version": software_version,
    }
    return hashlib.sha256(canonical_json(payload).encode("utf-8")).hexdigest()


# ----------------------------------------------------------------------------- tables
def bundle_tables(d: Dossier) -> dict[str, list[dict[str, Any]]]:
    """The bundle's data tables of a dossier (rows of plain values, in a fixed order)."""
    used, pooled, statuses, excl = [], [], [], []
    for s in d.sections:
        for r in s.forest:
            used.append(
                {
                    "outcome": s.outcome,
                    "group": r.group,
                    "study": r.study_id,
                    "event": r.event_id,
                    "country": r.country,
                    "change_date": r.change_date,
                    "design_family": r.design_family,
                    "level": r.level,
                    "estimate": r.estimate,
                    "ci_lower": r.ci_lower,
                    "ci_upper": r.ci_upper,
                    "weight": r.weight,
                }
            )
        for kind, groups in (("overall", s.pooled), ("design family", s.by_design_family)):
            for g in groups:
                pooled.append(
                    {
                        "outcome": s.outcome,
                        "pooling": kind,
                        "group": g.label,
                        "k": g.k,
                        "measure": g.measure,
                        "scale": g.scale,
                        "estimate": g.estimate,
                        "ci_lower": g.ci_lower,
                        "ci_upper": g.ci_upper,
                        "pi_lower": g.pi_lower,
                        "pi_upper": g.pi_upper,
                        "tau2": g.tau2,
                        "i2": g.i2,
                        "q": g.q,
                        "q_pvalue": g.q_pvalue,
                        "method": g.method,
                        "ci_method": g.ci_method,
                        **{f"extra_{k}": _plain(v) for k, v in sorted(g.extra.items())},
                    }
                )
        rep = s.replication
        statuses.append(
            {
                "outcome": s.outcome,
                "status": rep.status,
                "rule": rep.rule,
                "independent_events": rep.independent_events,
                "certainty": s.certainty.rating,
            }
        )
        for e in s.excluded:
            excl.append({"outcome": s.outcome, **e})
    appraisals = [{"study": st.study_id, "overall": st.overall, **st.domains} for st in d.studies]
    opps = [o.__dict__.copy() for o in d.opportunities]
    return {
        "estimates_used": used,
        "exclusions": excl,
        "pooled": pooled,
        "statuses": statuses,
        "appraisals": appraisals,
        "opportunities": opps,
    }


def _cell(value: Any) -> str:
    value = _plain(value)
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, list | dict):
        return canonical_json(value)
    return str(value)


def table_csv(rows: list[dict[str, Any]]) -> str:
    """CSV text of ``rows`` (columns in first-seen order; floats as ``repr``)."""
    cols: list[str] = []
    for r in rows:
        cols += [c for c in r if c not in cols]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    for r in rows:
        w.writerow([_cell(r.get(c)) for c in cols])
    return buf.getvalue()


def manifest(
    d: Dossier, records: dict[str, list[dict]], settings: dict[str, Any], files: dict[str, str]
) -> dict[str, Any]:
    """The bundle's ``manifest.json`` content."""
    p = d.provenance
    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "exposure": d.exposure,
        "outcomes": list(d.outcomes),
        "fingerprint": p.fingerprint,
        "records": record_versions(records),
        "made_at": p.made_at,
        "exposhift_version": p.software_version,
        "rubric": {"id": p.rubric_id, "version": p.rubric_version, "hash": p.rubric_hash},
        "settings": settings,
        "method": p.method,
        "audit_chain_head": p.audit_head,
        "demo": d.demo,
        "files": files,
    }
