"""Cached wrappers around the services: the only place the pages get data from.

Every function takes the database target (``EXPOSHIFT_DB`` or the default evidence base) and
plain, hashable arguments, calls one service and returns what it returns. Every cache is keyed
on :func:`stamp`: the evidence base's data version (moved in the same transaction as every
write, :mod:`exposhift.store.data_version`, including a new version of the method in force). A
write shows at the next rerun, and nothing is recomputed while nothing changes (no expiry).
The pages share one evidence snapshot per stamp (:func:`snapshot`: the analysis frame read
once). Errors are not cached: an
:class:`~exposhift.errors.ExposhiftError` reaches the page, which shows it with ``st.error``.
"""

from __future__ import annotations

import os

import charts
import pandas as pd
import streamlit as st

from exposhift.access import Identity
from exposhift.services import (
    accounts,
    appraising,
    browse,
    history,
    replicating,
    setup,
    workspace,
)
from exposhift.services import summary as summary_service
from exposhift.services.snapshot import EvidenceSnapshot, take_snapshot
from exposhift.store.database import Store, mask_url, resolve_url

# Text columns held in Python objects rather than Arrow buffers. Both are pandas' ``str`` dtype
# with the same values and semantics (missing is NaN); on a large base the dashboard's shared
# frames are filtered, merged and re-indexed many times, which costs an Arrow copy of every
# string each time (measured on 100,000 estimates: the independence step takes about half the
# CPU with Python storage, the read of the analysis frame about a tenth less). Set before any
# frame is built; the CLI keeps the default.
pd.set_option("mode.string_storage", "python")

DB_ENV = "EXPOSHIFT_DB"
#: cached results kept per function (older data versions fall out first)
KEEP = 64
#: event rows a forest plot draws at most (the heaviest; the page's table lists every event)
FOREST_ROWS = 40
#: events a replication timeline draws at most (the heaviest; the page's table lists every
#: event and the page says how many are not drawn)
TIMELINE_EVENTS = 40


def db_target() -> str | None:
    """The database the dashboard shows: ``EXPOSHIFT_DB`` (set by ``exposhift dashboard
    --db``), else the default evidence base."""
    return os.environ.get(DB_ENV) or None


def db_label(db: str | None) -> str:
    return mask_url(resolve_url(db))


@st.cache_resource(show_spinner=False)
def _store(db: str | None) -> Store:
    """The dashboard's own connection: it acts as a ``reader`` named ``dashboard`` (consensus
    appraisals only, no writes), so a page that forgets the identity shows and writes nothing
    it should not. Pages act for the person through :func:`acting`."""
    store = setup.open_current(db, user="dashboard")
    store.role = "reader"
    return store


def store(db: str | None) -> Store:
    """The shared store (sign-in and session checks go through it; see :func:`acting`)."""
    return _store(db)


def acting(db: str | None, who: Identity) -> Store:
    """The store as ``who`` (``identity.who()``): pass it to a write service, which records
    ``who.name`` in the audit trail and refuses a role that may not write."""
    return accounts.acting_store(_store(db), who)


def clear() -> None:
    """Forget cached results and the shared snapshot (the store connection is kept)."""
    st.cache_data.clear()
    _snapshot.clear()
    for shared in (_gaps, _forest, _replication_figures):
        shared.clear()


def stamp(db: str | None) -> tuple:
    """What every cached result depends on: the data version of the evidence base (one
    one-row query). The method in force is stored in the evidence base, so a new rubric or
    settings version moves the data version too."""
    return (_store(db).data_version(),)


@st.cache_resource(show_spinner=False, max_entries=2)
def _snapshot(db: str | None, key: tuple) -> EvidenceSnapshot:
    return take_snapshot(_store(db))


def snapshot(db: str | None, key: tuple | None = None) -> EvidenceSnapshot:
    """The evidence snapshot of this stamp, shared by every page and session (not copied:
    the services only read it)."""
    return _snapshot(db, stamp(db) if key is None else key)


CACHE = dict(show_spinner=False, max_entries=KEEP)


@st.cache_data(**CACHE)
def _summary(db: str | None, key: tuple) -> browse.EvidenceOverview:
    return browse.evidence_overview(_store(db))


def summary(db: str | None) -> browse.EvidenceOverview:
    """Counts, pairs, designs and levels, counted by the database: it reads no estimate, so a
    page that shows only the summary (and the sidebar of every page) does not pay for the
    snapshot."""
    return _summary(db, stamp(db))


