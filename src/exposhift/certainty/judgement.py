"""The committee's judgement per domain: checking a judgements sheet against the suggestions.

A judgements sheet (CSV or XLSX) has the columns :data:`FIELDS`: ``exposure``, ``outcome``,
``domain`` (one of :data:`~exposhift.certainty.domains.DOMAINS`), ``rating`` (the domain's
ratings, or a certainty level for the final ``certainty`` domain), ``why``, ``decided_by``
(blank: the importing user) and optionally ``decided_at`` (blank: now).

The justification rule is the appraisals' rule: a rating that departs from the tool's
suggestion needs a written ``why``; a rating that confirms it may leave ``why`` blank, and then
the suggestion's reason is recorded as the why. For the final ``certainty`` domain the
"suggestion" is the level the cell's domain ratings add up to — the committee's own ratings in
the same sheet or already recorded, the tool's suggestion for the rest — so a final level that
does not follow from the domain ratings needs a reason too.

Every problem of the file is reported at once (file, row, column, what to do); nothing is
written when there is one.
"""

from __future__ import annotations

import difflib
from collections.abc import Callable, Mapping

import pandas as pd

from exposhift.certainty.domains import (
    DOMAINS,
    DOWN_DOMAINS,
    FINAL,
    UP_DOMAINS,
    move,
    ratings_for,
    steps,
)
from exposhift.certainty.suggestions import CellSuggestions
from exposhift.io.directions import normalise_time
from exposhift.io.problems import ProblemLog, quote
from exposhift.io.sheet import RawSheet

FIELDS: tuple[str, ...] = (
    "exposure",
    "outcome",
    "domain",
    "rating",
    "why",
    "decided_by",
    "decided_at",
)
REQUIRED: tuple[str, ...] = ("exposure", "outcome", "domain", "rating")


def final_suggestion(cell: CellSuggestions, ratings: Mapping[str, str]) -> str:
    """The level the domain ratings add up to: ``ratings`` (the committee's, by domain) where
    given, the tool's suggestion elsewhere; rate-ups count for at most ``max_steps_up``."""
    moves = [steps(s.domain, ratings.get(s.domain, s.rating)) for s in cell.domains]
    up = min(sum(m for m in moves if m > 0), cell.max_steps_up)
    return move(cell.start_level, sum(m for m in moves if m < 0) + up)


def judgement_problem(
    domain: str, rating: str, why: str, suggested: str | None
) -> tuple[str, str] | None:
    """What is wrong with one judgement, as (column, message); None when it is acceptable."""
    if domain not in DOMAINS:
        close = difflib.get_close_matches(domain, DOMAINS, n=1)
        hint = f"did you mean {close[0]!r}? " if close else ""
        return (
            "domain",
            f"unknown domain {quote(domain)}; {hint}the domains are {', '.join(DOMAINS)}",
        )
    accepted = ratings_for(domain)
    if rating not in accepted:
        what = "a certainty level" if domain == FINAL else f"a rating of the {domain} domain"
        return "rating", f"{quote(rating)} is not {what}; write one of {', '.join(accepted)}"
    if suggested is not None and rating != suggested and not why.strip():
        return "why", (
            f"rating {rating!r} departs from the suggestion {suggested!r}: write in 'why' the "
            "reason the committee decided otherwise, or use the suggested rating"
        )
    return None


