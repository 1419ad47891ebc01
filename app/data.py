"""Cached wrappers around the services: the only place the pages get data from.

Every function takes the database target (``EXPOSHIFT_DB`` or the default evidence base) and
plain, hashable arguments, calls one service and returns what it returns. Results are cached for
``TTL`` seconds (the sidebar's reload button clears the cache). Errors are not cached: an
:class:`~exposhift.errors.ExposhiftError` reaches the page, which shows it with ``st.error``.
"""

from __future__ import annotations

import os

import pandas as pd
import streamlit as st

from exposhift.access import Identity
from exposhift.services import accounts, appraising, browse, replicating, setup, workspace
from exposhift.services import summary as summary_service
from exposhift.store.database import Store, mask_url, resolve_url

DB_ENV = "EXPOSHIFT_DB"
TTL = 60


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
    """Forget cached results (the store connection is kept)."""
    st.cache_data.clear()


@st.cache_data(ttl=TTL, show_spinner=False)
def summary(db: str | None) -> browse.EvidenceOverview:
    return browse.evidence_overview(_store(db))


@st.cache_data(ttl=TTL, show_spinner=False)
def findings(db: str | None) -> pd.DataFrame:
    """Replication status and pooled effect of the largest stratum, per exposure × outcome."""
    return summary_service.evidence_summary(_store(db))


@st.cache_data(ttl=TTL, show_spinner=False)
def studies(db: str | None) -> pd.DataFrame:
    return browse.list_studies(_store(db))


@st.cache_data(ttl=TTL, show_spinner=False)
def events(db: str | None) -> pd.DataFrame:
    return browse.list_events(_store(db))


@st.cache_data(ttl=TTL, show_spinner=False)
def appraisals(db: str | None, study: str, viewer: Identity) -> dict:
    """A study's appraisals as ``viewer`` (``identity.who()``) may see them (blinding by
    identity applied by the service)."""
    return appraising.show_appraisals(_store(db), study, viewer)


@st.cache_data(ttl=TTL, show_spinner=False)
def domain_titles(db: str | None = None) -> dict[str, str]:
    """Rubric domain key -> its title (the rubric the evidence base records)."""
    return {d.key: d.title for d in workspace.stored_rubric(_store(db)).domains}


@st.cache_data(ttl=TTL, show_spinner=False)
def agreement(db: str | None, viewer: Identity | None = None) -> pd.DataFrame:
    """Reviewer agreement over the studies whose independent appraisals ``viewer`` may see."""
    return appraising.agreement(_store(db), viewer)


@st.cache_data(ttl=TTL, show_spinner=False)
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
) -> browse.PoolView:
    return browse.pool_view(
        _store(db),
        exposure,
        outcome,
        method=method,
        ci=ci,
        by=list(by),
        include_fatal=include_fatal,
        align_to=align_to,
        within_event=within_event,
    )


@st.cache_data(ttl=TTL, show_spinner=False)
def replication(
    db: str | None, exposure: str, outcome: str, expected: str | None, family: str | None
):
    return replicating.replication_for(
        _store(db), exposure, outcome, expected=expected, family=family
    )


@st.cache_data(ttl=TTL, show_spinner=False)
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
    return replicating.gap_report(_store(db), filters)


@st.cache_data(ttl=TTL, show_spinner=False)
def replication_settings(db: str | None = None):
    """The thresholds in force: the settings the evidence base records."""
    return workspace.stored_settings(_store(db))


@st.cache_data(ttl=TTL, show_spinner=False)
def series_list(db: str | None) -> pd.DataFrame:
    from exposhift.services import series

    return series.list_series(_store(db))


@st.cache_data(ttl=TTL, show_spinner=False)
def series_estimate(db: str | None, key: str, horizon: int | None, model: str, seasonal: str):
    """Re-estimation of one exposed series (read only: nothing is stored from the dashboard)."""
    from exposhift.services import series

    return series.estimate_series(_store(db), key, horizon=horizon, model=model, seasonal=seasonal)
