"""Writing the extraction sheet (CSV or Excel) and the events sheet from evidence frames.

Spreadsheet safety: a text cell that a spreadsheet would run as a formula (it starts with ``=``,
``+``, ``-``, ``@``, a tab or a carriage return) is written with a single quote in front
(``'=HYPERLINK(...)``), the usual way to mark a cell as text. Text that is just a number
(``-5``) is not a formula and is left alone; numeric columns are written as numbers, so a negative
estimate stays a number. Importing strips that one quote again, so an export imports back to the
same records. (A value that itself starts with quotes before such a character gets one more
quote, so this is lossless too.)

Precision: CSV and JSON write every number with ``repr`` and read back the same double. Excel
workbooks (openpyxl) keep 16 significant digits, so a value with more digits than a reviewer
would type can change in its last digit; use the JSON archive for exact archives.

Files are written to a temporary name next to the target and renamed into place, so a reader
never sees half a file.
"""

from __future__ import annotations

import contextlib
import csv
import os
from collections.abc import Callable, Iterator
from pathlib import Path

import numpy as np
import pandas as pd

from exposhift.errors import ExposhiftError
from exposhift.io.cells import _NUMBER as _PLAIN_NUMBER
from exposhift.io.cells import FORMULA_START
from exposhift.io.columns import BY_NAME, COLUMN_NAMES
from exposhift.io.frames import EvidenceFrames
from exposhift.io.validate import EVENTS_SHEET_COLUMNS

_NEEDS_QUOTE = "^'*[" + "".join("\\" + c if c in "-+" else c for c in FORMULA_START) + "]"


def neutralise(s: pd.Series) -> pd.Series:
    """Text values with a quote in front where a spreadsheet would run them as a formula."""
    s = s.fillna("").astype("str")
    risky = s.str.contains(_NEEDS_QUOTE, regex=True) & ~s.str.fullmatch(_PLAIN_NUMBER)
    return s.mask(risky, "'" + s)


def _sorted_by(frame: pd.DataFrame, col: str) -> pd.DataFrame:
    order = np.argsort(frame[col].to_numpy(dtype=object), kind="stable")
    return frame.iloc[order].reset_index(drop=True)


def sheet_frame(frames: EvidenceFrames) -> pd.DataFrame:
    """One row per estimate, in sheet columns, sorted by estimate key."""
    est = _sorted_by(frames.estimates, "key")
    studies = frames.studies.rename(columns={"key": "study"})
    events = frames.events.rename(columns={"key": "event"}).drop(columns=["demo"])
    outcomes = frames.outcomes[["name", "outcome_group"]].rename(columns={"name": "outcome"})
    out = (
        est.merge(studies, on="study", how="left", validate="many_to_one")
        .merge(events, on="event", how="left", validate="many_to_one")
        .merge(outcomes, on="outcome", how="left", validate="many_to_one")
    )
    out = out.rename(columns={"study": "study_id", "event": "event_id", "point": "estimate"})
    return out[list(COLUMN_NAMES)]


def events_sheet_frame(frames: EvidenceFrames) -> pd.DataFrame:
    events = _sorted_by(frames.events, "key").rename(columns={"key": "event_id"})
    return events[list(EVENTS_SHEET_COLUMNS)]


def _text_cells(s: pd.Series, kind: str) -> list[str]:
    """Column values as CSV text: exact numbers, yes/no, neutralised text, blank for missing."""
    if kind == "float":
        return ["" if v != v else repr(v) for v in s.astype("float64").to_numpy().tolist()]
    if kind == "int":
        return [
            str(int(v)) if v is not None else ""
            for v in s.astype(object).where(s.notna(), None).tolist()
        ]
    if kind == "bool":
        return ["yes" if v else "no" for v in s.fillna(False).astype(bool).tolist()]
    return neutralise(s).tolist()


def _kind(col: str) -> str:
    return BY_NAME[col].kind if col in BY_NAME else "text"


@contextlib.contextmanager
def atomic_path(path: Path) -> Iterator[Path]:
    """A temporary path next to ``path`` that replaces it when the block succeeds."""
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        yield tmp
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def write_csv(frame: pd.DataFrame, path: Path) -> None:
    """UTF-8 CSV (no byte-order mark), ``\\n`` line ends, quoting only where needed."""
    columns = [_text_cells(frame[c], _kind(c)) for c in frame.columns]
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(list(frame.columns))
        w.writerows(zip(*columns, strict=True))


def _xlsx_cells(s: pd.Series, kind: str) -> list:
    if kind == "float":
        return [None if v != v else v for v in s.astype("float64").to_numpy().tolist()]
    if kind == "int":
        return [
            int(v) if v is not None else None
            for v in s.astype(object).where(s.notna(), None).tolist()
        ]
    if kind == "bool":
        return ["yes" if v else "no" for v in s.fillna(False).astype(bool).tolist()]
    return [v if v != "" else None for v in neutralise(s).tolist()]


#: characters an Excel worksheet cannot hold (as openpyxl's ILLEGAL_CHARACTERS_RE)
_CONTROL = "[\x00-\x08\x0b\x0c\x0e-\x1f]"


def _refuse_control_characters(frame: pd.DataFrame, path: Path) -> None:
    for name in frame.columns:
        if _kind(name) in ("float", "int", "bool"):
            continue
        bad = frame[name].fillna("").astype("str").str.contains(_CONTROL, regex=True)
        if bad.any():
            n = int(np.flatnonzero(bad.to_numpy(dtype=bool))[0]) + 2
            raise ExposhiftError(
                f"cannot write {path.name}: row {n}, column '{name}' holds a control character "
                "that Excel does not allow; export .csv or .json instead, or correct the record"
            )


def write_xlsx(frame: pd.DataFrame, path: Path, title: str = "estimates") -> None:
    """An Excel workbook with one sheet; numbers as numbers, text as text cells."""
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell

    _refuse_control_characters(frame, path)
    wb = Workbook(write_only=True)
    ws = wb.create_sheet(title)
    ws.append(list(frame.columns))
    columns = [_xlsx_cells(frame[c], _kind(c)) for c in frame.columns]
    kinds = [_kind(c) for c in frame.columns]
    for values in zip(*columns, strict=True):
        row = []
        for v, kind in zip(values, kinds, strict=True):
            if isinstance(v, str) and kind not in ("float", "int"):
                cell = WriteOnlyCell(ws, value=v)
                cell.data_type = "s"
                row.append(cell)
            else:
                row.append(v)
        ws.append(row)
    with atomic_path(path) as tmp:
        wb.save(tmp)


def write_text(text: str, path: Path) -> None:
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8", newline="")


SHEET_WRITERS: dict[str, Callable[[pd.DataFrame, Path], None]] = {
    ".csv": write_csv,
    ".xlsx": write_xlsx,
}
