"""One suggestion per certainty domain, from the cell's own numbers, with its reason in words.

Rules (settings in ``data/certainty.toml``; sources beside each):

Rating down (structure of Guyatt et al. 2011, J Clin Epidemiol 64:383 and the GRADE series):

* ``bias`` — share of the pooled random-effects weight carried by events whose (lowest)
  consensus overall level is at or below ``bias.weak_level`` (unappraised ones counted when
  ``unappraised_as_weak``): above ``weight_share`` one step, above ``weight_share_two`` two.
* ``inconsistency`` — one step for a ``discordant`` replication status; one step when, with 3+
  events, heterogeneity is shown (Q p < ``alpha_q`` or the Q-profile τ² interval excludes 0;
  Viechtbauer 2007) *and* the prediction interval (Higgins, Thompson & Spiegelhalter 2009)
  includes no effect while the confidence interval does not; both: two steps. With fewer than
  3 events and no discordance: not assessable.
* ``imprecision`` — against the committee's decision threshold T (a ratio; 1/T below 1): one
  step when the CI includes no effect or crosses T on the estimate's side, two when it reaches
  past both 1/T and T. The optimal information size is not assessed: the evidence base holds
  effect estimates, not event counts.
* ``indirectness`` — weight share of events rated at or below ``weak_level`` on the rubric's
  applicability domain above ``weight_share``: one step; no rating at all: not assessable.
* ``small-study`` — Egger's test (Egger et al. 1997) on the pooled events, only with
  ``min_events`` or more (Sterne et al. 2011, BMJ 343:d4002); p < ``alpha``: one step.

Rating up (each only when the tool's own numbers support it):

* ``large-effect`` — a pooled ratio at least ``ratio`` from no effect with a CI excluding no
  effect: one step; at least ``ratio_two`` with the CI limit nearest no effect beyond
  ``ratio``: two. Not while risk of bias is a concern (common practice in the GRADE series).
* ``dose-response`` — the meta-regression slope on the size of the change (Knapp-Hartung CI)
  excludes 0 in the direction of the effect.
* ``reversal`` — a reversal that counts (both events count for replication).
* ``replication`` — status replicated-place, replicated-time or convergent; a replicated-time
  status resting on the reversal alone is left to ``reversal`` (one fact is not counted twice).
* ``triangulation`` — design families agree (the replication report's triangulation).

No rate-up is suggested with fewer than 2 pooled events (our rule) or while risk of bias is a
concern (the GRADE series rates up evidence without serious limitations; from memory), and the
rate-ups count for at most ``max_steps_up`` steps together (a committee setting).

Reversal, replication and triangulation are never suggested while the status is provisional
(the expected direction was inferred from the same data). Replication is not suggested while
the status is imprecise (its pooled interval does not exclude no effect): that is a question
of imprecision, rated down under its own domain, not a strength to rate up.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from exposhift.certainty.domains import FINAL, LEVELS, move, steps
from exposhift.certainty.facts import CellFacts, share_at_or_below
from exposhift.certainty.settings import CertaintySettings
from exposhift.synthesis.evalue import EValue, e_value_of_pooled
from exposhift.synthesis.sensitivity import egger_test

REPLICATED = ("convergent", "replicated-place", "replicated-time")


@dataclass(frozen=True)
class Suggestion:
    """The tool's suggestion for one domain: rating, steps, reason in words, the numbers."""

    domain: str
    rating: str
    reason: str
    numbers: dict[str, Any] = field(default_factory=dict)

    @property
    def steps(self) -> int:
        return steps(self.domain, self.rating)

    def to_dict(self) -> dict[str, Any]:
        return {
            "domain": self.domain,
            "rating": self.rating,
            "steps": self.steps,
            "reason": self.reason,
            "numbers": self.numbers,
        }