def check_judgements(
    sheet: RawSheet,
    cells: Callable[[str, str], CellSuggestions | None],
    known_exposures: list[str],
    known_outcomes: list[str],
    recorded: Mapping[tuple[str, str], Mapping[str, str]] | None = None,
    *,
    default_by: str,
    default_at: str,
) -> pd.DataFrame:
    """The sheet checked completely; returns one normalised row per judgement with
    ``suggested`` and ``suggestion_reason``. ``cells(exposure, outcome)`` gives the cell's
    suggestions, None when the cell has no evidence. Raises InputFileError with every problem."""
    log = ProblemLog(sheet.file, sheet.rows)
    raw = sheet.frame
    absent = [c for c in REQUIRED if c not in raw.columns]
    for c in absent:
        log.add(1, c, f"required column '{c}' is missing; add it (columns: {', '.join(FIELDS)})")
    for c in raw.columns:
        if c not in FIELDS:
            close = difflib.get_close_matches(c, FIELDS, n=1)
            hint = f"did you mean '{close[0]}'? " if close else ""
            log.add(1, c, f"unknown column; {hint}a judgements sheet has {', '.join(FIELDS)}")
    log.raise_if_any()
    exposures = {e.lower(): e for e in known_exposures}
    outcomes = {o.lower(): o for o in known_outcomes}
    recs = []
    seen: dict[tuple[str, str, str], int] = {}
    for pos, rec in enumerate(raw.to_dict("records")):
        row = int(log.rows[pos])
        v = {f: str(rec.get(f) or "").strip() for f in FIELDS}
        bad = False
        for f in REQUIRED:
            if not v[f]:
                log.add(row, f, f"required value missing; give the {f}")
                bad = True
        ex, ou = exposures.get(v["exposure"].lower()), outcomes.get(v["outcome"].lower())
        if v["exposure"] and ex is None:
            log.add(row, "exposure", f"no exposure {quote(v['exposure'])} in the evidence base")
            bad = True
        if v["outcome"] and ou is None:
            log.add(row, "outcome", f"no outcome {quote(v['outcome'])} in the evidence base")
            bad = True
        v["domain"], v["rating"] = v["domain"].lower(), v["rating"].lower()
        if v["decided_at"]:
            at = normalise_time(v["decided_at"])
            if at is None:
                log.add(row, "decided_at", "not a date (YYYY-MM-DD) or a UTC date-time")
                bad = True
            v["decided_at"] = at or ""
        v["decided_at"] = v["decided_at"] or default_at
        v["decided_by"] = v["decided_by"] or default_by
        if bad:
            continue
        v["exposure"], v["outcome"] = ex, ou
        key = (ex, ou, v["domain"])
        if key in seen:
            log.add(
                row,
                "domain",
                f"{ex} x {ou}, domain {v['domain']!r} is already given in row {seen[key]}; "
                "keep one judgement per domain",
            )
            continue
        seen[key] = row
        recs.append((row, v))
    cache: dict[tuple[str, str], CellSuggestions | None] = {}
    by_cell: dict[tuple[str, str], dict[str, str]] = {}
    for _, v in recs:
        pair = (v["exposure"], v["outcome"])
        if pair not in cache:
            cache[pair] = cells(*pair)
        by_cell.setdefault(pair, dict((recorded or {}).get(pair, {})))
        if v["domain"] in DOWN_DOMAINS or v["domain"] in UP_DOMAINS:
            by_cell[pair][v["domain"]] = v["rating"]
    out = []
    for row, v in recs:
        pair = (v["exposure"], v["outcome"])
        cell = cache[pair]
        if cell is None:
            log.add(
                row,
                "outcome",
                f"{pair[0]} x {pair[1]} has no evidence (no estimate); a judgement needs "
                "evidence to judge ('exposhift gaps' lists the cells that have some)",
            )
            continue
        domain = v["domain"]
        if domain == FINAL:
            suggested = final_suggestion(cell, by_cell[pair])
            reason = f"the domain ratings add up to {suggested} (from {cell.start_level})"
        else:
            suggested = cell.suggested_rating(domain) if domain in DOMAINS else None
            reason = cell.suggested_reason(domain)
        problem = judgement_problem(domain, v["rating"], v["why"], suggested)
        if problem:
            log.add(row, *problem)
            continue
        out.append(
            {
                **v,
                "why": v["why"] or f"confirms the suggestion: {reason}",
                "suggested": suggested,
                "suggestion_reason": reason,
                "overrides": v["rating"] != suggested,
            }
        )
    log.raise_if_any()
    return pd.DataFrame(out, columns=[*FIELDS, "suggested", "suggestion_reason", "overrides"])
