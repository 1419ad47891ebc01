"""The ``certainty_judgements`` section of the JSON archive: the committee's recorded
certainty judgements, one per exposure x outcome x domain.

Layout, after ``method``::

    "certainty_judgements": [{"exposure", "outcome", "domain", "rating", "why", "suggested",
                              "suggestion_reason", "overrides", "numbers", "settings_hash",
                              "decided_by", "decided_at"}, ...]

sorted by exposure, outcome, domain (code-point order), one record per line. Exposure and
outcome are named by their natural keys; ``numbers`` is the stored JSON text of the numbers the
suggestion rested on, written verbatim; ``settings_hash`` the certainty settings' fingerprint
the judgement was made with; who decided and when are kept. Database ids, versions and
timestamps of the row are not written, so export -> import into a new base -> export gives the
same bytes.

Reading checks each record (row 1 = first record): every field present and of its JSON type,
a known domain and a rating that domain accepts, ``numbers`` readable JSON, no judgement twice;
at the import door (:func:`unknown_names`), an exposure and an outcome that the archive or the
evidence base holds. Any problem: nothing is imported. An archive without the section (written
before it existed) leaves the stored judgements as they are. On import the judgements are
written through the Writer in the import's transaction (:mod:`exposhift.store.certainty_records`:
versioned, audited); one that matches the stored judgement changes nothing.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Collection, Sequence

import pandas as pd

from exposhift.certainty.domains import DOMAINS, ratings_for
from exposhift.errors import Problem
from exposhift.io.problems import ProblemLog, quote

SECTION = "certainty_judgements"
FIELDS = (
    "exposure",
    "outcome",
    "domain",
    "rating",
    "why",
    "suggested",
    "suggestion_reason",
    "overrides",
    "numbers",
    "settings_hash",
    "decided_by",
    "decided_at",
)
#: fields that may not be empty text
REQUIRED = ("exposure", "outcome", "domain", "rating", "why", "decided_by", "decided_at")


def _order(r: dict) -> tuple[str, str, str]:
    return (r["exposure"], r["outcome"], r["domain"])


def judgement_records(frame: pd.DataFrame | None) -> list[dict] | None:
    """Archive records of a judgements frame (store columns), None when there is no frame."""
    if frame is None:
        return None
    out = []
    for r in frame.to_dict("records"):
        rec = {f: r[f] for f in FIELDS}
        rec["overrides"] = bool(rec["overrides"])
        out.append(rec)
    return out


def judgement_lines(records: Sequence[dict] | None, list_lines: Callable) -> list[str]:
    """The archive lines of the section (none when the frames carry no judgements)."""
    if records is None:
        return []
    ordered = sorted(({f: r[f] for f in FIELDS} for r in records), key=_order)
    return list_lines(SECTION, ordered, "  ", False)


def _record_problem(rec: dict) -> tuple[str | None, str] | None:
    """(field, message) of the first type problem of one record, or None."""
    missing = [f for f in FIELDS if f not in rec]
    if missing:
        return None, f"missing {', '.join(missing)}"
    extra = sorted(set(rec) - set(FIELDS))
    if extra:
        return extra[0], "unknown field; remove it (is this an exposhift export?)"
    for f in FIELDS:
        if f == "overrides":
            if not isinstance(rec[f], bool):
                return f, f"expected true or false, not {quote(rec[f])}"
        elif not isinstance(rec[f], str):
            return f, f"expected text, not {quote(rec[f])}"
    for f in REQUIRED:
        if not rec[f].strip():
            return f, "required value missing"
    return None


def read_certainty_section(doc: dict, log: ProblemLog, file: str) -> list[dict] | None:
    """The archive's judgements, checked; None when the archive has no such section.

    The names they rate are checked at the import door (:func:`unknown_names`), where the
    evidence base's own exposures and outcomes are known too.
    """
    if SECTION not in doc:
        return None
    raw = doc[SECTION]
    where = f"{file}: {SECTION}"
    if not isinstance(raw, list):
        log.problems.append(Problem(file, None, SECTION, "must be a list ([...]) of judgements"))
        return None
    out: list[dict] = []
    seen: set[tuple[str, str, str]] = set()
    for i, rec in enumerate(raw, start=1):
        if not isinstance(rec, dict):
            log.problems.append(Problem(where, i, None, "each judgement must be a JSON object"))
            continue
        bad = _record_problem(rec)
        if bad is not None:
            log.problems.append(Problem(where, i, bad[0], bad[1]))
            continue
        found = _value_problems(rec)
        key = _order(rec)
        if key in seen:
            found.append(
                ("domain", f"{quote(' | '.join(key))} is judged twice in the section; keep one")
            )
        seen.add(key)
        for column, message in found:
            log.problems.append(Problem(where, i, column, message))
        if not found:
            out.append({f: rec[f] for f in FIELDS})
    return out


def unknown_names(
    records: Sequence[dict], file: str, exposures: Collection[str], outcomes: Collection[str]
) -> list[Problem]:
    """A problem for every judgement whose exposure or outcome is neither in the archive nor in
    the evidence base (``exposures``, ``outcomes``: the names of both); row 1 = first record."""
    where = f"{file}: {SECTION}"
    out = []
    for i, rec in enumerate(records, start=1):
        for column, names in (("exposure", exposures), ("outcome", outcomes)):
            if rec[column] not in names:
                out.append(
                    Problem(
                        where,
                        i,
                        column,
                        f"no {column} {quote(rec[column])} in the archive or the evidence base; "
                        "a judgement is kept only with the evidence it rates: add the "
                        f"{column} or remove the judgement",
                    )
                )
    return out


def _value_problems(rec: dict) -> list[tuple[str, str]]:
    found: list[tuple[str, str]] = []
    domain = rec["domain"]
    if domain not in DOMAINS:
        found.append(("domain", f"unknown domain; accepted: {', '.join(DOMAINS)}"))
    else:
        accepted = ratings_for(domain)
        if rec["rating"] not in accepted:
            found.append(
                ("rating", f"{domain} is rated {', '.join(accepted)}, not {quote(rec['rating'])}")
            )
    try:
        json.loads(rec["numbers"])
    except json.JSONDecodeError as exc:
        found.append(("numbers", f"not readable JSON text ({exc.msg}); export the base again"))
    return found
