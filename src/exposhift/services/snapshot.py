"""One read of the evidence base that several views share: the evidence snapshot.

Every page of the dashboard (and the dossier) starts from the same three frames: the analysis
frame (one row per estimate, :func:`exposhift.store.queries.analysis_frame`), the registered
events and the committee's expected directions. :func:`take_snapshot` reads them in one read
transaction together with the data version they belong to
(:mod:`exposhift.store.data_version`), so a cache keyed on that version holds one copy of them
and every view computed from it rests on the same records.

The frames are shared, never copied per view: the services that take a snapshot read from it
and build new frames (filters, ``assign``, ``copy``); nothing here or there writes into it. The
pieces derived from the whole base that two views need (the independent units of the
replication analysis: summary and gap map) are computed once, on first use; the summary asks
only for the units (:attr:`EvidenceSnapshot.units`), not for the reason each estimate set
aside was set aside. The replication analysis of those units (statuses and the counts behind
them, :func:`exposhift.replication.status.analyse`) is also computed once per thresholds
(:meth:`EvidenceSnapshot.replication`): the summary's findings and the unfiltered gap map show
the same statuses from one computation.
"""

from __future__ import annotations

import functools
import threading
from dataclasses import dataclass, field

import pandas as pd

from exposhift.replication.settings import ReplicationSettings
from exposhift.replication.status import Analysis, analyse
from exposhift.store.data_version import current
from exposhift.store.database import Store
from exposhift.store.directions import directions_frame
from exposhift.store.queries import analysis_frame, events_frame


@dataclass(frozen=True, eq=False)
class EvidenceSnapshot:
    """The evidence base as read at ``data_version`` (frames are shared: do not modify)."""

    data_version: int
    analysis: pd.DataFrame
    events: pd.DataFrame
    directions: pd.DataFrame
    #: (settings, analysis) pairs computed so far, and the lock that guards them (the
    #: dashboard's sessions share one snapshot from several threads)
    _analyses: list = field(default_factory=list, init=False, repr=False)
    _lock: threading.Lock = field(default_factory=threading.Lock, init=False, repr=False)

    def pair(self, exposure: str, outcome: str) -> pd.DataFrame:
        """The analysis frame of one exposure and outcome (exact stored names, as
        :func:`~exposhift.store.queries.analysis_frame` filters them), a new frame."""
        a = self.analysis
        keep = (a["exposure"] == exposure) & (a["outcome"] == outcome)
        return a.loc[keep].reset_index(drop=True)

    @functools.cached_property
    def independent(self) -> tuple[pd.DataFrame, pd.DataFrame]:
        """Independent units of the whole base and the estimates set aside
        (:func:`exposhift.replication.families.independent_units`), computed once."""
        from exposhift.replication.families import independent_units

        return independent_units(self.analysis)

    @functools.cached_property
    def units(self) -> pd.DataFrame:
        """The independent units of :attr:`independent` alone (the same rows), for views that
        do not list the estimates set aside: computed without writing a reason for each."""
        if "independent" in self.__dict__:
            return self.independent[0]
        from exposhift.replication.families import independent_kept

        return independent_kept(self.analysis)

    def replication(self, settings: ReplicationSettings) -> Analysis:
        """The replication analysis of :attr:`units` by exposure × outcome under ``settings``
        with the snapshot's expected directions
        (:func:`exposhift.replication.status.analyse`), computed once per ``settings``
        (shared: do not modify)."""
        with self._lock:
            for known, done in self._analyses:
                if known == settings:
                    return done
            done = analyse(self.units, ("exposure", "outcome"), settings, self.directions)
            self._analyses.append((settings, done))
            return done


def take_snapshot(store: Store) -> EvidenceSnapshot:
    """Read the analysis frame, the events and the directions in one read transaction."""
    with store.read() as conn:
        version = current(conn)
        return EvidenceSnapshot(
            data_version=version,
            analysis=analysis_frame(conn),
            events=events_frame(conn),
            directions=directions_frame(conn),
        )
