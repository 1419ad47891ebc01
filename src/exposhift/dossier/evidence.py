"""The one adapter between the services' results and the dossier's dataclasses.

Every key the dossier reads from a pooled group, a replication report, a pool view or a gap
report is read here and nowhere else, so a change in those results (new fields such as
``k_events``, new statuses, provenance flags) is adjusted in this one module. Keys this module
does not know are kept in ``extra`` and rendered as they are.

Nothing here computes: values are moved, renamed and shown on the natural scale with
:func:`exposhift.synthesis.conversions.from_analysis_scale` (exp of a log ratio).
"""

from __future__ import annotations

import math
from typing import Any

import pandas as pd

from exposhift.dossier.content import (
    EstimateRow,
    GapCell,
    Opportunity,
    Pooled,
    Replication,
    SensitivityStep,
    TimelinePoint,
)
from exposhift.synthesis.conversions import from_analysis_scale

#: pooled-group keys read into :class:`Pooled` fields (the rest goes to ``extra``)
_GROUP_KNOWN = frozenset(
    {
        "k",
        "method",
        "ci_method",
        "measure",
        "scale",
        "estimate",
        "se",
        "ci_lower",
        "ci_upper",
        "pi_lower",
        "pi_upper",
        "tau2",
        "i2",
        "q",
        "q_pvalue",
        "sign_flipped",
        "estimates",
        "back_transformed",
        "excluded",
        "sensitivity",
        "measure_group",
        "estimate_kind",
        "increment",
        "design_family",
        "level",
        "design",
        "country",
        "outcome_group",
    }
)
#: group keys that name the stratum (shown in the label)
_STRATUM_KEYS = (
    "design_family",
    "level",
    "design",
    "country",
    "outcome_group",
    "measure_group",
    "estimate_kind",
    "increment",
)


def _num(x: Any) -> float | None:
    if x is None:
        return None
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _natural(scale: str, x: Any) -> float | None:
    v = _num(x)
    return None if v is None else float(from_analysis_scale(scale, v))


def _text(x: Any) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)) or x is pd.NA:
        return ""
    return str(x)


def level_text(x: Any) -> str:
    v = _num(x)
    if v is None:
        return "not appraised" if not isinstance(x, str) or not x else x
    return f"level {int(v)}"


def group_label(group: dict[str, Any]) -> str:
    """The stratum of a pooled group in words: its key values, blanks left out."""
    parts = []
    for k in _STRATUM_KEYS:
        v = group.get(k)
        if v is None or v == "" or (isinstance(v, float) and math.isnan(v)):
            continue
        parts.append(level_text(v) if k == "level" else str(v))
    return " · ".join(parts) or "all estimates"


def pooled_groups(groups: list[dict[str, Any]]) -> list[Pooled]:
    """The groups of a :class:`~exposhift.services.pooling.PoolOutput` as :class:`Pooled`."""
    out = []
    for g in groups:
        scale = str(g.get("scale") or "identity")
        back = g.get("back_transformed") or {}

        def nat(name: str, g=g, back=back, scale=scale) -> float | None:
            if name in back:
                return _num(back[name])
            return _natural(scale, g.get(name))

        extra = _group_extra(g)
        out.append(
            Pooled(
                label=group_label(g),
                k=int(g.get("k_events", g.get("k")) or 0),
                measure=_text(g.get("measure")),
                scale=scale,
                estimate=nat("estimate"),
                ci_lower=nat("ci_lower"),
                ci_upper=nat("ci_upper"),
                pi_lower=nat("pi_lower"),
                pi_upper=nat("pi_upper"),
                tau2=_num(g.get("tau2")),
                i2=_num(g.get("i2")),
                q=_num(g.get("q")),
                q_pvalue=_num(g.get("q_pvalue")),
                method=_text(g.get("method")),
                ci_method=_text(g.get("ci_method")),
                estimates=tuple(str(e) for e in g.get("estimates") or ()),
                extra=extra,
            )
        )
    return out


