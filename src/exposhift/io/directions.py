"""Expected directions: the committee's pre-specified direction of effect per exposure x outcome.

A direction says what an exposure *increase* does to the outcome: ``raises`` or ``lowers``. It
is decided before the evidence is pooled, with a rationale (required), who decided it and when
(ISO-8601 UTC with a ``Z`` suffix). This module checks the values and reads a directions sheet
(CSV or XLSX); the store keeps them versioned and audited (:mod:`exposhift.store.directions`).

Directions sheet columns: ``exposure``, ``outcome``, ``direction``, ``rationale`` (required),
``decided_by`` and ``decided_at`` (optional: blank means the importing user and now). Every
problem of the file is reported at once, with its row and column.
"""

from __future__ import annotations

import difflib
from datetime import UTC, date, datetime

import pandas as pd

from exposhift.errors import ConfigError
from exposhift.io.problems import ProblemLog, quote
from exposhift.io.sheet import RawSheet

#: accepted directions and what they mean
EXPECT: dict[str, str] = {
    "raises": "an exposure increase raises the outcome",
    "lowers": "an exposure increase lowers the outcome",
}
#: fields of a direction record as files and frames name them, in export order
FIELDS: tuple[str, ...] = (
    "exposure",
    "outcome",
    "direction",
    "rationale",
    "decided_by",
    "decided_at",
)
SHEET_REQUIRED: tuple[str, ...] = ("exposure", "outcome", "direction", "rationale")


def check_direction(value: str | None) -> str:
    """``raises`` or ``lowers`` (case and surrounding spaces ignored), else ConfigError."""
    v = (value or "").strip().lower()
    if v not in EXPECT:
        raise ConfigError(
            f"expected direction {value!r} is not one of "
            f"{', '.join(EXPECT)} ({'; '.join(EXPECT.values())})"
        )
    return v


def check_rationale(value: str | None) -> str:
    """The rationale, stripped; an empty one raises ConfigError."""
    v = (value or "").strip()
    if not v:
        raise ConfigError(
            "a pre-specified direction needs a rationale: say why the committee "
            'expects it (mechanism, prior evidence), e.g. --why "..."'
        )
    return v


def normalise_time(value: str | None) -> str | None:
    """ISO date or date-time -> ``YYYY-MM-DDTHH:MM:SS[.ffffff]Z`` in UTC; None if unreadable.

    A date alone means midnight UTC; a date-time must carry ``Z`` or a UTC offset.
    """
    text = (value or "").strip()
    if not text:
        return None
    try:
        if len(text) == 10:
            d = date.fromisoformat(text)
            moment = datetime(d.year, d.month, d.day, tzinfo=UTC)
        else:
            moment = datetime.fromisoformat(text)
            if moment.tzinfo is None:
                return None
            moment = moment.astimezone(UTC)
    except ValueError:
        return None
    fmt = "%Y-%m-%dT%H:%M:%S.%fZ" if moment.microsecond else "%Y-%m-%dT%H:%M:%SZ"
    return moment.strftime(fmt)


def check_time(value: str | None) -> str:
    out = normalise_time(value)
    if out is None:
        raise ConfigError(
            f"decided_at {value!r} is not a date (YYYY-MM-DD) or a UTC date-time "
            "(YYYY-MM-DDTHH:MM:SSZ)"
        )
    return out


def _name_problem(kind: str, name: str, known: list[str], where: str) -> str:
    close = difflib.get_close_matches(name, known, n=3, cutoff=0.5)
    hint = f"did you mean {', '.join(quote(c) for c in close)}? " if close else ""
    return (
        f"no {kind} {quote(name)} in {where}; {hint}use the {kind} name as studies and "
        "events give it"
    )


