"""Limits on input files, checked before a file is parsed into memory, and the text-cell rules.

Every limit has a default and an environment variable to change it (a committee with a very
wide sheet raises one limit, not the code):

=====================  ==============================  =========================================
limit                  environment variable            default
=====================  ==============================  =========================================
columns in a sheet     ``EXPOSHIFT_MAX_COLUMNS``       500
cells in a file        ``EXPOSHIFT_MAX_CELLS``         20,000,000 (rows x columns)
characters in a cell   ``EXPOSHIFT_MAX_CELL_CHARS``    100,000
file size              ``EXPOSHIFT_MAX_FILE_MB``       512 (MB, 2**20 bytes); also the
                                                       uncompressed size of an .xlsx
JSON nesting depth     ``EXPOSHIFT_MAX_JSON_DEPTH``    32 (an archive needs 5)
=====================  ==============================  =========================================

The file size is checked with ``stat`` before anything is read; a CSV's columns are counted on
its first line and its cells from its line count (read in 1 MB blocks), before pandas parses
it; an .xlsx's uncompressed size is read from its zip directory and its columns from each row
as openpyxl streams it; a JSON archive's depth is measured on its text before ``json.loads``.

Text cells may not hold control characters other than tab, line feed and carriage return, nor
unpaired surrogates: XML 1.0 (and so .xlsx) cannot hold them, and a value that cannot be
exported to every format is refused at import, with its row and column, rather than stored.
"""

from __future__ import annotations

import os
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from exposhift.errors import ConfigError, InputFileError, Problem

#: (attribute, environment variable, default, unit shown in messages)
_SETTINGS = (
    ("max_columns", "EXPOSHIFT_MAX_COLUMNS", 500),
    ("max_cells", "EXPOSHIFT_MAX_CELLS", 20_000_000),
    ("max_cell_chars", "EXPOSHIFT_MAX_CELL_CHARS", 100_000),
    ("max_file_mb", "EXPOSHIFT_MAX_FILE_MB", 512),
    ("max_json_depth", "EXPOSHIFT_MAX_JSON_DEPTH", 32),
)
_BLOCK = 1 << 20

#: characters XML 1.0 cannot hold (the set openpyxl refuses), DEL, and lone surrogates
CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f\ud800-\udfff]")


@dataclass(frozen=True)
class Limits:
    max_columns: int = 500
    max_cells: int = 20_000_000
    max_cell_chars: int = 100_000
    max_file_mb: int = 512
    max_json_depth: int = 32

    @property
    def max_file_bytes(self) -> int:
        return self.max_file_mb * (1 << 20)


def current_limits() -> Limits:
    """The limits in force: defaults, overridden by the environment variables above."""
    values = {}
    for attr, env, default in _SETTINGS:
        raw = os.environ.get(env)
        if raw is None or raw.strip() == "":
            values[attr] = default
            continue
        try:
            n = int(raw.strip().replace("_", ""))
        except ValueError:
            n = 0
        if n < 1:
            raise ConfigError(
                f"{env}={raw!r} is not a positive whole number; unset it to use "
                f"the default ({default:,}) or give e.g. {env}={default}"
            )
        values[attr] = n
    return Limits(**values)


def _refuse(file: str, message: str, row: int | None = None, column: str | None = None):
    raise InputFileError([Problem(file, row, column, message)])


def check_file_size(path: Path, limits: Limits | None = None) -> None:
    """Refuse a file larger than the limit, before reading it."""
    limits = limits or current_limits()
    size = path.stat().st_size
    if size > limits.max_file_bytes:
        _refuse(
            path.name,
            f"the file is {size / (1 << 20):,.1f} MB, over the limit of "
            f"{limits.max_file_mb:,} MB; split it, or raise EXPOSHIFT_MAX_FILE_MB",
        )


def _first_line(path: Path, limit_bytes: int) -> bytes:
    """The file's first line (without reading further than needed, at most ``limit_bytes``)."""
    parts: list[bytes] = []
    got = 0
    with open(path, "rb") as fh:
        while got < limit_bytes:
            block = fh.read(_BLOCK)
            if not block:
                break
            end = block.find(b"\n")
            if end >= 0:
                parts.append(block[:end])
                break
            parts.append(block)
            got += len(block)
    return b"".join(parts)


_QUOTED = re.compile(rb'"[^"]*"')


def header_columns(line: bytes) -> int:
    """Columns of a header line: separators outside double quotes, plus one (the largest count
    over comma, semicolon and tab, so that no delimiter slips past the limit)."""
    bare = _QUOTED.sub(b"", line)
    return 1 + max(bare.count(sep) for sep in (b",", b";", b"\t"))


def _line_count(path: Path) -> int:
    n = 0
    last = b""
    with open(path, "rb") as fh:
        while block := fh.read(_BLOCK):
            n += block.count(b"\n")
            last = block
    return n + (1 if last and not last.endswith(b"\n") else 0)


