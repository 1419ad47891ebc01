"""The evidence base as plain DataFrames keyed by natural keys (no database ids).

Reading a file (sheet, events sheet or JSON archive) produces :class:`EvidenceFrames`; the import
service compares them with the database, and the export service builds the same frames from the
database. Field names are the store's column names, with references by natural key
(``exposure``, ``study``, ``event``, ``outcome``) instead of ids.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from exposhift.errors import Problem
from exposhift.keys import ESTIMATE_KEY_PARTS, RECORD_KEYS

if TYPE_CHECKING:  # io.series_sheet imports this module
    from exposhift.io.series_sheet import SeriesFrames

#: field -> kind ("text", "int", "float", "bool"); order is the export order
EXPOSURE_FIELDS = {"name": "text", "agent_class": "text"}
OUTCOME_FIELDS = {"name": "text", "outcome_group": "text"}
EVENT_FIELDS = {
    "key": "text",
    "exposure": "text",
    "change_kind": "text",
    "change_direction": "text",
    "change_size": "float",
    "change_unit": "text",
    "country": "text",
    "area": "text",
    "change_date": "text",
    "date_precision": "text",
    "family": "text",
    "demo": "bool",
}
STUDY_FIELDS = {
    "key": "text",
    "citation": "text",
    "year": "int",
    "doi": "text",
    "design": "text",
    "comparison": "text",
    "population": "text",
    "data_source": "text",
    "same_population_as": "text",
    "assignment_grade": "int",
    "pre_points": "int",
    "post_points": "int",
    "checks": "text",
    "demo": "bool",
}
ESTIMATE_FIELDS = {
    "key": "text",
    "study": "text",
    "event": "text",
    "outcome": "text",
    "measure": "text",
    "estimate_kind": "text",
    "per_unit": "float",
    "point": "float",
    "ci_low": "float",
    "ci_high": "float",
    "ci_level": "float",
    "se": "float",
    "p_value": "float",
    "p_bound": "bool",
    "baseline_risk": "float",
    "subgroup": "text",
    "time_window": "text",
    "primary": "bool",
}
APPRAISAL_FIELDS = {
    "study": "text",
    "reviewer": "text",
    "stage": "text",
    "rubric_id": "text",
    "rubric_hash": "text",
    "overall": "int",
}
RATING_FIELDS = {
    "study": "text",
    "reviewer": "text",
    "stage": "text",
    "domain": "text",
    "level": "int",
    "reporting": "text",
    "justification": "text",
    "suggested_level": "int",
    "suggestion_reason": "text",
}

FIELDS: dict[str, dict[str, str]] = {
    "exposure": EXPOSURE_FIELDS,
    "outcome": OUTCOME_FIELDS,
    "event": EVENT_FIELDS,
    "study": STUDY_FIELDS,
    "estimate": ESTIMATE_FIELDS,
    "appraisal": APPRAISAL_FIELDS,
    "rating": RATING_FIELDS,
}

#: the natural key of each entity, as a tuple of fields (declared in exposhift.keys)
KEYS = RECORD_KEYS

#: entity name -> plural used in reports
PLURAL = {
    "exposure": "exposures",
    "outcome": "outcomes",
    "event": "events",
    "study": "studies",
    "estimate": "estimates",
    "appraisal": "appraisals",
    "rating": "ratings",
}


def estimate_keys(frame: pd.DataFrame) -> pd.Series:
    """``study|event|outcome|measure|estimate_kind|subgroup|time_window`` (blank when missing)."""
    blank = pd.Series("", index=frame.index, dtype="str")
    parts = [
        frame[p].fillna("").astype("str") if p in frame.columns else blank
        for p in ESTIMATE_KEY_PARTS
    ]
    key = parts[0]
    for p in parts[1:]:
        key = key + "|" + p
    return key


def coerce(frame: pd.DataFrame, kinds: dict[str, str]) -> pd.DataFrame:
    """The frame with each known column in its canonical dtype (str, Int64, float64, bool)."""
    out = {}
    for col in frame.columns:
        kind = kinds.get(col)
        s = frame[col]
        if kind == "text":
            s = s.astype(object).where(s.notna(), None).astype("str")
        elif kind == "int":
            s = pd.array(s.astype(object).where(s.notna(), None).tolist(), dtype="Int64")
        elif kind == "float":
            s = s.astype("float64")
        elif kind == "bool":
            s = s.fillna(False).astype(bool)
        out[col] = pd.Series(s, index=frame.index) if not isinstance(s, pd.Series) else s
    return pd.DataFrame(out, index=frame.index)


def empty(entity: str) -> pd.DataFrame:
    kinds = FIELDS[entity]
    dtype = {"text": "str", "int": "Int64", "float": "float64", "bool": bool}
    return pd.DataFrame({c: pd.Series([], dtype=dtype[k]) for c, k in kinds.items()})


def python_column(s: pd.Series) -> list:
    """A column as Python values with ``None`` for missing (what the database driver takes)."""
    if s.dtype == "float64":
        arr = s.to_numpy()
        return [None if v != v else v for v in arr.tolist()]
    if s.dtype == bool or s.dtype == "int64":
        return s.to_numpy().tolist()
    obj = s.astype(object)
    vals = obj.where(s.notna(), None).tolist()
    return [int(v) if isinstance(v, np.integer) else v for v in vals]


def to_records(frame: pd.DataFrame, columns: list[str] | None = None) -> list[dict]:
    cols = list(columns or frame.columns)
    data = [python_column(frame[c]) for c in cols]
    return [dict(zip(cols, vals, strict=True)) for vals in zip(*data, strict=True)]


@dataclass
class EvidenceFrames:
    """Records read from one file, validated and typed, keyed by natural keys.

    ``given`` names, per entity, the fields the file supplies: a field the file does not carry
    (an optional column left out of a sheet) is left as it is in the database.
    """

    exposures: pd.DataFrame = field(default_factory=lambda: empty("exposure"))
    outcomes: pd.DataFrame = field(default_factory=lambda: empty("outcome"))
    events: pd.DataFrame = field(default_factory=lambda: empty("event"))
    studies: pd.DataFrame = field(default_factory=lambda: empty("study"))
    estimates: pd.DataFrame = field(default_factory=lambda: empty("estimate"))
    appraisals: pd.DataFrame = field(default_factory=lambda: empty("appraisal"))
    ratings: pd.DataFrame = field(default_factory=lambda: empty("rating"))
    #: expected directions (exposhift.io.directions.FIELDS); None: the file has none to import
    directions: pd.DataFrame | None = None
    given: dict[str, frozenset[str]] = field(default_factory=dict)
    rows: int = 0
    notes: list[str] = field(default_factory=list)
    #: values that are valid but look wrong (e.g. an SE on another scale): the import goes on,
    #: and the caller shows them after it (see :func:`exposhift.io.plausible.check_plausible`)
    warnings: list[Problem] = field(default_factory=list)
    #: series records (:class:`exposhift.io.series_sheet.SeriesFrames`), archives only
    series: SeriesFrames | None = None
    #: method versions (:mod:`exposhift.io.method_archive` records); None: the file has none
    method: list | None = None
    #: certainty judgements (:mod:`exposhift.io.certainty_archive` records); None: none to import
    certainty: list | None = None

    def frame(self, entity: str) -> pd.DataFrame:
        return getattr(self, PLURAL[entity])

    def fields_given(self, entity: str) -> frozenset[str]:
        return self.given.get(entity, frozenset(FIELDS[entity]))
