"""exposhift: an evidence base for natural-experiment studies of environmental exposures.

The public computing functions are importable from the top level; they are loaded lazily so
that ``import exposhift`` stays fast for the CLI.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

_LAZY = {
    "pool": "exposhift.synthesis.pooling",
    "PoolResult": "exposhift.synthesis.pooling",
    "pool_groups": "exposhift.synthesis.grouped",
    "score_appraisal": "exposhift.appraisal.scoring",
    "weighted_kappa": "exposhift.appraisal.agreement",
    "load_rubric": "exposhift.appraisal.rubric",
    "e_value": "exposhift.synthesis.evalue",
    "EValue": "exposhift.synthesis.evalue",
}

__all__ = ["__version__", *_LAZY]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'exposhift' has no attribute {name!r}")
