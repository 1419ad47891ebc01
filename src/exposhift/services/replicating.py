"""The ``replication`` and ``gaps`` actions: read the evidence base, then call the pure modules.

Both actions take the same steps (each reported, never silent):

1. the analysis frame (one row per estimate, with the consensus appraisal level);
2. filters (gap map only): design family, countries or regions, change-year range, level;
3. harmonise to the analysis scale, every estimate aligned to an exposure *increase*
   (``exposhift.synthesis.harmonise``; a ban's estimate has its sign flipped);
4. one estimate per event × population × outcome data source × outcome × measure group ×
   estimate kind (``exposhift.synthesis.independence.select_independent``), the others listed
   with the reason;
5. replication statuses and gap states (``exposhift.replication``).
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from exposhift.errors import ConfigError, NotFoundError
from exposhift.replication.families import independent_units
from exposhift.replication.gaps import filter_frame, gap_map, opportunities, region_countries
from exposhift.replication.report import ReplicationReport, replication_report
from exposhift.replication.settings import ReplicationSettings
from exposhift.replication.status import CAUTION
from exposhift.services.lookup import require_name
from exposhift.services.options import check_countries, check_year
from exposhift.services.snapshot import EvidenceSnapshot
from exposhift.store.database import Store
from exposhift.store.directions import directions_frame
from exposhift.store.queries import analysis_frame, events_frame
from exposhift.vocab import DESIGN_FAMILIES


def _settings(
    store: Store, settings: ReplicationSettings | None, expected: str | None
) -> ReplicationSettings:
    """``settings`` (a one-run override), else the settings the evidence base records."""
    if settings is None:
        from exposhift.services.workspace import stored_settings

        settings = stored_settings(store)
    s = settings
    if expected is not None:
        s = s.with_(expected_direction=expected)
    return s


def replication_for(
    store: Store,
    exposure: str,
    outcome: str,
    *,
    settings: ReplicationSettings | None = None,
    expected: str | None = None,
    family: str | None = None,
    snapshot: EvidenceSnapshot | None = None,
) -> ReplicationReport:
    """Replication report of one exposure × outcome (optionally one family of change). Unknown
    names raise NotFoundError naming close matches. ``snapshot``: read from it instead of the
    store (:mod:`exposhift.services.snapshot`)."""
    s = _settings(store, settings, expected)
    with store.read() as conn:
        exposure = require_name(conn, "exposure", exposure)
        outcome = require_name(conn, "outcome", outcome)
        if snapshot is None:
            frame = analysis_frame(conn, exposure=exposure, outcome=outcome)
            directions = directions_frame(conn)
        else:
            frame = snapshot.pair(exposure, outcome)
            directions = snapshot.directions
    if family is not None:
        known = sorted(frame["family"].dropna().unique().tolist())
        if family not in known:
            close = difflib.get_close_matches(family, known, n=3, cutoff=0.5)
            hint = (
                f"did you mean {', '.join(map(repr, close))}?"
                if close
                else f"families of this exposure and outcome: {', '.join(known) or 'none'}"
            )
            raise NotFoundError(
                f"no family of change '{family}' for {exposure} and {outcome}; {hint}"
            )
        frame = frame[frame["family"] == family]
    units, excluded = independent_units(frame)
    if expected is not None:  # a one-run override wins over the committee's direction
        directions = None
    return replication_report(units, exposure, outcome, s, excluded, directions=directions)


@dataclass(frozen=True)
class GapFilters:
    """The gap map's filters; ``countries`` is the union of named countries and regions."""

    design_families: tuple[str, ...] = ()
    regions: tuple[str, ...] = ()
    countries: tuple[str, ...] = ()
    year_from: int | None = None
    year_to: int | None = None
    min_level: int | None = None
    stale_after: int | None = None
    studied_only: bool = False  # leave out the cells no study has touched

    def to_dict(self) -> dict[str, Any]:
        return {k: (list(v) if isinstance(v, tuple) else v) for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class GapReport:
    cells: pd.DataFrame
    opportunities: pd.DataFrame
    filters: GapFilters
    settings: ReplicationSettings
    excluded: pd.DataFrame = field(default_factory=pd.DataFrame)
    caution: str = CAUTION

    def to_dict(self) -> dict[str, Any]:
        from exposhift.replication.report import _records

        return {
            "filters": self.filters.to_dict(),
            "cells": _records(self.cells),
            "opportunities": _records(self.opportunities),
            "caution": self.caution,
        }


def _check_filters(f: GapFilters, s: ReplicationSettings) -> set[str] | None:
    unknown = [d for d in f.design_families if d not in DESIGN_FAMILIES]
    if unknown:
        raise ConfigError(
            f"unknown design family {', '.join(map(repr, unknown))}; use one of "
            f"{', '.join(DESIGN_FAMILIES)}"
        )
    if f.year_from is not None and f.year_to is not None and f.year_from > f.year_to:
        raise ConfigError(f"--from {f.year_from} is after --to {f.year_to}; swap them")
    if f.min_level is not None and not 0 <= f.min_level <= 3:
        raise ConfigError(f"--min-level must be 0, 1, 2 or 3 (got {f.min_level})")
    for value, option in (
        (f.year_from, "--from"),
        (f.year_to, "--to"),
        (f.stale_after, "--stale-after"),
    ):
        check_year(value, option)
    if not f.regions and not f.countries:
        return None
    countries = set(check_countries(f.countries))
    if f.regions:
        countries |= region_countries(f.regions, s)
    return countries


def gap_report(
    store: Store,
    filters: GapFilters | None = None,
    *,
    settings: ReplicationSettings | None = None,
    snapshot: EvidenceSnapshot | None = None,
) -> GapReport:
    """The gap map of the whole evidence base within ``filters``, and the opportunities
    (``snapshot``: read from it instead of the store, :mod:`exposhift.services.snapshot`;
    without filters, the statuses are the snapshot's shared analysis)."""
    f = filters or GapFilters()
    s = _settings(store, settings, None)
    countries = _check_filters(f, s)
    if snapshot is None:
        with store.read() as conn:
            frame = analysis_frame(conn)
            registry = events_frame(conn)
            directions = directions_frame(conn)
    else:
        frame, registry, directions = snapshot.analysis, snapshot.events, snapshot.directions
    unfiltered = not (f.design_families or countries is not None or f.min_level is not None)
    unfiltered = unfiltered and f.year_from is None and f.year_to is None
    frame = filter_frame(
        frame,
        design_families=f.design_families or None,
        countries=countries,
        year_from=f.year_from,
        year_to=f.year_to,
        min_level=f.min_level,
    )
    registry = filter_frame(
        registry.assign(design_family=None, level=float("nan")),
        countries=countries,
        year_from=f.year_from,
        year_to=f.year_to,
    )
    analysis = None
    if snapshot is not None and unfiltered:
        units, excluded = snapshot.independent
        analysis = snapshot.replication(s)  # the statuses the summary shows, computed once
    else:
        units, excluded = independent_units(frame)
    cells = gap_map(
        units,
        settings=s,
        stale_after=f.stale_after,
        all_estimates=frame,
        registry=registry,
        analysis=analysis,
        directions=directions,
    )
    if f.studied_only:
        cells = cells[cells["studies"] > 0].reset_index(drop=True)
    opps = opportunities(
        registry, units, countries=countries, year_from=f.year_from, year_to=f.year_to
    )
    return GapReport(cells=cells, opportunities=opps, filters=f, settings=s, excluded=excluded)
