"""What every command shares: the global options and the one-line error convention."""

from __future__ import annotations

import functools
import json
import sys
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, TypeVar

import typer

from exposhift.errors import ExposhiftError

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
