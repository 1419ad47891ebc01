"""Collecting every problem of an input file in one pass.

Checks are vectorised: each one computes a boolean mask over all rows at once, and only the rows
that fail are turned into :class:`~exposhift.errors.Problem`\\ s (with their spreadsheet row
number, the column and what to do).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd

from exposhift.errors import InputFileError, Problem

Message = str | Callable[[int], str]


class ProblemLog:
    """Problems found in one file (or one section of a file).

    ``rows`` maps a frame position (0, 1, ...) to the row number shown to the user: the
    spreadsheet row (header = row 1) for sheets, the position in the list for JSON sections.
    """

    def __init__(self, file: str, rows: Sequence[int] | np.ndarray | None = None):
        self.file = file
        self.rows = np.asarray(rows if rows is not None else [], dtype=np.int64)
        self.problems: list[Problem] = []

    def at(self, file: str, rows: Sequence[int] | np.ndarray) -> ProblemLog:
        """A log for another section that shares this log's problem list."""
        child = ProblemLog(file, rows)
        child.problems = self.problems
        return child

    def add(self, row: int | None, column: str | None, message: str) -> None:
        self.problems.append(Problem(self.file, row, column, message))

    def flag(self, mask, column: str | None, message: Message) -> int:
        """Record a problem for every position where ``mask`` is true; returns how many.

        ``message`` is a string, or a function of the frame position (for messages that quote
        the cell or name another row).
        """
        arr = np.asarray(mask, dtype=bool)
        positions = np.flatnonzero(arr)
        for pos in positions:
            text = message(int(pos)) if callable(message) else message
            self.problems.append(Problem(self.file, int(self.rows[pos]), column, text))
        return len(positions)

    def __bool__(self) -> bool:
        return bool(self.problems)

    def raise_if_any(self) -> None:
        if self.problems:
            raise InputFileError(sorted_problems(self.problems))


def sorted_problems(problems: Sequence[Problem]) -> list[Problem]:
    """Problems in file order: by file, then row (whole-file problems first), then column."""
    from exposhift.io.columns import COLUMN_NAMES

    order = {name: i for i, name in enumerate(COLUMN_NAMES)}

    def key(p: Problem):
        return (p.file, -1 if p.row is None else p.row, order.get(p.column or "", 999))

    return sorted(problems, key=key)


def quote(value) -> str:
    """A cell value as shown in a message (shortened when long)."""
    text = str(value)
    if len(text) > 60:
        text = text[:57] + "..."
    return repr(text)


def present(series: pd.Series) -> np.ndarray:
    """Mask of non-missing values."""
    return series.notna().to_numpy()
