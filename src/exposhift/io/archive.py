"""The JSON archive: the whole evidence base in one deterministic, lossless file.

Layout (``format`` = ``exposhift-evidence-base``, ``format_version`` = 1)::

    {"format": ..., "format_version": 1,
     "vocabularies": {"designs": [...], "change_kinds": [...], "change_directions": [...],
                      "measures": [...], "estimate_kinds": [...], "review_stages": [...],
                      "exposures": [{"name", "agent_class"}], "outcomes": [{"name", ...}]},
     "events": [...], "studies": [...], "estimates": [...],
     "expected_directions": [{"exposure", "outcome", "direction", "rationale", "decided_by",
                              "decided_at"}],
     "appraisals": [{..., "ratings": [...]}],
     "method": [{"part", "number", "declared", "content_hash", "source", "text"}],
     "certainty_judgements": [{"exposure", "outcome", "domain", "rating", "why", ...}],
     "series": [{..., "points": [...]}], "series_fits": [...]}

(the method section: :mod:`exposhift.io.method_archive`; the certainty judgements:
:mod:`exposhift.io.certainty_archive`; the series sections:
:mod:`exposhift.io.series_archive`)

An archive without ``expected_directions`` (written before the section existed) still reads;
it leaves the stored directions as they are.

Determinism: records are sorted by natural key (code-point order), fields come in a fixed order,
one record per line; no database ids, versions or timestamps; floats are written with ``repr``
so they read back to the same double. Export -> import into an empty database -> export gives
the same bytes.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd

from exposhift import vocab
from exposhift.errors import InputFileError, Problem
from exposhift.io import directions as expected
from exposhift.io import overlap, plausible, rules
from exposhift.io.certainty_archive import judgement_lines, read_certainty_section
from exposhift.io.frames import (
    APPRAISAL_FIELDS,
    ESTIMATE_FIELDS,
    EVENT_FIELDS,
    EXPOSURE_FIELDS,
    FIELDS,
    OUTCOME_FIELDS,
    RATING_FIELDS,
    STUDY_FIELDS,
    EvidenceFrames,
    coerce,
    estimate_keys,
    to_records,
)
from exposhift.io.limits import (
    check_file_size,
    check_json_depth,
    current_limits,
    text_problem,
)
from exposhift.io.method_archive import method_lines, read_method_section
from exposhift.io.problems import ProblemLog, quote, sorted_problems
from exposhift.io.series_archive import read_series_sections, series_lines
from exposhift.io.sheet import read_text
from exposhift.io.validate import RENAME, parse_cells, unreadable_cells

FORMAT = "exposhift-evidence-base"
FORMAT_VERSION = 1

#: fields written per record (derived values such as date_precision are left out)
ARCHIVE_FIELDS = {
    "exposure": list(EXPOSURE_FIELDS),
    "outcome": list(OUTCOME_FIELDS),
    "event": [f for f in EVENT_FIELDS if f != "date_precision"],
    "study": list(STUDY_FIELDS),
    "estimate": list(ESTIMATE_FIELDS),
    "appraisal": list(APPRAISAL_FIELDS),
    "rating": [f for f in RATING_FIELDS if f not in ("study", "reviewer", "stage")],
}
LEVELS = (0, 1, 2, 3)


# ---------------------------------------------------------------------------------- writing
def _line(record: dict) -> str:
    return json.dumps(record, ensure_ascii=False, separators=(", ", ": "), allow_nan=False)


def _list(name: str, records: list[dict], indent: str, last: bool) -> list[str]:
    comma = "" if last else ","
    if not records:
        return [f'{indent}"{name}": []{comma}']
    out = [f'{indent}"{name}": [']
    out += [f"{indent}  {_line(r)}," for r in records[:-1]]
    out.append(f"{indent}  {_line(records[-1])}")
    out.append(f"{indent}]{comma}")
    return out


def _sorted(frame: pd.DataFrame, fields: list[str], key: tuple[str, ...]) -> list[dict]:
    recs = to_records(frame, fields)
    return sorted(recs, key=lambda r: tuple(r[k] for k in key))


def code_lists() -> dict[str, list]:
    """The controlled vocabularies of this exposhift, as written into archives."""
    return {
        "designs": [
            {"code": c, "family": f, "description": d} for c, (f, d) in vocab.DESIGNS.items()
        ],
        "change_kinds": [{"code": c, "description": d} for c, d in vocab.CHANGE_KINDS.items()],
        "change_directions": [{"code": c} for c in vocab.DIRECTIONS],
        "measures": [{"code": c, "scale": s} for c, s in vocab.MEASURES.items()],
        "estimate_kinds": [{"code": c, "description": d} for c, d in vocab.ESTIMATE_KINDS.items()],
        "review_stages": [{"code": c} for c in vocab.REVIEW_STAGES],
    }


def archive_text(frames: EvidenceFrames) -> str:
    """The JSON archive of ``frames`` (the whole evidence base, as read from the database)."""
    lists = code_lists()
    lists["exposures"] = _sorted(frames.exposures, ARCHIVE_FIELDS["exposure"], ("name",))
    lists["outcomes"] = _sorted(frames.outcomes, ARCHIVE_FIELDS["outcome"], ("name",))
    ratings: dict[tuple, list[dict]] = {}
    for r in _sorted(frames.ratings, list(RATING_FIELDS), ("study", "reviewer", "stage", "domain")):
        ratings.setdefault((r["study"], r["reviewer"], r["stage"]), []).append(
            {f: r[f] for f in ARCHIVE_FIELDS["rating"]}
        )
    appraisals = _sorted(
        frames.appraisals, ARCHIVE_FIELDS["appraisal"], ("study", "reviewer", "stage")
    )
    for a in appraisals:
        a["ratings"] = ratings.get((a["study"], a["reviewer"], a["stage"]), [])
    lines = [
        "{",
        f'  "format": "{FORMAT}",',
        f'  "format_version": {FORMAT_VERSION},',
        '  "vocabularies": {',
    ]
    names = list(lists)
    for i, name in enumerate(names):
        lines += _list(name, lists[name], "    ", i == len(names) - 1)
    lines.append("  },")
    lines += _list("events", _sorted(frames.events, ARCHIVE_FIELDS["event"], ("key",)), "  ", False)
    lines += _list(
        "studies", _sorted(frames.studies, ARCHIVE_FIELDS["study"], ("key",)), "  ", False
    )
    lines += _list(
        "estimates", _sorted(frames.estimates, ARCHIVE_FIELDS["estimate"], ("key",)), "  ", False
    )
    lines += _direction_lines(frames)
    lines += _list("appraisals", appraisals, "  ", False)
    lines += method_lines(frames.method, _list)
    lines += judgement_lines(frames.certainty, _list)
    lines += series_lines(frames.series, _list)
    lines.append("}")
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------------------------- reading
_KIND_NAMES = {
    "text": "text",
    "int": "a whole number",
    "float": "a number",
    "bool": "true or false",
}


def _as_text(value, kind: str) -> str | None:
    """The JSON value as sheet text, or None when its JSON type is wrong for ``kind``."""
    if value is None:
        return ""
    if kind == "text":
        return value if isinstance(value, str) else None
    if isinstance(value, bool):
        return ("yes" if value else "no") if kind == "bool" else None
    if kind == "int":
        return str(value) if isinstance(value, int) else None
    if kind == "float":
        return repr(float(value)) if isinstance(value, (int, float)) else None
    return None


def _section(records, fields: dict[str, str], log: ProblemLog, section: str) -> pd.DataFrame:
    """Records of one section as a frame of sheet text, flagging wrong JSON types."""
    if not isinstance(records, list):
        log.add(None, section, f"'{section}' must be a list of records")
        return pd.DataFrame({f: pd.Series([], dtype="str") for f in fields})
    cols: dict[str, list[str]] = {f: [] for f in fields}
    limits = current_limits()
    for i, rec in enumerate(records):
        if not isinstance(rec, dict):
            log.add(i + 1, None, "each record must be a JSON object")
            rec = {}
        for extra in sorted(set(rec) - set(fields) - {"ratings"}):
            log.add(i + 1, extra, "unknown field; remove it (is this an exposhift export?)")
        for f, kind in fields.items():
            text = _as_text(rec.get(f), kind)
            if text is None:
                log.add(i + 1, f, f"expected {_KIND_NAMES[kind]}, not {quote(rec.get(f))}")
                text = ""
            elif text and kind == "text":
                text = _checked_text(text, log, i + 1, f, limits)
            cols[f].append(text)
    return pd.DataFrame({f: pd.Series(v, dtype="str") for f, v in cols.items()})


def _checked_text(text: str, log: ProblemLog, row: int, column: str, limits) -> str:
    """The text, or "" after logging why it may not be stored (too long, control characters,
    lone surrogates: see :mod:`exposhift.io.limits`)."""
    problem = text_problem(text, limits)
    if problem is None:
        return text
    log.add(row, column, problem)
    return ""


def _to_sheet_names(frame: pd.DataFrame, entity: str) -> pd.DataFrame:
    back = {v: k for k, v in RENAME.get(entity, {}).items()}
    return frame.rename(columns=back)


def _required(raw: pd.DataFrame, cols, log: ProblemLog) -> None:
    for c in cols:
        if c in raw.columns:
            log.flag((raw[c] == "").to_numpy(), c, "required value missing")


def _duplicates(keys: pd.Series, log: ProblemLog, column: str) -> None:
    dup = keys.duplicated().to_numpy() & keys.notna().to_numpy()
    vals = keys.to_numpy()
    log.flag(dup, column, lambda i: f"{quote(vals[i])} appears twice; keep one record")


def _entity_section(
    doc: dict, name: str, entity: str, required: tuple[str, ...], log: ProblemLog, file: str
) -> pd.DataFrame:
    records = doc.get(name, [])
    sec = log.at(
        f"{file}: {name}", np.arange(1, (len(records) if isinstance(records, list) else 0) + 1)
    )
    fields = {f: FIELDS[entity][f] for f in ARCHIVE_FIELDS[entity]}
    raw = _to_sheet_names(_section(records, fields, sec, name), entity)
    _required(raw, required, sec)
    typed = parse_cells(raw, sec, verbatim=True)
    if entity == "estimate":
        bad = unreadable_cells(raw, typed)
        rules.check_estimates(
            typed, sec, np.any([bad[c] for c in ("ci_low", "ci_high", "se", "p_value")], axis=0)
        )
    rules.check_key_text(typed, sec)
    rules.check_ranges(typed, sec)
    out = typed.rename(columns=RENAME.get(entity, {}))
    if "key" in raw.columns:
        out["_given_key"] = raw["key"].to_numpy()
    out.attrs["log"] = sec
    return out


def _vocab_section(doc: dict, name: str, entity: str, log: ProblemLog, file: str) -> pd.DataFrame:
    vocabularies = doc.get("vocabularies")
    records = vocabularies.get(name, []) if isinstance(vocabularies, dict) else []
    n = len(records) if isinstance(records, list) else 0
    sec = log.at(f"{file}: vocabularies.{name}", np.arange(1, n + 1))
    raw = _section(records, FIELDS[entity], sec, f"vocabularies.{name}")
    _required(raw, ("name",), sec)
    frame = coerce(raw.mask(raw == ""), FIELDS[entity])
    _duplicates(frame["name"], sec, "name")
    return frame


def _appraisals(doc: dict, studies: set[str], log: ProblemLog, file: str):
    records = doc.get("appraisals", [])
    n = len(records) if isinstance(records, list) else 0
    sec = log.at(f"{file}: appraisals", np.arange(1, n + 1))
    raw = _section(records, APPRAISAL_FIELDS, sec, "appraisals")
    _required(raw, ("study", "reviewer", "stage", "rubric_id", "rubric_hash"), sec)
    frame = coerce(raw.mask(raw == ""), {**APPRAISAL_FIELDS, "overall": "text"})
    overall = pd.to_numeric(frame["overall"], errors="coerce")
    sec.flag(
        overall.notna().to_numpy() & ~overall.isin(LEVELS).to_numpy(),
        "overall",
        "an overall level is 0, 1, 2 or 3 (or null)",
    )
    frame["overall"] = pd.array(
        overall.astype(object).where(overall.notna(), None).tolist(), dtype="Int64"
    )
    stage_bad = (
        frame["stage"].notna().to_numpy() & ~frame["stage"].isin(vocab.REVIEW_STAGES).to_numpy()
    )
    sec.flag(stage_bad, "stage", f"unknown stage; accepted: {', '.join(vocab.REVIEW_STAGES)}")
    unknown = frame["study"].notna().to_numpy() & ~frame["study"].isin(studies).to_numpy()
    sec.flag(unknown, "study", "no study with this key in the archive's studies")
    key = (
        frame["study"].fillna("")
        + "|"
        + frame["reviewer"].fillna("")
        + "|"
        + frame["stage"].fillna("")
    )
    _duplicates(key, sec, "reviewer")
    rating_rows = []
    limits = current_limits()
    for i, rec in enumerate(records if isinstance(records, list) else []):
        ratings = rec.get("ratings", []) if isinstance(rec, dict) else []
        if not isinstance(ratings, list):
            sec.add(i + 1, "ratings", "'ratings' must be a list")
            continue
        seen = set()
        for j, r in enumerate(ratings):
            where = f"ratings[{j}]"
            if not isinstance(r, dict):
                sec.add(i + 1, where, "each rating must be a JSON object")
                continue
            row = {
                "study": frame["study"].iat[i],
                "reviewer": frame["reviewer"].iat[i],
                "stage": frame["stage"].iat[i],
            }
            for f in ARCHIVE_FIELDS["rating"]:
                kind = RATING_FIELDS[f]
                v = r.get(f)
                if _as_text(v, kind) is None:
                    sec.add(i + 1, f"{where}.{f}", f"expected {_KIND_NAMES[kind]}, not {quote(v)}")
                    v = None
                if kind == "int" and v is not None and v not in LEVELS:
                    sec.add(i + 1, f"{where}.{f}", "a level is 0, 1, 2 or 3")
                if kind == "text" and isinstance(v, str):
                    v = _checked_text(v, sec, i + 1, f"{where}.{f}", limits) or None
                row[f] = v
            for extra in sorted(set(r) - set(ARCHIVE_FIELDS["rating"])):
                sec.add(i + 1, f"{where}.{extra}", "unknown field; remove it")
            if not row["domain"]:
                sec.add(i + 1, f"{where}.domain", "required value missing")
            if row["level"] is None:
                sec.add(i + 1, f"{where}.level", "required value missing")
            if row["domain"] in seen:
                sec.add(i + 1, f"{where}.domain", f"domain {quote(row['domain'])} is rated twice")
            seen.add(row["domain"])
            rating_rows.append(row)
    ratings = pd.DataFrame(rating_rows, columns=list(RATING_FIELDS))
    return frame, coerce(ratings, RATING_FIELDS)


def read_archive(
    path: str | Path, encoding: str | None = None, study_events: overlap.StudyEvents | None = None
) -> EvidenceFrames:
    """Read and validate a JSON archive written by :func:`archive_text`.

    ``study_events`` looks up evidence-base studies that ``same_population_as`` names.
    """
    path = Path(path)
    file = path.name
    check_file_size(path)
    check_json_depth(path.read_bytes(), file)  # before json.loads can recurse
    text = read_text(path, encoding)
    try:
        doc = json.loads(text)
    except RecursionError:
        raise InputFileError(
            [
                Problem(
                    file,
                    None,
                    None,
                    "the JSON is nested too deeply to read; this is not an exposhift export",
                )
            ]
        ) from None
    except json.JSONDecodeError as exc:
        raise InputFileError(
            [
                Problem(
                    file,
                    exc.lineno,
                    None,
                    f"not valid JSON ({exc.msg} at column {exc.colno}); "
                    "export the evidence base again or repair the file",
                )
            ]
        ) from None
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise InputFileError(
            [
                Problem(
                    file,
                    None,
                    None,
                    f'not an exposhift archive (no "format": "{FORMAT}"); '
                    "import sheets as .csv or .xlsx",
                )
            ]
        )
    if doc.get("format_version") != FORMAT_VERSION:
        raise InputFileError(
            [
                Problem(
                    file,
                    None,
                    "format_version",
                    f"archive format version {doc.get('format_version')!r} "
                    f"is not {FORMAT_VERSION}; use the exposhift that wrote it",
                )
            ]
        )
    log = ProblemLog(file)
    _section_types(doc, log)
    exposures = _vocab_section(doc, "exposures", "exposure", log, file)
    outcomes = _vocab_section(doc, "outcomes", "outcome", log, file)
    ev = _entity_section(
        doc,
        "events",
        "event",
        ("event_id", "exposure", "change_kind", "change_direction", "country", "change_date"),
        log,
        file,
    )
    st = _entity_section(
        doc, "studies", "study", ("study_id", "citation", "year", "design"), log, file
    )
    es = _entity_section(
        doc,
        "estimates",
        "estimate",
        ("key", "study_id", "event_id", "outcome", "measure", "estimate"),
        log,
        file,
    )
    for frame in (ev, st):
        _duplicates(frame["key"], frame.attrs["log"], "key")
    es_log = es.attrs["log"]
    if "estimate_kind" in es.columns:
        es["estimate_kind"] = es["estimate_kind"].fillna("change")
    recomputed = estimate_keys(es)
    given_key = es["_given_key"].astype("str")
    es_log.flag(
        (given_key != "").to_numpy() & (recomputed != given_key).to_numpy(),
        "key",
        lambda i: (
            f"key {quote(given_key.iat[i])} does not match the estimate's parts "
            f"({quote(recomputed.iat[i])}); correct it"
        ),
    )
    es["key"] = recomputed
    _duplicates(es["key"], es_log, "key")
    es_log.flag(
        es["study"].notna().to_numpy() & ~es["study"].isin(st["key"]).to_numpy(),
        "study",
        "no study with this key in the archive's studies",
    )
    es_log.flag(
        es["event"].notna().to_numpy() & ~es["event"].isin(ev["key"]).to_numpy(),
        "event",
        "no event with this key in the archive's events",
    )
    appraisals, ratings = _appraisals(doc, set(st["key"].dropna()), log, file)
    overlap.check_same_population(st, st.attrs["log"].rows, es, st.attrs["log"], study_events)
    directions = _directions_section(
        doc, log, file, ev["exposure"], es["outcome"], exposures, outcomes
    )
    series = _series(doc, log, file, ev, st, es, outcomes)
    method = read_method_section(doc, log, file)
    certainty = read_certainty_section(doc, log, file)
    if log.problems:
        raise InputFileError(sorted_problems(log.problems))
    warn = ProblemLog(es_log.file, es_log.rows)
    plausible.check_plausible(es.rename(columns={"point": "estimate"}), warn)

    exposures = _merge_names(exposures, ev["exposure"], "agent_class")
    outcomes = _merge_names(outcomes, es["outcome"], "outcome_group")
    events = coerce(ev[list(EVENT_FIELDS)], EVENT_FIELDS)
    studies = coerce(st[list(STUDY_FIELDS)], STUDY_FIELDS)
    estimates = es[list(ESTIMATE_FIELDS)].reset_index(drop=True)
    return EvidenceFrames(
        exposures=exposures,
        outcomes=outcomes,
        events=events,
        studies=studies,
        estimates=estimates,
        appraisals=appraisals,
        ratings=ratings,
        directions=directions,
        given={e: frozenset(FIELDS[e]) for e in FIELDS},
        rows=len(events) + len(studies) + len(estimates) + len(appraisals) + len(series),
        warnings=sorted_problems(warn.problems),
        series=series,
        method=method,
        certainty=certainty,
    )


#: top-level sections whose JSON type is checked here (the record lists are checked, with the
#: same kind of message, where they are read: see ``_section``)
SECTION_TYPES = {"vocabularies": dict}
_TYPE_NAMES = {dict: "an object ({...})", list: "a list ([...])"}
#: vocabulary lists read as records (checked where they are read)
_READ_VOCABULARIES = ("exposures", "outcomes")


def _json_type(value) -> str:
    return {
        dict: "an object",
        list: "a list",
        str: "text",
        bool: "true/false",
        type(None): "null",
        int: "a number",
        float: "a number",
    }.get(type(value), "a value")


def _section_types(doc: dict, log: ProblemLog) -> None:
    """Every known section of the right JSON type (a wrong one is reported, not crashed on)."""
    for name, kind in SECTION_TYPES.items():
        if name in doc and not isinstance(doc[name], kind):
            log.add(
                None,
                name,
                f"'{name}' must be {_TYPE_NAMES[kind]}, not "
                f"{_json_type(doc[name])}; export the evidence base again or repair it",
            )
    vocabularies = doc.get("vocabularies")
    if isinstance(vocabularies, dict):
        for name, value in vocabularies.items():
            if name not in _READ_VOCABULARIES and not isinstance(value, list):
                log.add(
                    None,
                    f"vocabularies.{name}",
                    f"'vocabularies.{name}' must be a list ([...]), not {_json_type(value)}",
                )


def _series(
    doc: dict,
    log: ProblemLog,
    file: str,
    ev: pd.DataFrame,
    st: pd.DataFrame,
    es: pd.DataFrame,
    outcomes: pd.DataFrame,
):
    """The series sections (:mod:`exposhift.io.series_archive`); a series must name an outcome
    the archive holds (listed, or named by an estimate)."""
    dates = {
        k: d
        for k, d in zip(ev["key"], ev["change_date"], strict=True)
        if isinstance(k, str) and isinstance(d, str)
    }
    return read_series_sections(
        doc,
        log,
        file,
        event_dates=dates,
        studies=set(st["key"].dropna()),
        estimates=set(es["key"].dropna()),
        outcomes=set(outcomes["name"].dropna()) | set(es["outcome"].dropna()),
    )


def _merge_names(vocab_frame: pd.DataFrame, used: pd.Series, extra: str) -> pd.DataFrame:
    """The vocabulary list plus any name used by records but not listed."""
    missing = sorted(set(used.dropna()) - set(vocab_frame["name"].dropna()))
    if missing:
        add = pd.DataFrame({"name": missing, extra: [None] * len(missing)})
        vocab_frame = pd.concat([vocab_frame, add], ignore_index=True)
    return coerce(vocab_frame.reset_index(drop=True), {"name": "text", extra: "text"})


# ------------------------------------------------------------- expected directions section
DIRECTIONS_SECTION = "expected_directions"


def _direction_lines(frames: EvidenceFrames) -> list[str]:
    """The ``expected_directions`` section: sorted by exposure, outcome; no versions."""
    d = frames.directions
    records = (
        [] if d is None or d.empty else _sorted(d, list(expected.FIELDS), ("exposure", "outcome"))
    )
    return _list(DIRECTIONS_SECTION, records, "  ", False)


def _directions_section(
    doc: dict,
    log: ProblemLog,
    file: str,
    used_exposures: pd.Series,
    used_outcomes: pd.Series,
    exposures: pd.DataFrame,
    outcomes: pd.DataFrame,
) -> pd.DataFrame | None:
    """The archive's directions (None when the section is absent: an older archive)."""
    if DIRECTIONS_SECTION not in doc:
        return None
    records = doc[DIRECTIONS_SECTION]
    n = len(records) if isinstance(records, list) else 0
    sec = log.at(f"{file}: {DIRECTIONS_SECTION}", np.arange(1, n + 1))
    raw = _section(records, dict.fromkeys(expected.FIELDS, "text"), sec, DIRECTIONS_SECTION)
    names = lambda frame, used: sorted(set(frame["name"].dropna()) | set(used.dropna()))  # noqa: E731
    return expected.check_records(
        raw,
        sec,
        names(exposures, used_exposures),
        names(outcomes, used_outcomes),
        where="the archive's exposures and outcomes",
    )


# --------------------------------------------------------- end expected directions section
