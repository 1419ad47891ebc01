"""Benchmark: one event-level fit (three-level REML + CR2) against one two-level REML pool.

Seeded data sets of k = 20 estimates in 9 events (sizes 1-4) from the three-level model. Timed:
``fit_multilevel`` (REML for two variance components from two interior starts plus the edge
checks, GLS, CR2 and Satterthwaite df) and ``pool_multilevel`` (the same plus the interval).
Baseline, named: ``exposhift.synthesis.pooling.pool(method="reml", ci="wald")`` on the same 20
estimates treated as independent (one variance component, Newton-Raphson). The two sides do not
fit the same model: the ratio says what the event as the unit costs per exposure x outcome cell.

Run: python benchmarks/bench_multilevel_fit.py [--sets 200] [--repeats 3] [--seed 9]
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

from exposhift.synthesis.multilevel import fit_multilevel, pool_multilevel
from exposhift.synthesis.pooling import pool

SIZES = (1, 2, 3, 2, 4, 1, 3, 2, 2)


def make_sets(n_sets: int, seed: int):
    rng = np.random.default_rng(seed)
    cl = np.repeat(np.arange(len(SIZES)), SIZES)
    n = cl.size
    out = []
    for _ in range(n_sets):
        v = rng.uniform(0.005, 0.2, n)
        s_e, s_w = rng.choice([0.0, 0.1, 0.3]), rng.choice([0.0, 0.1, 0.2])
        y = (
            rng.normal(0, 0.3)
            + rng.normal(0, 1, len(SIZES))[cl] * s_e
            + rng.normal(0, 1, n) * s_w
            + rng.normal(0, 1, n) * np.sqrt(v)
        )
        out.append((y, v, cl))
    return out


def per_call(fn, sets, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        for y, v, cl in sets:
            fn(y, v, cl)
        best = min(best, time.perf_counter() - t0)
    return best / len(sets)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sets", type=int, default=200)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--seed", type=int, default=9)
    args = ap.parse_args()
    sets = make_sets(args.sets, args.seed)
    t_base = per_call(lambda y, v, cl: pool(y, v, method="reml", ci="wald"), sets, args.repeats)
    t_fit = per_call(fit_multilevel, sets, args.repeats)
    t_pool = per_call(pool_multilevel, sets, args.repeats)
    converged = sum(fit_multilevel(y, v, cl).converged for y, v, cl in sets)
    print(f"k = 20 estimates in 9 events, {args.sets} seeded sets, best of {args.repeats}")
    print(f"load average: {os.getloadavg()[0]:.2f} on {os.cpu_count()} CPUs")
    print(f"baseline pool(reml, wald), independent units: {t_base * 1e3:8.3f} ms per pool")
    print(
        f"fit_multilevel (REML 3-level + CR2):          {t_fit * 1e3:8.3f} ms per fit "
        f"({t_fit / t_base:.1f}x baseline)"
    )
    print(
        f"pool_multilevel (cr2 interval):               {t_pool * 1e3:8.3f} ms per pool "
        f"({t_pool / t_base:.1f}x baseline)"
    )
    print(f"converged: {converged}/{len(sets)}")


if __name__ == "__main__":
    main()
