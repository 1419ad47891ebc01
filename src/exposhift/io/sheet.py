"""Reading an extraction sheet (CSV or Excel) into a frame of raw strings.

- CSV: UTF-8 with or without a byte-order mark by default; any other encoding must be named
  (``--encoding latin-1``). A file that is not valid in the encoding is refused with the row
  where decoding failed.
- Excel (``.xlsx``): the first worksheet; numbers keep their exact value, dates become
  ``YYYY-MM-DD``, TRUE/FALSE become yes/no.
- Row numbers are spreadsheet rows: the header is row 1, the first record row 2. Blank rows are
  skipped but still counted, so the numbers match what the reviewer sees.
- Header names are matched without regard to case or surrounding spaces.
- The delimiter of a CSV file is detected from its header row (comma, semicolon, tab or bar;
  ``--delimiter`` chooses it); a UTF-16 file with a byte-order mark is read as UTF-16; a file
  whose first bytes show it is a workbook, a PDF or an archive is refused with what it is.
- An ``.xlsx`` workbook: the worksheet named with ``--sheet``, else the first whose header row
  holds extraction-sheet columns, else the first; the notes name the worksheet read.
- A file with a header row and no data rows is refused (there is nothing to import).
"""

from __future__ import annotations

import codecs
import datetime as dt
import io
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from exposhift.errors import InputFileError, Problem
from exposhift.io.limits import RowCounter, check_csv_shape, check_text_cells, check_xlsx_size
from exposhift.io.problems import ProblemLog
from exposhift.io.signature import KINDS, sniff, wrong_kind_message

SHEET_SUFFIXES = (".csv", ".xlsx")
DEFAULT_ENCODING = "utf-8-sig"


@dataclass
class RawSheet:
    """Cells as stripped strings (``""`` when blank) under normalised header names."""

    file: str
    frame: pd.DataFrame
    rows: np.ndarray  # spreadsheet row number of each frame row
    notes: list[str] = field(default_factory=list)  # how the file was read (delimiter, sheet)

    def __len__(self) -> int:
        return len(self.frame)


def read_text(path: Path, encoding: str | None) -> str:
    """The file's text; a decoding failure names the row and the ``--encoding`` option."""
    enc = encoding or DEFAULT_ENCODING
    try:
        codecs.lookup(enc)
    except LookupError:
        raise InputFileError(
            [
                Problem(
                    path.name,
                    None,
                    None,
                    f"unknown encoding '{enc}' given with --encoding; use "
                    "e.g. utf-8, latin-1, cp1252 or utf-16",
                )
            ]
        ) from None
    data = path.read_bytes()
    if enc.lower().replace("_", "-") in ("utf-8", "utf8"):
        enc = DEFAULT_ENCODING  # a BOM is never part of the first header name
    try:
        return data.decode(enc)
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        shown = "UTF-8 (with or without BOM)" if encoding is None else f"'{enc}'"
        raise InputFileError(
            [
                Problem(
                    path.name,
                    line,
                    None,
                    f"the file is not valid {shown} text (byte 0x{data[exc.start]:02x} at position "
                    f"{exc.start}); save it as UTF-8, or name its encoding with --encoding (e.g. "
                    "--encoding latin-1 or --encoding cp1252)",
                )
            ]
        ) from None


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
            problems.append(
                Problem(
                    name, 1, None, f"column {i + 1} has values but no header; name it or delete it"
                )
            )
    seen: dict[str, int] = {}
    for i in keep_cols:
        if header[i] in seen:
            problems.append(
                Problem(
                    name,
                    1,
                    header[i],
                    f"the column appears twice (columns {seen[header[i]] + 1} "
                    f"and {i + 1}); keep one",
                )
            )
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


#: delimiters a CSV file may use, and the names --delimiter accepts for them
DELIMITERS = {",": ",", ";": ";", "\t": "\t", "tab": "\t", "|": "|"}
DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", "|": "bar"}


def _header_line(text: str) -> str:
    for line in text.splitlines():
        if line.strip():
            return line
    return ""


