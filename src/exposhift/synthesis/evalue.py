"""E-values: how strong an unmeasured confounder would have to be to explain an effect away.

VanderWeele & Ding 2017 (Ann Intern Med 167:268, "Sensitivity analysis in observational
research: introducing the E-value"):

* for a risk ratio RR > 1, ``E = RR + sqrt(RR * (RR - 1))``; for RR < 1 the same formula is
  applied to 1 / RR;
* the E-value of the confidence interval is that of the limit closest to no effect, and 1 when
  the interval includes no effect;
* other measures are first brought to the risk-ratio scale with the paper's approximations:
  an odds ratio or hazard ratio of a rare outcome (< 15 %) is taken as a risk ratio; an odds
  ratio of a common outcome as ``RR ≈ sqrt(OR)``; a hazard ratio of a common outcome as
  ``RR ≈ (1 - 0.5**sqrt(HR)) / (1 - 0.5**sqrt(1 / HR))``; a standardised mean difference
  ``d`` (continuous outcome) as ``RR ≈ exp(0.91 * d)`` with interval
  ``exp(0.91 * d ± 1.78 * SE(d))``.

A raw difference (not standardised), a percent change without a ratio reading, or any other
measure has no E-value here: the result says "not defined" and why. An E-value measures
unmeasured *confounding* only; it says nothing about measurement error, selection or a
concurrent change that also moved the outcome in the comparison group.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from exposhift.errors import AnalysisError

#: the measures :func:`e_value` accepts
MEASURES = ("RR", "IRR", "OR", "HR", "SMD")
#: the outcome risk from which an outcome counts as common (VanderWeele & Ding 2017: 15 %)
COMMON_OUTCOME = 0.15
#: the paper's multipliers for a standardised mean difference
SMD_SLOPE, SMD_SE = 0.91, 1.78


@dataclass(frozen=True)
class EValue:
    """``point``: E-value of the estimate; ``ci``: of the CI limit closest to no effect (1 when
    the interval includes it; None without an interval). ``defined`` False means no E-value
    exists for this input and ``reason`` says why. ``rr``: the risk ratio the E-value rests on
    (after conversion); ``conversion``: which approximation was used, in words."""

    point: float | None
    ci: float | None
    defined: bool
    measure: str
    rr: float | None = None
    rr_lower: float | None = None
    rr_upper: float | None = None
    conversion: str = ""
    reason: str = ""

    def to_dict(self) -> dict:
        return dict(vars(self))

    def words(self) -> str:
        """The E-value in one sentence (what would explain the effect away)."""
        if not self.defined:
            return f"E-value not defined: {self.reason}"
        ci = (
            ""
            if self.ci is None
            else f"; for the confidence limit closest to no effect {self.ci:.2f}"
        )
        return (
            f"E-value {self.point:.2f}{ci}: an unmeasured confounder associated with both the "
            f"exposure change and the outcome by a risk ratio of at least {self.point:.2f} each "
            "could explain the estimate away; weaker confounding could not "
            "(VanderWeele & Ding 2017)"
        )


def e_value_rr(rr: float) -> float:
    """E-value of a risk ratio: ``RR + sqrt(RR(RR-1))`` on the side of RR >= 1
    (VanderWeele & Ding 2017, Ann Intern Med 167:268, eq. in Table 2)."""
    if not (isinstance(rr, int | float) and math.isfinite(rr) and rr > 0):
        raise AnalysisError(f"a risk ratio must be a positive finite number (got {rr!r})")
    r = rr if rr >= 1 else 1.0 / rr
    return r + math.sqrt(r * (r - 1.0))


def _not_defined(measure: str, reason: str) -> EValue:
    return EValue(None, None, False, measure, reason=reason)


def _to_rr(measure: str, x: float, baseline_risk: float | None) -> tuple[float, str]:
    """One value on the risk-ratio scale, with the conversion in words."""
    if measure in ("RR", "IRR"):
        return x, "none (a risk or rate ratio)"
    common = baseline_risk is not None and baseline_risk >= COMMON_OUTCOME
    if measure == "OR":
        if common:
            return math.sqrt(x), "odds ratio of a common outcome: RR ≈ sqrt(OR)"
        return x, "odds ratio of a rare outcome taken as a risk ratio"
    if common:  # HR
        return (
            (1.0 - 0.5 ** math.sqrt(x)) / (1.0 - 0.5 ** math.sqrt(1.0 / x)),
            "hazard ratio of a common outcome: RR ≈ (1 − 0.5^√HR) / (1 − 0.5^√(1/HR))",
        )
    return x, "hazard ratio of a rare outcome taken as a risk ratio"


def e_value(
    estimate: float,
    lower: float | None = None,
    upper: float | None = None,
    measure: str = "RR",
    baseline_risk: float | None = None,
    se: float | None = None,
) -> EValue:
    """The E-value of an estimate and of its confidence interval (VanderWeele & Ding 2017).

    ``measure``: RR or IRR (ratios), OR and HR (converted; ``baseline_risk`` is the outcome
    risk in the unexposed, which decides whether the outcome is common, i.e. >= 15 %; without
    it the outcome is taken as rare and the result says so), SMD (a standardised mean
    difference; the interval from ``lower``/``upper`` on the SMD scale or from ``se``). Ratios
    are given on the natural scale (e.g. 1.25, not log 1.25).
    """
    m = str(measure or "").strip().upper()
    if m not in MEASURES:
        return _not_defined(
            m or "?",
            f"no E-value for measure {measure!r}: E-values exist for risk-type ratios "
            f"({', '.join(MEASURES[:4])}) and, approximately, for a standardised mean "
            "difference (SMD); a raw difference needs its standard deviation first",
        )
    if baseline_risk is not None and not (0.0 < float(baseline_risk) < 1.0):
        raise AnalysisError(f"baseline_risk is a proportion between 0 and 1 (got {baseline_risk})")
    values = [v for v in (estimate, lower, upper) if v is not None]
    if not all(isinstance(v, int | float) and math.isfinite(v) for v in values):
        raise AnalysisError("estimate and confidence limits must be finite numbers")
    if lower is not None and upper is not None and lower > upper:
        raise AnalysisError(f"lower limit {lower} is above upper limit {upper}; swap them")
    if m == "SMD":
        if se is not None and lower is None and upper is None:
            lower, upper = estimate - 1.959963984540054 * se, estimate + 1.959963984540054 * se
        seq = None
        if lower is not None and upper is not None:
            seq = (upper - lower) / (2 * 1.959963984540054)
        rr = math.exp(SMD_SLOPE * estimate)
        lo = None if seq is None else math.exp(SMD_SLOPE * estimate - SMD_SE * seq)
        hi = None if seq is None else math.exp(SMD_SLOPE * estimate + SMD_SE * seq)
        conversion = "standardised mean difference: RR ≈ exp(0.91·d), CI exp(0.91·d ± 1.78·SE)"
    else:
        if any(v <= 0 for v in values):
            return _not_defined(
                m, "a ratio must be positive; give it on the natural scale, not the log scale"
            )
        rr, conversion = _to_rr(m, float(estimate), baseline_risk)
        lo = None if lower is None else _to_rr(m, float(lower), baseline_risk)[0]
        hi = None if upper is None else _to_rr(m, float(upper), baseline_risk)[0]
        if m in ("OR", "HR") and baseline_risk is None:
            conversion += " (no baseline risk given: the outcome was assumed rare)"
    point = e_value_rr(rr)
    ci = None
    if lo is not None or hi is not None:
        if rr >= 1:
            ci = 1.0 if lo is None or lo <= 1 else e_value_rr(lo)
        else:
            ci = 1.0 if hi is None or hi >= 1 else e_value_rr(hi)
    return EValue(point, ci, True, m, rr, lo, hi, conversion)


def e_value_of_pooled(natural: dict, measure: str, baseline_risk: float | None = None) -> EValue:
    """The E-value of a pooled result given on the natural scale (``estimate``, ``ci_lower``,
    ``ci_upper``) with its measure label (``"OR/RR"`` for a pool of several; a mix of ratio
    measures, or a percent change back-transformed to a ratio, is read as a risk ratio and
    said so)."""
    parts = [p.strip().upper() for p in str(measure or "").split("/") if p.strip()]
    ratio = {"RR", "IRR", "OR", "HR", "PCT_CHANGE"}
    if parts and all(p in ratio for p in parts):
        kinds = {"RR" if p == "PCT_CHANGE" else p for p in parts}
        m = kinds.pop() if len(kinds) == 1 else "RR"
        out = e_value(
            natural.get("estimate"),
            natural.get("ci_lower"),
            natural.get("ci_upper"),
            measure=m,
            baseline_risk=baseline_risk,
        )
        mixed = len(set(parts)) > 1 or "PCT_CHANGE" in parts
        if mixed and out.defined:
            out = EValue(
                out.point,
                out.ci,
                True,
                "/".join(parts),
                out.rr,
                out.rr_lower,
                out.rr_upper,
                "a pool of several ratio measures or of percent changes (1 + p/100, a ratio "
                "of rates), read as a risk ratio (approximate)",
            )
        return out
    if natural.get("estimate") is None:
        return _not_defined(str(measure), "no pooled estimate")
    return e_value(natural["estimate"], measure=str(measure or "?"))
