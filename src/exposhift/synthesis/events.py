"""The event as the unit of analysis: one number per exposure-change event before pooling.

Several estimates of one event (papers, populations, outcome data sources) share the event's
exposure shock, its timing and usually much of its data; pooled as if independent they count the
event two or more times and make the pooled interval too narrow (Cochrane Handbook ch. 23.3;
Borenstein et al. 2009, Introduction to Meta-Analysis, ch. 24-25). Two steps keep one event to
one unit:

1. :func:`text_key` — populations and data sources are told apart by *normalised* text (case,
   plural, punctuation and whitespace do not count), so "national birth register" and
   "National birth registers." are one unit, not two because of wording. A reviewer marks
   overlap the words cannot show (a regional population nested in a national register) with
   the study field ``same_population_as``; :func:`overlap_groups` links those studies within
   each event.
2. :func:`aggregate_within_event` — the independent units that remain within one event (e.g.
   two disjoint populations of one ban) are combined into one event-level estimate: the
   inverse-variance weighted mean ȳ = Σ aᵢ yᵢ, aᵢ = (1/vᵢ)/Σ(1/vⱼ), with the variance of a
   linear combination of correlated estimates,
   Var(ȳ) = Σᵢ Σⱼ aᵢ aⱼ ρᵢⱼ √(vᵢ vⱼ) = (1 − ρ) Σ aᵢ² vᵢ + ρ (Σ aᵢ √vᵢ)²  (ρᵢᵢ = 1, ρᵢⱼ = ρ),
   for a stated within-event correlation ρ (Borenstein et al. 2009, ch. 24, "multiple
   outcomes or time-points within a study", composite of correlated estimates). ρ = 1 is the
   most conservative assumption (the event-level SE is then the weighted mean of the SEs);
   ρ = 0 treats the units of one event as independent pieces of one estimate. The default
   :data:`DEFAULT_RHO` = 0.8 is the working correlation used by Hedges, Tipton & Johnson (2010,
   Res Synth Methods 1:39) in their example and widely used since (common practice, no
   published optimum); :func:`rho_sensitivity` shows the pooled result over ρ = 0 … 1.

The weights aᵢ do not depend on ρ, so the event-level estimate is the same for every ρ; only
its variance changes.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

import numpy as np
import pandas as pd

from exposhift.errors import AnalysisError

DEFAULT_RHO = 0.8
#: the ρ values of the sensitivity range (0 = independent pieces, 1 = fully correlated)
RHO_RANGE: tuple[float, ...] = (0.0, 0.5, 0.8, 1.0)

_NON_WORD = re.compile(r"[^0-9a-z]+")


def _singular(word: str) -> str:
    """A plural English word in its singular form, for the common regular endings only."""
    if len(word) > 4 and word.endswith("ies"):
        return word[:-3] + "y"
    if len(word) > 3 and word.endswith("s") and not word.endswith(("ss", "us", "is")):
        return word[:-1]
    return word


def normalise(text: object) -> str:
    """Lower case, punctuation to spaces, whitespace collapsed, regular plurals singular.

    ``"National birth registers."`` and ``"national  birth-register"`` both give
    ``"national birth register"``. Blank or missing gives ``""``.
    """
    if text is None or (isinstance(text, float) and np.isnan(text)):
        return ""
    words = _NON_WORD.sub(" ", str(text).lower()).split()
    return " ".join(_singular(w) for w in words)


def text_key(values: pd.Series) -> np.ndarray:
    """:func:`normalise` applied once per distinct value of a column."""
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    clean = np.array([normalise(u) for u in uniques] + [""], dtype=object)
    return clean[codes]


def _links(value: object) -> list[str]:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return []
    return [p.strip() for p in str(value).split(";") if p.strip()]


def overlap_groups(frame: pd.DataFrame) -> np.ndarray:
    """Per row, the overlap group of its study within its event ("" when it has none).

    Studies of one event linked by ``same_population_as`` (in either direction, transitively)
    form one group, named by the alphabetically first study in it, so their estimates count as
    one population and outcome data source. Rows without the column, or studies linked to
    nobody, get "".
    """
    n = len(frame)
    if "same_population_as" not in frame.columns or n == 0:
        return np.full(n, "", dtype=object)
    events = frame["event_id"].astype(str).to_numpy(dtype=object)
    studies = frame["study_id"].astype(str).to_numpy(dtype=object)
    parent: dict[tuple[str, str], tuple[str, str]] = {}

    def find(x: tuple[str, str]) -> tuple[str, str]:
        root = x
        while parent.get(root, root) != root:
            root = parent[root]
        while parent.get(x, x) != root:  # path compression
            parent[x], x = root, parent[x]
        return root

    present = set(zip(events, studies, strict=True))
    for ev, st, links in zip(events, studies, frame["same_population_as"], strict=True):
        for other in _links(links):
            if (ev, other) not in present:
                continue  # the linked study has no estimate of this event here
            a, b = find((ev, st)), find((ev, other))
            if a != b:
                parent[max(a, b)] = min(a, b)
    out = np.full(n, "", dtype=object)
    if not parent:
        return out
    roots = {node: find(node) for node in present}
    size: dict[tuple[str, str], int] = {}
    for root in roots.values():
        size[root] = size.get(root, 0) + 1
    for i, node in enumerate(zip(events, studies, strict=True)):
        root = roots[node]
        if size[root] > 1:
            out[i] = f"overlap group {root[1]}"
    return out


def aggregate_within_event(
    units: pd.DataFrame,
    keys: Sequence[str],
    rho: float = DEFAULT_RHO,
    y: str = "y",
    v: str = "v",
) -> pd.DataFrame:
    """One row per ``keys`` × ``event_id``: the event-level estimate of its independent units.

    ``units`` holds independent units (see
    :func:`exposhift.synthesis.independence.select_independent`) with finite ``y`` and positive
    ``v``. Returns the key columns, ``event_id``, ``y``, ``v`` (see the module docstring),
    ``k_units`` (units combined), ``estimate_uids`` (list), ``study_ids`` (sorted, ', '-joined)
    and the first value of every other column (the units of one event share its event fields),
    in the order of ``keys`` then event. Rows are independent of the input order.
    """
    if not 0.0 <= float(rho) <= 1.0:
        raise AnalysisError(f"the within-event correlation must be between 0 and 1 (got {rho})")
    keys = [*keys, "event_id"]
    missing = [c for c in [*keys, y, v] if c not in units.columns]
    if missing:
        raise AnalysisError(
            f"column(s) {', '.join(missing)} missing; harmonise the analysis "
            "frame and keep independent units first"
        )
    if units.empty:
        return units.assign(
            k_units=pd.Series(dtype=int),
            estimate_uids=pd.Series(dtype=object),
            study_ids=pd.Series(dtype=object),
        )
    yy = units[y].to_numpy(dtype=float)
    vv = units[v].to_numpy(dtype=float)
    if not (np.isfinite(yy).all() and np.isfinite(vv).all() and (vv > 0).all()):
        raise AnalysisError(
            "every unit needs a finite estimate and a positive, finite variance "
            "before estimates are combined within an event"
        )
    sort_cols = [*keys, "estimate_uid"] if "estimate_uid" in units.columns else keys
    frame = units.sort_values(sort_cols, kind="stable")
    yy = frame[y].to_numpy(dtype=float)
    vv = frame[v].to_numpy(dtype=float)
    g = frame.groupby(keys, sort=False, dropna=False, observed=True).ngroup().to_numpy()
    n_groups = int(g.max()) + 1
    # relative weights within each event, computed on a per-event scale (no overflow for tiny v)
    vmin = np.full(n_groups, np.inf)
    np.minimum.at(vmin, g, vv)
    w = vmin[g] / vv
    a = w / np.bincount(g, weights=w)[g]
    ybar = np.bincount(g, weights=a * yy, minlength=n_groups)
    se = np.sqrt(vv)
    var = (1.0 - rho) * np.bincount(g, weights=a * a * vv, minlength=n_groups) + rho * np.bincount(
        g, weights=a * se, minlength=n_groups
    ) ** 2
    starts = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])  # rows of one group are contiguous
    out = frame.iloc[starts].reset_index(drop=True)
    out[y] = ybar
    out[v] = var
    out["k_units"] = np.bincount(g, minlength=n_groups)
    ends = np.r_[starts[1:], len(frame)].tolist()
    bounds = list(zip(starts.tolist(), ends, strict=True))
    if "estimate_uid" in frame.columns:
        uids = frame["estimate_uid"].astype(str).tolist()
        out["estimate_uids"] = [uids[a:b] for a, b in bounds]
    else:
        out["estimate_uids"] = [[] for _ in range(n_groups)]
    if "study_id" in frame.columns:
        sids = frame["study_id"].astype(str).tolist()
        out["study_ids"] = [
            sids[a] if b - a == 1 else ", ".join(sorted(set(sids[a:b]))) for a, b in bounds
        ]
    return out


def rho_sensitivity(
    units: pd.DataFrame, keys: Sequence[str], pool_fn, rhos: Sequence[float] = RHO_RANGE
) -> pd.DataFrame:
    """The pooled result for each ρ in ``rhos``: ``pool_fn(event_rows)`` must return a
    mapping with ``estimate``, ``ci_lower``, ``ci_upper``; one row per ρ."""
    rows = []
    for r in rhos:
        res = pool_fn(aggregate_within_event(units, keys, rho=r))
        rows.append({"rho": float(r), **{k: res[k] for k in ("estimate", "ci_lower", "ci_upper")}})
    return pd.DataFrame(rows)
