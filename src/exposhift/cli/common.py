"""What every command shares: the global options and the one-line error convention."""

from __future__ import annotations

import contextlib
import functools
import json
import sys
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

import typer

from exposhift.errors import ExposhiftError

if TYPE_CHECKING:  # pragma: no cover
    from exposhift.services.workspace import Workspace

F = TypeVar("F", bound=Callable[..., Any])


@dataclass
class Settings:
    db: str | None = None
    user: str | None = None
    db_given: bool = False  # --db typed on the command line (not only EXPOSHIFT_DB)


def settings(ctx: typer.Context) -> Settings:
    root = ctx.find_root()
    if not isinstance(root.obj, Settings):
        root.obj = Settings()
    return root.obj


@contextlib.contextmanager
def workspace(
    ctx: typer.Context, *, as_json: bool = False, **overrides: Path | None
) -> Iterator[Workspace]:
    """The evidence base of ``--db`` opened once, with the method it records.

    ``overrides`` (``rubric=FILE``, ``settings=FILE``) are one-run overrides. Their notes
    ``one-run override: ...`` are printed first: on stdout for text output, on stderr with
    ``as_json`` (JSON objects also carry them as a field, :func:`with_method`). The store is
    closed when the block ends.
    """
    from exposhift.services.workspace import open_workspace

    s = settings(ctx)
    given = {k: v for k, v in overrides.items() if v is not None}
    with open_workspace(s.db, s.user, overrides=given) as ws:
        for note in ws.overrides:
            typer.echo(note, err=as_json)
        yield ws


def with_method(value: Any, ws: Workspace) -> Any:
    """A JSON result with the method that produced it: the field ``method`` names each part's
    stored version and content hash (:meth:`MethodInForce.used`), and ``one_run_override``
    lists the one-run overrides when there were any."""
    if not isinstance(value, dict):
        return value
    out = {**value, "method": ws.method.used()}
    if ws.overrides:
        out["one_run_override"] = ws.overrides
    return out


def method_line(ws: Workspace) -> str:
    """The method of a text result in one line:
    ``method parts: rubric version 1 (1a2b3c4d5e6f), ...``."""
    return "method parts: " + ws.method.words() + " ('exposhift method show' gives them in full)"


def fail(message: str, code: int = 1) -> None:
    """Print one line ``error: ...`` on stderr and exit with ``code``."""
    typer.echo(f"error: {message}", err=True)
    raise typer.Exit(code)


def user_errors(func: F) -> F:
    """Turn an ExposhiftError into ``error: ...`` and its exit code; no traceback."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except ExposhiftError as exc:
            fail(str(exc), exc.exit_code)
        except KeyboardInterrupt:
            fail("interrupted; the transaction in progress was rolled back", 130)

    return wrapper  # type: ignore[return-value]


def print_json(value: Any) -> None:
    sys.stdout.write(json.dumps(value, indent=2, sort_keys=False, default=_json_default) + "\n")


def _json_default(value: Any) -> Any:
    import math

    import numpy as np

    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        v = float(value)
        return None if math.isnan(v) else v
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.ndarray):
        return value.tolist()
    return str(value)
