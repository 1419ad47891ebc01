"""Everything the tool reports for one exposed series: the fit in standard form, the controlled
comparison, placebo dates, placebo places and negative controls, the falsification facts for
the appraisal, and what a figure needs (:class:`SeriesFigure`).

Model choice ``"auto"`` (common practice, recorded with the result): counts are fitted with a
Poisson GLM, switched to the negative binomial when the Pearson dispersion of the Poisson fit
is above 1.5; rates and means with the gaussian model. Seasonal ``"auto"``: Fourier terms for
a sub-annual unit with at least 8 points on each side, none otherwise.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from exposhift.errors import AnalysisError
from exposhift.series.controlled import ControlledResult, estimate_controlled
from exposhift.series.its import SEASONAL_MIN_POINTS, ITSResult, estimate_its
from exposhift.series.periods import SEASON_LENGTH, timeline
from exposhift.series.placebo import (
    ALPHA,
    PlaceboResult,
    negative_control_status,
    placebo_dates,
    placebo_places,
)

DISPERSION_LIMIT = 1.5  # common practice
MODEL_CHOICES = ("auto", "gaussian", "poisson", "negbin")


@dataclass(frozen=True)
class SeriesData:
    """One extracted series as the library needs it."""

    key: str
    periods: tuple[str, ...]
    values: np.ndarray
    denominators: np.ndarray | None = None
    value_kind: str = "count"  # count, rate or mean
    role: str = "exposed"
    place: str | None = None


@dataclass(frozen=True)
class SeriesFigure:
    """What a series figure shows: observed points, the fitted line, the counterfactual with
    its 95 % band, the change period, and the placebo-date distribution."""

    series: str
    periods: list[str]
    observed: list[float]
    fitted: list[float]
    counterfactual: list[float]
    counterfactual_low: list[float]
    counterfactual_high: list[float]
    change_at: str
    value_label: str
    placebo_labels: list[str]
    placebo_effects: list[float]
    real_effect: float
    effect_scale: str
    comparisons: dict[str, dict[str, list]] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return dict(vars(self))


@dataclass(frozen=True)
class SeriesAnalysis:
    series: str
    model: str
    model_reason: str
    seasonal: str | None
    its: ITSResult
    placebo_dates: PlaceboResult
    placebo_places: PlaceboResult | None
    controlled: dict[str, ControlledResult]
    negative_controls: dict[str, ITSResult]
    figure: SeriesFigure

    @property
    def checks_passed(self) -> tuple[str, ...]:
        """Check codes (:mod:`exposhift.appraisal.checks`) this analysis supports."""
        out = []
        if self.placebo_dates.passed:
            out.append("placebo-date")
        if self.placebo_places is not None and self.placebo_places.passed:
            out.append("placebo-place")
        if self.negative_controls and all(
            negative_control_status(r) == "passed" for r in self.negative_controls.values()
        ):
            out.append("negative-control-outcome")
        return tuple(out)

    def options(self) -> dict[str, Any]:
        return {
            "model": self.model,
            "model_reason": self.model_reason,
            "seasonal": self.seasonal,
            "horizon": self.its.horizon,
            "hac_lag": self.its.hac_lag,
            "change_at": self.its.change_at,
            "placebo_alpha": self.placebo_dates.alpha,
        }

    def falsification(self) -> dict[str, Any]:
        """The figures recorded with a stored estimate and with the appraisal facts."""
        return {
            "placebo_dates": {
                k: v
                for k, v in self.placebo_dates.to_dict().items()
                if k not in ("effects", "ses", "labels")
            },
            "placebo_places": None
            if self.placebo_places is None
            else {
                k: v
                for k, v in self.placebo_places.to_dict().items()
                if k not in ("effects", "ses")
            },
            "negative_controls": {
                k: {
                    "effect": r.effect,
                    "effect_ci": list(r.effect_ci),
                    "status": negative_control_status(r),
                }
                for k, r in self.negative_controls.items()
            },
            "checks_passed": list(self.checks_passed),
        }

    def to_dict(self) -> dict[str, Any]:
        return {
            "series": self.series,
            "options": self.options(),
            "fit": self.its.to_dict(),
            "placebo_dates": self.placebo_dates.to_dict(),
            "placebo_places": None
            if self.placebo_places is None
            else self.placebo_places.to_dict(),
            "controlled": {k: v.to_dict() for k, v in self.controlled.items()},
            "negative_controls": {
                k: dict(v.to_dict(), status=negative_control_status(v))
                for k, v in self.negative_controls.items()
            },
            "checks_passed": list(self.checks_passed),
            "figure": self.figure.to_dict(),
        }


def choose_model(
    s: SeriesData, change_at, model: str, seasonal, horizon, hac_lag
) -> tuple[str, str]:
    """The model to use and why (see module doc)."""
    if model not in MODEL_CHOICES:
        raise AnalysisError(f"unknown model {model!r}; accepted: {', '.join(MODEL_CHOICES)}")
    if model != "auto":
        return model, "chosen by the reviewer"
    if s.value_kind != "count":
        return "gaussian", f"values are {s.value_kind}s: gaussian model"
    pois = estimate_its(
        s.periods,
        s.values,
        change_at,
        denominators=s.denominators,
        model="poisson",
        seasonal=seasonal,
        horizon=horizon,
        hac_lag=hac_lag,
    )
    disp = pois.diagnostics["dispersion"]
    if disp > DISPERSION_LIMIT:
        return "negbin", (
            f"counts with Pearson dispersion {disp:.2f} > {DISPERSION_LIMIT} "
            "under Poisson: negative binomial"
        )
    return "poisson", f"counts with Pearson dispersion {disp:.2f} <= {DISPERSION_LIMIT}: Poisson"


def choose_seasonal(s: SeriesData, change_at, seasonal: str | None) -> str | None:
    if seasonal != "auto":
        return None if seasonal in (None, "none") else seasonal
    tl = timeline(s.periods)
    if tl.unit not in SEASON_LENGTH:
        return None
    cut = tl.position(change_at)
    return "fourier" if min(cut, len(tl.index) - cut) >= SEASONAL_MIN_POINTS else None


def analyse_series(
    exposed: SeriesData,
    change_at,
    *,
    comparisons: Sequence[SeriesData] = (),
    negative_controls: Sequence[SeriesData] = (),
    model: str = "auto",
    seasonal: str | None = "auto",
    horizon: int | None = None,
    hac_lag: int | None = None,
    alpha: float = ALPHA,
) -> SeriesAnalysis:
    """Fit, compare and falsify one exposed series with the same options throughout."""
    seas = choose_seasonal(exposed, change_at, seasonal)
    chosen, why = choose_model(exposed, change_at, model, seas, horizon, hac_lag)

    def fit(s: SeriesData) -> ITSResult:
        return estimate_its(
            s.periods,
            s.values,
            change_at,
            denominators=s.denominators,
            model=chosen,
            seasonal=seas,
            horizon=horizon,
            hac_lag=hac_lag,
        )

    real = fit(exposed)
    dates = placebo_dates(
        exposed.periods,
        exposed.values,
        change_at,
        denominators=exposed.denominators,
        model=chosen,
        seasonal=seas,
        horizon=horizon,
        hac_lag=real.hac_lag,
        alpha=alpha,
        real=real,
    )
    comp_fits = {c.key: fit(c) for c in comparisons}
    places = placebo_places(real, comp_fits, alpha) if comparisons else None
    controlled = {
        c.key: estimate_controlled(
            exposed.periods,
            exposed.values,
            c.periods,
            c.values,
            change_at,
            denominators=exposed.denominators,
            comp_denominators=c.denominators,
            model=chosen,
            seasonal=seas,
            horizon=horizon,
            hac_lag=hac_lag,
        )
        for c in comparisons
    }
    negs = {s.key: fit(s) for s in negative_controls}
    label = {
        "count": "rate" if exposed.denominators is not None else "count",
        "rate": "rate",
        "mean": "mean",
    }.get(exposed.value_kind, exposed.value_kind)
    figure = SeriesFigure(
        series=exposed.key,
        periods=list(real.periods),
        observed=real.observed.tolist(),
        fitted=real.fitted.tolist(),
        counterfactual=real.counterfactual.tolist(),
        counterfactual_low=real.counterfactual_low.tolist(),
        counterfactual_high=real.counterfactual_high.tolist(),
        change_at=real.change_at,
        value_label=label,
        placebo_labels=list(dates.labels),
        placebo_effects=dates.effects.tolist(),
        real_effect=real.effect,
        effect_scale=real.effect_scale,
        comparisons={
            k: {"periods": list(r.periods), "observed": r.observed.tolist()}
            for k, r in comp_fits.items()
        },
    )
    return SeriesAnalysis(
        exposed.key, chosen, why, seas, real, dates, places, controlled, negs, figure
    )
