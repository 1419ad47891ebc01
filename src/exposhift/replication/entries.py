"""Typed entries of the replication report: the families of change, each place's sequence of
events in time, and the reversals (an increase after a decrease in the same place).

Each is a frozen dataclass with ``to_dict()`` (the report's JSON, key order included) that also
reads as a read-only mapping (:class:`exposhift.results.ReadsAsMapping`). The rules that fill
them are in :mod:`exposhift.replication.temporal` and :mod:`exposhift.replication.report`.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

from exposhift.results import ReadsAsMapping


@dataclass(frozen=True, eq=False)
class FamilyEntry(ReadsAsMapping):
    """A family of exposure change among the events: events, places, first and last year."""

    family: str
    events: int
    places: list[str]
    first_year: int | None
    last_year: int | None
    directions: list[str]

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True, eq=False)
class SequenceEvent(ReadsAsMapping):
    """One event of a place's sequence: its period (when it counts) and why it counts or not."""

    event_id: str
    change_date: str
    direction: str
    period: int | None
    level: int | None
    sign: int
    concordant: bool
    counts: bool

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True, eq=False)
class PlaceSequence(ReadsAsMapping):
    """A place with two or more events, in time order; ``replicated`` when its counting events
    fall in at least the settings' number of separate periods."""

    place: str
    periods_with_counting_event: int
    replicated: bool
    events: list[SequenceEvent]

    def to_dict(self) -> dict[str, Any]:
        return {
            "place": self.place,
            "periods_with_counting_event": self.periods_with_counting_event,
            "replicated": self.replicated,
            "events": [e.to_dict() for e in self.events],
        }


@dataclass(frozen=True, eq=False)
class Reversal(ReadsAsMapping):
    """An increase that follows a decrease in the same place; ``counts`` when the outcome moved
    back and both events count for replication."""

    place: str
    decrease_event: str
    decrease_date: str
    increase_event: str
    increase_date: str
    outcome_moved_back: bool
    counts: bool

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)
