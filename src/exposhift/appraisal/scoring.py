"""The summary rule: from one rating per domain to an overall level, with its reason in words.

The rule is read from the rubric (``[summary]`` in ``evidence/rubric.toml``, METHODS.md §2):

1. the overall level is the lowest rating among the core domains (``origin``,
   ``counterfactual``, ``design_checks``, ``concurrent_changes`` in the shipped rubric);
   on a tie the first in rubric order is named as deciding, and the others are listed;
2. a rating at or below ``cap_trigger`` (0, fatal) in any domain that is neither core nor
   reported apart limits the overall level to ``cap_at`` (1, weak). When the core already sets
   the overall at or below the cap, the cap changes nothing: ``capped_by`` stays ``None`` and a
   note says so;
3. the domains in ``never_lifts`` (``falsification``) are shown but never raise the overall
   level: a strong falsification record beside a weak core is noted, nothing more. (Under rules 1
   and 2 no non-core domain can raise the overall level; the note makes this visible.);
4. domains reported apart (``applicability``) are returned separately and never enter 1-3;
5. an overall level listed in ``exclude_from_pooling`` (0, fatal) marks the study as left out
   of pooled estimates by default. It stays on the evidence map.

Missing ratings: every core domain must be rated (otherwise :class:`RubricError` names the
missing ones: the overall level cannot be decided without them). Other domains may be left
unrated (``None`` or NaN, as from a blank spreadsheet cell); they are listed in ``missing`` and
in a note, because a fatal rating there would have capped the result.

An appraisal level supports, and never replaces, the judgement of the committee.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass

from exposhift.appraisal.rubric import Rubric, load_rubric
from exposhift.appraisal.suggestions import (
    Decision,
    StudyFacts,
    Suggestion,
    apply_override,
    confirm,
    suggest_levels,
)
from exposhift.errors import RubricError

__all__ = [
    "Decision",
    "ScoreResult",
    "StudyFacts",
    "Suggestion",
    "apply_override",
    "check_ratings",
    "confirm",
    "score_appraisal",
    "suggest_levels",
]

_LEVEL_WORDS = "0 (fatal), 1 (weak), 2 (adequate), 3 (strong)"


@dataclass(frozen=True)
class ScoreResult:
    overall: int
    overall_name: str  # the scale key of the overall level, e.g. "weak"
    deciding_domain: str
    reason: str  # e.g. "lowest core domain: counterfactual = 1 (weak)"
    capped_by: str | None  # the domain whose fatal rating lowered the overall level
    applicability: int | None  # reported apart, never part of the overall level
    excluded_from_pooling: bool
    missing: tuple[str, ...]  # rated-domain keys left unrated (never a core domain)
    notes: tuple[str, ...]
    ratings: tuple[tuple[str, int], ...]  # the checked ratings, in rubric order
    rubric_id: str
    rubric_version: str
    rubric_hash: str

    def as_dict(self) -> dict:
        """Plain values for JSON output and storage."""
        return {
            "overall": self.overall,
            "overall_name": self.overall_name,
            "deciding_domain": self.deciding_domain,
            "reason": self.reason,
            "capped_by": self.capped_by,
            "applicability": self.applicability,
            "excluded_from_pooling": self.excluded_from_pooling,
            "missing": list(self.missing),
            "notes": list(self.notes),
            "ratings": dict(self.ratings),
            "rubric_id": self.rubric_id,
            "rubric_version": self.rubric_version,
            "rubric_hash": self.rubric_hash,
        }


def _is_blank(value: object) -> bool:
    """None, NaN or pandas' missing-value marker: a domain left unrated."""
    if value is None or type(value).__name__ == "NAType":
        return True
    return isinstance(value, float) and math.isnan(value)


def _as_level(value: object) -> int | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, numbers.Integral):
        v = int(value)
    elif isinstance(value, numbers.Real) and float(value).is_integer():
        v = int(value)
    else:
        return None
    return v if v in (0, 1, 2, 3) else None


