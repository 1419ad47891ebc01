"""The ``method`` section of the JSON archive: every stored version of every method part.

Layout, after ``appraisals``::

    "method": [{"part", "number", "declared", "content_hash", "source", "text"}, ...]

sorted by part then number, one record per line, the text verbatim (LF line endings). Who stored
a version and when stay in each evidence base's audit trail, not in the archive, so that
export -> import into a new evidence base -> export gives the same bytes (a new base records its
packaged defaults as version 1 when it is created; the archive's version 1 matches them when it
was made the same way).

Reading checks each record: known part, whole ``number`` counting 1, 2, ... per part,
``content_hash`` equal to the sha256 of the text, and the text passing the part's own checks
(rubric rules, settings rules), each problem naming the record's row (1 = first record) and
field. Restoring (:func:`plan_restore`) compares the archive's versions with the stored ones by
number and hash: the stored versions must be the archive's first ones (the usual case: a new
base holds only its packaged defaults), and the archive's later versions are added; a version
that differs at the same number is a problem and nothing is imported. An archive without the
section (written before it existed) leaves the stored method as it is.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

from exposhift.errors import ExposhiftError, Problem
from exposhift.io.problems import ProblemLog
from exposhift.method.parts import METHOD_PARTS, content_hash

FIELDS = ("part", "number", "declared", "content_hash", "source", "text")
SECTION = "method"


def method_lines(records: Sequence[dict] | None, list_lines: Callable) -> list[str]:
    """The archive lines of the section (none when the frames carry no method)."""
    if records is None:
        return []
    ordered = sorted(({f: r[f] for f in FIELDS} for r in records), key=_order)
    return list_lines(SECTION, ordered, "  ", False)


def _order(r: dict) -> tuple[str, int]:
    return (r["part"], int(r["number"]))


def read_method_section(doc: dict, log: ProblemLog, file: str) -> list[dict] | None:
    """The archive's method versions, checked; None when the archive has no such section."""
    if SECTION not in doc:
        return None
    raw = doc[SECTION]
    if not isinstance(raw, list):
        log.problems.append(Problem(file, None, SECTION, "must be a list ([...]) of versions"))
        return None
    out: list[dict] = []
    seen: dict[str, int] = {}
    for i, rec in enumerate(raw, start=1):
        where = f"{SECTION}[{i}]"
        if not isinstance(rec, dict):
            log.problems.append(Problem(file, i, SECTION, "each version must be an object"))
            continue
        missing = [f for f in FIELDS if f not in rec]
        if missing:
            log.problems.append(Problem(file, i, SECTION, f"missing {', '.join(missing)}"))
            continue
        bad = [f for f in FIELDS if f != "number" and not isinstance(rec[f], str)]
        if bad or not isinstance(rec["number"], int) or isinstance(rec["number"], bool):
            log.problems.append(
                Problem(file, i, SECTION, "number must be a whole number and the rest text")
            )
            continue
        name = rec["part"]
        if name not in METHOD_PARTS:
            log.problems.append(
                Problem(
                    file,
                    i,
                    f"{SECTION}.part",
                    f"unknown method part {name!r}; this exposhift knows "
                    f"{', '.join(METHOD_PARTS)}: use the exposhift that wrote the archive",
                )
            )
            continue
        want = seen.get(name, 0) + 1
        if rec["number"] != want:
            log.problems.append(
                Problem(
                    file,
                    i,
                    f"{SECTION}.number",
                    f"{name} version {rec['number']} where "
                    f"{want} was expected (versions count 1, 2, ... per part)",
                )
            )
        seen[name] = rec["number"]
        data = rec["text"].encode("utf-8")
        if content_hash(data) != rec["content_hash"]:
            log.problems.append(
                Problem(
                    file,
                    i,
                    f"{SECTION}.content_hash",
                    "does not match the sha256 of the text; the archive was changed by hand",
                )
            )
            continue
        try:
            METHOD_PARTS[name].parse(data, f"{file} {where} ({name} {rec['number']})")
        except ExposhiftError as exc:
            log.problems.append(Problem(file, i, f"{SECTION}.text", str(exc)))
            continue
        out.append({f: rec[f] for f in FIELDS})
    return out


def plan_restore(
    stored: Sequence[Any], archived: Sequence[dict] | None, file: str
) -> tuple[list[dict], list[Problem]]:
    """The archive versions to add after the stored ones, and the problems.

    ``stored`` are :class:`~exposhift.store.method_records.StoredVersion` objects.
    """
    if archived is None:
        return [], []
    held = {(v.part, v.number): v.content_hash for v in stored}
    add: list[dict] = []
    problems: list[Problem] = []
    for rec in sorted(archived, key=_order):
        key = (rec["part"], rec["number"])
        if key in held:
            if held[key] != rec["content_hash"]:
                problems.append(
                    Problem(
                        file,
                        None,
                        SECTION,
                        f"the archive's {rec['part']} version {rec['number']} (hash "
                        f"{rec['content_hash'][:12]}) is not this evidence base's version "
                        f"{rec['number']} (hash {held[key][:12]}); nothing was imported. "
                        "Restore the archive into a new evidence base (exposhift --db NEW "
                        "init), or keep this base's method",
                    )
                )
            continue
        add.append(rec)
    return add, problems


def records_of(stored: Sequence[Any]) -> list[dict]:
    """Archive records of stored versions."""
    return [
        {
            "part": v.part,
            "number": v.number,
            "declared": v.declared,
            "content_hash": v.content_hash,
            "source": v.source,
            "text": v.text,
        }
        for v in stored
    ]
