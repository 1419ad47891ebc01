"""The one number formatter of the command line: every figure a command prints goes through
:func:`number`, so missing values, digits and large values read the same everywhere."""

from __future__ import annotations

import math
from typing import Any


def is_missing(x: Any) -> bool:
    """None or NaN."""
    return x is None or (isinstance(x, float) and math.isnan(x))


def number(
    x: Any,
    digits: int = 3,
    *,
    style: str = "fixed",
    missing: str = "n/a",
    large: float = math.inf,
) -> str:
    """``x`` as text.

    ``style``: "fixed" (``digits`` decimals), "significant" (``digits`` significant digits,
    scientific below 0.001; booleans as yes/no, other values as they are). A value whose size
    is at least ``large`` is shown with ``digits`` significant digits ("fixed" with
    ``digits=0`` shows it without decimals). ``missing`` is the text of None/NaN.
    """
    if is_missing(x):
        return missing
    if style == "significant":
        if isinstance(x, bool):
            return "yes" if x else "no"
        if isinstance(x, float):
            return f"{x:.{digits}g}" if abs(x) >= 1e-3 or x == 0 else f"{x:.2e}"
        return str(x)
    if abs(x) >= large:
        return f"{x:.{digits}g}" if digits else f"{x:.0f}"
    return f"{x:.{digits}f}"
