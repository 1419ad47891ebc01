"""Reading an extraction sheet (CSV or Excel) into a frame of raw strings.

- CSV: UTF-8 with or without a byte-order mark by default; any other encoding must be named
  (``--encoding latin-1``). A file that is not valid in the encoding is refused with the row
  where decoding failed.
- Excel (``.xlsx``): the first worksheet; numbers keep their exact value, dates become
  ``YYYY-MM-DD``, TRUE/FALSE become yes/no.
- Row numbers are spreadsheet rows: the header is row 1, the first record row 2. Blank rows are
  skipped but still counted, so the numbers match what the reviewer sees.
- Header names are matched without regard to case or surrounding spaces.
"""

from __future__ import annotations

import codecs
import datetime as dt
import io
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from exposhift.errors import InputFileError, Problem
from exposhift.io.limits import RowCounter, check_csv_shape, check_text_cells, check_xlsx_size
from exposhift.io.problems import ProblemLog

SHEET_SUFFIXES = (".csv", ".xlsx")
DEFAULT_ENCODING = "utf-8-sig"


@dataclass
class RawSheet:
    """Cells as stripped strings (``""`` when blank) under normalised header names."""

    file: str
    frame: pd.DataFrame
    rows: np.ndarray  # spreadsheet row number of each frame row

    def __len__(self) -> int:
        return len(self.frame)


def read_text(path: Path, encoding: str | None) -> str:
    """The file's text; a decoding failure names the row and the ``--encoding`` option."""
    enc = encoding or DEFAULT_ENCODING
    try:
        codecs.lookup(enc)
    except LookupError:
        raise InputFileError([Problem(path.name, None, None,
                                      f"unknown encoding '{enc}' given with --encoding; use "
                                      "e.g. utf-8, latin-1, cp1252 or utf-16")]) from None
    data = path.read_bytes()
    if enc.lower().replace("_", "-") in ("utf-8", "utf8"):
        enc = DEFAULT_ENCODING  # a BOM is never part of the first header name
    try:
        return data.decode(enc)
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        shown = "UTF-8 (with or without BOM)" if encoding is None else f"'{enc}'"
        raise InputFileError([Problem(
            path.name, line, None,
            f"the file is not valid {shown} text (byte 0x{data[exc.start]:02x} at position "
            f"{exc.start}); save it as UTF-8, or name its encoding with --encoding (e.g. "
            "--encoding latin-1 or --encoding cp1252)")]) from None


def _frame_from_rows(name: str, header: list[str], body: pd.DataFrame) -> RawSheet:
    header = [re.sub(r"\s+", " ", str(h or "")).strip().lower() for h in header]
    body = body.fillna("")
    body = body.apply(lambda s: s.astype("str").str.strip())
    rows = np.arange(len(body), dtype=np.int64) + 2
    nonblank = (body != "").any(axis=1).to_numpy() if body.shape[1] else np.zeros(len(body), bool)
    problems: list[Problem] = []
    keep_cols = []
    for i, h in enumerate(header):
        if h:
            keep_cols.append(i)
        elif (body.iloc[:, i] != "").any():
            problems.append(Problem(name, 1, None,
                                    f"column {i + 1} has values but no header; name it or "
                                    "delete it"))
    seen: dict[str, int] = {}
    for i in keep_cols:
        if header[i] in seen:
            problems.append(Problem(name, 1, header[i],
                                    f"the column appears twice (columns {seen[header[i]] + 1} "
                                    f"and {i + 1}); keep one"))
        else:
            seen[header[i]] = i
    if problems:
        raise InputFileError(problems)
    body = body.iloc[nonblank, keep_cols]
    body.columns = [header[i] for i in keep_cols]
    body = body.reset_index(drop=True)
    log = ProblemLog(name, rows[nonblank])
    check_text_cells(body, log)  # over-long cells and control characters, with row and column
    log.raise_if_any()
    return RawSheet(name, body, rows[nonblank])