@st.cache_data(**CACHE)
def _findings(db: str | None, key: tuple) -> pd.DataFrame:
    return summary_service.evidence_summary(
        _store(db), settings=_replication_settings(db, key), snapshot=snapshot(db, key)
    )


def findings(db: str | None) -> pd.DataFrame:
    """Replication status and pooled effect of the largest stratum, per exposure × outcome."""
    return _findings(db, stamp(db))


@st.cache_data(**CACHE)
def _studies(db: str | None, key: tuple) -> pd.DataFrame:
    return browse.list_studies(_store(db))


def studies(db: str | None) -> pd.DataFrame:
    """One row per study, joined and counted by the database (no snapshot: the study list
    and the writing pages' study pickers do not pay for reading every estimate)."""
    return _studies(db, stamp(db))


@st.cache_data(**CACHE)
def _events(db: str | None, key: tuple) -> pd.DataFrame:
    return browse.list_events(_store(db))


def events(db: str | None) -> pd.DataFrame:
    return _events(db, stamp(db))


@st.cache_data(**CACHE)
def _appraisals(db: str | None, key: tuple, study: str, viewer: Identity) -> dict:
    return appraising.show_appraisals(_store(db), study, viewer)


def appraisals(db: str | None, study: str, viewer: Identity) -> dict:
    """A study's appraisals as ``viewer`` (``identity.who()``) may see them (blinding by
    identity applied by the service)."""
    return _appraisals(db, stamp(db), study, viewer)


@st.cache_data(**CACHE)
def _record_history(db: str | None, key: tuple, record: str, viewer: Identity) -> pd.DataFrame:
    return history.record_history(acting(db, viewer), record, viewer.name)


def record_history(db: str | None, record: str, viewer: Identity) -> pd.DataFrame:
    """The audit entries of a study or event and the records under it, as ``viewer``
    (``identity.who()``) may see them (blinding by identity applied by the service). Every
    write adds its audit entries and moves the data version, so the stamp keys this too."""
    return _record_history(db, stamp(db), record, viewer)


@st.cache_data(**CACHE)
def _domain_titles(db: str | None, key: tuple) -> dict[str, str]:
    return {d.key: d.title for d in workspace.stored_rubric(_store(db)).domains}


def domain_titles(db: str | None = None) -> dict[str, str]:
    """Rubric domain key -> its title (the rubric the evidence base records)."""
    return _domain_titles(db, stamp(db))


@st.cache_data(**CACHE)
def _agreement(db: str | None, key: tuple, viewer: Identity | None) -> pd.DataFrame:
    return appraising.agreement(_store(db), viewer)


def agreement(db: str | None, viewer: Identity | None = None) -> pd.DataFrame:
    """Reviewer agreement over the studies whose independent appraisals ``viewer`` may see."""
    return _agreement(db, stamp(db), viewer)


def _pool_options(method, ci, by, include_fatal, align_to, within_event, min_level) -> tuple:
    return (
        ("method", method),
        ("ci", ci),
        ("by", tuple(by)),
        ("include_fatal", include_fatal),
        ("align_to", align_to),
        ("within_event", within_event),
        ("min_level", min_level),
    )


@st.cache_data(**CACHE)
def _pool(db: str | None, key: tuple, exposure: str, outcome: str, options: tuple):
    opts = dict(options)
    opts["by"] = list(opts["by"])
    return browse.pool_view(_store(db), exposure, outcome, snapshot=snapshot(db, key), **opts)


def pool(
    db: str | None,
    exposure: str,
    outcome: str,
    method: str,
    ci: str,
    by: tuple[str, ...],
    include_fatal: bool,
    align_to: str,
    within_event: str = "aggregate",
    min_level: int | None = None,
) -> browse.PoolView:
    options = _pool_options(method, ci, by, include_fatal, align_to, within_event, min_level)
    return _pool(db, stamp(db), exposure, outcome, options)


@st.cache_resource(**CACHE)
def _forest(db: str | None, key: tuple, exposure: str, outcome: str, options: tuple, top: int):
    view = _pool(db, key, exposure, outcome, options)
    return charts.forest_plot(view.rows, view.output.groups, max_rows=top)


