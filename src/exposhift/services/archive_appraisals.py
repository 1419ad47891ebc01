"""The appraisal rules at the archive door: the same as ``appraise import``, plus conflicts.

An appraisal that reaches the store through a JSON archive passes the validation of
:func:`exposhift.io.appraisal_sheet.validate_appraisal_sheet` (domains of the rubric,
levels 0-3, core domains rated, reporting values, stages, a consensus only after two
independent appraisals, a justification for every departure from a suggested level), and three
archive checks:

- the rubric named (id and content hash) is the rubric in use or one the evidence base already
  holds appraisals of;
- the ``overall`` level is the one the rubric gives for the ratings (when the rubric is the one
  in use): an archive cannot set a derived value;
- an appraisal that the base already holds with other content is a **conflict**. Conflicts are
  all reported and nothing is written, unless the import is run with ``replace=True``; each
  replaced appraisal is then recorded in the audit trail with the action ``replace`` (who, the
  archive, the ratings before and after).

Restoring an archive into an empty evidence base meets no conflict, so the byte-identical round
trip (export -> import into an empty base -> export) is unchanged.
"""

from __future__ import annotations

import math
from typing import Any

import pandas as pd

from exposhift.appraisal.rubric_types import Rubric
from exposhift.appraisal.scoring import score_appraisal
from exposhift.errors import InputFileError, Problem
from exposhift.io.appraisal_sheet import validate_appraisal_sheet
from exposhift.io.frames import EvidenceFrames, to_records
from exposhift.store.appraisals import existing_appraisals, rubrics_held, studies_by_key
from exposhift.store.writer import Writer

STUDY_FACTS = ("design", "pre_points", "post_points", "checks", "assignment_grade", "comparison")


def _none(v: Any) -> Any:
    if v is None or (isinstance(v, float) and math.isnan(v)) or v is pd.NA:
        return None
    return v


def _studies(conn, frames: EvidenceFrames) -> dict[str, dict[str, Any]]:
    """Stored studies, overlaid with the archive's (those are what will be stored)."""
    out = studies_by_key(conn)
    for rec in to_records(frames.studies):
        key = rec["key"]
        merged = dict(out.get(key, {}))
        merged.update({f: _none(rec.get(f)) for f in (*STUDY_FACTS, "key")})
        out[key] = merged
    return out


def _wide(frames: EvidenceFrames, domains: tuple[str, ...]) -> pd.DataFrame:
    """The archive's appraisals as the rows of an appraisal sheet (index: archive record no.)."""
    rows: list[dict[str, str]] = []
    apps = to_records(frames.appraisals)
    by_key: dict[tuple, list[dict]] = {}
    for r in to_records(frames.ratings):
        by_key.setdefault((r["study"], r["reviewer"], r["stage"]), []).append(r)
    for a in apps:
        row = {
            "study_id": a["study"] or "",
            "reviewer": a["reviewer"] or "",
            "stage": a["stage"] or "",
        }
        for d in domains:
            row[d] = ""
        for r in by_key.get((a["study"], a["reviewer"], a["stage"]), []):
            dom = r["domain"]
            row[dom] = "" if _none(r["level"]) is None else str(int(r["level"]))
            row[f"{dom}_why"] = _none(r["justification"]) or ""
            row[f"{dom}_reporting"] = _none(r["reporting"]) or ""
        rows.append(row)
    frame = pd.DataFrame(rows, dtype="str").fillna("")
    for c in ("study_id", "reviewer", "stage"):
        if c not in frame.columns:
            frame[c] = pd.Series([], dtype="str")
    return frame.set_axis(range(1, len(frame) + 1))


def _archive_column(column: str | None, domains: tuple[str, ...]) -> str | None:
    if column is None:
        return None
    if column == "study_id":
        return "study"
    for d in domains:
        if column == d:
            return f"ratings[{d}].level"
        if column == f"{d}_why":
            return f"ratings[{d}].justification"
        if column == f"{d}_reporting":
            return f"ratings[{d}].reporting"
    return column


def _message(msg: str, domains: tuple[str, ...]) -> str:
    for d in domains:
        msg = msg.replace(f"in '{d}_why'", "in the rating's justification")
    return msg.replace(
        "import the independent appraisals before the consensus",
        "add the independent appraisals to the archive or the evidence base",
    )


def _rule_problems(frames, wide, label, rubric, studies, existing) -> list[Problem]:
    try:
        validate_appraisal_sheet(wide, label, rubric, studies, existing)
    except InputFileError as exc:
        return [
            Problem(
                p.file,
                p.row,
                _archive_column(p.column, rubric.domain_keys),
                _message(p.message, rubric.domain_keys),
            )
            for p in exc.problems
        ]
    return []


