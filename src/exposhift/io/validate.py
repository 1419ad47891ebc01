"""From a raw extraction sheet to validated, typed records (or every problem at once).

:func:`validate_sheet` reads the full sheet (one row per estimate); :func:`validate_events_sheet`
reads an events sheet (the event columns and ``demo``). Both collect every problem in one pass and
raise them together as :class:`~exposhift.errors.InputFileError`; nothing is returned half-valid.

Column rules (see docs/extraction-sheet.md):

- a required column missing from the header is one problem on row 1;
- a column exposhift does not know is a problem naming it (with the closest known name), unless
  ``ignore_extra`` is set, in which case it is listed in the notes and ignored;
- an optional column left out of the file leaves that field as it is in the database; a blank
  cell in a column that is there clears it.
"""

from __future__ import annotations

import difflib

import numpy as np
import pandas as pd

from exposhift import vocab
from exposhift.io import cells, overlap, plausible, rules
from exposhift.io.columns import BY_NAME, COLUMN_NAMES, EVENT_COLUMNS, STUDY_COLUMNS
from exposhift.io.frames import EVENT_FIELDS, STUDY_FIELDS, EvidenceFrames, coerce, estimate_keys
from exposhift.io.problems import ProblemLog, quote, sorted_problems
from exposhift.io.sheet import RawSheet

#: code columns -> (accepted codes, name in messages, default for a blank cell)
CODES = {
    "design": (vocab.DESIGNS, "design", None),
    "change_kind": (vocab.CHANGE_KINDS, "change kind", None),
    "change_direction": (vocab.DIRECTIONS, "change direction", None),
    "measure": (vocab.MEASURES, "measure", None),
    "estimate_kind": (vocab.ESTIMATE_KINDS, "estimate kind", "change"),
}

#: sheet column -> field, per entity (other columns keep their name)
RENAME = {
    "study": {"study_id": "key"},
    "event": {"event_id": "key"},
    "estimate": {"study_id": "study", "event_id": "event", "estimate": "point"},
}
ESTIMATE_SHEET = (
    "study_id",
    "event_id",
    "outcome",
    "measure",
    "estimate_kind",
    "per_unit",
    "estimate",
    "ci_low",
    "ci_high",
    "ci_level",
    "se",
    "p_value",
    "p_bound",
    "baseline_risk",
    "subgroup",
    "time_window",
    "primary",
)
UNCERTAINTY = ("ci_low", "ci_high", "se", "p_value")
EVENTS_SHEET_COLUMNS = (*EVENT_COLUMNS, "demo")


def parse_cells(raw: pd.DataFrame, log: ProblemLog, *, verbatim: bool = False) -> pd.DataFrame:
    """Typed columns for every known column of ``raw`` (plus ``date_precision``)."""
    out: dict[str, pd.Series] = {}
    for name in raw.columns:
        col = BY_NAME.get(name)
        if col is None:
            continue
        s = raw[name]
        if name == "country":
            out[name] = cells.parse_country(s, name, log)
        elif name == "change_date":
            out[name], out["date_precision"] = cells.parse_date(s, name, log)
        elif name == "p_value":
            out[name], bound = cells.parse_p_value(s, name, log)
            out["p_bound"] = bound | out["p_bound"] if "p_bound" in out else bound
        elif name == "p_bound":
            flag = cells.parse_bool(s, name, log)
            out[name] = flag | out[name] if name in out else flag
        elif name == "checks":
            out[name] = cells.normalise_checks(cells.clean_text(s, verbatim=verbatim))
        elif name == overlap.COLUMN:
            out[name] = overlap.normalise_ids(cells.clean_text(s, verbatim=verbatim))
        elif name in CODES:
            accepted, what, default = CODES[name]
            out[name] = cells.parse_code(s, name, log, accepted, what, default=default)
        elif col.kind == "int":
            out[name] = cells.parse_int(s, name, log)
        elif col.kind == "float":
            out[name] = cells.parse_float(s, name, log)
        elif col.kind == "bool":
            out[name] = cells.parse_bool(s, name, log)
        else:
            out[name] = cells.clean_text(s, verbatim=verbatim)
    return pd.DataFrame(out, index=raw.index)


