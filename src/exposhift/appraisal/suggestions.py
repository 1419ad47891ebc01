"""Suggested levels from recorded facts, and the reviewer's confirmation or override.

The rules are data: the ``[[suggest]]`` tables of the rubric file (``evidence/rubric.toml``),
written from the rubric notes' "suggestions from recorded facts" (e.g. an interrupted time
series with fewer than 3 points on a side is suggested 0 on ``counterfactual``, the minimum of
the Cochrane EPOC study-design criteria; an instrumental variable without a first-stage F is
suggested at most 1 on ``design_checks``, Staiger & Stock 1997).

Semantics
    A rule *fires* when every condition it states holds. A condition on a fact that was not
    recorded never holds: with ``checks=None`` (checks not recorded) no rule about checks fires,
    whereas ``checks=()`` means "the record says no checks were reported". When several rules
    fire for one domain they are merged: the suggestion allows at most the lowest of their
    limits, and it is an exact suggested level when a rule giving that lowest value suggests a
    level rather than a limit. Its reason gives the reasons of the rules that set that value,
    then ("also: ...") those of looser rules that fired; ``rules`` lists every rule id.

Reviewer decision
    :func:`confirm` accepts a suggestion. :func:`apply_override` records a reviewer's level:
    when it departs from the suggestion (a level other than the suggested one, or above the
    limit) a non-empty written justification is required, otherwise :class:`RubricError`.
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable
from dataclasses import dataclass, field

from exposhift.appraisal.checks import parse_checks
from exposhift.appraisal.rubric import Rubric, SuggestRule, load_rubric
from exposhift.errors import AnalysisError, RubricError
from exposhift.vocab import check_design, design_family

#: design families without a concurrent comparison (a single series before and after)
SINGLE_SERIES_FAMILIES: tuple[str, ...] = ("uncontrolled", "trend-extrapolation")


def _whole(v: object) -> bool:
    return isinstance(v, numbers.Integral) and not isinstance(v, bool)


def _check_level(level: object, what: str) -> int:
    if not _whole(level) or int(level) not in range(4):  # type: ignore[call-overload]
        raise RubricError(
            f"level {level!r} for '{what}' is outside 0-3; accepted levels: "
            "0 (fatal), 1 (weak), 2 (adequate), 3 (strong)"
        )
    return int(level)  # type: ignore[call-overload]


@dataclass(frozen=True)
class StudyFacts:
    """What the study record says, as far as the suggestion rules need it.

    ``checks`` accepts a ';'-separated string or an iterable of names; it is normalised to
    check codes (:mod:`exposhift.appraisal.checks`), unknown names are kept and listed in
    ``unknown_checks``. ``None`` means not recorded. ``has_comparison=None`` takes the answer
    from the design: single-series designs (before-after, ITS, RD in time) have none.
    """

    design: str
    pre_points: int | None = None
    post_points: int | None = None
    checks: tuple[str, ...] | str | None = None
    assignment_grade: int | None = None
    has_comparison: bool | None = None
    unknown_checks: tuple[str, ...] = field(default=(), init=False)

    def __post_init__(self) -> None:
        check_design(self.design)
        for name in ("pre_points", "post_points"):
            v = getattr(self, name)
            if v is None:
                continue
            if not _whole(v) or v < 0:
                raise AnalysisError(f"{name} must be a whole number of 0 or more, got {v!r}")
            object.__setattr__(self, name, int(v))
        g = self.assignment_grade
        if g is not None:
            object.__setattr__(self, "assignment_grade", _check_level(g, "assignment_grade"))
        if self.checks is not None:
            parsed = parse_checks(self.checks)
            object.__setattr__(self, "checks", parsed.codes)
            object.__setattr__(self, "unknown_checks", parsed.unknown)

    @property
    def comparison(self) -> bool:
        if self.has_comparison is not None:
            return self.has_comparison
        return design_family(self.design) not in SINGLE_SERIES_FAMILIES

    @property
    def fewest_points(self) -> int | None:
        if self.pre_points is None or self.post_points is None:
            return None
        return min(self.pre_points, self.post_points)

    @property
    def checks_note(self) -> str | None:
        if not self.unknown_checks:
            return None
        return (
            f"unknown check{'s' if len(self.unknown_checks) > 1 else ''} kept but not used "
            f"by the suggestion rules: {', '.join(self.unknown_checks)}"
        )


@dataclass(frozen=True)
class Suggestion:
    """A suggested level (``level`` set) or an upper limit (``level`` None) for one domain."""

    domain: str
    max_level: int  # the suggested level, or the highest level the facts allow
    level: int | None
    reason: str
    rules: tuple[str, ...]  # ids of the rules that fired

    def allows(self, level: int) -> bool:
        """Whether ``level`` agrees with the suggestion (no justification needed)."""
        return level == self.level if self.level is not None else level <= self.max_level

    def __str__(self) -> str:
        what = f"{self.level}" if self.level is not None else f"at most {self.max_level}"
        return f"{self.domain}: {what} ({self.reason})"


@dataclass(frozen=True)
class Decision:
    """A reviewer's level for one domain, with the suggestion it answers."""

    domain: str
    level: int
    suggestion: Suggestion | None
    overridden: bool  # True when the level departs from the suggestion
    justification: str


def _has(facts: StudyFacts, code: str) -> bool:
    return facts.checks is not None and code in facts.checks


