"""Data classes of a loaded appraisal rubric (see :mod:`exposhift.appraisal.rubric`)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from exposhift.errors import RubricError

#: the domain keys every rubric must define (the import format has one column per key)
DOMAIN_KEYS: tuple[str, ...] = (
    "origin",
    "counterfactual",
    "design_checks",
    "falsification",
    "timing",
    "concurrent_changes",
    "exposure_shift",
    "outcome_data",
    "inference",
    "transparency",
    "applicability",
)

LEVELS: tuple[int, ...] = (0, 1, 2, 3)


@dataclass(frozen=True)
class LevelDef:
    level: int
    key: str  # e.g. "weak"
    meaning: str


@dataclass(frozen=True)
class ReportingDef:
    key: str  # stored value, e.g. "partial"
    label: str  # shown, e.g. "partly reported"
    meaning: str


@dataclass(frozen=True)
class DesignCriteria:
    """Criteria of one domain that apply to one design (design code of exposhift.vocab)."""

    design: str
    criteria: tuple[str, ...] = ()
    minimum: tuple[str, ...] = ()
    full: tuple[str, ...] = ()
    checks: tuple[str, ...] = ()  # check codes that make up the minimum set


@dataclass(frozen=True)
class Domain:
    key: str
    title: str
    question: str
    core: bool
    apart: bool  # reported apart, never part of the overall level (from [summary] apart)
    look_for: tuple[str, ...]
    levels: tuple[tuple[int, tuple[str, ...]], ...]  # (level, criteria), from 3 down to 0
    designs: tuple[DesignCriteria, ...] = ()

    def criteria(self, level: int) -> tuple[str, ...]:
        for lv, crit in self.levels:
            if lv == level:
                return crit
        raise RubricError(f"level {level!r} is outside 0-3; accepted levels: 0, 1, 2, 3")

    def for_design(self, design: str) -> DesignCriteria | None:
        for d in self.designs:
            if d.design == design:
                return d
        return None


@dataclass(frozen=True)
class SuggestRule:
    """One rule of "suggestions from recorded facts"; all given conditions must hold."""

    id: str
    domain: str
    reason: str
    level: int | None = None  # a suggested level ...
    max_level: int | None = None  # ... or an upper limit ...
    max_level_from: str | None = None  # ... or a limit taken from a recorded fact
    designs: tuple[str, ...] | None = None
    comparison: bool | None = None
    fewest_points_below: int | None = None
    fewest_points_at_least: int | None = None
    fewest_pre_below: int | None = None
    lacks_all: tuple[str, ...] = ()
    lacks_any: tuple[str, ...] = ()
    fewer_than: tuple[int, tuple[str, ...]] | None = None


@dataclass(frozen=True)
class Rubric:
    rubric_id: str
    version: str
    title: str
    caution: str
    content_hash: str  # sha256 hex of the normalised bytes (see module docstring)
    domains: tuple[Domain, ...]  # in display order
    core_domains: tuple[str, ...]
    apart_domains: tuple[str, ...]
    cap_trigger: int  # a rating <= cap_trigger in a capping domain ...
    cap_at: int  # ... limits the overall level to cap_at
    never_lifts: tuple[str, ...]
    exclude_from_pooling: tuple[int, ...]  # overall levels left out of pooling by default
    scale: tuple[LevelDef, ...]
    reporting: tuple[ReportingDef, ...]
    suggestions: tuple[SuggestRule, ...]
    path: Path | None
    text: str = field(default="", repr=False, compare=False)

    @property
    def domain_keys(self) -> tuple[str, ...]:
        return tuple(d.key for d in self.domains)

    @property
    def cap_domains(self) -> tuple[str, ...]:
        """Domains whose low rating caps the overall level: neither core nor apart."""
        return tuple(
            d.key
            for d in self.domains
            if d.key not in self.core_domains and d.key not in self.apart_domains
        )

    @property
    def short_hash(self) -> str:
        return self.content_hash[:12]

    @property
    def label(self) -> str:
        """``id version (hash)``, for display next to an appraisal."""
        return f"{self.rubric_id} {self.version} ({self.short_hash})"

    @property
    def summary_text(self) -> str:
        """The summary rule in words, for display beside an overall level."""
        name = self.level_name
        text = (
            f"overall = lowest of {', '.join(self.core_domains)}; a rating of "
            f"{self.cap_trigger} ({name(self.cap_trigger)}) or lower in "
            f"{', '.join(self.cap_domains)} caps it at {self.cap_at} ({name(self.cap_at)})"
        )
        if self.never_lifts:
            text += f"; {', '.join(self.never_lifts)} never lifts a weak core"
        if self.apart_domains:
            text += f"; {', '.join(self.apart_domains)} reported apart"
        if self.exclude_from_pooling:
            levels = ", ".join(f"{lv} ({name(lv)})" for lv in self.exclude_from_pooling)
            text += f"; overall {levels} left out of pooled estimates by default"
        return text

    def domain(self, key: str) -> Domain:
        for d in self.domains:
            if d.key == key:
                return d
        raise RubricError(
            f"unknown domain '{key}'; accepted domains: {', '.join(self.domain_keys)}"
        )

    def level_name(self, level: int) -> str:
        for s in self.scale:
            if s.level == level:
                return s.key
        raise RubricError(f"level {level!r} is outside 0-3; accepted levels: 0, 1, 2, 3")