def check_header(
    columns: list[str],
    allowed: tuple[str, ...],
    required: tuple[str, ...],
    log: ProblemLog,
    *,
    ignore_extra: bool,
    ignored: tuple[str, ...] = (),
    notes: list[str] | None = None,
) -> list[str]:
    """Report missing required and unknown columns; returns the columns that were missing."""
    missing = [c for c in required if c not in columns]
    if len(missing) > 2:  # one mistake (wrong sheet, delimiter or file), one problem
        log.add(
            1,
            None,
            f"{len(missing)} required columns are missing: {', '.join(missing)}; "
            "is this the extraction sheet? Its columns are listed in "
            "docs/extraction-sheet.md (template: docs/example-sheet.csv)",
        )
    for c in missing if len(missing) <= 2 else []:
        log.add(1, c, f"required column '{c}' is missing; add it ({BY_NAME[c].help})")
    unknown = [c for c in columns if c not in allowed and c not in ignored]
    if unknown and not ignore_extra:
        for c in unknown:
            close = difflib.get_close_matches(c, COLUMN_NAMES, n=1)
            hint = f"did you mean '{close[0]}'? " if close else ""
            log.add(
                1,
                c,
                f"unknown column; {hint}rename or delete it, or import with "
                "--ignore-extra-columns to skip columns exposhift does not use",
            )
    if notes is not None:
        skipped = [c for c in columns if c in ignored or (ignore_extra and c in unknown)]
        if skipped:
            notes.append(f"ignored columns: {', '.join(skipped)}")
    return missing


def check_required_values(raw: pd.DataFrame, required: tuple[str, ...], log: ProblemLog) -> None:
    for c in required:
        if c in raw.columns:
            blank = (raw[c].fillna("").astype("str").str.strip() == "").to_numpy()
            log.flag(blank, c, f"required value missing; give the {BY_NAME[c].help}")


def unreadable_cells(raw: pd.DataFrame, typed: pd.DataFrame) -> dict[str, np.ndarray]:
    """Per column, the cells that were filled in but could not be read (already reported)."""
    out = {}
    for c in raw.columns:
        if c in typed.columns:
            filled = (raw[c].fillna("").astype("str").str.strip() != "").to_numpy()
            out[c] = filled & typed[c].isna().to_numpy()
    return out


def with_blank_required(
    bad: dict[str, np.ndarray], raw: pd.DataFrame, required: tuple[str, ...]
) -> dict[str, np.ndarray]:
    """``bad`` plus the blank cells of required columns: both are reported already, so the
    consistency checks leave them out (a missing citation is one problem, not two)."""
    out = dict(bad)
    for c in required:
        if c in raw.columns:
            blank = (raw[c].fillna("").astype("str").str.strip() == "").to_numpy()
            out[c] = out[c] | blank if c in out else blank
    return out


def _any_unreadable(bad: dict[str, np.ndarray], columns, n: int) -> np.ndarray:
    out = np.zeros(n, bool)
    for c in columns:
        if c in bad:
            out |= bad[c]
    return out


def _entity(typed: pd.DataFrame, columns, entity: str) -> pd.DataFrame:
    cols = [c for c in columns if c in typed.columns]
    return typed[cols].rename(columns=RENAME.get(entity, {})).reset_index(drop=True)


