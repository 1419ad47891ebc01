"""Shared data for the synthesis tests: the sourced check values and a seeded group generator.

``CHECKS`` holds tests/data/meta_checks.json (copied from ../shared/reference): each value has
its source, status and a suggested tolerance, which the tests use unless they say otherwise.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd

DATA = Path(__file__).resolve().parents[1] / "data" / "meta_checks.json"
CHECKS = json.loads(DATA.read_text(encoding="utf-8"))
KACKER = CHECKS["datasets"]["kacker_interlab"]
KACKER_Y = np.array(KACKER["yi"], dtype=float)
KACKER_V = np.array(KACKER["vi"], dtype=float)


def check(group: str, quantity: str) -> tuple[float, float]:
    """(expected, suggested_abs_tol) of one check value, looked up by its 'quantity' text."""
    for item in CHECKS["checks"][group]:
        if item["quantity"] == quantity:
            return float(item["expected"]), float(item["suggested_abs_tol"])
    raise KeyError(f"no check '{quantity}' in group '{group}'")


def random_groups(n_groups: int, k_min: int, k_max: int, seed: int) -> pd.DataFrame:
    """Seeded groups of estimates from a random-effects model with varied τ² (0 for some)."""
    rng = np.random.default_rng(seed)
    ks = rng.integers(k_min, k_max + 1, n_groups)
    g = np.repeat(np.arange(n_groups), ks)
    n = g.size
    tau = rng.choice([0.0, 0.05, 0.2, 0.6], n_groups)
    v = rng.uniform(0.005, 0.4, n)
    mu = rng.normal(0.0, 0.5, n_groups)
    y = mu[g] + rng.normal(0.0, 1.0, n) * tau[g] + rng.normal(0.0, 1.0, n) * np.sqrt(v)
    return pd.DataFrame({"group": g, "y": y, "v": v})


def restricted_nll(y: np.ndarray, v: np.ndarray, tau2: float, X: np.ndarray | None = None) -> float:
    """Negative restricted log-likelihood written out from its definition, for scipy to minimise.

    −ℓ_R = ½[log|V| + log|X'V⁻¹X| + (y − Xβ̂)'V⁻¹(y − Xβ̂)] with V = diag(v + τ²) (Harville 1977,
    JASA 72:320; Viechtbauer 2005, J Educ Behav Stat 30:261, eq. 11). Written independently of
    the library (plain linear algebra) so it can serve as a second route.
    """
    if X is None:
        X = np.ones((y.size, 1))
    Vinv = np.diag(1.0 / (v + tau2))
    A = X.T @ Vinv @ X
    beta = np.linalg.solve(A, X.T @ Vinv @ y)
    r = y - X @ beta
    return 0.5 * (np.sum(np.log(v + tau2)) + np.linalg.slogdet(A)[1] + r @ Vinv @ r)
