"""The ``same_population_as`` field: studies whose population or outcome data overlap.

A reviewer names, for one study, the other studies *of the same event* whose population or
outcome data overlap this study's (a regional population nested in a national register another
study used, the same cohort analysed twice, ...). The value is one or more study ids separated by
``;``; it is stored normalised (ids stripped, blanks and repeats dropped, order kept, joined by
``;`` without spaces), so an export imports back to the same text.

Rules (checked for every study of a sheet or archive, in the file's one-pass problem log):

- every named study exists in the same file or in the evidence base;
- it shares at least one event with this study (events of the file and of the evidence base
  together, as they will be after the import);
- a study is not named as overlapping itself.
"""

from __future__ import annotations

import difflib
from collections.abc import Callable, Iterable

import numpy as np
import pandas as pd

from exposhift.io.cells import blank_to_na
from exposhift.io.problems import ProblemLog, quote

COLUMN = "same_population_as"
SEPARATOR = ";"

#: given study keys, the events each one that exists in the evidence base has estimates for
#: (a study without estimates maps to an empty set; an unknown key is left out)
StudyEvents = Callable[[list[str]], dict[str, set[str]]]


def split_ids(value) -> list[str]:
    """``' S1; S2;;S1 '`` -> ``['S1', 'S2']`` (order kept, no repeats); blank -> ``[]``."""
    if value is None or (isinstance(value, float) and value != value) or value is pd.NA:
        return []
    out: list[str] = []
    for part in str(value).split(SEPARATOR):
        part = part.strip()
        if part and part not in out:
            out.append(part)
    return out


def normalise_ids(s: pd.Series) -> pd.Series:
    """The column normalised as stored: ``'S1;S2'``, or missing when no id is given."""
    vals = [SEPARATOR.join(split_ids(v)) for v in s.astype(object).tolist()]
    return blank_to_na(pd.Series(vals, index=s.index, dtype="str"))


def _events_of(pairs: Iterable[tuple[str, str]]) -> dict[str, set[str]]:
    out: dict[str, set[str]] = {}
    for study, event in pairs:
        if study is None or event is None or study != study or event != event:
            continue
        out.setdefault(str(study), set()).add(str(event))
    return out


def _names(events: set[str]) -> str:
    return ", ".join(quote(e) for e in sorted(events)) if events else "none"


def check_same_population(
    studies: pd.DataFrame,
    rows: np.ndarray | list[int],
    estimates: pd.DataFrame,
    log: ProblemLog,
    stored: StudyEvents | None = None,
) -> None:
    """Flag every bad id in ``studies[COLUMN]`` (``studies`` has ``key``; one row per study).

    ``rows`` are the row numbers shown for each study (its first sheet row or its position in
    the archive's list); ``estimates`` has ``study`` and ``event`` (the file's estimates).
    ``stored`` looks studies up in the evidence base; without it only the file is searched.
    """
    if COLUMN not in studies.columns or studies.empty:
        return
    keys = studies["key"].astype(object).tolist()
    refs = [split_ids(v) for v in studies[COLUMN].astype(object).tolist()]
    if not any(refs):
        return
    in_file = _events_of(
        zip(
            estimates["study"].astype(object).tolist(),
            estimates["event"].astype(object).tolist(),
            strict=True,
        )
    )
    file_keys = {str(k) for k in keys if k is not None and k == k}
    wanted = sorted(
        {r for ids in refs for r in ids}
        | {str(k) for k, ids in zip(keys, refs, strict=True) if ids}
    )
    in_base = stored(wanted) if stored is not None and wanted else {}
    for key, ids, row in zip(keys, refs, list(rows), strict=True):
        if not ids or key is None or key != key:
            continue
        own = in_file.get(key, set()) | in_base.get(key, set())
        for other in ids:
            if other == key:
                log.add(
                    int(row),
                    COLUMN,
                    f"study {quote(key)} names itself; list only the "
                    "other studies whose population overlaps this one's",
                )
                continue
            if other not in file_keys and other not in in_base:
                close = difflib.get_close_matches(other, sorted(file_keys), n=2)
                hint = f"did you mean {' or '.join(quote(c) for c in close)}? " if close else ""
                log.add(
                    int(row),
                    COLUMN,
                    f"no study {quote(other)} in this file or in the "
                    f"evidence base; {hint}give the study_id of an existing study, or "
                    "remove it",
                )
                continue
            theirs = in_file.get(other, set()) | in_base.get(other, set())
            if not own & theirs:
                log.add(
                    int(row),
                    COLUMN,
                    f"study {quote(other)} shares no event with study "
                    f"{quote(key)} (its events: {_names(theirs)}; this study's: "
                    f"{_names(own)}); same_population_as names studies of the same event "
                    "only; correct the id or remove it",
                )
