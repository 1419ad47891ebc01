"""Benchmark: the gap map and every replication status, grouped vs a per-cell Python loop.

Evidence base (synthetic, seeded, an analysis frame already harmonised and reduced to
independent units, so no database is involved): 100,000 estimates over 500 exposures and 40
outcome groups (3 outcomes per group), about 40 events per exposure in 60 countries, 8 design
families, appraisal levels 0-3 or not appraised, three estimate kinds and two measure groups,
and an event register of 25,000 events of which about a tenth were never evaluated.

Computation timed: :func:`exposhift.replication.status.analyse` (every exposure × outcome
status with its rule) + :func:`exposhift.replication.gaps.gap_map` (the 20,000 cells, with
``stale_after=2000``) +
:func:`exposhift.replication.gaps.opportunities`.

Baseline: the per-pair loop a caller would write (``loop_statuses``, ``loop_cells``): split the
frame once with ``groupby``, then run the replication analysis on each exposure × outcome alone,
then for each of the 20,000 cells the counts and state in Python. The two routes must give the
same status, state and counts for every key and cell (checked before the ratio is printed), so
the benchmark also checks that the grouped computation never lets one pair's evidence leak into
another's. (An earlier version's loop was a second, hand-written implementation of the rules;
the rules have since grown — event-level estimates, a pooled route, a meta-regression across
design families — and are checked against crafted cases and outside references in
``tests/replication`` instead.)

Time: best of ``--repeats`` runs (the loop runs once). Peak memory: ``tracemalloc`` in a
separate run of each route (tracing slows both down, so it is not timed). Target: the grouped
route ≥ 20× faster than the loop, and fast enough to recompute on each dashboard click.

Run: python benchmarks/bench_gaps.py [--estimates 100000] [--exposures 500] [--groups 40]
     [--repeats 3] [--seed 20240611]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np
import pandas as pd

from exposhift.replication.gaps import STATE_OF_STATUS, gap_map, opportunities
from exposhift.replication.settings import DEFAULTS, ReplicationSettings
from exposhift.replication.status import STATUS_RANK, analyse

FAMILIES = [
    "uncontrolled",
    "trend-extrapolation",
    "common-trend",
    "weighted-fit",
    "local-continuity",
    "instrument",
    "as-if-random",
    "observables",
]


# --------------------------------------------------------------------------------------------
# synthetic evidence base


def make_base(n: int, n_exp: int, n_groups: int, seed: int) -> tuple[pd.DataFrame, pd.DataFrame]:
    rng = np.random.default_rng(seed)
    countries = np.array([f"C{i:02d}" for i in range(60)], dtype=object)
    ev_per_exp = 50
    n_ev = n_exp * ev_per_exp
    ev_exp = np.repeat(np.arange(n_exp), ev_per_exp)
    ev_country = countries[rng.integers(0, 60, n_ev)]
    # a few countries per exposure, so that places repeat (temporal replication happens)
    ev_country = np.where(rng.random(n_ev) < 0.5, countries[ev_exp % 60], ev_country)
    ev_year = rng.integers(1975, 2023, n_ev)
    ev_dir = np.where(rng.random(n_ev) < 0.85, "decrease", "increase").astype(object)
    ev_size = np.where(rng.random(n_ev) < 0.6, rng.uniform(0.5, 10.0, n_ev), np.nan)
    ev_ids = np.array([f"X{e:03d}-E{i:05d}" for i, e in enumerate(ev_exp)], dtype=object)
    evaluated = rng.random(n_ev) < 0.9

    m = int(n * 1.25)
    exp = rng.integers(0, n_exp, m)
    # each exposure is studied for a subset of outcome groups (a sparse map)
    grp = (exp * 7 + rng.integers(0, 15, m)) % n_groups
    outcome = grp * 3 + rng.integers(0, 3, m)
    pool_idx = np.flatnonzero(evaluated)
    ev_of_exp = [pool_idx[ev_exp[pool_idx] == e] for e in range(n_exp)]
    ev = np.array([ev_of_exp[e][rng.integers(0, len(ev_of_exp[e]))] for e in exp])
    fam = np.array(FAMILIES, dtype=object)[rng.integers(0, len(FAMILIES), m)]
    kind = np.array(["change", "level", "slope"], dtype=object)[
        rng.choice(3, m, p=[0.85, 0.1, 0.05])
    ]
    mgroup = np.where(rng.random(m) < 0.9, "ratio", "mean_difference").astype(object)
    level = np.array([np.nan, 0, 1, 2, 3])[rng.choice(5, m, p=[0.1, 0.1, 0.2, 0.35, 0.25])]
    truth = rng.normal(0.08, 0.08, n_exp)[exp]
    se = rng.uniform(0.03, 0.15, m)
    y = truth + rng.normal(0, 1, m) * se
    frame = pd.DataFrame(
        {
            "exposure": np.array([f"X{e:03d}" for e in exp], dtype=object),
            "outcome": np.array([f"O{o:03d}" for o in outcome], dtype=object),
            "outcome_group": np.array([f"G{g:02d}" for g in grp], dtype=object),
            "event_id": ev_ids[ev],
            "country": ev_country[ev],
            "change_date": ev_year[ev].astype(str),
            "change_year": ev_year[ev].astype(float),
            "change_direction": ev_dir[ev],
            "change_kind": "ban",
            "change_size": ev_size[ev],
            "change_unit": "ug/m3",
            "design_family": fam,
            "design": fam,
            "level": level,
            "y": y,
            "v": se * se,
            "study_id": np.array([f"S{i:06d}" for i in rng.integers(0, n // 2, m)], dtype=object),
            "population": np.array(["", "adults", "children"], dtype=object)[rng.integers(0, 3, m)],
            "data_source": "",
            "measure_group": mgroup,
            "estimate_kind": kind,
            "increment": "",
        }
    )
    # independent units: one per event x population x outcome x measure group x kind
    frame = frame.drop_duplicates(
        ["event_id", "population", "data_source", "outcome", "measure_group", "estimate_kind"]
    ).iloc[:n]
    frame = frame.reset_index(drop=True)
    studied = frame.groupby("event_id")["study_id"].nunique()
    registry = pd.DataFrame(
        {
            "event_id": ev_ids,
            "exposure": np.array([f"X{e:03d}" for e in ev_exp], dtype=object),
            "change_kind": "ban",
            "change_direction": ev_dir,
            "change_size": ev_size,
            "country": ev_country,
            "area": None,
            "change_date": ev_year.astype(str),
            "change_year": ev_year,
            "family": None,
        }
    )
    registry["studies"] = registry["event_id"].map(studied).fillna(0).astype(np.int64)
    return frame, registry


# --------------------------------------------------------------------------------------------
# the grouped route


#: cells whose newest evaluated change is in or before this year are stale
STALE_AFTER = 2000


def grouped(units: pd.DataFrame, registry: pd.DataFrame, s: ReplicationSettings):
    a = analyse(units, ("exposure", "outcome"), s)
    cells = gap_map(units, settings=s, registry=registry, analysis=a, stale_after=STALE_AFTER)
    opps = opportunities(registry, units)
    return a.statuses, cells, opps


# --------------------------------------------------------------------------------------------
# the per-cell loop (a second, straightforward implementation of the same rules)


def loop_one(sub: pd.DataFrame, s: ReplicationSettings) -> dict:
    """The status of one exposure x outcome, computed alone (the library on one pair)."""
    row = analyse(sub, ("exposure", "outcome"), s).statuses.iloc[0]
    return {
        c: row[c]
        for c in (
            "status",
            "n_events",
            "n_good",
            "places_count",
            "time_periods",
            "reversal",
            "families_concordant",
            "sign_test_p",
        )
    }


def loop_statuses(units: pd.DataFrame, s: ReplicationSettings) -> pd.DataFrame:
    rows = []
    for (x, o), sub in units.groupby(["exposure", "outcome"], sort=True):
        rows.append({"exposure": x, "outcome": o, **loop_one(sub, s)})
    return pd.DataFrame(rows)


def loop_cells(
    units: pd.DataFrame, registry: pd.DataFrame, statuses: pd.DataFrame, s: ReplicationSettings
) -> pd.DataFrame:
    exposures = sorted(set(units["exposure"]) | set(registry["exposure"]))
    groups = sorted(set(units["outcome_group"]))
    by_cell = dict(iter(units.groupby(["exposure", "outcome_group"])))
    group_of = dict(
        zip(
            zip(units["exposure"], units["outcome"], strict=True),
            units["outcome_group"],
            strict=True,
        )
    )
    st_by_cell: dict[tuple, list] = {}
    for r in statuses.itertuples(index=False):
        st_by_cell.setdefault((r.exposure, group_of[(r.exposure, r.outcome)]), []).append(r)
    rows = []
    for x in exposures:
        for g in groups:
            sub = by_cell.get((x, g))
            if sub is None:
                rows.append(
                    {
                        "exposure": x,
                        "outcome_group": g,
                        "events": 0,
                        "studies": 0,
                        "status": "none",
                        "state": "no-study",
                    }
                )
                continue
            sts = st_by_cell[(x, g)]
            best = min(sts, key=lambda r: (STATUS_RANK[r.status], -r.n_good, r.outcome))
            good = max(r.n_good for r in sts)
            newest = sub["change_year"].max()
            state = "stale" if newest <= STALE_AFTER else STATE_OF_STATUS[best.status]
            assert good >= 0
            rows.append(
                {
                    "exposure": x,
                    "outcome_group": g,
                    "events": sub["event_id"].nunique(),
                    "studies": sub["study_id"].nunique(),
                    "status": best.status,
                    "state": state,
                }
            )
    return pd.DataFrame(rows)


def loop_route(units: pd.DataFrame, registry: pd.DataFrame, s: ReplicationSettings):
    st = loop_statuses(units, s)
    cells = loop_cells(units, registry, st, s)
    opps = registry[registry["studies"] == 0]
    return st, cells, opps


# --------------------------------------------------------------------------------------------


def check_same(g, lp) -> None:
    gs, gc, go = g
    ls, lc, lo = lp
    keys = ["exposure", "outcome"]
    m = gs.merge(ls, on=keys, suffixes=("", "_loop"))
    assert len(m) == len(gs) == len(ls), "different keys"
    for col in (
        "status",
        "n_events",
        "n_good",
        "places_count",
        "time_periods",
        "reversal",
        "families_concordant",
    ):
        bad = (m[col] != m[f"{col}_loop"]).sum()
        assert bad == 0, f"{bad} keys differ in {col}"
    np.testing.assert_allclose(m["sign_test_p"], m["sign_test_p_loop"], rtol=1e-9)
    c = gc.merge(lc, on=["exposure", "outcome_group"], suffixes=("", "_loop"))
    assert len(c) == len(gc) == len(lc), "different cells"
    for col in ("events", "studies", "status", "state"):
        bad = (c[col] != c[f"{col}_loop"]).sum()
        assert bad == 0, f"{bad} cells differ in {col}"
    assert set(go["event_id"]) == set(lo["event_id"])


def best_time(fn, repeats: int):
    best, out = float("inf"), None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def peak_mb(fn) -> float:
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / 2**20
    finally:
        tracemalloc.stop()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--estimates", type=int, default=100_000)
    ap.add_argument("--exposures", type=int, default=500)
    ap.add_argument("--groups", type=int, default=40)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--seed", type=int, default=20_240_611)
    args = ap.parse_args()
    s = DEFAULTS
    units, registry = make_base(args.estimates, args.exposures, args.groups, args.seed)
    n_keys = units.groupby(["exposure", "outcome"]).ngroups
    print(
        f"evidence base: {len(units):,} estimates, {units['exposure'].nunique()} exposures, "
        f"{units['outcome_group'].nunique()} outcome groups, {n_keys:,} exposure x outcome "
        f"pairs, {units['event_id'].nunique():,} events; register {len(registry):,} events"
    )

    t_g, g = best_time(lambda: grouped(units, registry, s), args.repeats)
    t_l, lp = best_time(lambda: loop_route(units, registry, s), 1)
    check_same(g, lp)
    print(
        f"same status, counts and sign-test p for all {n_keys:,} pairs; same state and counts "
        f"for all {len(g[1]):,} cells; same {len(g[2]):,} opportunities"
    )
    statuses = g[0]["status"].value_counts().to_dict()
    states = g[1]["state"].value_counts().to_dict()
    print(f"statuses: {statuses}")
    print(f"states:   {states}")

    m_g = peak_mb(lambda: grouped(units, registry, s))
    m_l = peak_mb(lambda: loop_route(units, registry, s))
    print()
    print(f"{'route':<34}{'time (s)':>10}{'peak memory (MiB)':>20}")
    print(f"{'grouped (analyse + gap_map)':<34}{t_g:>10.3f}{m_g:>20.1f}")
    print(f"{'per-cell Python loop (baseline)':<34}{t_l:>10.3f}{m_l:>20.1f}")
    print(
        f"speed ratio loop / grouped: {t_l / t_g:.1f}x (target >= 20x); "
        f"memory ratio grouped / loop: {m_g / m_l:.2f}"
    )


if __name__ == "__main__":
    main()
