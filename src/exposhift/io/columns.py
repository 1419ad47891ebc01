"""The extraction sheet: the interchange format for study records (one row per estimate).

Study and event fields repeat on every row of the same study or event. This module only names
the columns; reading lives in :mod:`exposhift.io.sheet`, parsing and validation in
:mod:`exposhift.io.validate` and :mod:`exposhift.io.rules`.

The same column names are used in the *analysis frame* that the services hand to the pure
computation modules (synthesis, replication, gaps), which adds derived columns
(see :data:`ANALYSIS_EXTRA`).
"""

from __future__ import annotations

from dataclasses import dataclass

from exposhift.vocab import CHANGE_KINDS, DESIGNS


@dataclass(frozen=True)
class Column:
    name: str
    entity: str  # "study", "event" or "estimate"
    kind: str  # "text", "int", "float", "bool", "date", "code"
    required: bool
    help: str


COLUMNS: tuple[Column, ...] = (
    # study
    Column("study_id", "study", "text", True, "stable key chosen by the reviewer"),
    Column("citation", "study", "text", True, "short citation (authors, year, journal)"),
    Column("year", "study", "int", True, "publication year"),
    Column("doi", "study", "text", False, "DOI, without the https://doi.org/ prefix"),
    Column("design", "study", "code", True, "design code: " + ", ".join(DESIGNS)),
    Column("comparison", "study", "text", False, "what the exposed units are compared with"),
    Column(
        "population",
        "study",
        "text",
        False,
        "population studied; with data_source, defines independent units",
    ),
    Column("data_source", "study", "text", False, "outcome data source (registry, survey, ...)"),
    Column(
        "same_population_as",
        "study",
        "text",
        False,
        "';'-separated study_ids of studies of the same event whose population or outcome "
        "data overlap this study's (e.g. a region nested in a national register)",
    ),
    Column(
        "assignment_grade",
        "study",
        "int",
        False,
        "reviewer's grade 0-3 of how plausibly as-if random the assignment was",
    ),
    Column("pre_points", "study", "int", False, "time points before the change"),
    Column("post_points", "study", "int", False, "time points after the change"),
    Column(
        "checks",
        "study",
        "text",
        False,
        "';'-separated diagnostics the authors report (e.g. pre-trends; placebo-date)",
    ),
    Column("demo", "study", "bool", False, "yes for invented demonstration records"),
    # event
    Column("event_id", "event", "text", True, "stable key; studies of the same event share it"),
    Column("exposure", "event", "text", True, "exposure agent"),
    Column("change_kind", "event", "code", True, "kind of change: " + ", ".join(CHANGE_KINDS)),
    Column("change_direction", "event", "code", True, "decrease or increase"),
    Column("change_size", "event", "float", False, "size of the exposure change"),
    Column("change_unit", "event", "text", False, "unit of change_size (e.g. ug/m3)"),
    Column("country", "event", "text", True, "ISO 3166-1 alpha-3 code"),
    Column("area", "event", "text", False, "area within the country (free text or ISO 3166-2)"),
    Column("change_date", "event", "date", True, "YYYY, YYYY-MM or YYYY-MM-DD (precision kept)"),
    Column(
        "family",
        "event",
        "text",
        False,
        "family key: the same kind of change elsewhere (default: exposure + change_kind)",
    ),
    # estimate
    Column("outcome", "estimate", "text", True, "outcome"),
    Column("outcome_group", "estimate", "text", False, "outcome category"),
    Column("measure", "estimate", "code", True, "RR, OR, HR, IRR, pct_change, RD, MD or SMD"),
    Column(
        "estimate_kind", "estimate", "code", False, "change (default), level, slope or per-unit"
    ),
    Column(
        "per_unit",
        "estimate",
        "float",
        False,
        "exposure increment for per-unit estimates, in change_unit",
    ),
    Column("estimate", "estimate", "float", True, "point estimate as reported"),
    Column("ci_low", "estimate", "float", False, "lower confidence limit"),
    Column("ci_high", "estimate", "float", False, "upper confidence limit"),
    Column("ci_level", "estimate", "float", False, "confidence level in (0, 1), default 0.95"),
    Column("se", "estimate", "float", False, "standard error on the analysis scale"),
    Column(
        "p_value",
        "estimate",
        "float",
        False,
        "two-sided p value; write '<0.001' when the paper gives only a bound",
    ),
    Column(
        "p_bound",
        "estimate",
        "bool",
        False,
        "yes when the p value is a bound ('p < x'); set by '<' in p_value",
    ),
    Column(
        "baseline_risk",
        "estimate",
        "float",
        False,
        "risk in the unexposed group (for odds ratio to risk ratio conversion)",
    ),
    Column("subgroup", "estimate", "text", False, "subgroup, blank for the whole population"),
    Column("time_window", "estimate", "text", False, "time window or lag as reported"),
    Column("primary", "estimate", "bool", False, "yes for the study's primary estimate"),
)

COLUMN_NAMES: tuple[str, ...] = tuple(c.name for c in COLUMNS)
BY_NAME: dict[str, Column] = {c.name: c for c in COLUMNS}
STUDY_COLUMNS = tuple(c.name for c in COLUMNS if c.entity == "study")
EVENT_COLUMNS = tuple(c.name for c in COLUMNS if c.entity == "event")
ESTIMATE_COLUMNS = tuple(c.name for c in COLUMNS if c.entity == "estimate")
REQUIRED = tuple(c.name for c in COLUMNS if c.required)

#: columns the analysis frame adds to the sheet columns (filled by the services)
ANALYSIS_EXTRA: dict[str, str] = {
    "estimate_uid": "stable key of the estimate (study|event|outcome|measure|kind|subgroup|window)",
    "design_family": "design family of the study's design",
    "change_year": "year of change_date (int)",
    "level": "overall appraisal level of record (0-3), NaN when not appraised",
}