def detect_delimiter(text: str, given: str | None, file: str) -> tuple[str, str | None]:
    """The delimiter to read ``text`` with, and a note saying which was used (None: comma,
    detected). Detection counts each candidate in the header row outside quotes; the most
    frequent wins, a comma when none occurs (common practice, as Python's csv.Sniffer does
    with a restricted set of delimiters)."""
    if given is not None:
        sep = DELIMITERS.get(given.lower() if len(given) > 1 else given)
        if sep is None:
            raise InputFileError(
                [
                    Problem(
                        file,
                        None,
                        None,
                        f"unknown delimiter {given!r} given with --delimiter; "
                        "use one of: ',' ';' '|' or tab",
                    )
                ]
            )
        return sep, f"read with the delimiter given: {DELIMITER_NAMES[sep]} ({sep!r})"
    header = re.sub(r'"[^"]*"', "", _header_line(text))
    counts = {d: header.count(d) for d in DELIMITER_NAMES}
    sep = max(counts, key=lambda d: (counts[d], d == ","))
    if counts[sep] == 0 or sep == ",":
        return ",", None
    return sep, (
        f"read as {DELIMITER_NAMES[sep]}-separated ({sep!r} detected in the header "
        "row); use --delimiter to choose another"
    )


def read_csv_sheet(
    path: Path, encoding: str | None = None, delimiter: str | None = None
) -> RawSheet:
    check_csv_shape(path)  # size, columns and cells, before the file is parsed
    notes: list[str] = []
    if encoding is None and sniff(path) == "utf-16":
        encoding = "utf-16"
        notes.append("read as UTF-16 text (the file starts with a UTF-16 byte-order mark)")
    text = read_text(path, encoding)
    if not text.strip():
        raise InputFileError(
            [
                Problem(
                    path.name,
                    None,
                    None,
                    "the file is empty; it needs a header row and one row per "
                    "estimate (see docs/extraction-sheet.md)",
                )
            ]
        )
    sep, note = detect_delimiter(text, delimiter, path.name)
    if note:
        notes.append(note)
    try:
        raw = pd.read_csv(
            io.StringIO(text),
            header=None,
            dtype=str,
            keep_default_na=False,
            na_filter=False,
            skip_blank_lines=False,
            engine="c",
            sep=sep,
        )
    except pd.errors.ParserError as exc:
        m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(exc))
        if m:
            raise InputFileError(
                [
                    Problem(
                        path.name,
                        int(m.group(2)),
                        None,
                        f"this row has {m.group(3)} cells but the header has {m.group(1)}; "
                        "remove the extra cells (or quote text that contains commas)",
                    )
                ]
            ) from None
        raise InputFileError(
            [Problem(path.name, None, None, f"cannot read the file as CSV ({exc}); check quoting")]
        ) from None
    header = raw.iloc[0].tolist()
    sheet = _frame_from_rows(path.name, header, raw.iloc[1:].reset_index(drop=True))
    sheet.notes.extend(notes)
    return sheet


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


def _looks_like_sheet(ws) -> bool:
    """True when the worksheet's first row names at least two extraction-sheet columns."""
    from exposhift.io.columns import COLUMN_NAMES

    for row in ws.iter_rows(values_only=True, max_row=1):
        names = {re.sub(r"\s+", " ", str(v or "")).strip().lower() for v in row}
        return len(names & set(COLUMN_NAMES)) >= 2
    return False


def select_worksheet(wb, name: str | None, file: str) -> tuple[object, str | None]:
    """The worksheet to read and a note naming it and the others (None: a one-sheet book).

    ``name`` (``--sheet``) picks one by name (case-insensitive); otherwise the first worksheet
    whose header row holds extraction-sheet columns, or the first worksheet.
    """
    names = list(wb.sheetnames)
    if name is not None:
        match = [n for n in names if n.strip().lower() == name.strip().lower()]
        if not match:
            raise InputFileError(
                [
                    Problem(
                        file,
                        None,
                        None,
                        f"no worksheet {name!r} in the workbook; its "
                        f"worksheets are: {', '.join(names)}",
                    )
                ]
            )
        ws = wb[match[0]]
    else:
        ws = next((w for w in wb.worksheets if _looks_like_sheet(w)), wb.worksheets[0])
    if len(names) == 1:
        return ws, None
    others = ", ".join(repr(n) for n in names if n != ws.title)
    return ws, (
        f"read worksheet {ws.title!r}; the workbook also has {others} "
        "(choose one with --sheet NAME)"
    )