def _outcomes(est: pd.DataFrame, log: ProblemLog) -> pd.DataFrame:
    """One row per outcome; non-blank ``outcome_group`` values of an outcome must agree."""
    if "outcome_group" not in est.columns:
        names = est["outcome"].dropna().drop_duplicates()
        return pd.DataFrame({"name": names.to_numpy()}).astype("str")
    grouped = est[["outcome", "outcome_group"]].copy()
    pos = np.arange(len(grouped), dtype=float)
    with_group = grouped["outcome_group"].notna().to_numpy()
    first = (
        pd.Series(np.where(with_group, pos, np.inf))
        .groupby(grouped["outcome"].to_numpy(), sort=False)
        .transform("min")
        .to_numpy()
    )
    ok = np.isfinite(first)
    ref = np.full(len(grouped), None, dtype=object)
    ref[ok] = grouped["outcome_group"].to_numpy()[first[ok].astype(int)]
    own = grouped["outcome_group"].to_numpy(dtype=object)
    bad = with_group & ok & (own != ref)
    names = grouped["outcome"].to_numpy()
    log.flag(
        bad,
        "outcome_group",
        lambda i: (
            f"outcome {quote(names[i])} has outcome_group {quote(own[i])} here but "
            f"{quote(ref[i])} in row {log.rows[int(first[i])]}; give each outcome one group"
        ),
    )
    out = pd.DataFrame({"name": names, "outcome_group": ref})
    out = out[out["name"].notna()].drop_duplicates("name")
    return coerce(out.reset_index(drop=True), {"name": "text", "outcome_group": "text"})


def _check_duplicates(keys: pd.Series, log: ProblemLog) -> None:
    pos = pd.Series(np.arange(len(keys)))
    first = pos.groupby(keys.to_numpy(), sort=False).transform("min")
    first = first.fillna(pos).astype(np.int64).to_numpy()
    dup = first != np.arange(len(keys))
    log.flag(
        dup,
        None,
        lambda i: (
            f"duplicate estimate: same study_id, event_id, outcome, measure, estimate_kind, "
            f"subgroup and time_window as row {log.rows[first[i]]}; delete one, or tell them "
            "apart with subgroup or time_window"
        ),
    )


def validate_sheet(
    sheet: RawSheet, *, ignore_extra: bool = False, study_events: overlap.StudyEvents | None = None
) -> EvidenceFrames:
    """Validate a full extraction sheet (one row per estimate).

    ``study_events`` looks up studies of the evidence base that ``same_population_as`` names
    (see :mod:`exposhift.io.overlap`); without it, only the sheet's own studies can be named.
    """
    log = ProblemLog(sheet.file, sheet.rows)
    notes: list[str] = []
    raw = sheet.frame
    required = tuple(c.name for c in BY_NAME.values() if c.required)
    missing = check_header(
        list(raw.columns), COLUMN_NAMES, required, log, ignore_extra=ignore_extra, notes=notes
    )
    if len(missing) > 2:  # not an extraction sheet: the row checks would only repeat that
        log.raise_if_any()
    raw = raw[[c for c in raw.columns if c in BY_NAME]]
    check_required_values(raw, required, log)
    typed = parse_cells(raw, log)
    for c in missing:  # already reported; blank so that the other checks can run
        typed[c] = pd.Series(np.nan, index=typed.index, dtype=_BLANK_DTYPE[BY_NAME[c].kind])
        if c == "change_date":
            typed["date_precision"] = typed[c]
    rules.check_key_text(typed, log)
    rules.check_ranges(typed, log)
    bad = with_blank_required(unreadable_cells(raw, typed), raw, required)
    rules.check_estimates(typed, log, _any_unreadable(bad, UNCERTAINTY, len(typed)))
    study_rows = rules.check_consistent(
        typed, "study_id", list(STUDY_COLUMNS[1:]), log, "study", bad
    )
    event_rows = rules.check_consistent(
        typed, "event_id", list(EVENT_COLUMNS[1:]), log, "event", bad
    )
    est = _entity(typed, ESTIMATE_SHEET, "estimate")
    if "estimate_kind" not in est.columns:
        est["estimate_kind"] = pd.Series("change", index=est.index, dtype="str")
    est["key"] = estimate_keys(est)
    complete = est[["study", "event", "outcome", "measure"]].notna().all(axis=1).to_numpy()
    _check_duplicates(est["key"].where(complete), log)
    outcomes = _outcomes(typed, log)
    studies = _entity(typed.iloc[study_rows], STUDY_COLUMNS, "study")
    overlap.check_same_population(studies, log.rows[study_rows], est, log, study_events)
    log.raise_if_any()
    warn = ProblemLog(sheet.file, sheet.rows)
    plausible.check_plausible(typed, warn)

    events = _entity(typed.iloc[event_rows], (*EVENT_COLUMNS, "date_precision"), "event")
    if "demo" in typed.columns:  # an event is demo when any of its rows is
        demo_any = typed.groupby("event_id", sort=False)["demo"].any()
        events["demo"] = events["key"].map(demo_any).astype(bool).to_numpy()
    exposures = pd.DataFrame({"name": events["exposure"].drop_duplicates().to_numpy()})
    given = {
        "exposure": frozenset({"name"}),
        "outcome": frozenset(outcomes.columns),
        "event": frozenset(events.columns),
        "study": frozenset(studies.columns),
        "estimate": frozenset(est.columns),
    }
    est = est[[c for c in _ESTIMATE_ORDER if c in est.columns]]
    return EvidenceFrames(
        exposures=coerce(exposures, {"name": "text"}),
        outcomes=outcomes,
        events=coerce(events, EVENT_FIELDS),
        studies=coerce(studies, STUDY_FIELDS),
        estimates=est,
        given=given,
        rows=len(raw),
        notes=notes,
        warnings=sorted_problems(warn.problems),
    )


