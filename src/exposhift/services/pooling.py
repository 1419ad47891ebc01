"""The ``pool`` action: harmonise, keep independent estimates, leave out fatal studies, pool.

Steps (each reported, never silent):

1. the estimates of one exposure and one outcome (analysis frame);
2. studies whose appraisal of record is in the rubric's ``exclude_from_pooling`` levels (fatal by
   default) are left out unless ``include_fatal``;
3. harmonise to the analysis scale, every estimate expressed for a change in the direction
   ``align_to`` (a ban's estimate has its sign flipped when aligning to ``increase``);
4. one estimate per event x population x outcome data source (independence);
5. pool per stratum: measure group, estimate kind and exposure increment always (never level
   with slope changes, nor policy effects with per-unit effects), plus the strata asked for.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from exposhift.appraisal.rubric import load_rubric
from exposhift.errors import ConfigError, NotFoundError
from exposhift.services.lookup import require_name
from exposhift.store.database import Store
from exposhift.store.queries import analysis_frame
from exposhift.synthesis.grouped import pool_groups
from exposhift.synthesis.harmonise import harmonise
from exposhift.synthesis.independence import pooling_keys, select_independent
from exposhift.synthesis.pooling import CAUTION
from exposhift.synthesis.sensitivity import egger_test, leave_one_out, tau2_ci_qprofile

#: --by choices -> analysis frame columns
STRATA = {"design-family": "design_family", "level": "level", "design": "design",
          "country": "country", "outcome-group": "outcome_group"}


@dataclass(frozen=True)
class PoolOutput:
    exposure: str
    outcome: str
    align_to: str
    groups: list[dict[str, Any]]
    excluded: list[dict[str, Any]]
    caution: str = CAUTION
    #: the harmonised, independent estimates that were pooled (one row each; ``y``/``v`` on the
    #: analysis scale), for plots and tables that show the pooled rows
    pooled_rows: pd.DataFrame = field(default_factory=pd.DataFrame, repr=False)


def _excluded_records(frame: pd.DataFrame, reason: pd.Series | str) -> list[dict[str, Any]]:
    out = frame[["estimate_uid", "study_id", "event_id"]].copy()
    out["reason"] = reason
    return out.to_dict(orient="records")


def _finite(x: Any) -> Any:
    if isinstance(x, float | np.floating) and not math.isfinite(float(x)):
        return None
    if isinstance(x, np.floating):
        return float(x)
    if isinstance(x, np.integer):
        return int(x)
    return x


def prepare_for_pooling(
    frame: pd.DataFrame, *, include_fatal: bool = False, align_to: str = "increase"
) -> tuple[pd.DataFrame, list[dict[str, Any]]]:
    """Steps 2-4: leave out fatal studies, harmonise, keep independent estimates.

    Returns the harmonised estimates to pool and the left-out ones with their reasons.
    """
    excluded: list[dict[str, Any]] = []
    if not include_fatal:
        rubric = load_rubric(None)
        fatal = frame["level"].isin(list(rubric.exclude_from_pooling))
        if fatal.any():
            excluded += _excluded_records(
                frame[fatal],
                frame.loc[fatal, "level"].map(
                    lambda lv: f"appraisal of record overall {int(lv)} (fatal): left out of "
                    "pooling by default (--include-fatal keeps it)"))
        frame = frame[~fatal]
    if frame.empty:
        return frame.assign(y=[], v=[]), excluded
    harm = harmonise(frame, align_to=align_to)
    kept, dropped = select_independent(harm)
    if len(dropped):
        excluded += _excluded_records(dropped, dropped["reason"])
    return kept, excluded


def pool_evidence(
    store: Store,
    exposure: str,
    outcome: str,
    *,
    method: str = "reml",
    ci: str = "hksj",
    by: list[str] | None = None,
    include_fatal: bool = False,
    align_to: str = "increase",
    alpha: float = 0.05,
    hksj_floor: bool = False,
    details: bool = False,
) -> PoolOutput:
    """Pool one exposure x outcome; ``details`` adds a ``sensitivity`` entry to each group."""
    by = list(by or [])
    for b in by:
        if b not in STRATA:
            raise ConfigError(f"unknown stratum '{b}' for --by; accepted: {', '.join(STRATA)}")
    if align_to not in ("increase", "decrease"):
        raise ConfigError("--align takes 'increase' or 'decrease'")
    with store.read() as conn:
        exposure = require_name(conn, "exposure", exposure)
        outcome = require_name(conn, "outcome", outcome)
        frame = analysis_frame(conn, exposure=exposure, outcome=outcome)
    if frame.empty:
        raise NotFoundError(
            f"no estimates for exposure '{exposure}' and outcome '{outcome}'; "
            "'exposhift gaps' lists the combinations that have some")
    kept, excluded = prepare_for_pooling(frame, include_fatal=include_fatal, align_to=align_to)
    if kept.empty:
        return PoolOutput(exposure, outcome, align_to, [], excluded)
    keys = pooling_keys([STRATA[b] for b in by])
    kept = kept.copy()
    for k in keys:
        kept[k] = kept[k].astype(object).where(kept[k].notna(), "not appraised"
                                               if k == "level" else "")
    table = pool_groups(kept, by=keys, y="y", v="v", method=method, ci=ci, alpha=alpha,
                        hksj_floor=hksj_floor)
    scales = kept.groupby(keys, sort=True)["scale"].first()
    measures = kept.groupby(keys, sort=True)["measure"].agg(lambda s: "/".join(sorted(set(s))))
    flipped = kept.groupby(keys, sort=True)["sign_flipped"].sum()
    members = kept.groupby(keys, sort=True)["estimate_uid"].agg(list)
    groups = []
    for rec in table.to_dict(orient="records"):
        gkey = tuple(rec[k] for k in keys)
        gkey = gkey[0] if len(gkey) == 1 else gkey
        scale = scales.loc[gkey]
        g = {k: _finite(rec[k]) for k in keys}
        g.update({
            "k": int(rec["k"]), "method": method, "ci_method": ci,
            "measure": measures.loc[gkey], "scale": scale,
            **{f: _finite(rec[f]) for f in ("estimate", "se", "ci_lower", "ci_upper",
                                             "pi_lower", "pi_upper", "tau2", "i2", "q",
                                             "q_pvalue")},
            "sign_flipped": int(flipped.loc[gkey]),
            "estimates": members.loc[gkey],
        })
        if scale == "log":
            g["back_transformed"] = {
                f: (None if g[f] is None else float(np.exp(g[f])))
                for f in ("estimate", "ci_lower", "ci_upper", "pi_lower", "pi_upper")}
        g["excluded"] = excluded
        if details:
            rows = kept.set_index("estimate_uid").loc[g["estimates"]]
            g["sensitivity"] = sensitivity(rows, method=method, ci=ci, alpha=alpha,
                                           hksj_floor=hksj_floor)
        groups.append(g)
    return PoolOutput(exposure, outcome, align_to, groups, excluded, pooled_rows=kept)


def sensitivity(rows: pd.DataFrame, *, method: str, ci: str, alpha: float,
                hksj_floor: bool) -> dict[str, Any]:
    """What moves the pooled number: τ² interval, leave-one-out, small-study effects."""
    y, v = rows["y"].to_numpy(float), rows["v"].to_numpy(float)
    k = y.size
    out: dict[str, Any] = {"k": k}
    if k < 2:
        out["note"] = "a single estimate: nothing to vary"
        return out
    t2 = tau2_ci_qprofile(y, v, alpha=alpha)
    out["tau2_ci"] = {"lower": _finite(t2.tau2_lower), "upper": _finite(t2.tau2_upper),
                      "method": "Q-profile (Viechtbauer 2007)", "note": t2.note}
    loo = leave_one_out(y, v, labels=rows["study_id"].to_numpy(), method=method, ci=ci,
                        alpha=alpha, hksj_floor=hksj_floor)
    worst = loo.iloc[int(np.argmax(np.abs(loo["shift"].to_numpy())))]
    out["leave_one_out"] = {
        "lowest": _finite(loo["estimate"].min()), "highest": _finite(loo["estimate"].max()),
        "most_influential": str(worst["omitted"]), "shift": _finite(worst["shift"]),
    }
    eg = egger_test(y, v, alpha=alpha)
    out["small_study"] = {"run": eg.run, "reason": eg.reason,
                          "intercept": _finite(eg.intercept), "pvalue": _finite(eg.pvalue)}
    return out
