"""Dose-response: does the effect grow with the size of the exposure change?

Mixed-effects meta-regression of the aligned effect on the size of the change, with the
Knapp–Hartung adjustment (Knapp & Hartung 2003, Stat Med 22:2693), by
:func:`exposhift.synthesis.metareg.meta_regression` (REML τ² by default). Rules:

- Data: independent units at level ≥ ``min_level`` in the main stratum of the exposure ×
  outcome (see :mod:`exposhift.replication.triangulation`), one per event (the best-appraised,
  then the most precise), whose event reports ``change_size``. Sizes in different units are
  never mixed: the unit reported by most events is used and the others are named.
- The moderator is |change_size|: estimates are aligned to an exposure increase, so a decrease
  of size s whose effect is −β·s becomes +β·s; the slope β is the change in the aligned effect
  per unit of change, on the analysis scale (log scale for ratio measures).
- Run only with ≥ ``dose_min_events`` such events (about 5+ needed, METHODS.md §5; common
  practice) and at least two distinct sizes; otherwise the reason is returned.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd

from exposhift.errors import AnalysisError
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.replication.triangulation import STRATA
from exposhift.synthesis.harmonise import GROUP_SCALES
from exposhift.synthesis.metareg import meta_regression


@dataclass(frozen=True)
class DoseResponse:
    """Outcome of the dose-response step: ``run`` False comes with the ``reason``."""

    run: bool
    reason: str
    k: int = 0
    unit: str = ""
    events: tuple[str, ...] = ()
    intercept: float = float("nan")
    slope: float = float("nan")
    slope_se: float = float("nan")
    slope_ci_lower: float = float("nan")
    slope_ci_upper: float = float("nan")
    slope_pvalue: float = float("nan")
    tau2: float = float("nan")
    r2: float = float("nan")
    interpretation: str = ""

    def to_dict(self) -> dict:
        d = asdict(self)
        d["events"] = list(self.events)
        return {k: (None if isinstance(v, float) and np.isnan(v) else v) for k, v in d.items()}


def dose_response(
    units: pd.DataFrame,
    main: dict[str, str] | None,
    settings: ReplicationSettings = DEFAULTS,
) -> DoseResponse:
    """Dose-response meta-regression for ONE exposure × outcome.

    ``units``: that key's prepared units (:func:`~exposhift.replication.families.prepare_units`);
    ``main``: its main stratum (values of :data:`~exposhift.replication.triangulation.STRATA`),
    None when nothing could be pooled.
    """
    need = settings.dose_min_events
    if main is None:
        return DoseResponse(
            False,
            f"not run: no estimate at level ≥ {settings.min_level} with a variance to regress",
        )
    u = units[
        units["good"].to_numpy(bool)
        & np.isfinite(units["y"].to_numpy(float))
        & (units["v"].to_numpy(float) > 0)
    ]
    for col in STRATA:
        u = u[u[col].fillna("").astype(str) == str(main[col])]
    size = pd.to_numeric(u.get("change_size"), errors="coerce") if "change_size" in u else None
    if size is None:
        return DoseResponse(False, "not run: the evidence has no change_size column")
    u = u.assign(_size=size.abs()).dropna(subset=["_size"])
    u = u.sort_values(["event_id", "level", "v"], ascending=[True, False, True], kind="stable")
    u = u.drop_duplicates("event_id", keep="first")
    units_col = (
        u["change_unit"].fillna("").astype(str)
        if "change_unit" in u
        else pd.Series("", index=u.index)
    )
    note = ""
    if units_col.nunique() > 1:
        counts = units_col.value_counts()
        top = sorted(counts[counts == counts.max()].index)[0]
        others = ", ".join(f"'{x}'" for x in sorted(set(counts.index) - {top}))
        note = f"; events with sizes in {others} left out (sizes in different units)"
        u = u[units_col == top]
        units_col = units_col[units_col == top]
    unit = units_col.iloc[0] if len(units_col) else ""
    k = len(u)
    ids = tuple(u["event_id"].astype(str))
    if k < need:
        return DoseResponse(
            False,
            f"not run: {k} independent event(s) at level ≥ "
            f"{settings.min_level} report the size of the change in the "
            f"main stratum; needs ≥ {need}{note}",
            k=k,
            unit=unit,
            events=ids,
        )
    if u["_size"].nunique() < 2:
        return DoseResponse(
            False,
            "not run: every event reports the same size of change, so "
            f"there is no variation to regress on{note}",
            k=k,
            unit=unit,
            events=ids,
        )
    try:
        res = meta_regression(
            u["y"].to_numpy(float),
            u["v"].to_numpy(float),
            pd.DataFrame({"change_size": u["_size"].to_numpy(float)}),
            method=settings.pool_method,
            knapp_hartung=True,
            alpha=settings.alpha,
        )
    except AnalysisError as exc:
        return DoseResponse(False, f"not run: {exc}", k=k, unit=unit, events=ids)
    row = res.coefficients.set_index("term")
    b = row.loc["change_size"]
    group = str(main.get("measure_group", ""))
    level = f"{100 * (1 - settings.alpha):g}% CI"
    kh = f"Knapp–Hartung t on {res.df_resid} df"
    if GROUP_SCALES.get(group) == "log":
        # a slope on the log scale is a ratio of ratios per unit of change
        f = np.exp([b["estimate"], b["ci_lower"], b["ci_upper"]])
        interp = (
            f"each additional {unit or 'unit'} of change multiplies the ratio for an "
            f"exposure increase by {f[0]:.3g} ({level} {f[1]:.3g} to {f[2]:.3g}, {kh})"
            f"{note}"
        )
    else:
        verb = "raises" if b["estimate"] > 0 else "lowers"
        interp = (
            f"each additional {unit or 'unit'} of change {verb} the difference for an "
            f"exposure increase by {abs(b['estimate']):.3g} ({level} "
            f"{b['ci_lower']:.3g} to {b['ci_upper']:.3g}, {kh}){note}"
        )
    return DoseResponse(
        True,
        f"run on {k} independent events with a reported size of change{note}",
        k=k,
        unit=unit,
        events=ids,
        intercept=float(row.loc["intercept", "estimate"]),
        slope=float(b["estimate"]),
        slope_se=float(b["se"]),
        slope_ci_lower=float(b["ci_lower"]),
        slope_ci_upper=float(b["ci_upper"]),
        slope_pvalue=float(b["pvalue"]),
        tau2=float(res.tau2),
        r2=float(res.r2),
        interpretation=interp,
    )
