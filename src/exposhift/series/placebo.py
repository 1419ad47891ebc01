"""Falsification of a series estimate: placebo dates, placebo places, negative controls.

* **Placebo dates** (in-time placebos): the same model is refitted on the pre-change points
  only, with a false change at every admissible date (at least ``min_points`` on each side and,
  with a horizon, ``horizon`` points after it). The real effect is ranked by absolute size
  among the placebo effects and itself (rank 1 = largest); the permutation-style p value is
  ``rank / (number of placebo dates + 1)`` (Abadie, Diamond & Hainmueller 2010, JASA 105:493,
  applied in time; ties count against the real effect).
* **Placebo places** (in-space placebos, Abadie et al. 2010): each comparison series is fitted
  as if exposed; the real effect is ranked among them the same way.
* **Negative-control outcome** (Lipsitch, Tchetgen Tchetgen & Cohen 2010, Epidemiology 21:383):
  a series of an outcome the change cannot plausibly affect, fitted the same way; it passes when
  its interval includes no effect.

A check *passes* when ``p <= alpha`` (0.10 by default, common practice) — the real effect stands
out from the false ones; with fewer placebos than ``1 / alpha - 1`` the check is
``inconclusive`` (the p value cannot reach ``alpha``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from exposhift.errors import AnalysisError
from exposhift.series import fit as F
from exposhift.series.its import (
    MIN_POINTS,
    SEASONAL_MIN_POINTS,
    ITSResult,
    _arrays,
    estimate_its,
    fit_its,
    seasonal_terms,
)
from exposhift.series.periods import Timeline, timeline

ALPHA = 0.10


def rank_and_p(real: float, placebos: Sequence[float]) -> tuple[int, float]:
    """Rank of ``|real|`` among ``|placebos|`` and itself (1 = largest; ties count against the
    real effect) and ``rank / (len(placebos) + 1)``."""
    p = np.abs(np.asarray(placebos, dtype=float))
    rank = 1 + int(np.sum(p >= abs(real)))
    return rank, rank / (len(p) + 1)


def verdict(p: float, n: int, alpha: float = ALPHA) -> str:
    if (n + 1) * alpha < 1:
        return "inconclusive"
    return "passed" if p <= alpha else "failed"


@dataclass(frozen=True)
class PlaceboResult:
    """Placebo effects (analysis scale) and where the real effect ranks among them."""

    kind: str  # "dates" or "places"
    real_effect: float
    labels: tuple[str, ...]  # placebo change periods, or comparison series ids
    effects: np.ndarray = field(repr=False)
    ses: np.ndarray = field(repr=False)
    rank: int = 0
    p_value: float = float("nan")
    alpha: float = ALPHA
    status: str = "inconclusive"  # passed, failed or inconclusive
    notes: tuple[str, ...] = ()
    #: naive before-after effect (no trend) at the real date and at each placebo date
    naive_real: float | None = None
    naive_effects: np.ndarray | None = field(default=None, repr=False)

    @property
    def passed(self) -> bool:
        return self.status == "passed"

    @property
    def share_significant(self) -> float | None:
        """Share of placebo effects whose 95 % interval excludes no effect."""
        if not len(self.effects):
            return None
        return float(np.mean(np.abs(self.effects) > 1.959963984540054 * self.ses))

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "real_effect": self.real_effect,
            "labels": list(self.labels),
            "effects": self.effects.tolist(),
            "ses": self.ses.tolist(),
            "rank": self.rank,
            "n_placebos": len(self.effects),
            "p_value": self.p_value,
            "alpha": self.alpha,
            "status": self.status,
            "share_significant": self.share_significant,
            "notes": list(self.notes),
            "naive_real": self.naive_real,
            "naive_effects": None if self.naive_effects is None else self.naive_effects.tolist(),
        }


def naive_before_after(y: np.ndarray, offset, cut: int, model: str) -> float:
    """Before-after ignoring any trend: difference of the means after and before ``cut``
    (gaussian) or the log of their ratio (counts; rates when there is an offset)."""
    v = y if offset is None else y / np.exp(offset)
    before, after = float(np.mean(v[:cut])), float(np.mean(v[cut:]))
    if model == "gaussian":
        return after - before
    return float(np.log(after / before)) if before > 0 and after > 0 else float("nan")


def _placebo_fits(tl: Timeline, y, offset, model, seas, lag, horizon, min_points):
    n = len(y)
    last = n - max(min_points, horizon or 0)
    cuts = list(range(min_points, last + 1))
    effects, ses = [], []
    start = None
    for cut in cuts:
        f, _, eff, se = fit_its(tl, y, offset, cut, model, seas, lag, horizon, start)
        start = f.params if model != "gaussian" else None
        effects.append(eff)
        ses.append(se)
    return cuts, np.array(effects), np.array(ses)


def placebo_dates(
    periods: Sequence,
    values: Sequence[float],
    change_at,
    *,
    denominators: Sequence[float] | None = None,
    model: str = "gaussian",
    seasonal: str | None = None,
    horizon: int | None = None,
    hac_lag: int | None = None,
    min_points: int | None = None,
    alpha: float = ALPHA,
    real: ITSResult | None = None,
) -> PlaceboResult:
    """Refit at every admissible false change date in the pre-change period (module doc).

    ``min_points`` on each side of a placebo date: 3 (Wagner et al. 2002), or 8 with seasonal
    terms (common practice). ``real`` (the result of :func:`estimate_its` with the same options)
    is computed when not given; its lag is used for every placebo fit. The naive before-after
    effect (no trend) is reported at the real date and at each placebo date beside them: when
    it is as large at the placebo dates, a before-after "effect" is a pre-existing trend.
    """
    if min_points is None:
        min_points = SEASONAL_MIN_POINTS if seasonal else MIN_POINTS
    if real is None:
        real = estimate_its(
            periods,
            values,
            change_at,
            denominators=denominators,
            model=model,
            seasonal=seasonal,
            horizon=horizon,
            hac_lag=hac_lag,
        )
    tl = timeline(periods)
    y, offset = _arrays(values, denominators, model)
    cut = tl.position(change_at)
    pre = Timeline(tl.labels[:cut], tl.index[:cut], tl.season[:cut], tl.unit)
    y_pre = y[:cut]
    off_pre = None if offset is None else offset[:cut]
    seas, _ = seasonal_terms(pre, seasonal) if seasonal else (np.zeros((cut, 0)), [])
    notes = []
    try:
        cuts, effects, ses = _placebo_fits(
            pre, y_pre, off_pre, model, seas, real.hac_lag, horizon, min_points
        )
    except F.NotConverged:
        raise
    except AnalysisError as exc:  # e.g. too short a pre-period for the seasonal terms
        cuts, effects, ses = [], np.array([]), np.array([])
        notes.append(f"no placebo date could be fitted: {exc}")
    if not cuts and not notes:
        notes.append(
            f"the pre-change period ({cut} points) is too short for any placebo date "
            f"({min_points} points on each side needed)"
        )
    rank, p = rank_and_p(real.effect, effects)
    naive = np.array([naive_before_after(y_pre, off_pre, c, model) for c in cuts])
    return PlaceboResult(
        "dates",
        real.effect,
        tuple(pre.labels[c] for c in cuts),
        effects,
        ses,
        rank,
        p,
        alpha,
        verdict(p, len(effects), alpha),
        tuple(notes),
        naive_before_after(y, offset, cut, model),
        naive,
    )


def placebo_places(
    real: ITSResult, comparisons: dict[str, ITSResult], alpha: float = ALPHA
) -> PlaceboResult:
    """Rank the real effect among the comparison series fitted as if exposed."""
    labels = tuple(sorted(comparisons))
    effects = np.array([comparisons[k].effect for k in labels])
    ses = np.array([comparisons[k].effect_se for k in labels])
    rank, p = rank_and_p(real.effect, effects)
    notes = () if labels else ("no comparison series: no placebo places",)
    return PlaceboResult(
        "places",
        real.effect,
        labels,
        effects,
        ses,
        rank,
        p,
        alpha,
        verdict(p, len(effects), alpha),
        notes,
    )


def negative_control_status(result: ITSResult) -> str:
    """``passed`` when the negative-control effect's 95 % interval includes no effect."""
    lo, hi = result.effect_ci
    return "passed" if lo <= 0.0 <= hi else "failed"


def require_same_options(a: ITSResult, b: ITSResult) -> None:
    if (a.model, a.seasonal, a.horizon) != (b.model, b.seasonal, b.horizon):
        raise AnalysisError(
            "placebo fits must use the model, seasonal terms and horizon of the real fit"
        )