def _group_extra(g: dict[str, Any]) -> dict[str, Any]:
    """The pooled group's further facts, as short texts (k counts events)."""
    out: dict[str, Any] = {}
    if "k_estimates" in g:
        out["estimates"] = g["k_estimates"]
    if g.get("within_event"):
        rho = f", rho {g['rho']:g}" if g.get("rho") is not None else ""
        out["within events"] = f"{g['within_event']}{rho}"
    t2 = g.get("tau2_ci")
    if t2 and t2.get("lower") is not None:
        out["τ² 95% CI"] = f"{t2['lower']:.3g} to {t2['upper']:.3g}"
    if g.get("headline") == "two-events" and g.get("fixed_effect"):
        fe = g["fixed_effect"].get("natural") or {}
        if fe.get("estimate") is not None:
            out["fixed effect (2 events)"] = (
                f"{fe['estimate']:.3g} ({fe['ci_lower']:.3g} to {fe['ci_upper']:.3g})"
            )
    if g.get("notes"):
        out["notes"] = "; ".join(map(str, g["notes"]))
    if g.get("provenance"):
        out["conversions"] = "; ".join(map(str, g["provenance"]))
    return out


def excluded_rows(excluded: list[dict[str, Any]]) -> list[dict[str, str]]:
    """Left-out estimates (estimate, study, event, reason) of a pool output."""
    rows = [
        {
            "estimate": _text(e.get("estimate_uid")),
            "study": _text(e.get("study_id")),
            "event": _text(e.get("event_id")),
            "reason": _text(e.get("reason")),
        }
        for e in excluded
    ]
    return sorted(rows, key=lambda r: r["estimate"])


def replication(report: Any, meanings: dict[str, str]) -> Replication:
    """A :class:`~exposhift.replication.report.ReplicationReport` in the dossier's terms."""
    d = report.to_dict()
    events = report.events
    n = int(events["event_id"].nunique()) if len(events) else 0
    return Replication(
        # with its qualifiers (provisional, imprecise), as every output writes a status
        status=str(report.label),
        meaning=meanings.get(str(d["status"]), ""),
        rule=str(d["rule"]),
        expected=str(d["expected_direction"].get("meaning", "")),
        independent_events=n,
        triangulation=_text((d.get("triangulation") or {}).get("statement")),
        extra=_replication_extra(d),
    )


def _replication_extra(d: dict[str, Any]) -> dict[str, Any]:
    """The headline pooled number and the provisional flag of a replication report, as text."""
    out: dict[str, Any] = {}
    if d.get("provisional"):
        out["provisional"] = (
            "yes: the expected direction was inferred from these same events, "
            "not pre-specified by the committee"
        )
    if d.get("imprecise"):
        out["imprecise"] = (
            "yes: the pooled interval of the good events does not exclude no effect, so the "
            "size of the average effect is not settled"
        )
    basis = (d.get("expected_direction") or {}).get("basis")
    if basis:
        out["expected direction"] = basis
    h = d.get("headline") or {}
    if h.get("k_events") and h.get("estimate") is not None:
        word = "ratio" if h.get("scale") == "log" else "difference"
        out["pooled (same evidence as the status)"] = (
            f"{word} {h['estimate']:.3g} (95% CI {h['ci_lower']:.3g} to {h['ci_upper']:.3g}) "
            f"from {h['k_events']} event(s), {h['k_estimates']} estimate(s): "
            f"{h.get('evidence_set', '')}"
        )
    return out


def timeline(report: Any, scale_of: dict[str, str]) -> list[TimelinePoint]:
    """The events of a replication report that represent their event (date × effect)."""
    ev = report.events
    if ev is None or ev.empty:
        return []
    ev = ev[ev["represents_event"].astype(bool)] if "represents_event" in ev else ev
    out = []
    for r in ev.to_dict("records"):
        scale = scale_of.get(_text(r.get("measure_group")), "identity")
        est = _natural(scale, r.get("estimate"))
        if est is None:
            continue
        out.append(
            TimelinePoint(
                scale=scale,
                event_id=_text(r.get("event_id")),
                study_id=_text(r.get("study_id")),
                country=_text(r.get("country")),
                change_date=_text(r.get("change_date")),
                design_family=_text(r.get("design_family")),
                estimate=est,
                ci_lower=_natural(scale, r.get("ci_lower")) or est,
                ci_upper=_natural(scale, r.get("ci_upper")) or est,
                concordant=None if r.get("concordant") is None else bool(r.get("concordant")),
            )
        )
    return out


