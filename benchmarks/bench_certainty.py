"""Time of the certainty outputs against the commands that compute their numbers.

The invented demo evidence base (SQLite), its busiest exposure. Best of --repeat runs:

- baseline: ``exposhift pool`` plus ``exposhift replication`` for every outcome of the
  exposure, as the services behind those commands (pool_evidence + replication_for);
- ``exposhift evidence-table`` (certainty suggestions for every outcome, no sensitivity table);
- ``exposhift certainty`` (suggestions plus the sensitivity table for every outcome).

Usage: python benchmarks/bench_certainty.py [--repeat 3]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path


def best(fn, repeat: int) -> float:
    out = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t)
    return min(out)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    from exposhift.services.certainty import _outcomes_with_evidence, certainty_for, evidence_table
    from exposhift.services.demo import build_demo
    from exposhift.services.pooling import pool_evidence
    from exposhift.services.replicating import replication_for
    from exposhift.services.setup import open_current

    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "demo.db"
        build_demo(db, user="bench")
        store = open_current(str(db), "bench")
        exposure = "dravonil"
        outcomes = _outcomes_with_evidence(store, exposure)

        def baseline():
            for o in outcomes:
                pool_evidence(store, exposure, o)
                replication_for(store, exposure, o)

        base = best(baseline, args.repeat)
        table = best(lambda: evidence_table(store, exposure), args.repeat)
        full = best(lambda: certainty_for(store, exposure), args.repeat)
        store.dispose()
    print(f"demo, exposure {exposure}, {len(outcomes)} outcomes, best of {args.repeat}")
    print(f"baseline pool + replication per outcome: {base:.3f} s (1.00x)")
    print(f"evidence-table:                          {table:.3f} s ({table / base:.2f}x)")
    print(f"certainty (with sensitivity tables):     {full:.3f} s ({full / base:.2f}x)")


if __name__ == "__main__":
    main()