def check_ratings(ratings: Mapping[str, object], rubric: Rubric) -> dict[str, int]:
    """Validate ``ratings`` against ``rubric``; return the rated domains as ``{key: level}``.

    Unknown domain keys and levels outside 0-3 raise one :class:`RubricError` listing every
    problem and the accepted values. Blank values (``None``, NaN) are dropped.
    """
    if not isinstance(ratings, Mapping):
        raise RubricError(
            "ratings must be a mapping of domain key to level 0-3, e.g. "
            "{'origin': 2, 'counterfactual': 1, ...}"
        )
    keys = rubric.domain_keys
    problems = []
    unknown = [k for k in ratings if k not in keys]
    if unknown:
        problems.append(
            f"unknown domain{'s' if len(unknown) > 1 else ''} "
            f"{', '.join(repr(k) for k in unknown)}; accepted domains: "
            f"{', '.join(keys)}"
        )
    out: dict[str, int] = {}
    bad = []
    for key in keys:
        if key not in ratings or _is_blank(ratings[key]):
            continue
        level = _as_level(ratings[key])
        if level is None:
            bad.append(f"{key} = {ratings[key]!r}")
        else:
            out[key] = level
    if bad:
        problems.append(f"level outside 0-3 for {', '.join(bad)}; accepted levels: {_LEVEL_WORDS}")
    if problems:
        raise RubricError("; ".join(problems))
    return out


def score_appraisal(ratings: Mapping[str, object], rubric: Rubric | None = None) -> ScoreResult:
    """Apply the rubric's summary rule (see the module docstring) to one set of ratings.

    Source: the summary rule of the exposhift rubric (METHODS.md §2), held as data in
    ``[summary]`` of the rubric file.
    """
    rubric = rubric if rubric is not None else load_rubric()
    rated = check_ratings(ratings, rubric)
    name = rubric.level_name

    unrated_core = [k for k in rubric.core_domains if k not in rated]
    if unrated_core:
        raise RubricError(
            f"core domain{'s' if len(unrated_core) > 1 else ''} not rated: "
            f"{', '.join(unrated_core)}; the overall level needs every core domain "
            f"({', '.join(rubric.core_domains)}) rated 0-3"
        )

    core_min = min(rated[k] for k in rubric.core_domains)
    lowest = [k for k in rubric.core_domains if rated[k] == core_min]
    deciding = lowest[0]
    reason = f"lowest core domain: {deciding} = {core_min} ({name(core_min)})"
    if len(lowest) > 1:
        reason += f", tied with {', '.join(lowest[1:])}"
    overall, capped_by = core_min, None
    notes: list[str] = []

    hits = [k for k in rubric.cap_domains if k in rated and rated[k] <= rubric.cap_trigger]
    if hits:
        first = hits[0]
        said = f"{first} = {rated[first]} ({name(rated[first])})"
        if core_min > rubric.cap_at:
            overall, capped_by, deciding = rubric.cap_at, first, first
            reason = f"capped at {rubric.cap_at} ({name(rubric.cap_at)}) by {said}; {reason}"
        else:
            notes.append(
                f"{said} would cap the overall level at {rubric.cap_at} "
                f"({name(rubric.cap_at)}); the core already sets it at {core_min}"
            )
        if len(hits) > 1:
            notes.append(f"also rated {name(rubric.cap_trigger)} or lower: {', '.join(hits[1:])}")

    for key in rubric.never_lifts:
        if key in rated and rated[key] > overall:
            notes.append(
                f"{key} = {rated[key]} ({name(rated[key])}) is shown but does not lift "
                f"the overall level (summary rule)"
            )

    missing = tuple(k for k in rubric.cap_domains if k not in rated)
    if missing:
        notes.append(
            f"not rated: {', '.join(missing)}; a {name(rubric.cap_trigger)} rating "
            f"there would cap the overall level at {rubric.cap_at}"
        )

    applicability = rated.get("applicability")
    excluded = overall in rubric.exclude_from_pooling
    if excluded:
        notes.append(
            f"overall {overall} ({name(overall)}): left out of pooled estimates by "
            f"default; the study stays on the evidence map"
        )

    return ScoreResult(
        overall=overall,
        overall_name=name(overall),
        deciding_domain=deciding,
        reason=reason,
        capped_by=capped_by,
        applicability=applicability,
        excluded_from_pooling=excluded,
        missing=missing,
        notes=tuple(notes),
        ratings=tuple((k, rated[k]) for k in rubric.domain_keys if k in rated),
        rubric_id=rubric.rubric_id,
        rubric_version=rubric.version,
        rubric_hash=rubric.content_hash,
    )