def forest_rows(view: Any) -> list[EstimateRow]:
    """The rows of a :class:`~exposhift.services.browse.PoolView` on the natural scale."""
    rows = view.rows
    out = []
    for r in rows.to_dict("records"):
        scale = _text(r.get("scale")) or "identity"
        out.append(
            EstimateRow(
                estimate_uid=_text(r.get("estimate_uid")),
                scale=scale,
                group=_text(r.get("group_label")),
                study_id=_text(r.get("study_id")),
                event_id=_text(r.get("event_id")),
                country=_text(r.get("country")),
                change_date=_text(r.get("change_date")),
                design_family=_text(r.get("design_family")),
                level=level_text(r.get("level")),
                estimate=_natural(scale, r.get("y")),
                ci_lower=_natural(scale, r.get("ci_lower")),
                ci_upper=_natural(scale, r.get("ci_upper")),
                weight=_num(r.get("weight")),
            )
        )
    return out


def steps(frame: pd.DataFrame, label: str, scale: str) -> list[SensitivityStep]:
    """Rows of a leave-one-out or cumulative table (:mod:`exposhift.synthesis.sensitivity`)."""
    return [
        SensitivityStep(
            label=_text(r[label]),
            estimate=_natural(scale, r["estimate"]),
            ci_lower=_natural(scale, r["ci_lower"]),
            ci_upper=_natural(scale, r["ci_upper"]),
            k=int(r["k"]),
        )
        for r in frame.to_dict("records")
    ]


def level_steps(groups: list[Pooled]) -> list[SensitivityStep]:
    return [SensitivityStep(g.label, g.estimate, g.ci_lower, g.ci_upper, g.k) for g in groups]


def gap_cells(report: Any, exposure: str) -> list[GapCell]:
    cells = report.cells
    if cells is None or cells.empty:
        return []
    cells = cells[cells["exposure"] == exposure]
    return [
        GapCell(
            outcome_group=_text(r.get("outcome_group")),
            state=_text(r.get("state")),
            state_rule=_text(r.get("state_rule")),
            events=int(r.get("events") or 0),
            studies=int(r.get("studies") or 0),
            unevaluated_events=int(r.get("unevaluated_events") or 0),
        )
        for r in cells.to_dict("records")
    ]


def opportunities(report: Any, exposure: str) -> list[Opportunity]:
    opps = report.opportunities
    if opps is None or opps.empty:
        return []
    opps = opps[opps["exposure"] == exposure]
    out = []
    for r in opps.to_dict("records"):
        change = " ".join(
            x for x in (_text(r.get("change_kind")), _text(r.get("change_direction"))) if x
        )
        out.append(
            Opportunity(
                event_id=_text(r.get("event_id")),
                country=_text(r.get("country"))
                + (f" ({_text(r.get('area'))})" if _text(r.get("area")) else ""),
                change_date=_text(r.get("change_date")),
                change=change,
                family=_text(r.get("family")),
                needs=_text(r.get("needs")),
            )
        )
    return out


def audit_chain_head(store: Any) -> str | None:
    """The head of the evidence base's audit hash chain with its number of entries
    (:func:`exposhift.store.audit_chain.audit_chain_head`), or None ("not recorded") for an
    empty trail. Kept with the dossier, it lets a later reader detect a rewritten history
    (docs/audit-trail.md)."""
    from exposhift.store.audit_chain import audit_chain_head as head

    value = head(store)
    if not value.entries:
        return None
    return f"{value.head} ({value.entries} audit entries)"