def _unknown_domains(frames, label, rubric) -> list[Problem]:
    known = set(rubric.domain_keys)
    out = []
    index = {
        (a["study"], a["reviewer"], a["stage"]): i + 1
        for i, a in enumerate(to_records(frames.appraisals))
    }
    for r in to_records(frames.ratings):
        if r["domain"] not in known:
            out.append(
                Problem(
                    label,
                    index.get((r["study"], r["reviewer"], r["stage"])),
                    f"ratings[{r['domain']}]",
                    f"unknown domain; the rubric {rubric.label} has: "
                    f"{', '.join(rubric.domain_keys)}",
                )
            )
    return out


def _rubric_problems(conn, frames, label, rubric) -> list[Problem]:
    from exposhift.services.method_restore import method_rubrics

    held = rubrics_held(conn) | {(rubric.rubric_id, rubric.content_hash)}
    held |= method_rubrics(conn, frames)  # every rubric version the base or archive records
    ids = {i for i, _ in held}
    out = []
    ratings: dict[tuple, dict[str, int]] = {}
    for r in to_records(frames.ratings):
        if _none(r["level"]) is not None:
            ratings.setdefault((r["study"], r["reviewer"], r["stage"]), {})[r["domain"]] = int(
                r["level"]
            )
    for i, a in enumerate(to_records(frames.appraisals)):
        pair = (a["rubric_id"], a["rubric_hash"])
        if pair not in held:
            hashes = sorted(h[:12] for j, h in held if j == a["rubric_id"])
            why = (
                f"this evidence base holds rubric '{a['rubric_id']}' only with hash "
                f"{', '.join(hashes)}"
                if a["rubric_id"] in ids
                else f"this evidence base holds no rubric '{a['rubric_id']}' (it holds "
                f"{', '.join(sorted(ids))})"
            )
            out.append(
                Problem(
                    label,
                    i + 1,
                    "rubric_hash" if a["rubric_id"] in ids else "rubric_id",
                    f"{why}; appraisals are restored only with a rubric the base "
                    "holds, so re-appraise with the rubric in use",
                )
            )
            continue
        if pair == (rubric.rubric_id, rubric.content_hash):
            levels = ratings.get((a["study"], a["reviewer"], a["stage"]), {})
            if set(levels) <= set(rubric.domain_keys) and set(rubric.core_domains) <= set(levels):
                want = score_appraisal(levels, rubric).overall
                if _none(a["overall"]) != want:
                    out.append(
                        Problem(
                            label,
                            i + 1,
                            "overall",
                            f"overall {_none(a['overall'])} is not what the rubric "
                            f"gives for these ratings ({want}); an archive does not "
                            "set derived values, correct or remove it",
                        )
                    )
    return out


def check_archive_appraisals(
    conn, frames: EvidenceFrames, rubric: Rubric, file: str, conflicts: dict[str, dict] | set[str]
) -> list[Problem]:
    """Every rule problem of the archive's appraisals (empty list: they may be written).

    ``conflicts`` are the keys (``study|reviewer|stage``) of stored appraisals the archive would
    change; their stored versions are left out of the rules' view, as they would be replaced.
    """
    if frames.appraisals.empty:
        return []
    label = f"{file}: appraisals"
    existing = {k: v for k, v in existing_appraisals(conn).items() if "|".join(k) not in conflicts}
    wide = _wide(frames, rubric.domain_keys)
    unknown = _unknown_domains(frames, label, rubric)
    problems = unknown + _rubric_problems(conn, frames, label, rubric)
    if not unknown:  # the sheet rules assume the rubric's domains
        problems += _rule_problems(frames, wide, label, rubric, _studies(conn, frames), existing)
    return problems


def conflict_problems(frames: EvidenceFrames, conflicts, file: str) -> list[Problem]:
    """One problem per stored appraisal the archive would replace."""
    index = {
        f"{a['study']}|{a['reviewer']}|{a['stage']}": i + 1
        for i, a in enumerate(to_records(frames.appraisals))
    }
    out = []
    for key in sorted(conflicts):
        study, reviewer, stage = key.split("|", 2)
        out.append(
            Problem(
                f"{file}: appraisals",
                index.get(key),
                "reviewer",
                f"the evidence base already holds the {stage} appraisal of study "
                f"'{study}' by '{reviewer}' with other content; an archive does not "
                "overwrite an appraisal. Settle differences in a consensus, or "
                "restore with --replace (an administrator's decision, recorded in "
                "the audit trail)",
            )
        )
    return out


def audit_replacements(w: Writer, conflicts, file: str) -> None:
    """Record each replaced appraisal as a ``replace`` entry in the audit trail."""
    for key in sorted(conflicts):
        w.note(
            "appraisal",
            key,
            "replace",
            None,
            {
                "archive": file,
                "option": "--replace",
                "reason": "appraisal replaced by an archive restore",
            },
        )