@dataclass(frozen=True)
class CellSuggestions:
    """All suggestions of one cell, the level they add up to and the E-value."""

    exposure: str
    outcome: str
    start_level: str
    start_why: str
    domains: list[Suggestion]
    level: str
    e_value: EValue
    settings_fingerprint: str
    facts: CellFacts
    max_steps_up: int = 2

    def of(self, domain: str) -> Suggestion | None:
        return next((s for s in self.domains if s.domain == domain), None)

    def suggested_rating(self, domain: str) -> str | None:
        """The suggested rating of a domain (the level for the final ``certainty``)."""
        if domain == FINAL:
            return self.level
        s = self.of(domain)
        return None if s is None else s.rating

    def suggested_reason(self, domain: str) -> str:
        if domain == FINAL:
            return self.level_reason()
        s = self.of(domain)
        return "" if s is None else s.reason

    def level_reason(self) -> str:
        moved = [s for s in self.domains if s.steps]
        if not moved:
            return f"starts at {self.start_level} ({self.start_why}); no domain moves it"
        parts = ", ".join(f"{s.domain} {s.rating}" for s in moved)
        return f"starts at {self.start_level}; {parts}: {self.level}"


def _g(x: Any) -> str:
    return "n/a" if x is None or (isinstance(x, float) and math.isnan(x)) else f"{x:.3g}"


def _interval(nat: dict[str, Any], lo: str, hi: str) -> tuple[float, float] | None:
    a, b = nat.get(lo), nat.get(hi)
    return None if a is None or b is None else (float(a), float(b))


def _bias(f: CellFacts, s: CertaintySettings) -> Suggestion:
    if not f.k_events:
        return Suggestion("bias", "not-assessable", "no pooled events")
    share, evs = share_at_or_below(f.events, "level", s.bias_weak_level, s.unappraised_as_weak)
    nums = {"weight_share_weak": round(share, 4), "events_weak": evs, "k_events": f.k_events}
    what = (
        f"{share:.0%} of the pooled weight rests on events appraised at level "
        f"≤ {s.bias_weak_level}" + (" or not appraised" if s.unappraised_as_weak else "")
    )
    if share > s.bias_weight_share_two:
        return Suggestion("bias", "down-two", f"{what} (above {s.bias_weight_share_two:.0%})", nums)
    if share > s.bias_weight_share:
        return Suggestion("bias", "down-one", f"{what} (above {s.bias_weight_share:.0%})", nums)
    return Suggestion("bias", "none", f"{what} (at most {s.bias_weight_share:.0%})", nums)


def _inconsistency(f: CellFacts, s: CertaintySettings) -> Suggestion:
    p = f.pooled
    null = 1.0 if f.scale == "log" else 0.0
    t2 = p.get("tau2_ci") or {}
    nums = {
        "status": f.status,
        "k_events": f.k_events,
        "tau2": p.get("tau2"),
        "tau2_ci": [t2.get("lower"), t2.get("upper")],
        "i2": p.get("i2"),
        "q_pvalue": p.get("q_pvalue"),
        "pi": [f.natural.get("pi_lower"), f.natural.get("pi_upper")],
    }
    reasons, n = [], 0
    if f.status == "discordant":
        n += 1
        reasons.append(f"replication status discordant ({f.status_rule})")
    pi, ci = (
        _interval(f.natural, "pi_lower", "pi_upper"),
        _interval(f.natural, "ci_lower", "ci_upper"),
    )
    if f.k_events >= 3 and pi is not None and ci is not None:
        qp, lower = p.get("q_pvalue"), t2.get("lower")
        shown = (qp is not None and qp < s.inconsistency_alpha_q) or (
            lower is not None and lower > 0
        )
        pi_cross = pi[0] <= null <= pi[1]
        ci_cross = ci[0] <= null <= ci[1]
        words = (
            f"τ² {_g(p.get('tau2'))} (Q-profile interval {_g(t2.get('lower'))} to "
            f"{_g(t2.get('upper'))}), Q p {_g(qp)}; prediction interval {_g(pi[0])} to "
            f"{_g(pi[1])}"
        )
        if shown and pi_cross and not ci_cross:
            n += 1
            reasons.append(f"{words} includes no effect while the CI excludes it")
        elif not reasons:
            if not shown:
                tail = "heterogeneity not shown"
            elif not pi_cross:
                tail = "the prediction interval excludes no effect"
            else:
                tail = "the prediction interval and the CI both include no effect (imprecision)"
            return Suggestion("inconsistency", "none", f"{words}: {tail}", nums)
    elif not reasons:
        return Suggestion(
            "inconsistency",
            "not-assessable",
            f"{f.k_events} event(s): consistency across events needs 3 or more (a prediction "
            "interval needs k ≥ 3; Higgins, Thompson & Spiegelhalter 2009)",
            nums,
        )
    rating = {0: "none", 1: "down-one"}.get(n, "down-two")
    return Suggestion("inconsistency", rating, "; ".join(reasons), nums)


