"""``exposhift demo``: a fresh demo evidence base built from the invented scenario in seed_records/.

The demo never touches the user's own evidence base: it writes ``demo/evidence-demo.db`` (or the
file named with ``--db``), and builds the new database under a temporary name before renaming it
into place, so an interrupted build leaves the previous demo file as it was.

An existing file is replaced only when it holds nothing but what the demo itself generates: every
row of every table, and every entry of its audit trail, must be one that a fresh build from the
same seed records writes too. Anything else (a reviewer's own appraisal, an event, an edit of a
demo record, rows of a table the demo does not fill) makes the build refuse, unless ``force``;
then the old file is first copied beside it (``NAME.backup-YYYYMMDDTHHMMSSZ``).
"""

from __future__ import annotations

import contextlib
import datetime as dt
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
SEED_FILES = (
    "evidence.csv",
    "registered_events.csv",
    "appraisals.csv",
    "directions.csv",
    "series.csv",
    "judgements.csv",
)


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
    directions: str = ""  # what happened to directions.csv
    judgements: str = ""  # what happened to judgements.csv
    summary: pd.DataFrame = field(default_factory=pd.DataFrame)  # what the evidence says
    backup: str | None = None  # the copy of the replaced file (with force)


def _user_databases() -> set[Path]:
    out = {DEFAULT_SQLITE.resolve()}
    env = os.environ.get("EXPOSHIFT_DB")
    if env:
        p = sqlite_path(resolve_url(env))
        if p is not None:
            out.add(p.resolve())
    return out


_FORCE_HINT = (
    "Choose another file with --db, or give --force to replace it (a backup copy is kept beside it)"
)


def _check_target(target: Path, force: bool) -> None:
    """Refuse the user's own evidence base outright (even with force), and, before building,
    a file that is no exposhift database or holds studies or events not flagged demo."""
    if target.resolve() in _user_databases():
        raise ConfigError(
            f"{target} is your evidence base, not a demo file; the demo writes "
            f"{DEMO_DB} (or another new file given with --db)"
        )
    if force or not target.exists():
        return
    try:
        con = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            real = con.execute(
                "SELECT (SELECT count(*) FROM study WHERE NOT demo) + "
                "(SELECT count(*) FROM event WHERE NOT demo)"
            ).fetchone()[0]
        finally:
            con.close()
    except sqlite3.Error:
        raise ConfigError(
            f"{target} exists and is not an exposhift demo database; refusing to "
            f"replace it. {_FORCE_HINT}"
        ) from None
    if real:
        raise ConfigError(
            f"{target} holds {real} records that are not demo records; refusing "
            f"to replace it. {_FORCE_HINT}"
        )


#: tables whose rows are compared by content (the rest: by row count)
_SKIP_TABLES = ("alembic_version", "sqlite_sequence")


def _tables(con: sqlite3.Connection) -> list[str]:
    return [
        n
        for (n,) in con.execute(
            "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'"
        )
        if n not in _SKIP_TABLES
    ]


def _audit(con: sqlite3.Connection) -> set[tuple[str, str, str]]:
    return set(con.execute("SELECT table_name, row_key, action FROM audit_entry"))


def foreign_content(target: Path, fresh: Path) -> list[str]:
    """What ``target`` holds that a fresh demo build (``fresh``) does not: an empty list when the
    file holds only what the demo generates. Each entry is a readable reason."""
    try:
        con = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            tables = _tables(con)
            if "audit_entry" not in tables:
                return ["it is not an exposhift database"]
            old_counts = {
                t: con.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in tables
            }
            old_audit = _audit(con)
        finally:
            con.close()
    except sqlite3.Error:
        return ["it is not an exposhift database (not readable as SQLite)"]
    con = sqlite3.connect(fresh)
    try:
        new_tables = set(_tables(con))
        new_counts = {
            t: con.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0] for t in new_tables
        }
        new_audit = _audit(con)
    finally:
        con.close()
    reasons = []
    words = {"insert": "added", "update": "changed", "delete": "deleted"}
    by_kind: dict[tuple[str, str], int] = {}
    for table, _, action in old_audit - new_audit:
        by_kind[(table, action)] = by_kind.get((table, action), 0) + 1
    reasons += [
        f"{n} {table} record(s) {words.get(action, action)} that the demo does not make"
        for (table, action), n in sorted(by_kind.items())
    ]
    covered = {t for t, _ in by_kind}
    for t in tables:
        if t != "audit_entry" and t not in covered and old_counts[t] > new_counts.get(t, 0):
            reasons.append(
                f"{old_counts[t] - new_counts.get(t, 0)} row(s) in table {t} that "
                "the demo does not write"
            )
    return reasons