def validate_events_sheet(sheet: RawSheet, *, ignore_extra: bool = False) -> EvidenceFrames:
    """Validate an events sheet: exposure-change events registered without studies."""
    log = ProblemLog(sheet.file, sheet.rows)
    notes: list[str] = []
    raw = sheet.frame
    required = tuple(c for c in EVENT_COLUMNS if BY_NAME[c].required)
    others = tuple(c for c in COLUMN_NAMES if c not in EVENTS_SHEET_COLUMNS)
    missing = check_header(
        list(raw.columns),
        EVENTS_SHEET_COLUMNS,
        required,
        log,
        ignore_extra=ignore_extra,
        ignored=others,
        notes=notes,
    )
    if len(missing) > 2:  # not an events sheet: the row checks would only repeat that
        log.raise_if_any()
    raw = raw[[c for c in raw.columns if c in EVENTS_SHEET_COLUMNS]]
    check_required_values(raw, required, log)
    typed = parse_cells(raw, log)
    rules.check_key_text(typed, log)
    rules.check_ranges(typed, log)
    fields = [*EVENT_COLUMNS[1:], "demo"]
    skip = with_blank_required(unreadable_cells(raw, typed), raw, required)
    event_rows = (
        rules.check_consistent(typed, "event_id", fields, log, "event", skip)
        if "event_id" in typed.columns
        else np.array([], dtype=int)
    )
    log.raise_if_any()
    events = _entity(typed.iloc[event_rows], (*EVENT_COLUMNS, "date_precision", "demo"), "event")
    exposures = pd.DataFrame({"name": events["exposure"].drop_duplicates().to_numpy()})
    return EvidenceFrames(
        exposures=coerce(exposures, {"name": "text"}),
        events=coerce(events, EVENT_FIELDS),
        given={"exposure": frozenset({"name"}), "event": frozenset(events.columns)},
        rows=len(raw),
        notes=notes,
    )


_BLANK_DTYPE = {"text": "str", "code": "str", "date": "str", "int": "Int64", "float": "float64"}
_ESTIMATE_ORDER = (
    "key",
    "study",
    "event",
    "outcome",
    "measure",
    "estimate_kind",
    "per_unit",
    "point",
    "ci_low",
    "ci_high",
    "ci_level",
    "se",
    "p_value",
    "p_bound",
    "baseline_risk",
    "subgroup",
    "time_window",
    "primary",
)
