"""The ``certainty``, ``certainty record`` and ``evidence-table`` actions.

Steps (each reported, never silent):

1. the cell's numbers from the same services the ``pool`` and ``replication`` commands call
   (:func:`~exposhift.services.pooling.pool_evidence` with its defaults and the small-study
   details, :func:`~exposhift.services.replicating.replication_for`), plus the consensus
   applicability rating per study;
2. one suggestion per domain (:mod:`exposhift.certainty.suggestions`) and the E-value;
3. the committee's recorded judgements (:mod:`exposhift.store.certainty_records`);
4. for ``record``: the sheet checked against the suggestions (justification rule), then written
   in one transaction through the Writer (versions, audit entries), or nothing.

Every output carries the certainty settings' fingerprint and the caution.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from exposhift.certainty.facts import cell_facts, main_group
from exposhift.certainty.judgement import check_judgements
from exposhift.certainty.sensitivity_table import sensitivity_rows
from exposhift.certainty.settings import CertaintySettings
from exposhift.certainty.suggestions import CellSuggestions, suggest
from exposhift.certainty.table import COLUMNS, table_row
from exposhift.errors import NotFoundError
from exposhift.io.directions import normalise_time
from exposhift.io.sheet import read_sheet
from exposhift.services.lookup import require_name
from exposhift.services.pooling import pool_evidence
from exposhift.services.replicating import replication_for
from exposhift.store.certainty_records import (
    consensus_domain_levels,
    judgements_frame,
    upsert_judgement,
)
from exposhift.store.database import Store
from exposhift.store.queries import analysis_frame, vocabulary_names
from exposhift.store.writer import Writer, utc_now
from exposhift.synthesis.pooling import CAUTION

#: what is shown beside every certainty output
CERTAINTY_CAUTION = (
    CAUTION + " A certainty level is the committee's judgement on the evidence it had; the "
    "tool's suggestions are a starting point with their reasons, not a rating."
)


@dataclass(frozen=True)
class CellCertainty:
    """One exposure × outcome: suggestions, recorded judgements, sensitivity table."""

    suggestions: CellSuggestions
    judgements: pd.DataFrame
    sensitivity: list[dict[str, Any]] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        s = self.suggestions
        f = s.facts
        recorded = {}
        if not self.judgements.empty:
            for r in self.judgements.to_dict("records"):
                r["numbers"] = json.loads(r["numbers"]) if r.get("numbers") else {}
                recorded[r["domain"]] = {
                    k: v for k, v in r.items() if k not in ("exposure", "outcome")
                }
        return {
            "exposure": s.exposure,
            "outcome": s.outcome,
            "start": {"level": s.start_level, "why": s.start_why},
            "suggested_level": s.level,
            "suggested_level_reason": s.level_reason(),
            "domains": [d.to_dict() for d in s.domains],
            "recorded": recorded,
            "pooled": {
                "evidence_set": f.evidence_set,
                "k_events": f.k_events,
                "k_estimates": int(f.pooled.get("k_estimates") or 0),
                "measure": f.pooled.get("measure"),
                "scale": f.scale,
                "natural": f.natural,
                "strata_pooled": f.n_groups,
            },
            "status": f.status,
            "provisional": f.provisional,
            "imprecise": f.imprecise,
            "e_value": s.e_value.to_dict() | {"words": s.e_value.words()},
            "sensitivity": self.sensitivity,
            "settings_fingerprint": s.settings_fingerprint,
        }


@dataclass(frozen=True)
class CertaintyReport:
    exposure: str
    cells: list[CellCertainty]
    settings: CertaintySettings
    caution: str = CERTAINTY_CAUTION

    def to_dict(self) -> dict[str, Any]:
        return {
            "exposure": self.exposure,
            "outcomes": [c.to_dict() for c in self.cells],
            "settings": {"source": self.settings.source, **self.settings.values()},
            "settings_fingerprint": self.settings.fingerprint(),
            "caution": self.caution,
        }


def _in_force(store: Store) -> CertaintySettings:
    """The certainty settings the evidence base records (its method in force)."""
    from exposhift.services.workspace import method_in_force

    return method_in_force(store)["certainty"]


def _cell(store: Store, exposure: str, outcome: str, settings: CertaintySettings, apps, *, sens):
    """Suggestions of one cell (None when it has no estimate) and its sensitivity table."""
    try:
        pool = pool_evidence(store, exposure, outcome, details=False)
    except NotFoundError:
        return None, []
    report = replication_for(store, exposure, outcome)
    cell = suggest(cell_facts(pool, report, apps), settings)
    rows: list[dict[str, Any]] = []
    if sens and pool.groups:
        gi = main_group(pool.groups)
        ev = pool.pooled_rows[pool.pooled_rows["group"] == gi].sort_values("event_id")
        rows = sensitivity_rows(pool.groups[gi], pool.unit_rows, ev, pool.options)
    return cell, rows


def _outcomes_with_evidence(store: Store, exposure: str) -> list[str]:
    with store.read() as conn:
        frame = analysis_frame(conn, exposure=exposure)
    return sorted(frame["outcome"].dropna().astype(str).unique().tolist()) if len(frame) else []


def certainty_for(
    store: Store,
    exposure: str,
    outcome: str | None = None,
    *,
    settings: CertaintySettings | None = None,
    sensitivity: bool = True,
) -> CertaintyReport:
    """Suggestions, recorded judgements and the sensitivity table for one exposure (every
    outcome with evidence, or ``outcome``)."""
    s = settings or _in_force(store)
    with store.read() as conn:
        exposure = require_name(conn, "exposure", exposure)
        if outcome is not None:
            outcome = require_name(conn, "outcome", outcome)
        apps = consensus_domain_levels(conn, s.indirectness_domain)
        recorded = judgements_frame(conn, exposure=exposure)
    outcomes = [outcome] if outcome is not None else _outcomes_with_evidence(store, exposure)
    cells = []
    for o in outcomes:
        cell, rows = _cell(store, exposure, o, s, apps, sens=sensitivity)
        if cell is None:
            raise NotFoundError(
                f"no estimates for exposure '{exposure}' and outcome '{o}'; 'exposhift gaps' "
                "lists the combinations that have some"
            )
        mine = recorded[recorded["outcome"] == o] if len(recorded) else recorded
        cells.append(CellCertainty(cell, mine.reset_index(drop=True), rows))
    if not cells:
        raise NotFoundError(f"no estimates for exposure '{exposure}'; nothing to rate")
    return CertaintyReport(exposure, cells, s)


@dataclass(frozen=True)
class EvidenceTable:
    exposure: str
    rows: pd.DataFrame
    settings_fingerprint: str
    caution: str = CERTAINTY_CAUTION
    #: the evidence set every row's pooled number rests on (the pool command's default)
    evidence_set: str = ""

    def to_dict(self) -> dict[str, Any]:
        rows = self.rows.astype(object).where(self.rows.notna(), None).to_dict("records")
        return {
            "exposure": self.exposure,
            "evidence_set": self.evidence_set,
            "rows": rows,
            "settings_fingerprint": self.settings_fingerprint,
            "scale_note": "effects of an exposure increase on the natural scale (ratios "
            "back-transformed); the pool command's main stratum per outcome",
            "caution": self.caution,
        }


def evidence_table(
    store: Store, exposure: str, *, settings: CertaintySettings | None = None
) -> EvidenceTable:
    """The summary-of-evidence table of one exposure: one row per outcome with evidence."""
    rep = certainty_for(store, exposure, settings=settings, sensitivity=False)
    rows = [table_row(c.suggestions, c.judgements) for c in rep.cells]
    sets = sorted({c.suggestions.facts.evidence_set for c in rep.cells} - {""})
    return EvidenceTable(
        rep.exposure,
        pd.DataFrame(rows, columns=list(COLUMNS)),
        rep.settings.fingerprint(),
        evidence_set="; ".join(sets),
    )


@dataclass(frozen=True)
class JudgementImport:
    file: str
    dry_run: bool
    added: int
    updated: int
    unchanged: int
    overrides: int
    settings_fingerprint: str

    def to_dict(self) -> dict[str, Any]:
        return dict(vars(self))


def record_judgements(
    store: Store,
    path: str | Path,
    *,
    settings: CertaintySettings | None = None,
    encoding: str | None = None,
    dry_run: bool = False,
) -> JudgementImport:
    """Record a judgements sheet (CSV/XLSX) in one transaction; nothing is written on error.

    Every problem of the file (row, column, what to do) is raised at once as InputFileError.
    """
    s = settings or _in_force(store)
    sheet = read_sheet(path, encoding)
    with store.read() as conn:
        exposures = vocabulary_names(conn, "exposure")
        outcomes = vocabulary_names(conn, "outcome")
        apps = consensus_domain_levels(conn, s.indirectness_domain)
        stored = judgements_frame(conn)
    recorded: dict[tuple[str, str], dict[str, str]] = {}
    for r in stored.to_dict("records"):
        recorded.setdefault((r["exposure"], r["outcome"]), {})[r["domain"]] = r["rating"]
    cache: dict[tuple[str, str], CellSuggestions | None] = {}

    def cells(e: str, o: str) -> CellSuggestions | None:
        if (e, o) not in cache:
            cache[(e, o)] = _cell(store, e, o, s, apps, sens=False)[0]
        return cache[(e, o)]

    now = normalise_time(utc_now()) or utc_now()
    frame = check_judgements(
        sheet, cells, exposures, outcomes, recorded, default_by=store.user, default_at=now
    )
    counts = {"added": 0, "updated": 0, "unchanged": 0}
    fp = s.fingerprint()
    if not dry_run:
        with store.write() as conn:
            w = Writer(conn, store.user)
            for rec in frame.to_dict("records"):
                cell = cache[(rec["exposure"], rec["outcome"])]
                sug = cell.of(rec["domain"]) if cell is not None else None
                values = {
                    **rec,
                    "numbers": json.dumps(
                        sug.numbers if sug else {"level": cell.level if cell else None},
                        sort_keys=True,
                        default=str,
                    ),
                    "settings_hash": fp,
                }
                action, _ = upsert_judgement(
                    w, rec["exposure"], rec["outcome"], rec["domain"], values
                )
                counts[action] += 1
            w.flush()
    else:
        keyed = {(r["exposure"], r["outcome"], r["domain"]): r for r in stored.to_dict("records")}
        for rec in frame.to_dict("records"):
            old = keyed.get((rec["exposure"], rec["outcome"], rec["domain"]))
            if old is None:
                counts["added"] += 1
            elif (old["rating"], old["why"]) != (rec["rating"], rec["why"]):
                counts["updated"] += 1
            else:
                counts["unchanged"] += 1
    return JudgementImport(
        str(path),
        dry_run,
        **counts,
        overrides=int(frame["overrides"].sum()),
        settings_fingerprint=fp,
    )


def cell_certainty(
    store: Store,
    exposure: str,
    outcome: str,
    *,
    settings: CertaintySettings | None = None,
    sensitivity: bool = False,
) -> CellCertainty | None:
    """One cell's suggestions and recorded judgements (None when it has no estimate)."""
    s = settings or _in_force(store)
    with store.read() as conn:
        exposure = require_name(conn, "exposure", exposure)
        outcome = require_name(conn, "outcome", outcome)
        apps = consensus_domain_levels(conn, s.indirectness_domain)
        recorded = judgements_frame(conn, exposure=exposure, outcome=outcome)
    cell, rows = _cell(store, exposure, outcome, s, apps, sens=sensitivity)
    return None if cell is None else CellCertainty(cell, recorded, rows)


def recorded_judgements(store: Store, exposure: str, outcome: str) -> pd.DataFrame:
    """The judgements recorded for one cell (empty frame when none)."""
    with store.read() as conn:
        return judgements_frame(conn, exposure=exposure, outcome=outcome)
