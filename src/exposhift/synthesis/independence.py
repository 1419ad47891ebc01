"""Independence and compatibility of estimates before pooling.

* :func:`select_independent` keeps one estimate per unit of replication — event × population ×
  outcome data source × outcome × measure group × estimate kind — so that several papers (or
  several analyses) of the same event count once, and reports every estimate left out and why.
  Estimates sharing data are not independent and would be over-weighted if pooled together
  (Cochrane Handbook ch. 23.3; Borenstein et al. 2009, ch. 25). Population and data source
  are compared as normalised text (:func:`exposhift.synthesis.events.normalise`: case, plural,
  punctuation and whitespace do not count), and studies a reviewer links with
  ``same_population_as`` count as one population within each event. The units left may still
  share an event: :func:`exposhift.synthesis.events.aggregate_within_event` makes one number
  per event before pooling.
* :func:`pooling_keys`, :func:`check_poolable` and :func:`split_strata` keep incompatible
  quantities apart: different measure groups (scales), ITS level vs slope changes (Korevaar et
  al. 2023, Res Synth Methods), policy effects vs per-unit exposure effects, and per-unit
  effects on different exposure increments.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from exposhift.errors import AnalysisError
from exposhift.synthesis.events import overlap_groups, text_key

#: one estimate is kept per combination of these columns (blank population/data_source = one
#: value)
UNIT_KEYS: tuple[str, ...] = (
    "event_id",
    "population",
    "data_source",
    "outcome",
    "measure_group",
    "estimate_kind",
)
OPTIONAL_UNIT_KEYS = frozenset({"population", "data_source"})
#: estimates may only be pooled within one combination of these columns
POOLING_KEYS: tuple[str, ...] = ("measure_group", "estimate_kind", "increment")

_TRUE = frozenset({"true", "yes", "y", "1", "t"})


def _clean_text(s: pd.Series) -> np.ndarray:
    codes, uniques = pd.factorize(s, use_na_sentinel=True)
    # the distinct values as plain Python objects (iterating a pandas array is slower)
    values = np.asarray(uniques, dtype=object)
    clean = np.empty(len(values) + 1, dtype=object)
    clean[:-1] = [u.strip() if type(u) is str else str(u).strip() for u in values]
    clean[-1] = ""
    return clean[codes]


def _flag(s: pd.Series) -> np.ndarray:
    """Boolean flag from bools, 0/1 or yes/no text; missing is False."""
    if pd.api.types.is_bool_dtype(s.dtype):
        return s.fillna(False).to_numpy(dtype=bool)
    if pd.api.types.is_numeric_dtype(s.dtype):
        return s.fillna(0).to_numpy(dtype=float) != 0
    return np.isin(np.char.lower(_clean_text(s).astype(str)), list(_TRUE))


def keep_independent(frame: pd.DataFrame) -> pd.DataFrame:
    """The ``kept`` frame of :func:`select_independent` (the same rows, by the same code),
    without writing the reason for each estimate left out: for views that show only the
    units (on a large base the reasons are tens of thousands of sentences)."""
    return select_independent(frame, explain=False)[0]


def select_independent(
    frame: pd.DataFrame, *, explain: bool = True
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Keep one estimate per :data:`UNIT_KEYS` combination; return ``(kept, excluded)``.

    Preference, in order: the ``primary`` flag; an estimate as published over one
    re-estimated from an extracted series (``re_estimated`` column, when present: the reviewer
    marks a re-estimate primary to prefer it); the better appraisal ``level`` when that column
    exists (higher is better, not appraised is worst); an estimate for the whole population
    (blank ``subgroup``) over a subgroup; the smaller variance ``v``; then ``estimate_uid`` and
    ``study_id`` (alphabetical) so the choice never depends on row order. Both frames keep the
    input index and columns; ``excluded`` adds ``kept_estimate`` and ``reason`` (in words).
    Needs a harmonised frame (``measure_group``, ``estimate_kind``). ``explain=False``
    (:func:`keep_independent`): ``excluded`` is left empty and no reason is written.
    """
    required = [c for c in UNIT_KEYS if c not in OPTIONAL_UNIT_KEYS]
    missing = [c for c in required if c not in frame.columns]
    if missing:
        raise AnalysisError(
            f"column(s) {', '.join(missing)} missing; harmonise the analysis frame first"
        )
    n = len(frame)
    if n == 0:
        ex = frame.iloc[0:0].copy()
        ex["kept_estimate"] = pd.Series(dtype=object)
        ex["reason"] = pd.Series(dtype=object)
        return frame.copy(), ex

    keys = {
        c: (_clean_text(frame[c]) if c in frame.columns else np.full(n, "", dtype=object))
        for c in UNIT_KEYS
    }
    raw_text = {c: keys[c] for c in OPTIONAL_UNIT_KEYS}
    for c in OPTIONAL_UNIT_KEYS:
        if c in frame.columns:
            keys[c] = text_key(frame[c])
    overlap = overlap_groups(frame)
    linked = overlap != ""
    for c in OPTIONAL_UNIT_KEYS:
        keys[c] = np.where(linked, overlap, keys[c])
    unit = pd.DataFrame(keys).groupby(list(UNIT_KEYS), sort=False).ngroup().to_numpy()

    primary = _flag(frame["primary"]) if "primary" in frame.columns else np.zeros(n, bool)
    re_est = _flag(frame["re_estimated"]) if "re_estimated" in frame.columns else np.zeros(n, bool)
    has_level = "level" in frame.columns
    level = (
        pd.to_numeric(frame["level"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        if has_level
        else np.full(n, np.nan)
    )
    subgroup = (
        _clean_text(frame["subgroup"])
        if "subgroup" in frame.columns
        else np.full(n, "", dtype=object)
    )
    v = (
        pd.to_numeric(frame["v"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        if "v" in frame.columns
        else np.full(n, np.nan)
    )
    uid = (
        _clean_text(frame["estimate_uid"])
        if "estimate_uid" in frame.columns
        else np.full(n, "", dtype=object)
    )
    study = (
        _clean_text(frame["study_id"])
        if "study_id" in frame.columns
        else np.full(n, "", dtype=object)
    )

    level_key = np.where(np.isnan(level), np.inf, -level)
    v_key = np.where(np.isnan(v), np.inf, v)
    uid_rank = pd.factorize(uid, sort=True)[0]
    study_rank = pd.factorize(study, sort=True)[0]
    # np.lexsort: last key is the primary sort key
    order = np.lexsort(
        (
            np.arange(n),
            study_rank,
            uid_rank,
            v_key,
            subgroup != "",
            level_key,
            re_est,
            ~primary,
            unit,
        )
    )
    first = np.r_[True, unit[order][1:] != unit[order][:-1]]
    kept_pos = order[first]
    best_of_unit = np.empty(unit.max() + 1, dtype=int)
    best_of_unit[unit[kept_pos]] = kept_pos
    is_kept = np.zeros(n, dtype=bool)
    is_kept[kept_pos] = True

    if not explain:
        ex = frame.iloc[0:0].copy()
        ex["kept_estimate"] = pd.Series(dtype=object)
        ex["reason"] = pd.Series(dtype=object)
        return frame.iloc[np.flatnonzero(is_kept)].copy(), ex
    ex_pos = np.flatnonzero(~is_kept)
    kp = best_of_unit[unit[ex_pos]]
    kept_names, reasons = _reasons(
        frame.index,
        ex_pos,
        kp,
        keys["event_id"],
        raw_text,
        overlap,
        uid,
        study,
        primary,
        re_est,
        has_level,
        level,
        level_key,
        subgroup,
        v,
        v_key,
    )
    kept = frame.iloc[np.flatnonzero(is_kept)].copy()
    excluded = frame.iloc[ex_pos].copy()
    excluded["kept_estimate"] = kept_names
    excluded["reason"] = reasons
    return kept, excluded


def _obj(values) -> np.ndarray:
    return np.asarray(values, dtype=object)


def _cat(*parts) -> np.ndarray:
    """Element-wise concatenation of object arrays of text (and plain strings)."""
    out = _obj(parts[0]) if isinstance(parts[0], np.ndarray) else parts[0]
    for p in parts[1:]:
        out = out + p
    return _obj(out)


def _reasons(
    index: pd.Index,
    i: np.ndarray,
    j: np.ndarray,
    event: np.ndarray,
    raw: dict[str, np.ndarray],
    overlap: np.ndarray,
    uid: np.ndarray,
    study: np.ndarray,
    primary: np.ndarray,
    re_est: np.ndarray,
    has_level: bool,
    level: np.ndarray,
    level_key: np.ndarray,
    subgroup: np.ndarray,
    v: np.ndarray,
    v_key: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """The kept estimate's name and the reason, in words, for each estimate set aside (row
    positions ``i``, kept in its place ``j``): the first preference of
    :func:`select_independent` that tells them apart, computed for every row at once."""
    rows = _obj(index.astype(str))
    uid_o, study_o = _obj(uid), _obj(study)

    def name(k: np.ndarray) -> np.ndarray:
        label = np.where(uid_o[k] != "", _cat("estimate ", uid_o[k]), _cat("row ", rows[k]))
        return np.where(study_o[k] != "", _cat("study ", study_o[k], "'s ", label), label)

    n = len(i)
    why = np.full(n, "it comes first by identifier (tie on every other criterion)", dtype=object)
    decided = np.zeros(n, dtype=bool)

    def take(mask: np.ndarray) -> np.ndarray:
        """Rows where ``mask`` holds and no earlier preference decided (now decided)."""
        hit = mask & ~decided
        decided[hit] = True
        return hit

    hit = take(primary[j] & ~primary[i])
    why[hit] = "it is flagged primary"
    hit = take(re_est[i] & ~re_est[j])
    why[hit] = (
        "it is the published estimate (this one is re-estimated from an extracted "
        "series; flag it primary to use it instead)"
    )
    if has_level:
        hit = take(level_key[j] < level_key[i])
        if hit.any():
            lj, li = level[j[hit]], level[i[hit]]
            why[hit] = [
                f"it is better appraised (level {a:g} vs "
                f"{'not appraised' if np.isnan(b) else f'{b:g}'})"
                for a, b in zip(lj.tolist(), li.tolist(), strict=True)
            ]
    hit = take((subgroup[j] == "") & (subgroup[i] != ""))
    if hit.any():
        why[hit] = _cat(
            "it covers the whole population (this one is subgroup '", _obj(subgroup[i[hit]]), "')"
        )
    hit = take(v_key[j] < v_key[i])
    if hit.any():
        why[hit] = [
            f"it is more precise (variance {a:.4g} vs {b:.4g})"
            for a, b in zip(v[j[hit]].tolist(), v[i[hit]].tolist(), strict=True)
        ]

    # why two units with different wording count as one (empty when the text is identical)
    how = np.full(n, "", dtype=object)
    ov_i, ov_j = _obj(overlap)[i], _obj(overlap)[j]
    linked = (ov_i != "") & (ov_i == ov_j)
    how[linked] = _cat(" (populations overlap: ", ov_i[linked], ", marked with same_population_as)")
    differ = np.full(n, "", dtype=object)
    for c in sorted(raw):
        ri, rj = _obj(raw[c])[i], _obj(raw[c])[j]
        d = ~linked & (ri != rj)
        if d.any():
            text = _cat(f"{c} '", ri[d], "' and '", rj[d], "'")
            differ[d] = np.where(differ[d] != "", _cat(differ[d], "; ", text), text)
    some = differ != ""
    how[some] = _cat(
        " (",
        differ[some],
        " read as the same after ignoring case, plural, punctuation and spacing)",
    )

    kept_names = np.where(uid_o[j] != "", uid_o[j], rows[j])
    reasons = _cat(
        "same event ",
        _obj(event)[i],
        ", population, data source and outcome as ",
        name(j),
        how,
        ", kept because ",
        why,
    )
    return _obj(kept_names), reasons


def pooling_keys(by: Sequence[str] = ()) -> list[str]:
    """``by`` plus the :data:`POOLING_KEYS` it lacks: the grouping every pooled analysis needs."""
    by = list(by)
    return by + [k for k in POOLING_KEYS if k not in by]


def check_poolable(frame: pd.DataFrame) -> None:
    """Refuse a frame that mixes measure groups (scales), estimate kinds or increments.

    Raises :class:`AnalysisError` listing the combinations found and how to split them.
    """
    missing = [c for c in POOLING_KEYS if c not in frame.columns]
    if missing:
        raise AnalysisError(
            f"column(s) {', '.join(missing)} missing; harmonise the analysis frame first"
        )
    combos = frame[list(POOLING_KEYS)].astype("string").fillna("").drop_duplicates()
    if "scale" in frame.columns and frame["scale"].nunique(dropna=False) > 1:
        raise AnalysisError(
            "estimates on different analysis scales (log and identity) cannot "
            "be pooled together; split by measure_group"
        )
    if len(combos) > 1:
        shown = "; ".join(" / ".join(x for x in row if x) for row in combos.itertuples(index=False))
        raise AnalysisError(
            "these estimates are different quantities and cannot be pooled together "
            f"({shown}): pool each stratum separately (group by "
            f"{', '.join(POOLING_KEYS)})"
        )


def split_strata(frame: pd.DataFrame, by: Sequence[str] = ()) -> dict[tuple, pd.DataFrame]:
    """Split a harmonised frame into poolable strata keyed by :func:`pooling_keys` values."""
    keys = pooling_keys(by)
    missing = [c for c in keys if c not in frame.columns]
    if missing:
        raise AnalysisError(
            f"column(s) {', '.join(missing)} missing; harmonise the analysis frame first"
        )
    return {
        (k if isinstance(k, tuple) else (k,)): g
        for k, g in frame.groupby(keys, sort=True, dropna=False)
    }
