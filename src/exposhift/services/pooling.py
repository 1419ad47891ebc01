"""The ``pool`` action: harmonise, keep independent estimates, one number per event, pool.

Steps (each reported, never silent):

1. the estimates of one exposure and one outcome (analysis frame);
2. the evidence set: studies whose appraisal of record is in the rubric's
   ``exclude_from_pooling`` levels (fatal by default) are left out unless ``include_fatal``;
   with ``min_level`` also those below it and those not appraised;
3. harmonise to the analysis scale, every estimate expressed for a change in the direction
   ``align_to`` (a ban's estimate has its sign flipped when aligning to ``increase``);
4. one estimate per event x population x outcome data source (independence; populations and
   sources compared as normalised text, overlaps marked with ``same_population_as``);
5. the event as the unit of analysis (``within_event``: ``aggregate`` by default, see
   :mod:`exposhift.synthesis.event_pooling`), pooled per stratum: measure group, estimate kind
   and exposure increment always (never level with slope changes, nor policy effects with
   per-unit effects), plus the strata asked for; with strata, also the result over all of them
   and the test of subgroup differences.

Small-k policy (``docs/methods.md``): Hartung-Knapp scale floored at 1; a prediction interval
only from 3 events; at 2 events the headline is the two event estimates and a fixed-effect
sensitivity result, not a t(1) interval.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from exposhift.appraisal.rubric import Rubric, load_rubric
from exposhift.errors import AnalysisError, ConfigError, NotFoundError
from exposhift.services.lookup import require_name
from exposhift.services.pool_results import Exclusion, PooledGroup
from exposhift.services.snapshot import EvidenceSnapshot
from exposhift.store.database import Store
from exposhift.store.queries import analysis_frame
from exposhift.synthesis.conversions import from_analysis_scale
from exposhift.synthesis.event_pooling import WITHIN_EVENT, pool_event_level
from exposhift.synthesis.events import DEFAULT_RHO, RHO_RANGE, aggregate_within_event
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.harmonise import harmonise
from exposhift.synthesis.independence import pooling_keys, select_independent
from exposhift.synthesis.pooling import CAUTION, METHODS
from exposhift.synthesis.provenance import provenance_lines
from exposhift.synthesis.sensitivity import (
    cumulative,
    egger_test,
    leave_one_out,
    subgroup_test,
    tau2_ci_qprofile,
)

#: --by choices -> analysis frame columns
STRATA = {
    "design-family": "design_family",
    "level": "level",
    "design": "design",
    "country": "country",
    "outcome-group": "outcome_group",
}
POOL_FIELDS = (
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
    "pvalue",
    "df",
)
NATURAL_FIELDS = ("estimate", "ci_lower", "ci_upper", "pi_lower", "pi_upper")


@dataclass(frozen=True)
class PoolOutput:
    exposure: str
    outcome: str
    align_to: str
    groups: list[PooledGroup]
    excluded: list[Exclusion]
    caution: str = CAUTION
    #: the evidence set and the options, in words and as values (shown with every result)
    evidence_set: str = ""
    options: dict[str, Any] = field(default_factory=dict)
    #: results over all strata (only with ``by``), one per pooling stratum, with the test of
    #: subgroup differences
    overall: list[dict[str, Any]] = field(default_factory=list)
    #: the rows that were pooled: one per event and group (``y``/``v`` on the analysis scale,
    #: ``weight``, ``k_units``, ``estimate_uids``)
    pooled_rows: pd.DataFrame = field(default_factory=pd.DataFrame, repr=False)
    #: the harmonised, independent estimates behind them (one row each)
    unit_rows: pd.DataFrame = field(default_factory=pd.DataFrame, repr=False)

    def to_dict(self) -> dict[str, Any]:
        """What ``exposhift pool --json`` prints."""
        return {
            "exposure": self.exposure,
            "outcome": self.outcome,
            "evidence_set": self.evidence_set,
            "options": self.options,
            "groups": [g.to_dict() for g in self.groups],
            "overall": self.overall,
            "caution": self.caution,
        }


def _excluded_records(frame: pd.DataFrame, reason: pd.Series | str) -> list[Exclusion]:
    out = frame[["estimate_uid", "study_id", "event_id"]].copy()
    out["reason"] = reason
    return [Exclusion(**rec) for rec in out.to_dict(orient="records")]


def _finite(x: Any) -> Any:
    if isinstance(x, float | np.floating) and not math.isfinite(float(x)):
        return None
    if isinstance(x, np.floating):
        return float(x)
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


def evidence_set_words(
    include_fatal: bool, min_level: int | None, left_out: tuple[int, ...] = (0,)
) -> str:
    """The evidence set of a pooled result, in words; ``left_out``: the overall levels the
    rubric in force leaves out of pooling (``exclude_from_pooling``)."""
    if min_level is not None:
        return (
            f"studies appraised at overall level >= {min_level} (not-yet-appraised "
            "studies left out), one number per event"
        )
    levels = ", ".join(str(lv) for lv in sorted(left_out))
    if include_fatal:
        if tuple(left_out) == (0,):
            return "every study, fatal-overall ones included, one number per event"
        return f"every study, those appraised at overall {levels} included, one number per event"
    if tuple(left_out) == (0,):
        return (
            "every study except those appraised fatal overall (not-yet-appraised studies "
            "included), one number per event"
        )
    if not left_out:
        return "every study (the rubric in force leaves no level out), one number per event"
    return (
        f"every study except those appraised at overall {levels} (left out by the rubric in "
        "force; not-yet-appraised studies included), one number per event"
    )


def prepare_for_pooling(
    frame: pd.DataFrame,
    *,
    include_fatal: bool = False,
    align_to: str = "increase",
    min_level: int | None = None,
    rubric: Rubric | None = None,
) -> tuple[pd.DataFrame, list[Exclusion]]:
    """Steps 2-4: the evidence set, harmonise, keep independent estimates.

    ``rubric`` says which overall levels are left out (the evidence base's rubric in force;
    None: the packaged rubric). Returns the harmonised independent units to pool and the
    left-out estimates with reasons.
    """
    excluded: list[Exclusion] = []
    if not include_fatal:
        rubric = rubric if rubric is not None else load_rubric()
        fatal = frame["level"].isin(list(rubric.exclude_from_pooling))
        if fatal.any():
            excluded += _excluded_records(
                frame[fatal],
                frame.loc[fatal, "level"].map(
                    lambda lv: (
                        f"appraisal of record overall {int(lv)} ({rubric.level_name(int(lv))}): "
                        "left out of pooling by default (--include-fatal keeps it)"
                    )
                ),
            )
        frame = frame[~fatal]
    if min_level is not None:
        low = ~(frame["level"] >= min_level)
        if low.any():
            excluded += _excluded_records(
                frame[low],
                frame.loc[low, "level"].map(
                    lambda lv: (
                        (
                            "not appraised yet"
                            if pd.isna(lv)
                            else f"appraisal of record overall {int(lv)}"
                        )
                        + f": below --min-level {min_level}"
                    )
                ),
            )
        frame = frame[~low]
    if frame.empty:
        return frame.assign(y=[], v=[]), excluded
    harm = harmonise(frame, align_to=align_to)
    kept, dropped = select_independent(harm)
    if len(dropped):
        excluded += _excluded_records(dropped, dropped["reason"])
    return kept, excluded


def _check_options(
    by: list[str], align_to: str, method: str, within_event: str, rho: float, min_level: int | None
) -> None:
    for b in by:
        if b not in STRATA:
            raise ConfigError(f"unknown stratum '{b}' for --by; accepted: {', '.join(STRATA)}")
    if align_to not in ("increase", "decrease"):
        raise ConfigError("--align takes 'increase' or 'decrease'")
    if method not in METHODS:
        raise ConfigError(f"unknown --method '{method}'; accepted: {', '.join(METHODS)}")
    if within_event not in WITHIN_EVENT:
        raise ConfigError(
            f"unknown --within-event '{within_event}'; accepted: {', '.join(WITHIN_EVENT)}"
        )
    if not (isinstance(rho, float | int) and 0.0 <= float(rho) <= 1.0):
        raise ConfigError(f"--rho is a correlation between 0 and 1 (got {rho})")
    if min_level is not None and min_level not in (0, 1, 2, 3):
        raise ConfigError(f"--min-level must be 0, 1, 2 or 3 (got {min_level})")


def pool_evidence(
    store: Store,
    exposure: str,
    outcome: str,
    *,
    method: str = "reml",
    ci: str = "hksj",
    by: list[str] | None = None,
    include_fatal: bool = False,
    min_level: int | None = None,
    align_to: str = "increase",
    alpha: float = 0.05,
    hksj_floor: bool = True,
    within_event: str = "aggregate",
    rho: float = DEFAULT_RHO,
    details: bool = False,
    rubric: Rubric | None = None,
    snapshot: EvidenceSnapshot | None = None,
    prepared: PoolOutput | None = None,
    light: bool = False,
) -> PoolOutput:
    """Pool one exposure x outcome; ``details`` adds leave-one-event-out, cumulative and the
    small-study test to each group (the τ² interval is always there). ``rubric``: a one-run
    override; by default the rubric the evidence base records. ``snapshot``: read the
    estimates from it instead of the store (:mod:`exposhift.services.snapshot`).

    For a second view of the same evidence (other strata): ``prepared``, an earlier result of
    the same exposure, outcome and evidence-set options, gives its harmonised independent
    estimates and left-out list instead of preparing them again; ``light`` leaves out what such
    a view does not show (the within-event correlation range and the across-strata test)."""
    by = list(by or [])
    if rubric is None:
        from exposhift.services.workspace import stored_rubric

        rubric = stored_rubric(store)
    _check_options(by, align_to, method, within_event, rho, min_level)
    with store.read() as conn:
        exposure = require_name(conn, "exposure", exposure)
        outcome = require_name(conn, "outcome", outcome)
        if snapshot is None:
            frame = analysis_frame(conn, exposure=exposure, outcome=outcome)
        else:
            frame = snapshot.pair(exposure, outcome)
    if frame.empty:
        raise NotFoundError(
            f"no estimates for exposure '{exposure}' and outcome '{outcome}'; "
            "'exposhift gaps' lists the combinations that have some"
        )
    options = {
        "method": method,
        "ci": ci,
        "by": by,
        "include_fatal": include_fatal,
        "min_level": min_level,
        "align_to": align_to,
        "alpha": alpha,
        "hksj_floor": hksj_floor,
        "within_event": within_event,
        "rho": float(rho) if within_event == "aggregate" else None,
    }
    if prepared is not None:
        same = {k: prepared.options.get(k) for k in ("include_fatal", "min_level", "align_to")}
        if same != {"include_fatal": include_fatal, "min_level": min_level, "align_to": align_to}:
            raise ValueError("prepared comes from another evidence set or alignment")
    words = evidence_set_words(include_fatal, min_level, tuple(rubric.exclude_from_pooling))
    if within_event != "aggregate":  # the words name the route actually used
        words = words.replace(
            "one number per event", f"estimates pooled by the {within_event} route"
        )
    if prepared is not None:
        kept, excluded = prepared.unit_rows, list(prepared.excluded)
    else:
        kept, excluded = prepare_for_pooling(
            frame,
            include_fatal=include_fatal,
            align_to=align_to,
            min_level=min_level,
            rubric=rubric,
        )
    if kept.empty:
        return PoolOutput(
            exposure, outcome, align_to, [], excluded, evidence_set=words, options=options
        )
    keys = pooling_keys([STRATA[b] for b in by])
    kept = _fill_keys(kept, keys)
    pooled = pool_event_level(
        kept,
        keys,
        method=method,
        ci=ci,
        alpha=alpha,
        hksj_floor=hksj_floor,
        within_event=within_event,
        rho=rho,
    )
    groups = [
        PooledGroup.from_record(
            _group_record(
                rec, keys, kept, pooled.rows[pooled.rows["group"] == i], options, details, light
            ),
            keys,
            excluded,
        )
        for i, rec in enumerate(pooled.table.to_dict(orient="records"))
    ]
    overall = _overall(kept, keys, by, options) if by and not light else []
    return PoolOutput(
        exposure,
        outcome,
        align_to,
        groups,
        excluded,
        evidence_set=words,
        options=options,
        overall=overall,
        pooled_rows=pooled.rows,
        unit_rows=kept,
    )


def _fill_keys(kept: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    kept = kept.copy()
    for k in keys:
        kept[k] = (
            kept[k].astype(object).where(kept[k].notna(), "not appraised" if k == "level" else "")
        )
    return kept


def natural(scale: str, values: dict[str, Any]) -> dict[str, Any]:
    """The fields of :data:`NATURAL_FIELDS` on the natural scale (ratio or difference)."""
    return {
        f: (None if values.get(f) is None else float(from_analysis_scale(scale, float(values[f]))))
        for f in NATURAL_FIELDS
        if f in values
    }


def _group_record(
    rec: dict[str, Any],
    keys: list[str],
    kept: pd.DataFrame,
    rows: pd.DataFrame,
    options: dict[str, Any],
    details: bool,
    light: bool = False,
) -> dict[str, Any]:
    mine = rows
    units = kept[kept["estimate_uid"].isin([u for uids in rows["estimate_uids"] for u in uids])]
    scale = str(units["scale"].iloc[0])
    g: dict[str, Any] = {k: _finite(rec[k]) for k in keys}
    g.update(
        {
            "k": int(rec["k"]),
            "k_events": int(rec["k_events"]),
            "k_estimates": int(rec["k_estimates"]),
            "method": rec.get("method", options["method"]),
            "ci_method": rec.get("ci_method", options["ci"]),
            "within_event": options["within_event"],
            "rho": options["rho"],
            "measure": "/".join(sorted(set(units["measure"]))),
            "scale": scale,
            **{f: _finite(rec.get(f)) for f in POOL_FIELDS},
            "notes": [n for n in str(rec.get("notes") or "").split("; ") if n],
            "sign_flipped": int(units["sign_flipped"].sum()),
            "estimates": sorted(units["estimate_uid"].tolist()),
            "events": sorted(mine["event_id"].astype(str).unique().tolist()),
        }
    )
    g["provenance"] = provenance_lines(units)
    g["natural"] = natural(scale, g)
    if scale == "log":
        g["back_transformed"] = dict(g["natural"])
    g["headline"] = (
        "single-event" if g["k_events"] == 1 else "two-events" if g["k_events"] == 2 else "pooled"
    )
    ev = mine.sort_values("event_id")
    g["event_estimates"] = (
        [
            {
                "event_id": str(r.event_id),
                "k_units": int(r.k_units),
                "y": _finite(r.y),
                "se": _finite(math.sqrt(r.v)),
                "natural": natural(
                    scale,
                    {
                        "estimate": r.y,
                        "ci_lower": r.y - 1.959963984540054 * math.sqrt(r.v),
                        "ci_upper": r.y + 1.959963984540054 * math.sqrt(r.v),
                    },
                ),
            }
            for r in ev.itertuples(index=False)
        ]
        if g["k_events"] <= 2
        else []
    )
    y, v = ev["y"].to_numpy(float), ev["v"].to_numpy(float)
    if options["within_event"] != "multilevel" and y.size >= 2:
        t2 = tau2_ci_qprofile(y, v, alpha=options["alpha"])
        g["tau2_ci"] = {
            "lower": _finite(t2.tau2_lower),
            "upper": _finite(t2.tau2_upper),
            "method": "Q-profile (Viechtbauer 2007)",
            "note": t2.note,
        }
    if g["k_events"] == 2:
        fe = pool_groups(
            ev.assign(_g=0), ["_g"], method="fe", ci="wald", alpha=options["alpha"]
        ).iloc[0]
        g["fixed_effect"] = {
            f: _finite(fe[f]) for f in ("estimate", "se", "ci_lower", "ci_upper", "pvalue")
        }
        g["fixed_effect"]["natural"] = natural(scale, g["fixed_effect"])
    if (
        not light
        and options["within_event"] == "aggregate"
        and (units["event_id"].duplicated()).any()
    ):
        g["rho_sensitivity"] = _rho_range(units, keys, options)
    if details:
        g["sensitivity"] = sensitivity(ev, scale=scale, options=options)
    return g


def _match(frame: pd.DataFrame, keys: list[str], rec: dict[str, Any]) -> np.ndarray:
    mask = np.ones(len(frame), dtype=bool)
    for k in keys:
        mask &= (frame[k].astype(object) == rec[k]).to_numpy()
    return mask


def _rho_range(units: pd.DataFrame, keys: list[str], options: dict[str, Any]) -> list[dict]:
    """The pooled result over the within-event correlations of :data:`RHO_RANGE`."""
    out = []
    for r in RHO_RANGE:
        ev = aggregate_within_event(units, keys, rho=r)
        res = pool_groups(
            ev.assign(_g=0),
            ["_g"],
            method=options["method"],
            ci=options["ci"],
            alpha=options["alpha"],
            hksj_floor=options["hksj_floor"],
        ).iloc[0]
        out.append(
            {"rho": r, **{f: _finite(res[f]) for f in ("estimate", "se", "ci_lower", "ci_upper")}}
        )
    return out


def _overall(
    kept: pd.DataFrame, keys: list[str], by: list[str], options: dict[str, Any]
) -> list[dict[str, Any]]:
    """Per pooling stratum: the result over all the ``by`` strata and the subgroup test."""
    base = pooling_keys()
    res = pool_event_level(
        kept,
        base,
        method=options["method"],
        ci=options["ci"],
        alpha=options["alpha"],
        hksj_floor=options["hksj_floor"],
        within_event=options["within_event"],
        rho=options["rho"] or 0.0,
    )
    out = []
    strata = [STRATA[b] for b in by]
    for rec in res.table.to_dict(orient="records"):
        units = kept[_match(kept, base, rec)]
        scale = str(units["scale"].iloc[0])
        o = {k: _finite(rec[k]) for k in base}
        o.update(
            {
                "k_events": int(rec["k_events"]),
                "k_estimates": int(rec["k_estimates"]),
                **{f: _finite(rec.get(f)) for f in POOL_FIELDS},
                "scale": scale,
            }
        )
        o["natural"] = natural(scale, o)
        o["subgroup_test"] = _subgroup(units, base, strata, options)
        out.append(o)
    return out


def _subgroup(
    units: pd.DataFrame, base: list[str], strata: list[str], options: dict[str, Any]
) -> dict[str, Any]:
    rows = aggregate_within_event(units, [*base, *strata], rho=options["rho"] or 0.0)
    label = rows[strata].astype(str).agg(" / ".join, axis=1)
    shared = int(rows["event_id"].duplicated().sum())
    if label.nunique() < 2:
        return {"run": False, "reason": "only one subgroup has estimates"}
    try:
        st = subgroup_test(
            rows["y"],
            rows["v"],
            label,
            method=options["method"],
            ci=options["ci"],
            alpha=options["alpha"],
            hksj_floor=options["hksj_floor"],
        )
    except AnalysisError as exc:
        return {"run": False, "reason": str(exc)}
    note = st.note
    if shared:
        note += (
            f"; {shared} event(s) appear in more than one subgroup, so the subgroups "
            "are not independent and the test is approximate"
        )
    return {"run": True, "q_between": st.q_between, "df": st.df, "pvalue": st.pvalue, "note": note}


def sensitivity(ev: pd.DataFrame, *, scale: str, options: dict[str, Any]) -> dict[str, Any]:
    """What moves the pooled number, with the event as the unit: leave one event out,
    cumulative by date of change, small-study effects (Egger only with >= 10 events)."""
    y, v = ev["y"].to_numpy(float), ev["v"].to_numpy(float)
    k = y.size
    out: dict[str, Any] = {"k_events": k}
    if k < 2:
        out["note"] = "a single event: nothing to vary"
        return out
    kw = {
        "method": options["method"],
        "ci": options["ci"],
        "alpha": options["alpha"],
        "hksj_floor": options["hksj_floor"],
    }
    if k >= 3:
        loo = leave_one_out(y, v, labels=ev["event_id"].astype(str).to_numpy(), **kw)
        worst = loo.iloc[int(np.argmax(np.abs(loo["shift"].to_numpy())))]
        out["leave_one_out"] = {
            "lowest": _finite(loo["estimate"].min()),
            "highest": _finite(loo["estimate"].max()),
            "most_influential": str(worst["omitted"]),
            "shift": _finite(worst["shift"]),
            "natural": {
                "lowest": float(from_analysis_scale(scale, loo["estimate"].min())),
                "highest": float(from_analysis_scale(scale, loo["estimate"].max())),
                "without_most_influential": float(
                    from_analysis_scale(scale, float(worst["estimate"]))
                ),
            },
            "unit": "event",
        }
    dates = ev["change_date"].astype(str).to_numpy() if "change_date" in ev else None
    if dates is not None:
        cum = cumulative(y, v, order=dates, labels=ev["event_id"].astype(str).to_numpy(), **kw)
        out["cumulative"] = [
            {
                "added": str(r.added),
                "date": str(r.order),
                "k_events": int(r.k),
                "natural": natural(
                    scale, {"estimate": r.estimate, "ci_lower": r.ci_lower, "ci_upper": r.ci_upper}
                ),
            }
            for r in cum.itertuples(index=False)
        ]
    eg = egger_test(y, v, alpha=options["alpha"])
    out["small_study"] = {
        "run": eg.run,
        "reason": eg.reason.replace("estimates", "events"),
        "intercept": _finite(eg.intercept),
        "pvalue": _finite(eg.pvalue),
    }
    return out
