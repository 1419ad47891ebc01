"""``exposhift demo``: a fresh demo evidence base built from the invented scenario in seed_records/.

The demo never touches the user's own evidence base: it writes ``demo/evidence-demo.db`` (or the
file named with ``--db``), refuses a file that holds anything but demo records, and builds the new
database under a temporary name before renaming it into place, so an interrupted build leaves the
previous demo file as it was.
"""

from __future__ import annotations

import contextlib
import os
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

import exposhift
from exposhift.errors import ConfigError
from exposhift.services.appraising import import_appraisals
from exposhift.services.exporting import load_evidence
from exposhift.services.importing import ImportReport, import_into
from exposhift.services.setup import init_database, open_current
from exposhift.services.summary import evidence_summary
from exposhift.store.database import DEFAULT_SQLITE, resolve_url, sqlite_path

DEMO_DB = Path("demo") / "evidence-demo.db"
SEED_FILES = ("evidence.csv", "registered_events.csv", "appraisals.csv", "series.csv")


def seed_dir() -> Path:
    """The repository's ``seed_records/`` (next to ``src/``)."""
    return Path(exposhift.__file__).resolve().parents[2] / "seed_records"


@dataclass
class DemoResult:
    path: str
    seed: str
    counts: dict[str, int]
    grid: pd.DataFrame  # exposure x outcome: number of studies
    imports: list[ImportReport] = field(default_factory=list)
    appraisals: str = ""  # what happened to appraisals.csv
    summary: pd.DataFrame = field(default_factory=pd.DataFrame)  # what the evidence says


def _user_databases() -> set[Path]:
    out = {DEFAULT_SQLITE.resolve()}
    env = os.environ.get("EXPOSHIFT_DB")
    if env:
        p = sqlite_path(resolve_url(env))
        if p is not None:
            out.add(p.resolve())
    return out


def _check_target(target: Path) -> None:
    if target.resolve() in _user_databases():
        raise ConfigError(f"{target} is your evidence base, not a demo file; the demo writes "
                          f"{DEMO_DB} (or another new file given with --db)")
    if not target.exists():
        return
    try:
        con = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            real = con.execute("SELECT (SELECT count(*) FROM study WHERE NOT demo) + "
                               "(SELECT count(*) FROM event WHERE NOT demo)").fetchone()[0]
        finally:
            con.close()
    except sqlite3.Error:
        raise ConfigError(f"{target} exists and is not an exposhift demo database; refusing to "
                          "replace it. Delete it or choose another file with --db") from None
    if real:
        raise ConfigError(f"{target} holds {real} records that are not demo records; refusing "
                          "to replace it. Choose another file with --db")


def _remove_sqlite(path: Path) -> None:
    for p in (path, Path(f"{path}-wal"), Path(f"{path}-shm"), Path(f"{path}-journal")):
        with contextlib.suppress(FileNotFoundError):
            p.unlink()


def _import_appraisals(store, path: Path) -> str:
    if not path.is_file():
        return "no appraisals.csv in the seed directory"
    import_appraisals(store, path)
    return "appraisals loaded from appraisals.csv"


def _overview(store) -> tuple[dict[str, int], pd.DataFrame]:
    with store.read() as conn:
        f = load_evidence(conn)
    studied = set(f.estimates["event"])
    counts = {
        "studies": len(f.studies),
        "events": len(f.events),
        "events_without_study": int((~f.events["key"].isin(studied)).sum()),
        "estimates": len(f.estimates),
        "appraisals": len(f.appraisals),
        "exposures": len(f.exposures),
        "outcomes": len(f.outcomes),
        "countries": int(f.events["country"].nunique()),
        "designs": int(f.studies["design"].nunique()),
    }
    est = f.estimates.merge(f.events[["key", "exposure"]], left_on="event", right_on="key",
                            suffixes=("", "_event"))
    grid = (est.drop_duplicates(["exposure", "outcome", "study"])
            .pivot_table(index="exposure", columns="outcome", values="study", aggfunc="count",
                         fill_value=0))
    return counts, grid


def build_demo(db: str | Path | None = None, seed: str | Path | None = None,
               user: str | None = None) -> DemoResult:
    """Create a fresh demo database from the seed records; returns an overview."""
    target = Path(db) if db else DEMO_DB
    if "://" in str(target):
        raise ConfigError("exposhift demo writes a SQLite file; give a file path with --db, "
                          "not a URL")
    source = Path(seed) if seed else seed_dir()
    evidence = source / SEED_FILES[0]
    if not evidence.is_file():
        raise ConfigError(f"no demo records: looked for {evidence}. Run exposhift demo from a "
                          "checkout of the repository (seed_records/ next to src/), or name "
                          "the directory with --seed")
    _check_target(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.with_name(f".{target.name}.{os.getpid()}.building")
    _remove_sqlite(tmp)
    try:
        init_database(str(tmp), user or "demo")
        store = open_current(str(tmp), user or "demo")
        try:
            reports = [import_into(store, evidence)]
            events = source / SEED_FILES[1]
            if events.is_file():
                reports.append(import_into(store, events, events_only=True))
            appraisals = _import_appraisals(store, source / SEED_FILES[2])
            series = source / SEED_FILES[3]
            if series.is_file():
                from exposhift.services.series import import_series_into

                import_series_into(store, series)
            counts, grid = _overview(store)
            summary = evidence_summary(store)
        finally:
            store.dispose()
        con = sqlite3.connect(tmp)
        try:
            con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        finally:
            con.close()
        for side in ("-wal", "-shm"):
            with contextlib.suppress(FileNotFoundError):
                Path(f"{target}{side}").unlink()
        os.replace(tmp, target)
    except BaseException:
        _remove_sqlite(tmp)
        raise
    finally:
        for side in ("-wal", "-shm"):
            with contextlib.suppress(FileNotFoundError):
                Path(f"{tmp}{side}").unlink()
    return DemoResult(path=str(target), seed=str(source), counts=counts, grid=grid,
                      imports=reports, appraisals=appraisals, summary=summary)
