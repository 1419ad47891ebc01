"""One typed exception hierarchy for every user-facing error.

The CLI turns any :class:`ExposhiftError` into a single line ``error: ...`` on stderr and a
non-zero exit; the dashboard shows it with ``st.error``. Messages say what is wrong *and* what
to do about it. Programming errors are not wrapped: they should surface as tracebacks.
"""

from __future__ import annotations

from dataclasses import dataclass


class ExposhiftError(Exception):
    """Base class: a problem the user can fix."""

    exit_code = 1


class ConfigError(ExposhiftError):
    """A bad option, setting or database URL."""

    exit_code = 2


class DatabaseError(ExposhiftError):
    """The database cannot be reached, opened, written or is at an unknown schema revision."""

    exit_code = 3


class ConflictError(ExposhiftError):
    """An edit was based on a stale version of a row (optimistic locking); nothing was changed."""

    exit_code = 4


class NotFoundError(ExposhiftError):
    """A named study, event, exposure, outcome or appraisal does not exist."""

    exit_code = 5


class VocabularyError(ExposhiftError):
    """A code that is not in a controlled vocabulary."""

    exit_code = 2


class RubricError(ExposhiftError):
    """The rubric file is malformed or a rating does not fit it."""

    exit_code = 2


class AnalysisError(ExposhiftError):
    """Inputs that a statistical computation cannot accept (e.g. a non-positive variance)."""

    exit_code = 2


class ReviewError(ExposhiftError):
    """A dual-review rule was broken (blinding, duplicate appraisal, consensus too early)."""

    exit_code = 6


@dataclass(frozen=True)
class Problem:
    """One problem found in an input file: where it is and what to do."""

    file: str
    row: int | None  # 1-based spreadsheet row number (the header is row 1); None: whole file
    column: str | None
    message: str

    def __str__(self) -> str:
        where = self.file
        if self.row is not None:
            where += f", row {self.row}"
        if self.column:
            where += f", column '{self.column}'"
        return f"{where}: {self.message}"


class InputFileError(ExposhiftError):
    """One or more problems in an input file. Nothing was written.

    ``problems`` holds every problem found in one pass, so a reviewer can fix them all at once.
    """

    exit_code = 2

    def __init__(self, problems: list[Problem], *, limit: int = 50):
        self.problems = list(problems)
        n = len(self.problems)
        shown = "\n".join(f"  {p}" for p in self.problems[:limit])
        more = f"\n  ... and {n - limit} more" if n > limit else ""
        head = f"{n} problem{'s' if n != 1 else ''} found; nothing was written"
        super().__init__(f"{head}:\n{shown}{more}")
