"""Refusing oversized input: time and peak memory against reading a normal sheet.

Cases, each in a fresh process (best of --repeat runs):

- baseline:   ``read_input`` of a normal 100-row extraction sheet (exposhift.io.synthetic):
              read, parse and validate it completely;
- wide-csv:   ``read_input`` of a CSV whose header has 1,000,000 columns (one data row): refused
              by the column limit before pandas parses it (issue 15: it ran to 8 GB before);
- deep-json:  ``read_input`` of a 1,000,000-level nested JSON "archive": refused by the depth
              limit before ``json.loads`` (it raised RecursionError before);
- long-cell:  ``read_input`` of a 100-row sheet with one 10,000,000-character cell: refused by
              the cell-length limit with its row and column (it was stored as is before).

Memory, two ways: the case's own peak allocation (``tracemalloc``, started after exposhift
and pandas were imported; numpy buffers are traced, in a separate run so that tracing does not
slow the timed one), and the whole process's maximum resident set size (``resource.getrusage``),
shown with the resident size after imports. The libraries an ``exposhift`` process loads take
most of the latter before any file is opened.

Usage: python benchmarks/bench_limits.py [--repeat 3]
Targets (issue 15): the 1,000,000-column header refused in under 2 s and under 200 MB.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CASES = ("baseline", "wide-csv", "deep-json", "long-cell")


def _rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # Linux: KiB


def make_files(work: Path) -> None:
    from exposhift.io.synthetic import synthetic_sheet

    synthetic_sheet(100).to_csv(work / "baseline.csv", index=False)
    header = b",".join(b"c%d" % i for i in range(1_000_000))
    (work / "wide-csv.csv").write_bytes(header + b"\n" + b"1," * 999_999 + b"1\n")
    (work / "deep-json.json").write_bytes(b"[" * 1_000_000 + b"]" * 1_000_000)
    sheet = synthetic_sheet(100)
    sheet.loc[50, "comparison"] = "x" * 10_000_000
    sheet.to_csv(work / "long-cell.csv", index=False)


def case(name: str, work: Path, traced: bool) -> dict:
    import tracemalloc

    import pandas as pd  # noqa: F401 - imported before the baseline is taken

    from exposhift.errors import InputFileError
    from exposhift.services.importing import read_input

    path = next(work.glob(f"{name}.*"))
    base = _rss_mb()
    if traced:
        tracemalloc.start()
    t = time.perf_counter()
    try:
        read_input(path)
        outcome = "read"
    except InputFileError as exc:
        outcome = "refused: " + exc.problems[0].message[:70]
    seconds = time.perf_counter() - t
    own = tracemalloc.get_traced_memory()[1] / 2**20 if traced else None
    return {
        "seconds": seconds,
        "rss_base_mb": base,
        "rss_peak_mb": _rss_mb(),
        "own_mb": own,
        "outcome": outcome,
        "bytes": path.stat().st_size,
    }


def _once(name: str, work: Path, traced: bool) -> dict:
    cmd = [sys.executable, __file__, "--case", name, "--work", str(work)]
    out = subprocess.run(
        cmd + (["--traced"] if traced else []), check=True, capture_output=True, text=True
    ).stdout
    return json.loads(out.strip().splitlines()[-1])


def run(name: str, work: Path, repeat: int) -> dict:
    best = min((_once(name, work, False) for _ in range(repeat)), key=lambda r: r["seconds"])
    best["own_mb"] = _once(name, work, True)["own_mb"]
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--case")
    ap.add_argument("--work")
    ap.add_argument("--traced", action="store_true")
    args = ap.parse_args()
    if args.case:
        print(json.dumps(case(args.case, Path(args.work), args.traced)))
        return
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        make_files(work)
        results = {n: run(n, work, args.repeat) for n in CASES}
    print(
        f"best of {args.repeat}; own MB = peak traced allocation of the case; RSS = whole "
        "process (after imports -> peak)"
    )
    print(
        f"{'case':<10} {'file MB':>8} {'seconds':>8} {'own MB':>8} {'RSS MB':>11} "
        f"{'x time':>7} {'x own':>7}  outcome"
    )
    b = results["baseline"]
    for n, r in results.items():
        print(
            f"{n:<10} {r['bytes'] / 1e6:>8.1f} {r['seconds']:>8.3f} {r['own_mb']:>8.1f} "
            f"{r['rss_base_mb']:>5.0f}->{r['rss_peak_mb']:<5.0f} "
            f"{r['seconds'] / b['seconds']:>7.2f} {r['own_mb'] / b['own_mb']:>7.2f}  "
            f"{r['outcome']}"
        )
    w = results["wide-csv"]
    met = w["seconds"] < 2 and w["own_mb"] < 200
    print(
        f"1,000,000-column header: refused in {w['seconds']:.3f} s "
        f"({w['seconds'] / b['seconds']:.2f}x reading the 100-row sheet), own peak "
        f"{w['own_mb']:.1f} MB ({w['own_mb'] / b['own_mb']:.2f}x); process RSS "
        f"{w['rss_base_mb']:.0f} MB after imports -> {w['rss_peak_mb']:.0f} MB peak "
        f"(target < 2 s and < 200 MB for the refusal itself: {'met' if met else 'MISSED'})"
    )


if __name__ == "__main__":
    main()
