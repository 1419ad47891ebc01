"""The natural keys of the evidence base's records, declared once.

Natural keys are what users and files see (a study's ``key``, an exposure's ``name``); integer
ids stay inside the store. The store (:mod:`exposhift.store.models`), the file readers
(:mod:`exposhift.io.frames`) and the importer all take their keys from here.
"""

from __future__ import annotations

#: entity -> the one column that is its natural key (records with a single-field key)
NATURAL_KEY: dict[str, str] = {
    "exposure": "name",
    "outcome": "name",
    "event": "key",
    "study": "key",
    "estimate": "key",
    "series": "key",
}

#: entity -> the fields of its natural key as files carry it (references by natural key)
RECORD_KEYS: dict[str, tuple[str, ...]] = {
    "exposure": ("name",),
    "outcome": ("name",),
    "event": ("key",),
    "study": ("key",),
    "estimate": ("key",),
    "appraisal": ("study", "reviewer", "stage"),
    "rating": ("study", "reviewer", "stage", "domain"),
}

#: the parts of an estimate's natural key, in order (``key`` joins them with ``|``)
ESTIMATE_KEY_PARTS: tuple[str, ...] = (
    "study",
    "event",
    "outcome",
    "measure",
    "estimate_kind",
    "subgroup",
    "time_window",
)
