"""Import and export speed and memory against the pandas floor.

Generates an invented 100,000-row extraction sheet (exposhift.io.synthetic), then times, each
phase in a fresh process (best of --repeat runs):

- import: reading + validating the sheet + importing it into an empty SQLite evidence base
  (one transaction, with versions and an audit entry per inserted row);
- floor:  ``pandas.read_csv`` + ``DataFrame.to_sql`` of the same rows into one SQLite table
  (no validation, no keys, no audit): the least any importer has to do;
- export: the JSON archive and the CSV sheet of that evidence base;
- export floor: ``pandas.read_sql`` of the floor table + ``DataFrame.to_csv``.

Peak memory is the process's maximum resident set size (``resource.getrusage``), shown with the
resident size after imports so the phase's own share is visible.

Usage: python benchmarks/bench_import_export.py [--rows 100000] [--repeat 3]
Target (issue 3): import within 3x of the floor.
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


def _rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # Linux: KiB


def phase(name: str, work: Path) -> dict:
    import pandas as pd  # noqa: F401 - imported before the baseline is taken

    from exposhift.services.exporting import export_store
    from exposhift.services.importing import import_frames, read_input
    from exposhift.services.setup import init_database, open_current

    sheet = work / "sheet.csv"
    base = _rss_mb()
    if name == "floor":
        import sqlite3

        db = work / "floor.db"
        db.unlink(missing_ok=True)
        t = time.perf_counter()
        frame = pd.read_csv(sheet)
        con = sqlite3.connect(db)
        frame.to_sql("sheet", con, index=False)
        con.commit()
        con.close()
        seconds = time.perf_counter() - t
    elif name == "import":
        db = work / "evidence.db"
        for p in (db, Path(f"{db}-wal"), Path(f"{db}-shm")):
            p.unlink(missing_ok=True)
        init_database(str(db), "bench")
        store = open_current(str(db), "bench")
        t = time.perf_counter()
        kind, frames = read_input(sheet)
        import_frames(store, frames, file=str(sheet), kind=kind)
        seconds = time.perf_counter() - t
        store.dispose()
    elif name in ("export-json", "export-csv"):
        store = open_current(str(work / "evidence.db"), "bench")
        target = work / ("out.json" if name == "export-json" else "out.csv")
        t = time.perf_counter()
        export_store(store, target)
        seconds = time.perf_counter() - t
        store.dispose()
    elif name == "export-floor":
        import sqlite3

        con = sqlite3.connect(work / "floor.db")
        t = time.perf_counter()
        pd.read_sql("SELECT * FROM sheet", con).to_csv(work / "floor_out.csv", index=False)
        seconds = time.perf_counter() - t
        con.close()
    else:
        raise SystemExit(f"unknown phase {name}")
    return {"seconds": seconds, "rss_base_mb": base, "rss_peak_mb": _rss_mb()}


def run(name: str, work: Path, repeat: int) -> dict:
    best = None
    for _ in range(repeat):
        out = subprocess.run(
            [sys.executable, __file__, "--phase", name, "--work", str(work)],
            check=True,
            capture_output=True,
            text=True,
        ).stdout
        result = json.loads(out.strip().splitlines()[-1])
        if best is None or result["seconds"] < best["seconds"]:
            best = result
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--phase")
    ap.add_argument("--work")
    args = ap.parse_args()
    if args.phase:
        print(json.dumps(phase(args.phase, Path(args.work))))
        return

    from exposhift.io.synthetic import synthetic_sheet

    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        synthetic_sheet(args.rows).to_csv(work / "sheet.csv", index=False)
        size = (work / "sheet.csv").stat().st_size / 1e6
        print(f"extraction sheet: {args.rows:,} rows, {size:.1f} MB (best of {args.repeat})")
        results = {
            n: run(n, work, args.repeat)
            for n in ("floor", "import", "export-floor", "export-json", "export-csv")
        }
    print(f"{'phase':<34} {'seconds':>8} {'peak RSS MB':>12} {'(base)':>8}")
    labels = {
        "floor": "floor: read_csv + to_sql",
        "import": "import (read, validate, write)",
        "export-floor": "export floor: read_sql + to_csv",
        "export-json": "export JSON archive",
        "export-csv": "export CSV sheet",
    }
    for n, r in results.items():
        print(
            f"{labels[n]:<34} {r['seconds']:>8.2f} {r['rss_peak_mb']:>12.0f} "
            f"{r['rss_base_mb']:>8.0f}"
        )
    floor = results["floor"]["seconds"]
    ratio = results["import"]["seconds"] / floor
    print(f"import / floor      = {ratio:.2f}x (target <= 3x: {'met' if ratio <= 3 else 'MISSED'})")
    ef = results["export-floor"]["seconds"]
    print(
        f"export JSON / floor = {results['export-json']['seconds'] / ef:.2f}x "
        f"(export floor: read_sql + to_csv)"
    )
    print(f"export CSV / floor  = {results['export-csv']['seconds'] / ef:.2f}x")


if __name__ == "__main__":
    main()
