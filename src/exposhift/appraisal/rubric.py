"""The appraisal rubric: a committee-owned TOML file, loaded into frozen dataclasses.

The rubric is data, not code (METHODS.md §2), so a committee can adapt wording, criteria, the
summary rule and the suggestion rules without touching the program. Every appraisal stores the
rubric id, its declared version and its content hash, so an old appraisal can always be traced
to the exact text it was made with.

Content hash
    ``sha256`` of the file bytes after two normalisations, so that the same rubric checked out
    on Windows and on Linux hashes alike: a leading UTF-8 byte-order mark is removed, and line
    endings are made LF (``\\r\\n`` and lone ``\\r`` both become ``\\n``). Nothing else is
    normalised: any other change to the bytes, including a comment or trailing space, gives a
    new hash. The declared ``version`` is the committee's name for a release; the hash is the
    safety net when someone edits the text and forgets to raise it.

Where the rubric comes from
    The rubric in force is a record of the evidence base (``exposhift method show``; services
    read it through :func:`exposhift.services.workspace.open_workspace`). ``load_rubric(path)``
    reads a file (``exposhift method set rubric FILE`` and the one-run ``--rubric FILE``);
    :func:`rubric_from_bytes` checks stored text. ``load_rubric()`` without a path gives the copy
    packaged with exposhift (``exposhift/data/rubric.toml``, identical to the repository's
    ``evidence/rubric.toml``): what ``exposhift init`` stores in a new evidence base. Nothing is
    read from the working folder.

Errors
    Any problem raises :class:`~exposhift.errors.RubricError` naming the file, the line and what
    to change. Syntax errors take their line from ``tomllib``; problems found after parsing (a
    missing domain, a level outside 0-3, an unknown key) take it from
    :class:`~exposhift.appraisal.toml_lines.TomlLines`.
"""

from __future__ import annotations

import functools
import hashlib
import re
import tomllib
from importlib import resources
from pathlib import Path

from exposhift.appraisal.rubric_check import build_rubric_parts
from exposhift.appraisal.rubric_types import (
    DOMAIN_KEYS,
    LEVELS,
    DesignCriteria,
    Domain,
    LevelDef,
    ReportingDef,
    Rubric,
    SuggestRule,
)
from exposhift.appraisal.toml_lines import TomlLines
from exposhift.errors import RubricError

__all__ = [
    "DOMAIN_KEYS",
    "LEVELS",
    "DesignCriteria",
    "Domain",
    "LevelDef",
    "ReportingDef",
    "Rubric",
    "SuggestRule",
    "default_rubric_path",
    "load_rubric",
    "normalise_bytes",
    "packaged_rubric_path",
    "rubric_from_bytes",
    "rubric_hash",
]


def normalise_bytes(data: bytes) -> bytes:
    """Drop a UTF-8 byte-order mark and make every line ending LF (see the module docstring)."""
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    return data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")


def rubric_hash(data: bytes) -> str:
    """sha256 hex digest of the rubric bytes after :func:`normalise_bytes`."""
    return hashlib.sha256(normalise_bytes(data)).hexdigest()


def packaged_rubric_path() -> Path:
    return Path(str(resources.files("exposhift") / "data" / "rubric.toml"))


def default_rubric_path() -> Path:
    """The packaged rubric (the working folder is never read: the method lives in the base)."""
    return packaged_rubric_path()


_AT = re.compile(r"^(?P<msg>.*?)\s*\(at line (?P<line>\d+), column (?P<col>\d+)\)$", re.S)


def _syntax_error(label: str, text: str, exc: tomllib.TOMLDecodeError) -> RubricError:
    message = str(exc)
    m = _AT.match(message)
    if m:
        where = f"line {m['line']}, column {m['col']}"
        problem = m["msg"]
    else:
        lines = TomlLines(text)
        line = lines.unclosed_line or lines.duplicate_line or lines.last_line
        where = f"line {line}"
        problem = message.replace(" (at end of document)", "")
        if lines.unclosed_line:
            problem += " (the value that starts here is never closed)"
    return RubricError(
        f"{label}, {where}: TOML syntax error: {problem}; fix the file there and load it again"
    )


@functools.lru_cache(maxsize=16)
def _parse(label: str, data: bytes) -> tuple:
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise RubricError(
            f"{label}, line {line}: the file is not UTF-8 text; save it as UTF-8"
        ) from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _syntax_error(label, text, exc) from None
    return text, build_rubric_parts(raw, TomlLines(text), label)


def load_rubric(path: str | Path | None = None) -> Rubric:
    """Load and check a rubric file; ``None`` uses :func:`default_rubric_path`.

    Raises :class:`RubricError` naming the file and line of the first problem found.
    """
    file = Path(path) if path is not None else default_rubric_path()
    label = str(file)
    try:
        data = file.read_bytes()
    except FileNotFoundError:
        raise RubricError(
            f"rubric file not found: {label}; give the path of an existing rubric.toml"
        ) from None
    except OSError as exc:
        raise RubricError(f"cannot read the rubric file {label}: {exc.strerror}") from None
    return rubric_from_bytes(data, label, path=file)


def rubric_from_bytes(data: bytes, label: str, *, path: Path | None = None) -> Rubric:
    """Check rubric text (as stored in the evidence base or read from a file).

    ``label`` names the source in errors (a file path, or ``rubric version 3 of the evidence
    base``). Raises :class:`RubricError` naming the line of the first problem found.
    """
    data = normalise_bytes(data)
    text, parts = _parse(label, data)
    return Rubric(
        content_hash=hashlib.sha256(data).hexdigest(),
        path=path,
        text=text,
        **parts,
    )
