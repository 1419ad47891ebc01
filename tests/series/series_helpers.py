"""Helpers for the series store tests: the demo evidence base and series sheets as CSV."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from sqlalchemy import func, select

from exposhift.demo_scenario.series import series_frame
from exposhift.services.demo import seed_dir
from exposhift.services.importing import import_into
from exposhift.store.models import Estimate, Series, SeriesFit, SeriesPoint

TABLES = {
    "series": Series.__table__,
    "series_point": SeriesPoint.__table__,
    "series_fit": SeriesFit.__table__,
    "estimate": Estimate.__table__,
}


def load_evidence(store) -> None:
    import_into(store, seed_dir() / "evidence.csv")


def demo_series(keys: tuple[str, ...] | None = None) -> pd.DataFrame:
    f = series_frame()
    return f if keys is None else f[f["series_id"].isin(keys)].reset_index(drop=True)


def write_series(path: Path, frame: pd.DataFrame) -> Path:
    frame.to_csv(path, index=False, float_format="%.10g")
    return path


def count(store, name: str) -> int:
    with store.read() as conn:
        return conn.execute(select(func.count()).select_from(TABLES[name])).scalar_one()