def _imprecision(f: CellFacts, s: CertaintySettings) -> Suggestion:
    ci = _interval(f.natural, "ci_lower", "ci_upper")
    if not f.k_events or ci is None:
        return Suggestion("imprecision", "not-assessable", "no pooled confidence interval")
    est = float(f.natural["estimate"])
    ois = (
        "optimal information size not assessed: the evidence base holds effect estimates, "
        "not event counts or sample sizes"
    )
    if f.scale == "log":
        hi, lo, null, unit = s.decision_ratio, 1.0 / s.decision_ratio, 1.0, "ratio"
    elif s.decision_difference > 0:
        hi, lo, null, unit = s.decision_difference, -s.decision_difference, 0.0, "difference"
    else:
        hi = lo = None
        null, unit = 0.0, "difference"
    nums = {
        "estimate": est,
        "ci": list(ci),
        "threshold": None if hi is None else [lo, hi],
        "k_events": f.k_events,
        "optimal_information_size": "not assessed",
    }
    cross_null = ci[0] <= null <= ci[1]
    where = f"CI {ci[0]:.3g} to {ci[1]:.3g}"
    if hi is None:
        if cross_null:
            return Suggestion(
                "imprecision",
                "down-one",
                f"{where} includes no effect (no decision threshold set for differences); {ois}",
                nums,
            )
        return Suggestion(
            "imprecision",
            "none",
            f"{where} excludes no effect (no decision threshold set for differences); {ois}",
            nums,
        )
    both = ci[0] < lo and ci[1] > hi
    side = hi if est >= null else lo
    cross_t = ci[0] < side < ci[1]
    band = f"decision threshold {lo:.3g} / {hi:.3g} ({unit})"
    if both:
        return Suggestion(
            "imprecision",
            "down-two",
            f"{where} reaches past both sides of the {band}: it allows an appreciable effect "
            f"either way; {ois}",
            nums,
        )
    if cross_null or cross_t:
        what = "includes no effect" if cross_null else f"crosses the decision threshold {side:.3g}"
        return Suggestion("imprecision", "down-one", f"{where} {what} ({band}); {ois}", nums)
    beyond = ci[0] >= hi if est >= null else ci[1] <= lo
    what = (
        "lies wholly beyond the decision threshold: an appreciable effect"
        if beyond
        else "lies wholly between no effect and the decision threshold: an effect too small "
        "to matter for the decision, estimated precisely"
    )
    return Suggestion("imprecision", "none", f"{where} {what} ({band}); {ois}", nums)


def _indirectness(f: CellFacts, s: CertaintySettings) -> Suggestion:
    d = s.indirectness_domain
    if not f.k_events:
        return Suggestion("indirectness", "not-assessable", "no pooled events")
    rated = f.events["applicability"].notna()
    if not rated.any():
        return Suggestion(
            "indirectness",
            "not-assessable",
            f"no consensus rating of the {d} domain for the pooled studies: indirectness "
            "is for the committee to judge",
            {"k_events": f.k_events, "rated_events": 0},
        )
    share, evs = share_at_or_below(f.events, "applicability", s.indirectness_weak_level, False)
    rated_share = float(f.events.loc[rated, "weight"].sum())
    nums = {
        "weight_share_low": round(share, 4),
        "weight_share_rated": round(rated_share, 4),
        "events_low": evs,
    }
    what = (
        f"{share:.0%} of the pooled weight rests on events rated ≤ {s.indirectness_weak_level} "
        f"on {d} ({rated_share:.0%} of the weight rated)"
    )
    if share > s.indirectness_weight_share:
        return Suggestion("indirectness", "down-one", what, nums)
    return Suggestion("indirectness", "none", what, nums)


