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
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

import exposhift
from exposhift.errors import ConfigError
from exposhift.services.appraising import import_appraisals
from exposhift.services.importing import ImportReport, import_into
from exposhift.services.setup import init_database, open_current
from exposhift.services.summary import evidence_summary
from exposhift.store.database import DEFAULT_SQLITE, resolve_url, sqlite_path
from exposhift.store.evidence_frames import load_evidence
from exposhift.store.sqlite_files import (
    checkpoint,
    copy_database,
    foreign_content,
    non_demo_records,
    remove_database,
)

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
    real = non_demo_records(target)
    if real is None:
        raise ConfigError(
            f"{target} exists and is not an exposhift demo database; refusing to "
            f"replace it. {_FORCE_HINT}"
        )
    if real:
        raise ConfigError(
            f"{target} holds {real} records that are not demo records; refusing "
            f"to replace it. {_FORCE_HINT}"
        )


def backup_path(target: Path) -> Path:
    stamp = dt.datetime.now(dt.UTC).strftime("%Y%m%dT%H%M%SZ")
    return target.with_name(f"{target.name}.backup-{stamp}")


def _backup(target: Path) -> Path:
    """Copy ``target`` beside itself (:func:`~exposhift.store.sqlite_files.copy_database`)."""
    dest = backup_path(target)
    copy_database(target, dest)
    return dest


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
    remove_database(tmp)
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
        checkpoint(tmp)
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
        remove_database(tmp)
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