def read_csv_sheet(path: Path, encoding: str | None = None) -> RawSheet:
    check_csv_shape(path)  # size, columns and cells, before the file is parsed
    text = read_text(path, encoding)
    if not text.strip():
        raise InputFileError([Problem(path.name, None, None,
                                      "the file is empty; it needs a header row and one row per "
                                      "estimate (see docs/extraction-sheet.md)")])
    try:
        raw = pd.read_csv(io.StringIO(text), header=None, dtype=str, keep_default_na=False,
                          na_filter=False, skip_blank_lines=False, engine="c")
    except pd.errors.ParserError as exc:
        m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(exc))
        if m:
            raise InputFileError([Problem(
                path.name, int(m.group(2)), None,
                f"this row has {m.group(3)} cells but the header has {m.group(1)}; remove the "
                "extra cells (or quote text that contains commas)")]) from None
        raise InputFileError([Problem(path.name, None, None,
                                      f"cannot read the file as CSV ({exc}); check quoting")]) \
            from None
    header = raw.iloc[0].tolist()
    return _frame_from_rows(path.name, header, raw.iloc[1:].reset_index(drop=True))


def _cell_text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, dt.datetime):
        if value.time() == dt.time(0, 0):
            return value.date().isoformat()
        return value.isoformat(sep=" ")
    if isinstance(value, dt.date):
        return value.isoformat()
    return str(value)


def read_xlsx_sheet(path: Path) -> RawSheet:
    from openpyxl import load_workbook
    from openpyxl.utils.exceptions import InvalidFileException

    check_xlsx_size(path)
    try:
        wb = load_workbook(path, read_only=True, data_only=False)
    except (InvalidFileException, zipfile.BadZipFile, OSError, KeyError, ValueError) as exc:
        raise InputFileError([Problem(path.name, None, None,
                                      f"cannot read the file as an Excel workbook ({exc}); save "
                                      "it as .xlsx or as CSV")]) from None
    counter = RowCounter(path.name)
    try:
        ws = wb.worksheets[0]
        rows, formulas = _xlsx_rows(ws, counter)
    finally:
        wb.close()
    if formulas:
        raise InputFileError([Problem(path.name, r, h or f"column {c}",
                                      "the cell holds a formula; paste its value (Paste "
                                      "Special > Values) and save again")
                              for r, c, h in _formula_places(formulas, rows)])
    if not rows:
        raise InputFileError([Problem(path.name, None, None,
                                      "the first worksheet is empty; it needs a header row")])
    width = max(len(r) for r in rows)
    rows = [r + [""] * (width - len(r)) for r in rows]
    body = pd.DataFrame(rows[1:], columns=range(width), dtype="str")
    return _frame_from_rows(path.name, rows[0], body)


def _xlsx_rows(ws, counter: RowCounter) -> tuple[list[list[str]], list[tuple[int, int]]]:
    """Cell texts row by row, and the (row, column) of every formula cell (1-based)."""
    rows: list[list[str]] = []
    formulas: list[tuple[int, int]] = []
    for n, r in enumerate(ws.iter_rows(), start=1):
        counter.check(n, len(r))
        texts = []
        for j, cell in enumerate(r, start=1):
            if getattr(cell, "data_type", None) == "f":
                formulas.append((n, j))
                texts.append("")
            else:
                texts.append(_cell_text(cell.value))
        rows.append(texts)
    return rows, formulas


def _formula_places(formulas, rows) -> list[tuple[int, int, str]]:
    header = [re.sub(r"\s+", " ", h).strip().lower() for h in rows[0]] if rows else []
    return [(r, c, header[c - 1] if c - 1 < len(header) and r > 1 else "")
            for r, c in formulas[:50]]


def read_sheet(path: str | Path, encoding: str | None = None) -> RawSheet:
    """Read a ``.csv`` or ``.xlsx`` extraction sheet."""
    path = Path(path)
    if not path.is_file():
        raise InputFileError([Problem(path.name, None, None,
                                      f"no such file: {path}; check the path")])
    suffix = path.suffix.lower()
    if suffix == ".csv":
        return read_csv_sheet(path, encoding)
    if suffix == ".xlsx":
        return read_xlsx_sheet(path)
    raise InputFileError([Problem(path.name, None, None,
                                  f"cannot import '{suffix or path.name}' files; use .csv, "
                                  ".xlsx or an exposhift .json export")])