def _small_study(f: CellFacts, s: CertaintySettings) -> Suggestion:
    k = f.k_events
    if k < s.small_study_min_events:
        return Suggestion(
            "small-study",
            "not-assessable",
            f"{k} event(s): Egger's test and the funnel need at least "
            f"{s.small_study_min_events} (Sterne et al. 2011)",
            {"k_events": k},
        )
    eg = egger_test(
        f.events["y"], f.events["v"], alpha=s.small_study_alpha, min_k=s.small_study_min_events
    )
    if not eg.run:
        return Suggestion("small-study", "not-assessable", eg.reason, {"k_events": k})
    nums = {"k_events": k, "intercept": eg.intercept, "pvalue": eg.pvalue}
    words = f"Egger intercept {eg.intercept:.3g}, p {eg.pvalue:.3g} over {k} events"
    if eg.pvalue < s.small_study_alpha:
        return Suggestion(
            "small-study", "down-one", f"{words} (< {s.small_study_alpha}): asymmetry", nums
        )
    return Suggestion("small-study", "none", f"{words}: no asymmetry shown", nums)


def _large(f: CellFacts, s: CertaintySettings, bias: Suggestion) -> Suggestion:
    ci = _interval(f.natural, "ci_lower", "ci_upper")
    if f.scale != "log" or ci is None or not f.k_events:
        return Suggestion(
            "large-effect",
            "not-assessable",
            "no pooled ratio: the large-effect thresholds are ratios",
        )
    est = float(f.natural["estimate"])
    mag = est if est >= 1 else 1.0 / est
    near = ci[0] if est >= 1 else 1.0 / ci[1]
    nums = {"ratio_from_no_effect": mag, "ci_limit_nearest_no_effect": near}
    words = f"pooled ratio {est:.3g} ({mag:.3g}× from no effect), CI {ci[0]:.3g} to {ci[1]:.3g}"
    if bias.steps < 0:
        return Suggestion(
            "large-effect",
            "none",
            f"{words}; not suggested while risk of bias is a concern ({bias.rating})",
            nums,
        )
    if near > 1 and mag >= s.large_ratio_two and near >= s.large_ratio:
        return Suggestion(
            "large-effect",
            "up-two",
            f"{words}: at least {s.large_ratio_two:g}× and the CI beyond {s.large_ratio:g}×",
            nums,
        )
    if near > 1 and mag >= s.large_ratio:
        return Suggestion(
            "large-effect",
            "up-one",
            f"{words}: at least {s.large_ratio:g}× and the CI excludes no effect",
            nums,
        )
    return Suggestion(
        "large-effect", "none", f"{words}: below {s.large_ratio:g}× or CI includes no effect", nums
    )


def _dose(f: CellFacts) -> Suggestion:
    dr = f.dose_response
    if not dr.get("run"):
        return Suggestion("dose-response", "not-assessable", str(dr.get("reason") or "not run"))
    sign = f.expected or (1 if (f.pooled.get("estimate") or 0) >= 0 else -1)
    lo, hi = dr.get("slope_ci_lower"), dr.get("slope_ci_upper")
    nums = {
        "k": dr.get("k"),
        "slope": dr.get("slope"),
        "slope_ci": [lo, hi],
        "slope_pvalue": dr.get("slope_pvalue"),
        "unit": dr.get("unit"),
    }
    words = (
        f"slope {_g(dr.get('slope'))} per {dr.get('unit') or 'unit'} of change "
        f"(CI {_g(lo)} to {_g(hi)}, {dr.get('k')} events)"
    )
    grows = lo is not None and hi is not None and ((lo > 0) if sign > 0 else (hi < 0))
    if grows:
        return Suggestion(
            "dose-response", "up-one", f"{words}: larger changes, larger effects", nums
        )
    return Suggestion("dose-response", "none", f"{words}: no gradient shown", nums)


def _provisional(domain: str, f: CellFacts) -> Suggestion | None:
    if f.provisional:
        return Suggestion(
            domain,
            "none",
            "not suggested: the expected direction was inferred from the same data (the status "
            "is provisional); pre-specify it with 'exposhift direction set'",
            {"status": f.status, "provisional": True},
        )
    return None