def check_csv_shape(path: Path, limits: Limits | None = None) -> None:
    """Refuse a CSV over the size, column or cell limit before it is parsed."""
    limits = limits or current_limits()
    check_file_size(path, limits)
    columns = header_columns(_first_line(path, limits.max_file_bytes))
    if columns > limits.max_columns:
        _refuse(
            path.name,
            f"the header has {columns:,} columns, over the limit of "
            f"{limits.max_columns:,}; an extraction sheet has fewer than 60 (see "
            "docs/extraction-sheet.md). Remove the extra columns, or raise "
            "EXPOSHIFT_MAX_COLUMNS",
            row=1,
        )
    cells = columns * _line_count(path)
    if cells > limits.max_cells:
        _refuse(
            path.name,
            f"the file has about {cells:,} cells, over the limit of "
            f"{limits.max_cells:,}; split it, or raise EXPOSHIFT_MAX_CELLS",
        )


def check_xlsx_size(path: Path, limits: Limits | None = None) -> None:
    """Refuse an .xlsx whose file or uncompressed content is over the size limit."""
    limits = limits or current_limits()
    check_file_size(path, limits)
    try:
        with zipfile.ZipFile(path) as z:
            inflated = sum(i.file_size for i in z.infolist())
    except (zipfile.BadZipFile, OSError):
        return  # the workbook reader reports what is wrong with the file
    if inflated > limits.max_file_bytes:
        _refuse(
            path.name,
            f"the workbook unpacks to {inflated / (1 << 20):,.1f} MB, over the "
            f"limit of {limits.max_file_mb:,} MB; split it, or raise EXPOSHIFT_MAX_FILE_MB",
        )


class RowCounter:
    """Counts a streamed workbook's cells and refuses a row over the column or cell limit."""

    def __init__(self, file: str, limits: Limits | None = None):
        self.file = file
        self.limits = limits or current_limits()
        self.cells = 0

    def check(self, row_number: int, width: int) -> None:
        if width > self.limits.max_columns:
            _refuse(
                self.file,
                f"row {row_number} has {width:,} cells, over the limit of "
                f"{self.limits.max_columns:,} columns; remove the extra columns, or raise "
                "EXPOSHIFT_MAX_COLUMNS",
                row=row_number,
            )
        self.cells += width
        if self.cells > self.limits.max_cells:
            _refuse(
                self.file,
                f"the worksheet has over {self.limits.max_cells:,} cells; split "
                "it, or raise EXPOSHIFT_MAX_CELLS",
                row=row_number,
            )


_STRINGS = re.compile(rb'"(?:[^"\\]|\\.)*"')
_OPEN = np.array([ord("["), ord("{")], dtype=np.uint8)
_CLOSE = np.array([ord("]"), ord("}")], dtype=np.uint8)


def json_depth(data: bytes) -> int:
    """The deepest nesting of arrays and objects in JSON text (strings are skipped), computed
    in blocks with numpy so that neither a huge nor a deeply nested file costs much."""
    bare = _STRINGS.sub(b"", data)
    depth = best = 0
    for start in range(0, len(bare), 4 * _BLOCK):
        arr = np.frombuffer(
            bare, dtype=np.uint8, count=min(4 * _BLOCK, len(bare) - start), offset=start
        )
        step = np.isin(arr, _OPEN).astype(np.int32) - np.isin(arr, _CLOSE).astype(np.int32)
        if not step.any():
            continue
        run = np.cumsum(step) + depth
        best = max(best, int(run.max()))
        depth = int(run[-1])
    return best


def check_json_depth(data: bytes, file: str, limits: Limits | None = None) -> None:
    limits = limits or current_limits()
    depth = json_depth(data)
    if depth > limits.max_json_depth:
        _refuse(
            file,
            f"the JSON is nested {depth:,} levels deep, over the limit of "
            f"{limits.max_json_depth:,} (an exposhift archive needs 5); this is not an "
            "exposhift export. Export the evidence base again, or raise "
            "EXPOSHIFT_MAX_JSON_DEPTH",
        )


# ---------------------------------------------------------------------------- text cells
def text_problem(value: str, limits: Limits) -> str | None:
    """Why one text value may not be stored (None when it may)."""
    if len(value) > limits.max_cell_chars:
        return (
            f"the cell holds {len(value):,} characters, over the limit of "
            f"{limits.max_cell_chars:,}; shorten it, or raise EXPOSHIFT_MAX_CELL_CHARS"
        )
    m = CONTROL.search(value)
    if m:
        return (
            f"the cell holds the control character U+{ord(m.group()):04X} at position "
            f"{m.start() + 1}; remove it (spreadsheets and XML cannot hold it)"
        )
    return None


def check_text_cells(frame: pd.DataFrame, log, limits: Limits | None = None) -> None:
    """Flag every text cell over the length limit or holding a control character.

    ``log`` is a :class:`~exposhift.io.problems.ProblemLog` whose rows match ``frame``'s.
    """
    limits = limits or current_limits()
    for col in frame.columns:
        s = frame[col]
        if s.dtype != object and str(s.dtype) != "str":
            continue
        text = s.fillna("").astype("str")
        lengths = text.str.len()
        # one search over the whole column first: most columns are clean
        if not len(text) or (
            lengths.max() <= limits.max_cell_chars and not CONTROL.search("\n".join(text.tolist()))
        ):
            continue
        vals = text.tolist()  # Python's re: pyarrow's regex cannot hold lone surrogates
        bad = np.array([text_problem(v, limits) is not None for v in vals], dtype=bool)
        if bad.any():
            log.flag(bad, str(col), lambda i, v=vals: text_problem(v[i], limits))
