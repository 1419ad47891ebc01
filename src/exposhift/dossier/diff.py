"""What changed between two dossier bundles: records, pooled estimates, statuses, certainty
ratings and opportunities. Pure comparison of two :class:`~exposhift.dossier.bundle.Bundle`.
"""

from __future__ import annotations

from typing import Any

from exposhift.dossier.bundle import Bundle
from exposhift.dossier.content import Change, DossierDiff
from exposhift.dossier.html import number
from exposhift.dossier.manifest import canonical_json, record_index

#: pooled values compared (a move in any of them is reported)
POOLED_VALUES = ("k", "estimate", "ci_lower", "ci_upper", "pi_lower", "pi_upper")


def _show(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, dict | list):
        return canonical_json(v)
    return str(v)


def _record_changes(old: dict[str, list[dict]], new: dict[str, list[dict]]) -> list[Change]:
    a, b = record_index(old), record_index(new)
    out = [Change("record-added", k) for k in sorted(set(b) - set(a))]
    out += [Change("record-removed", k) for k in sorted(set(a) - set(b))]
    for k in sorted(set(a) & set(b)):
        ra, rb = a[k], b[k]
        for f in sorted(set(ra) | set(rb)):
            if f == "version":
                continue
            if canonical_json(ra.get(f)) != canonical_json(rb.get(f)):
                out.append(Change("record-changed", k, f, _show(ra.get(f)), _show(rb.get(f))))
    return out


def _ci(r: dict) -> str:
    return (
        f"{number(r.get('estimate'))} ({number(r.get('ci_lower'))} to "
        f"{number(r.get('ci_upper'))}), k = {r.get('k')}"
    )


def _pooled_changes(old: list[dict], new: list[dict]) -> list[Change]:
    key = lambda r: f"{r['outcome']} | {r['pooling']} | {r['group']}"  # noqa: E731
    a, b = {key(r): r for r in old}, {key(r): r for r in new}
    out = []
    for k in sorted(set(a) | set(b)):
        ra, rb = a.get(k), b.get(k)
        if ra is None:
            out.append(Change("pooled-new", k, "estimate", "", _ci(rb)))
        elif rb is None:
            out.append(Change("pooled-gone", k, "estimate", _ci(ra), ""))
        elif any(canonical_json(ra.get(f)) != canonical_json(rb.get(f)) for f in POOLED_VALUES):
            out.append(Change("pooled-moved", k, "estimate", _ci(ra), _ci(rb)))
    return out


def _status_changes(old: list[dict], new: list[dict]) -> list[Change]:
    a, b = {r["outcome"]: r for r in old}, {r["outcome"]: r for r in new}
    out = []
    for k in sorted(set(a) | set(b)):
        ra, rb = a.get(k, {}), b.get(k, {})
        for f, kind in (("status", "status-changed"), ("certainty", "certainty-changed")):
            if ra.get(f) != rb.get(f):
                out.append(Change(kind, k, f, _show(ra.get(f)), _show(rb.get(f))))
    return out


def _opportunity_changes(old: list[dict], new: list[dict]) -> list[Change]:
    a = {r["event_id"] for r in old}
    return [
        Change(
            "opportunity-new",
            r["event_id"],
            "place and date",
            "",
            f"{r.get('country', '')} {r.get('change_date', '')}".strip(),
        )
        for r in sorted(new, key=lambda r: r["event_id"])
        if r["event_id"] not in a
    ]


def diff_bundles(old: Bundle, new: Bundle) -> DossierDiff:
    """Every change from ``old`` to ``new``, records first, then results."""
    changes = _record_changes(old.records, new.records)
    changes += _pooled_changes(old.tables.get("pooled", []), new.tables.get("pooled", []))
    changes += _status_changes(old.tables.get("statuses", []), new.tables.get("statuses", []))
    changes += _opportunity_changes(
        old.tables.get("opportunities", []), new.tables.get("opportunities", [])
    )
    return DossierDiff(
        old_fingerprint=str(old.manifest.get("fingerprint", "")),
        new_fingerprint=str(new.manifest.get("fingerprint", "")),
        old_made_at=str(old.manifest.get("made_at", "")),
        new_made_at=str(new.manifest.get("made_at", "")),
        changes=changes,
    )
