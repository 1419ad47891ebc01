"""Reading tabular input files (CSV, Excel) as text, with errors that say what to do.

Every cell is read as a string (blank cells as ""), so that validation sees exactly what the
reviewer typed and can name the row and column of each problem. Spreadsheet row numbers count
the header as row 1, so the first data row is row 2.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd

from exposhift.errors import InputFileError, Problem

FIRST_DATA_ROW = 2


def _encoding_problem(path: Path, encoding: str, exc: UnicodeDecodeError) -> InputFileError:
    return InputFileError([Problem(
        str(path), None, None,
        f"the file is not valid {encoding} (byte {exc.start}: {exc.reason}); save it as UTF-8, "
        "or name its encoding with --encoding (e.g. --encoding latin-1 or --encoding cp1252)",
    )])


def read_table(path: str | Path, encoding: str | None = None) -> pd.DataFrame:
    """All cells of a .csv or .xlsx file as stripped strings; column names stripped."""
    path = Path(path)
    if not path.exists():
        raise InputFileError([Problem(str(path), None, None,
                                      "file not found; check the path")])
    suffix = path.suffix.lower()
    if suffix in (".xlsx", ".xlsm"):
        try:
            frame = pd.read_excel(path, dtype=str, keep_default_na=False, engine="openpyxl")
        except Exception as exc:  # noqa: BLE001 - any reason the workbook cannot be read
            raise InputFileError([Problem(str(path), None, None,
                                          f"cannot read the workbook: {exc}")]) from None
    elif suffix in (".csv", ".txt"):
        enc = encoding or "utf-8-sig"
        try:
            frame = pd.read_csv(path, dtype=str, keep_default_na=False, encoding=enc,
                                quoting=csv.QUOTE_MINIMAL, skipinitialspace=False)
        except UnicodeDecodeError as exc:
            raise _encoding_problem(path, enc, exc) from None
        except LookupError:
            raise InputFileError([Problem(
                str(path), None, None, f"unknown encoding '{enc}' given to --encoding")]) from None
        except pd.errors.ParserError as exc:
            raise InputFileError([Problem(str(path), None, None,
                                          f"cannot parse the CSV file: {exc}")]) from None
        except pd.errors.EmptyDataError:
            raise InputFileError([Problem(str(path), None, None,
                                          "the file is empty; it needs a header row")]) from None
    else:
        raise InputFileError([Problem(str(path), None, None,
                                      f"unsupported file type '{suffix}'; use .csv or .xlsx")])
    frame.columns = [str(c).strip() for c in frame.columns]
    for col in frame.columns:
        frame[col] = frame[col].astype(str).str.strip()
    frame.index = range(FIRST_DATA_ROW, FIRST_DATA_ROW + len(frame))
    return frame
