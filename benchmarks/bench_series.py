"""Benchmark: re-estimation with placebo dates, against a plain statsmodels loop.

1,000 series of 120 monthly counts (seeded: a level change at month 61, yearly seasonality,
Poisson noise, a population denominator). For each series, exposhift fits the Poisson
segmented regression with Fourier terms and the log denominator as offset, then refits it at
every admissible placebo date in the pre-change period (``estimate_its`` + ``placebo_dates``).
Baseline: the same model fitted with ``statsmodels.api.GLM(...).fit(cov_type="HAC")`` in a
plain Python loop over the real date and the same placebo dates, rebuilding the design each
time — the obvious way to do it with a general-purpose library. The baseline runs on the first
``--baseline`` series (it is slow) and its time per series is compared. The placebo effects
of both are compared too (largest absolute difference). Target: the placebo-date analysis of
one 120-point series under 1 s on this machine.

Run: python benchmarks/bench_series.py [--series 1000] [--baseline 50] [--seed 16]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import statsmodels.api as sm

from exposhift.series import estimate_its, placebo_dates
from exposhift.series.its import design, seasonal_terms
from exposhift.series.periods import timeline

N, CUT = 120, 60
PERIODS = [f"{2000 + i // 12}-{i % 12 + 1:02d}" for i in range(N)]
CHANGE = PERIODS[CUT]


def make_series(n: int, seed: int):
    rng = np.random.default_rng(seed)
    t = np.arange(N)
    month = t % 12
    out = []
    for _ in range(n):
        pop = rng.uniform(5e5, 5e6) * (1 + 0.0003 * t)
        mu = (
            pop
            * 2e-4
            * np.exp(
                rng.normal(0, 0.002) * t
                - 0.1 * (t >= CUT)
                + 0.15 * np.cos(2 * np.pi * (month - rng.integers(12)) / 12)
            )
        )
        out.append((rng.poisson(mu).astype(float), pop))
    return out


def ours(series):
    results = []
    for y, d in series:
        real = estimate_its(
            PERIODS, y, CHANGE, denominators=d, model="poisson", seasonal="fourier", hac_lag=4
        )
        results.append(
            placebo_dates(
                PERIODS,
                y,
                CHANGE,
                denominators=d,
                model="poisson",
                seasonal="fourier",
                hac_lag=4,
                real=real,
            )
        )
    return results


def baseline(series, labels):
    tl_full = timeline(PERIODS)
    pre = timeline(PERIODS[:CUT])
    cuts = [PERIODS.index(lab) for lab in labels]
    out = []
    for y, d in series:
        x = design(tl_full, CUT, seasonal_terms(tl_full, "fourier")[0])
        sm.GLM(y, x, family=sm.families.Poisson(), offset=np.log(d)).fit(
            cov_type="HAC", cov_kwds={"maxlags": 4, "use_correction": True}
        )
        effects = []
        for c in cuts:
            xp = design(pre, c, seasonal_terms(pre, "fourier")[0])
            r = sm.GLM(y[:CUT], xp, family=sm.families.Poisson(), offset=np.log(d[:CUT])).fit(
                cov_type="HAC", cov_kwds={"maxlags": 4, "use_correction": True}
            )
            effects.append(r.params[2])
        out.append(np.array(effects))
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--series", type=int, default=1000)
    ap.add_argument("--baseline", type=int, default=50)
    ap.add_argument("--seed", type=int, default=16)
    args = ap.parse_args()
    series = make_series(args.series, args.seed)
    t0 = time.perf_counter()
    res = ours(series)
    t_ours = (time.perf_counter() - t0) / len(series)
    nb = min(args.baseline, len(series))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        ref = baseline(series[:nb], res[0].labels)
        t_base = (time.perf_counter() - t0) / nb
    diff = max(float(np.max(np.abs(r.effects - e))) for r, e in zip(res[:nb], ref, strict=True))
    fits = len(res[0].effects) + 1
    print(
        f"{len(series)} series x {N} monthly points, Poisson + Fourier + offset, "
        f"{fits} fits per series (real date + {fits - 1} placebo dates)"
    )
    print(f"exposhift   : {t_ours * 1e3:8.1f} ms per series (placebo analysis)")
    print(f"statsmodels : {t_base * 1e3:8.1f} ms per series (plain GLM loop, first {nb} series)")
    print(f"ratio       : {t_base / t_ours:8.1f}x faster than the statsmodels loop")
    print(f"largest |placebo effect difference| vs statsmodels: {diff:.2e}")
    print(f"target < 1 s per series: {'met' if t_ours < 1.0 else 'NOT met'}")


if __name__ == "__main__":
    main()