def check_records(
    frame: pd.DataFrame,
    log: ProblemLog,
    known_exposures: list[str],
    known_outcomes: list[str],
    *,
    default_by: str | None = None,
    default_at: str | None = None,
    where: str = "the evidence base",
    absent: frozenset[str] = frozenset(),
) -> pd.DataFrame:
    """Check direction records (text cells, ``""`` when blank); returns them normalised.

    Every problem goes to ``log`` at the record's row. ``default_by``/``default_at`` fill a
    blank ``decided_by``/``decided_at`` (``""``: left blank, for the writer to fill); without a
    default the value is required. Columns in
    ``absent`` (missing from the file, already reported) are not reported again per row.
    """
    exposures, outcomes = set(known_exposures), set(known_outcomes)
    seen: dict[tuple[str, str], int] = {}
    out = []
    for pos, rec in enumerate(frame.to_dict("records")):
        row = int(log.rows[pos])
        vals = {f: str(rec.get(f) or "").strip() for f in FIELDS}
        for f in SHEET_REQUIRED:
            if not vals[f] and f not in absent:
                what = {
                    "rationale": "say why the committee expects this direction",
                    "direction": "write raises or lowers",
                }.get(f, f"give the {f} name")
                log.add(row, f, f"required value missing; {what}")
        if vals["exposure"] and vals["exposure"] not in exposures:
            log.add(
                row,
                "exposure",
                _name_problem("exposure", vals["exposure"], sorted(exposures), where),
            )
        if vals["outcome"] and vals["outcome"] not in outcomes:
            log.add(
                row, "outcome", _name_problem("outcome", vals["outcome"], sorted(outcomes), where)
            )
        if vals["direction"]:
            low = vals["direction"].lower()
            if low not in EXPECT:
                log.add(
                    row,
                    "direction",
                    f"{quote(vals['direction'])} is not a direction; "
                    "write raises (an exposure increase raises the outcome) or lowers",
                )
            vals["direction"] = low
        if not vals["decided_by"]:
            if default_by is None:
                log.add(row, "decided_by", "required value missing; name who decided it")
            vals["decided_by"] = default_by or ""
        if vals["decided_at"]:
            at = normalise_time(vals["decided_at"])
            if at is None:
                log.add(
                    row,
                    "decided_at",
                    f"{quote(vals['decided_at'])} is not a date "
                    "(YYYY-MM-DD) or a UTC date-time (YYYY-MM-DDTHH:MM:SSZ)",
                )
            vals["decided_at"] = at or ""
        else:
            if default_at is None:
                log.add(
                    row,
                    "decided_at",
                    "required value missing; give the date of the decision (YYYY-MM-DD)",
                )
            vals["decided_at"] = default_at or ""
        pair = (vals["exposure"], vals["outcome"])
        if all(pair):
            if pair in seen:
                log.add(
                    row,
                    "outcome",
                    f"{quote(pair[0])} x {quote(pair[1])} is already given "
                    f"in row {seen[pair]}; keep one direction per exposure x outcome",
                )
            else:
                seen[pair] = row
        out.append(vals)
    return pd.DataFrame(out, columns=list(FIELDS)).astype("str")


def validate_directions_sheet(
    sheet: RawSheet,
    known_exposures: list[str],
    known_outcomes: list[str],
    *,
    default_by: str = "",
    default_at: str = "",
) -> pd.DataFrame:
    """A directions sheet checked completely; raises InputFileError with every problem."""
    log = ProblemLog(sheet.file, sheet.rows)
    raw = sheet.frame
    absent = frozenset(c for c in SHEET_REQUIRED if c not in raw.columns)
    for c in SHEET_REQUIRED:
        if c in absent:
            log.add(
                1, c, f"required column '{c}' is missing; add it (columns: {', '.join(FIELDS)})"
            )
    for c in raw.columns:
        if c not in FIELDS:
            close = difflib.get_close_matches(c, FIELDS, n=1)
            hint = f"did you mean '{close[0]}'? " if close else ""
            log.add(
                1,
                c,
                f"unknown column; {hint}a directions sheet has the columns {', '.join(FIELDS)}",
            )
    frame = check_records(
        raw,
        log,
        known_exposures,
        known_outcomes,
        default_by=default_by,
        default_at=default_at,
        absent=absent,
    )
    log.raise_if_any()
    return frame