def _reversal(f: CellFacts) -> Suggestion:
    counting = [r for r in f.reversals if r.get("counts")]
    if counting:
        if (p := _provisional("reversal", f)) is not None:
            return p
        r = counting[0]
        return Suggestion(
            "reversal",
            "up-one",
            f"the outcome moved back when the exposure was restored in {r['place']} "
            f"({r['decrease_event']} {r['decrease_date']}, then {r['increase_event']} "
            f"{r['increase_date']}); both events count",
            {"reversals": len(f.reversals), "counting": len(counting)},
        )
    if f.reversals:
        return Suggestion(
            "reversal",
            "none",
            f"{len(f.reversals)} reversal(s), none where both events count for replication",
            {"reversals": len(f.reversals), "counting": 0},
        )
    return Suggestion("reversal", "none", "no reversal recorded", {"reversals": 0})


def _replication(f: CellFacts, reversal: Suggestion) -> Suggestion:
    nums = {"status": f.status, "provisional": f.provisional}
    if f.status not in REPLICATED:
        return Suggestion("replication", "none", f"status {f.status}: {f.status_rule}", nums)
    if (p := _provisional("replication", f)) is not None:
        return p
    if f.imprecise:
        return Suggestion(
            "replication",
            "none",
            f"status {f.status}, but imprecise: the pooled interval of its good events does "
            "not exclude no effect, so replication is not rated up (see imprecision)",
            nums | {"imprecise": True},
        )
    if f.status == "replicated-time" and reversal.steps > 0:
        return Suggestion(
            "replication",
            "none",
            "replicated in time through the reversal, which is rated under 'reversal' (one "
            "fact is not counted twice)",
            nums,
        )
    return Suggestion("replication", "up-one", f"status {f.status}: {f.status_rule}", nums)


def _triangulation(f: CellFacts) -> Suggestion:
    t = f.triangulation
    nums = {
        "n_families": t.get("n_families"),
        "triangulated": bool(t.get("triangulated")),
        "families_disagree": bool(t.get("families_disagree")),
    }
    statement = str(t.get("statement") or "no triangulation")
    if t.get("triangulated") and not t.get("families_disagree"):
        if (p := _provisional("triangulation", f)) is not None:
            return p
        return Suggestion("triangulation", "up-one", statement, nums)
    return Suggestion("triangulation", "none", statement, nums)


def _gate(d: Suggestion, f: CellFacts, bias: Suggestion) -> Suggestion:
    """A rate-up is suggested only with 2+ pooled events and no risk-of-bias concern."""
    if d.steps <= 0:
        return d
    if f.k_events < 2:
        why = f"{f.k_events} pooled event: a strength seen in one event is not rated up (our rule)"
    elif bias.steps < 0:
        why = f"not suggested while risk of bias is a concern ({bias.rating})"
    else:
        return d
    return Suggestion(d.domain, "none", f"{d.reason}; {why}", {**d.numbers, "gated": True})


def suggest(facts: CellFacts, settings: CertaintySettings) -> CellSuggestions:
    """The suggestion of every domain of one cell, and the level they add up to."""
    bias = _bias(facts, settings)
    reversal = _reversal(facts)
    domains = [
        bias,
        _inconsistency(facts, settings),
        _imprecision(facts, settings),
        _indirectness(facts, settings),
        _small_study(facts, settings),
        _large(facts, settings, bias),
        _dose(facts),
        reversal,
        _replication(facts, reversal),
        _triangulation(facts),
    ]
    domains = [_gate(d, facts, bias) for d in domains]
    down = sum(d.steps for d in domains if d.steps < 0)
    up = min(sum(d.steps for d in domains if d.steps > 0), settings.max_steps_up)
    level = move(settings.start_level, down + up) if facts.k_events else LEVELS[-1]
    ev = e_value_of_pooled(facts.natural, str(facts.pooled.get("measure") or ""))
    return CellSuggestions(
        facts.exposure,
        facts.outcome,
        settings.start_level,
        settings.start_why,
        domains,
        level,
        ev,
        settings.fingerprint(),
        facts,
        settings.max_steps_up,
    )