def forest(
    db: str | None,
    exposure: str,
    outcome: str,
    method: str,
    ci: str,
    by: tuple[str, ...],
    include_fatal: bool,
    align_to: str,
    within_event: str = "aggregate",
    min_level: int | None = None,
    top: int | None = None,
):
    """The forest plot of :func:`pool` with the same arguments (at most ``top`` event rows,
    default :data:`FOREST_ROWS`), built once per stamp (shared: do not modify the figure)."""
    top = FOREST_ROWS if top is None else top
    options = _pool_options(method, ci, by, include_fatal, align_to, within_event, min_level)
    return _forest(db, stamp(db), exposure, outcome, options, top)


@st.cache_data(**CACHE)
def _replication(
    db: str | None, key: tuple, exposure: str, outcome: str, expected: str | None, family
):
    return replicating.replication_for(
        _store(db),
        exposure,
        outcome,
        expected=expected,
        family=family,
        snapshot=snapshot(db, key),
    )


def replication(
    db: str | None, exposure: str, outcome: str, expected: str | None, family: str | None
):
    return _replication(db, stamp(db), exposure, outcome, expected, family)


@st.cache_resource(**CACHE)
def _replication_figures(
    db: str | None,
    key: tuple,
    exposure: str,
    outcome: str,
    expected: str | None,
    family,
    min_level: int,
    focus: tuple[str, ...] | None,
    timeline_events: int | None,
):
    report = _replication(db, key, exposure, outcome, expected, family)
    return (
        charts.event_map(report.events, min_level=min_level, focus=list(focus) if focus else None),
        charts.event_timeline(
            report.events, report.reversals, min_level=min_level, max_events=timeline_events
        ),
    )


def replication_figures(
    db: str | None,
    exposure: str,
    outcome: str,
    expected: str | None,
    family: str | None,
    min_level: int,
    focus: list[str] | None,
):
    """The map and the timeline of :func:`replication` (built once per stamp and view;
    shared: do not modify the figures). The timeline draws at most :data:`TIMELINE_EVENTS`
    events."""
    view = tuple(focus) if focus else None
    return _replication_figures(
        db, stamp(db), exposure, outcome, expected, family, min_level, view, TIMELINE_EVENTS
    )


@st.cache_resource(**CACHE)
def _gaps(db: str | None, key: tuple, filters: replicating.GapFilters) -> replicating.GapReport:
    """Shared, not copied (a resource: the report carries every estimate set aside, tens of
    megabytes on a large base, which a data cache would pickle on every view; pages only read
    it)."""
    return replicating.gap_report(
        _store(db), filters, settings=_replication_settings(db, key), snapshot=snapshot(db, key)
    )


def gaps(
    db: str | None,
    design_families: tuple[str, ...],
    regions: tuple[str, ...],
    countries: tuple[str, ...],
    year_from: int | None,
    year_to: int | None,
    min_level: int | None,
    stale_after: int | None,
    studied_only: bool = False,
) -> replicating.GapReport:
    filters = replicating.GapFilters(
        design_families=design_families,
        regions=regions,
        countries=countries,
        year_from=year_from,
        year_to=year_to,
        min_level=min_level,
        stale_after=stale_after,
        studied_only=studied_only,
    )
    return _gaps(db, stamp(db), filters)


@st.cache_data(**CACHE)
def _replication_settings(db: str | None, key: tuple):
    return workspace.stored_settings(_store(db))


def replication_settings(db: str | None = None):
    """The thresholds in force: the settings the evidence base records."""
    return _replication_settings(db, stamp(db))


@st.cache_data(**CACHE)
def _series_list(db: str | None, key: tuple) -> pd.DataFrame:
    from exposhift.services import series

    return series.list_series(_store(db))


def series_list(db: str | None) -> pd.DataFrame:
    return _series_list(db, stamp(db))


@st.cache_data(**CACHE)
def _series_estimate(
    db: str | None, key: tuple, series_key: str, horizon: int | None, model: str, seasonal: str
):
    from exposhift.services import series

    return series.estimate_series(
        _store(db), series_key, horizon=horizon, model=model, seasonal=seasonal
    )


def series_estimate(db: str | None, key: str, horizon: int | None, model: str, seasonal: str):
    """Re-estimation of one exposed series (read only: nothing is stored from the dashboard)."""
    return _series_estimate(db, stamp(db), key, horizon, model, seasonal)
