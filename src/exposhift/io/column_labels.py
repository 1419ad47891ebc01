"""What people see for each column of the extraction sheet: a human label and a short help
text, declared once beside the column list (:mod:`exposhift.io.columns`).

The sheet's column names stay what they are (they are the file format); the label is what the
dashboard's entry forms, the estimate grid, the upload preview and the problem tables show, and
the help text names the sheet column so that a user can find it in the file. A column added to
:data:`exposhift.io.columns.COLUMNS` without a label here fails at import time.

Stored records name a few fields differently from the sheet (a study's and an event's ``key``
is the sheet's ``study_id`` / ``event_id``; an estimate's ``point`` is the sheet's ``estimate``:
:data:`exposhift.io.validate.RENAME`); :func:`field_label` gives the label of a stored field.
"""

from __future__ import annotations

from exposhift.io.columns import BY_NAME, COLUMN_NAMES

#: sheet column -> the label people see (forms, grid, tables, problem lists)
LABELS: dict[str, str] = {
    # study
    "study_id": "Study key",
    "citation": "Citation",
    "year": "Publication year",
    "doi": "DOI",
    "design": "Study design",
    "comparison": "Comparison group",
    "population": "Population",
    "data_source": "Outcome data source",
    "same_population_as": "Overlapping studies",
    "assignment_grade": "As-if-random grade (0-3)",
    "pre_points": "Time points before",
    "post_points": "Time points after",
    "checks": "Diagnostics reported",
    "demo": "Demo record",
    # event
    "event_id": "Event key",
    "exposure": "Exposure",
    "change_kind": "Kind of change",
    "change_direction": "Direction of change",
    "change_size": "Size of change",
    "change_unit": "Unit of change",
    "country": "Country (ISO code)",
    "area": "Area",
    "change_date": "Date of change",
    "family": "Event family",
    # estimate
    "outcome": "Outcome",
    "outcome_group": "Outcome group",
    "measure": "Effect measure",
    "estimate_kind": "Estimate kind",
    "per_unit": "Exposure increment",
    "estimate": "Estimate",
    "ci_low": "Lower CI limit",
    "ci_high": "Upper CI limit",
    "ci_level": "Confidence level",
    "se": "Standard error",
    "p_value": "p value",
    "p_bound": "p value is a bound",
    "baseline_risk": "Baseline risk",
    "subgroup": "Subgroup",
    "time_window": "Time window",
    "primary": "Primary estimate",
}

_missing = sorted(set(COLUMN_NAMES) - set(LABELS))
_extra = sorted(set(LABELS) - set(COLUMN_NAMES))
if _missing or _extra:  # pragma: no cover - a developer's mistake, caught by every import
    raise RuntimeError(
        f"io/column_labels.py: columns without a label {_missing}, labels of no column {_extra}"
    )

#: entity -> stored field -> sheet column, where the two differ (the inverse of validate.RENAME)
STORED_AS: dict[str, dict[str, str]] = {
    "study": {"key": "study_id"},
    "event": {"key": "event_id"},
    "estimate": {"point": "estimate", "study": "study_id", "event": "event_id"},
}


def label(column: str) -> str:
    """The human label of sheet column ``column`` (an unknown name: itself, spaced)."""
    return LABELS.get(column, str(column).replace("_", " "))


def help_text(column: str) -> str:
    """What the column holds, then its name in the sheet (for matching the file)."""
    col = BY_NAME.get(column)
    parts = []
    if col is not None:
        parts.append(f"{col.help[:1].upper()}{col.help[1:]}.")
        if col.required:
            parts.append("Required.")
    parts.append(f"Sheet column: `{column}`.")
    return " ".join(parts)


def label_with_column(column: str | None) -> str:
    """``Lower CI limit (ci_low)``: the label and the sheet's column name, for problem lists;
    an empty string for a problem of a whole row or file."""
    if not column:
        return ""
    if column not in LABELS:
        return str(column)
    return f"{LABELS[column]} ({column})"


def field_label(entity: str, field: str) -> str:
    """The label of a stored ``field`` of ``entity`` (``point`` of an estimate: ``Estimate``);
    a field with no sheet column keeps its name, spaced."""
    column = STORED_AS.get(entity, {}).get(field, field)
    return label(column)