def _fires(rule: SuggestRule, facts: StudyFacts) -> bool:
    if rule.designs is not None and facts.design not in rule.designs:
        return False
    if rule.comparison is not None and facts.comparison != rule.comparison:
        return False
    few = facts.fewest_points
    if rule.fewest_points_below is not None and (few is None or few >= rule.fewest_points_below):
        return False
    if rule.fewest_points_at_least is not None and (
        few is None or few < rule.fewest_points_at_least
    ):
        return False
    if rule.fewest_pre_below is not None and (
        facts.pre_points is None or facts.pre_points >= rule.fewest_pre_below
    ):
        return False
    needs_checks = rule.lacks_all or rule.lacks_any or rule.fewer_than
    if needs_checks and facts.checks is None:
        return False
    if rule.lacks_all and any(_has(facts, c) for c in rule.lacks_all):
        return False
    if rule.lacks_any and all(_has(facts, c) for c in rule.lacks_any):
        return False
    if rule.fewer_than is not None:
        n, of = rule.fewer_than
        if sum(_has(facts, c) for c in of) >= n:
            return False
    if rule.max_level_from == "assignment_grade" and facts.assignment_grade is None:
        return False
    return True


def _bound(rule: SuggestRule, facts: StudyFacts) -> tuple[int, bool, str]:
    """(limit, exact, reason) of a rule that fired."""
    if rule.level is not None:
        return rule.level, True, rule.reason
    if rule.max_level is not None:
        return rule.max_level, False, rule.reason
    grade = facts.assignment_grade
    assert grade is not None  # _fires checked it
    return grade, False, f"{rule.reason} (assignment grade {grade})"


def _join_reasons(items: list[tuple[int, bool, str, str]], top: int) -> str:
    binding = list(dict.fromkeys(r for limit, _, r, _ in items if limit == top))
    others = [
        r for r in dict.fromkeys(r for limit, _, r, _ in items if limit != top) if r not in binding
    ]
    text = "; ".join(binding)
    return f"{text}; also: {'; '.join(others)}" if others else text


def suggest_levels(facts: StudyFacts, rubric: Rubric | None = None) -> dict[str, Suggestion]:
    """Suggestions for the domains that the rubric's rules say something about.

    Returns ``{domain: Suggestion}`` in rubric domain order; domains no rule fired for are
    absent. Source of the rules: the ``[[suggest]]`` tables of the rubric file.
    """
    rubric = rubric if rubric is not None else load_rubric()
    fired: dict[str, list[tuple[int, bool, str, str]]] = {}
    for rule in rubric.suggestions:
        if _fires(rule, facts):
            limit, exact, reason = _bound(rule, facts)
            fired.setdefault(rule.domain, []).append((limit, exact, reason, rule.id))
    out: dict[str, Suggestion] = {}
    for key in rubric.domain_keys:
        if key not in fired:
            continue
        items = sorted(fired[key], key=lambda t: (t[0], not t[1]))
        top = items[0][0]
        exact = any(limit == top and ex for limit, ex, _, _ in items)
        out[key] = Suggestion(
            domain=key,
            max_level=top,
            level=top if exact else None,
            reason=_join_reasons(items, top),
            rules=tuple(rid for _, _, _, rid in items),
        )
    return out


def confirm(suggestion: Suggestion, justification: str = "") -> Decision:
    """Accept a suggestion: its level, or for a limit the highest level it allows."""
    return Decision(
        suggestion.domain, suggestion.max_level, suggestion, False, justification.strip()
    )


def apply_override(
    suggestion: Suggestion | None, level: int, justification: str = "", domain: str | None = None
) -> Decision:
    """Record the reviewer's ``level`` against ``suggestion`` (or against none).

    A level that departs from the suggestion needs a non-empty ``justification``; without one
    :class:`RubricError` is raised and nothing is recorded. A level that agrees with it (or any
    level when there is no suggestion) is recorded with whatever justification is given.
    """
    key = suggestion.domain if suggestion is not None else domain
    if key is None:
        raise RubricError("apply_override needs a suggestion or a domain key")
    level = _check_level(level, key)
    why = (justification or "").strip()
    departs = suggestion is not None and not suggestion.allows(level)
    if departs and not why:
        raise RubricError(
            f"level {level} for '{key}' departs from the suggestion ({suggestion}); "
            "write a justification saying why, or use the suggested level"
        )
    return Decision(key, level, suggestion, departs, why)


def facts_from_record(
    design: str,
    pre_points: object = None,
    post_points: object = None,
    checks: str | Iterable[str] | None = None,
    assignment_grade: object = None,
    has_comparison: bool | None = None,
) -> StudyFacts:
    """Build :class:`StudyFacts` from loosely typed record values (blank cells as None/NaN)."""

    def whole(v: object) -> int | None:
        if v is None or (isinstance(v, float) and v != v) or type(v).__name__ == "NAType":
            return None
        if isinstance(v, float) and v.is_integer():
            return int(v)
        return v  # type: ignore[return-value]  # StudyFacts validates the rest

    if isinstance(checks, float) and checks != checks:
        checks = None
    return StudyFacts(
        design=design,
        pre_points=whole(pre_points),
        post_points=whole(post_points),
        checks=checks,
        assignment_grade=whole(assignment_grade),
        has_comparison=has_comparison,
    )