def backup_path(target: Path) -> Path:
    stamp = dt.datetime.now(dt.UTC).strftime("%Y%m%dT%H%M%SZ")
    return target.with_name(f"{target.name}.backup-{stamp}")


def _backup(target: Path) -> Path:
    """Copy ``target`` beside itself (SQLite's online backup when it is a database: the WAL is
    included; a byte copy otherwise)."""
    dest = backup_path(target)
    try:
        src = sqlite3.connect(f"file:{target}?mode=ro", uri=True)
        try:
            src.execute("SELECT count(*) FROM sqlite_master").fetchone()
            out = sqlite3.connect(dest)
            try:
                src.backup(out)
            finally:
                out.close()
        finally:
            src.close()
    except sqlite3.Error:
        _remove_sqlite(dest)
        import shutil

        shutil.copy2(target, dest)
    return dest


def _remove_sqlite(path: Path) -> None:
    for p in (path, Path(f"{path}-wal"), Path(f"{path}-shm"), Path(f"{path}-journal")):
        with contextlib.suppress(FileNotFoundError):
            p.unlink()


def _import_appraisals(store, path: Path) -> str:
    if not path.is_file():
        return "no appraisals.csv in the seed directory"
    import_appraisals(store, path)
    return "appraisals loaded from appraisals.csv"


def _import_directions(store, path: Path) -> str:
    if not path.is_file():
        return "no directions.csv in the seed directory"
    from exposhift.services.directions import import_directions

    result = import_directions(store, path)
    return f"{result.added} expected directions loaded from directions.csv"


def _import_judgements(store, path: Path) -> str:
    if not path.is_file():
        return "no judgements.csv in the seed directory"
    from exposhift.services.certainty import record_judgements

    result = record_judgements(store, path)
    return f"{result.added} certainty judgements recorded from judgements.csv"


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
    est = f.estimates.merge(
        f.events[["key", "exposure"]], left_on="event", right_on="key", suffixes=("", "_event")
    )
    grid = est.drop_duplicates(["exposure", "outcome", "study"]).pivot_table(
        index="exposure", columns="outcome", values="study", aggfunc="count", fill_value=0
    )
    return counts, grid


def build_demo(
    db: str | Path | None = None,
    seed: str | Path | None = None,
    user: str | None = None,
    *,
    force: bool = False,
) -> DemoResult:
    """Create a fresh demo database from the seed records; returns an overview.

    An existing file that holds anything the demo does not generate is refused (ConfigError
    naming what it holds) unless ``force``; then it is first backed up beside itself.
    """
    target = Path(db) if db else DEMO_DB
    if "://" in str(db or "") and str(db).startswith("sqlite:"):
        target = sqlite_path(resolve_url(str(db))) or target
    if "://" in str(target):
        raise ConfigError(
            "exposhift demo writes a SQLite file; give a file path with --db, not a URL"
        )
    source = Path(seed) if seed else seed_dir()
    evidence = source / SEED_FILES[0]
    if not evidence.is_file():
        raise ConfigError(
            f"no demo records: looked for {evidence}. Run exposhift demo from a "
            "checkout of the repository (seed_records/ next to src/), or name "
            "the directory with --seed"
        )
    _check_target(target, force)
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
            directions = _import_directions(store, source / SEED_FILES[3])
            series = source / SEED_FILES[4]
            if series.is_file():
                from exposhift.services.series import import_series_into

                import_series_into(store, series)
            judgements = _import_judgements(store, source / SEED_FILES[5])
            counts, grid = _overview(store)
            summary = evidence_summary(store)
        finally:
            store.dispose()
        con = sqlite3.connect(tmp)
        try:
            con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        finally:
            con.close()
        backup = None
        if target.exists():
            reasons = foreign_content(target, tmp)
            if reasons and not force:
                raise ConfigError(
                    f"{target} holds more than the demo generates ({'; '.join(reasons)}); "
                    f"refusing to replace it. {_FORCE_HINT}"
                )
            if reasons:
                backup = str(_backup(target))
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
    return DemoResult(
        path=str(target),
        seed=str(source),
        counts=counts,
        grid=grid,
        imports=reports,
        appraisals=appraisals,
        directions=directions,
        judgements=judgements,
        summary=summary,
        backup=backup,
    )