def read_xlsx_sheet(path: Path, sheet: str | None = None) -> RawSheet:
    from openpyxl import load_workbook
    from openpyxl.utils.exceptions import InvalidFileException

    check_xlsx_size(path)
    try:
        wb = load_workbook(path, read_only=True, data_only=False)
    except (InvalidFileException, zipfile.BadZipFile, OSError, KeyError, ValueError) as exc:
        raise InputFileError(
            [
                Problem(
                    path.name,
                    None,
                    None,
                    f"cannot read the file as an Excel workbook ({exc}); save "
                    "it as .xlsx or as CSV",
                )
            ]
        ) from None
    counter = RowCounter(path.name)
    try:
        ws, note = select_worksheet(wb, sheet, path.name)
        rows, formulas = _xlsx_rows(ws, counter)
    finally:
        wb.close()
    if formulas:
        raise InputFileError(
            [
                Problem(
                    path.name,
                    r,
                    h or f"column {c}",
                    "the cell holds a formula; paste its value (Paste "
                    "Special > Values) and save again",
                )
                for r, c, h in _formula_places(formulas, rows)
            ]
        )
    if not rows:
        raise InputFileError(
            [
                Problem(
                    path.name,
                    None,
                    None,
                    f"the worksheet {ws.title!r} is empty; it needs a header row",
                )
            ]
        )
    width = max(len(r) for r in rows)
    rows = [r + [""] * (width - len(r)) for r in rows]
    body = pd.DataFrame(rows[1:], columns=range(width), dtype="str")
    out = _frame_from_rows(path.name, rows[0], body)
    if note:
        out.notes.append(note)
    return out


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
    return [
        (r, c, header[c - 1] if c - 1 < len(header) and r > 1 else "") for r, c in formulas[:50]
    ]


def check_signature(path: Path, suffix: str) -> None:
    """Refuse a file whose first bytes say it is something else than its name says."""
    kind = sniff(path)
    expected = "csv" if suffix == ".csv" else "xlsx"
    if suffix == ".csv" and kind in KINDS:
        raise InputFileError(
            [Problem(path.name, None, None, wrong_kind_message(path, kind, expected))]
        )
    if suffix == ".xlsx" and kind != "xlsx":
        if kind in KINDS:
            msg = wrong_kind_message(path, kind, expected)
        else:
            msg = (
                "cannot read the file as an Excel workbook: it is not an .xlsx workbook (it "
                "looks like text, perhaps CSV); rename it to .csv and import it again"
            )
        raise InputFileError([Problem(path.name, None, None, msg)])


def require_data_rows(sheet: RawSheet) -> RawSheet:
    """Refuse a sheet with a header row and no data rows: there is nothing to import."""
    if len(sheet) == 0:
        raise InputFileError(
            [
                Problem(
                    sheet.file,
                    None,
                    None,
                    "the file has a header row but no data rows; add one row "
                    "per estimate (see docs/extraction-sheet.md)",
                )
            ]
        )
    return sheet


def read_sheet(
    path: str | Path,
    encoding: str | None = None,
    *,
    delimiter: str | None = None,
    sheet: str | None = None,
) -> RawSheet:
    """Read a ``.csv`` or ``.xlsx`` extraction sheet (``delimiter``: CSV only; ``sheet``: the
    worksheet of a workbook)."""
    path = Path(path)
    if not path.is_file():
        raise InputFileError(
            [Problem(path.name, None, None, f"no such file: {path}; check the path")]
        )
    suffix = path.suffix.lower()
    if suffix in SHEET_SUFFIXES:
        check_signature(path, suffix)
    if suffix == ".csv":
        return require_data_rows(read_csv_sheet(path, encoding, delimiter))
    if suffix == ".xlsx":
        return require_data_rows(read_xlsx_sheet(path, sheet))
    kind = sniff(path)
    what = (
        f"this file is {KINDS[kind][0]}; {KINDS[kind][1]}"
        if kind in KINDS
        else (f"cannot import '{suffix or path.name}' files")
    )
    raise InputFileError(
        [Problem(path.name, None, None, f"{what}; use .csv, .xlsx or an exposhift .json export")]
    )
