"""An archive's method at the import door: which versions to add, and the rubric its
appraisals are checked against (:mod:`exposhift.io.method_archive` says the rules)."""

from __future__ import annotations

from pathlib import Path

from exposhift.errors import InputFileError
from exposhift.io.frames import EvidenceFrames
from exposhift.io.method_archive import plan_restore
from exposhift.io.problems import sorted_problems
from exposhift.method.parts import part
from exposhift.store.method_records import add_method_version, latest_versions, method_versions


def method_plan(conn, frames: EvidenceFrames, file: str) -> list[dict]:
    """The archive's method versions this base lacks; raises when they diverge."""
    add, problems = plan_restore(method_versions(conn), frames.method, Path(file).name)
    if problems:
        raise InputFileError(sorted_problems(problems))
    return add


def restore_method(conn, user: str, add: list[dict]) -> list[str]:
    """Store the planned versions (audited, in the import's transaction); notes for the report."""
    for rec in add:
        add_method_version(
            conn, user, rec["part"], rec["text"].encode("utf-8"), rec["declared"], rec["source"]
        )
    if not add:
        return []
    shown = ", ".join(f"{r['part']} {r['number']}" for r in add)
    return [f"method: restored {len(add)} version(s) from the archive ({shown})"]


def method_rubrics(conn, frames: EvidenceFrames) -> set[tuple[str, str]]:
    """(rubric id, content hash) of every rubric version stored here or in the archive."""
    rubric = part("rubric")
    texts = [(v.text, f"rubric version {v.number}") for v in method_versions(conn, "rubric")]
    texts += [
        (r["text"], f"archive rubric {r['number']}")
        for r in frames.method or []
        if r["part"] == "rubric"
    ]
    out = set()
    for text, label in texts:
        parsed = rubric.parse(text.encode("utf-8"), label)
        out.add((parsed.rubric_id, parsed.content_hash))
    return out


def door_rubric(conn, frames: EvidenceFrames, rubric_path: str | Path | None):
    """The rubric an archive's appraisals are checked against: a one-run ``--rubric`` file,
    else the archive's rubric in force, else the one this evidence base records."""
    from exposhift.appraisal.rubric import load_rubric

    if rubric_path is not None:
        return load_rubric(rubric_path)
    rubric = part("rubric")
    archived = [r for r in frames.method or [] if r["part"] == "rubric"]
    if archived:
        newest = max(archived, key=lambda r: r["number"])
        return rubric.parse(newest["text"].encode("utf-8"), f"archive rubric {newest['number']}")
    stored = latest_versions(conn).get("rubric")
    if stored is None:
        return load_rubric()
    return rubric.parse(stored.text.encode("utf-8"), f"rubric version {stored.number}")
