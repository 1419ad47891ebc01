"""Import warnings: values that are valid but probably entered on the wrong scale.

Unlike the checks of :mod:`exposhift.io.rules` these do not stop an import: the rows are
written as entered, each warning names the file, row and column and says what to check, and
the caller shows them after the import (``EvidenceFrames.warnings``). The same rows carry the
provenance flag ``se_implausible`` into every pool (:mod:`exposhift.synthesis.provenance`).

What an SE must be (docs/extraction-sheet.md, "Scale of an SE"): the SE on the analysis scale,
i.e. of log(ratio) for RR, OR, HR, IRR; of log(1 + p/100) for a percent change; in the units of
the estimate for RD, MD and SMD. Warnings:

* a ratio measure with an SE above :data:`~exposhift.synthesis.provenance.MAX_LOG_SE_RATIO`
  (a 95 % CI wider than a factor of 360): probably the SE of the ratio itself, or a percent;
* a percent change with an SE above :data:`~exposhift.synthesis.provenance.MAX_LOG_SE_PCT`:
  almost surely entered in percent points (read on the log scale, a variance up to 10⁴ too
  large); the message gives the value to enter instead, SE/(100 + p) (delta method);
* an SE that disagrees with the CI given on the same row by more than a factor of
  :data:`SE_CI_FACTOR` (the CI is used, the SE ignored, so the pool is not affected; the
  disagreement still points to a scale or copying error). Common practice thresholds.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from exposhift.io.problems import ProblemLog
from exposhift.synthesis.provenance import MAX_LOG_SE_PCT, MAX_LOG_SE_RATIO

RATIO_MEASURES = ("RR", "OR", "HR", "IRR")
#: an SE and the SE implied by the CI of the same row may differ by at most this factor
SE_CI_FACTOR = 2.0


def _col(t: pd.DataFrame, name: str, n: int) -> np.ndarray:
    if name not in t.columns:
        return np.full(n, np.nan)
    return pd.to_numeric(t[name], errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def _g(x: float) -> str:
    return f"{x:.3g}"


def _exp(x: float) -> float:
    """exp without an overflow warning for the huge SEs these messages are about."""
    return float(np.exp(min(float(x), 700.0)))


def _expm1(x: float) -> float:
    return float(np.expm1(min(float(x), 700.0)))


def check_plausible(t: pd.DataFrame, log: ProblemLog) -> int:
    """Record a warning in ``log`` for every implausible SE of the typed sheet ``t`` (sheet
    column names); returns how many. Rows with unreadable or out-of-range values have been
    refused before this runs."""
    n = len(t)
    if "measure" not in t.columns or "se" not in t.columns:
        return 0
    measure = t["measure"].fillna("").to_numpy(dtype=object)
    est, se = _col(t, "estimate", n), _col(t, "se", n)
    low, high = _col(t, "ci_low", n), _col(t, "ci_high", n)
    level = _col(t, "ci_level", n)
    level = np.where(np.isnan(level), 0.95, level)
    ratio = np.isin(measure, RATIO_MEASURES)
    pct = measure == "pct_change"
    count = 0
    with np.errstate(invalid="ignore"):
        wild_ratio = ratio & (se > MAX_LOG_SE_RATIO)
        wild_pct = pct & (se > MAX_LOG_SE_PCT)
    count += log.flag(
        wild_ratio,
        "se",
        lambda i: (
            f"SE {_g(se[i])} is implausibly large for the SE of log({measure[i]}) (a 95% CI wider "
            f"than a factor of {_g(_exp(2 * 1.96 * se[i]))}); the se column takes the SE on the "
            "log scale: if the paper gives the SE of the ratio itself or a percent, leave se blank "
            "and give the confidence limits instead. The value was imported as entered"
        ),
    )

    def pct_message(i: int) -> str:
        fix = se[i] / (100.0 + est[i]) if np.isfinite(est[i]) and est[i] > -100 else np.nan
        hint = f", or enter {_g(fix)} = SE/(100 + p)" if np.isfinite(fix) else ""
        return (
            f"SE {_g(se[i])} for a percent change is read on the log scale (the SE of "
            f"log(1 + p/100)), where it means a 95% CI from {_g(100 * _expm1(-1.96 * se[i]))}"
            f"% to +{_g(100 * _expm1(1.96 * se[i]))}%: it looks like an SE in percent "
            "points. Leave se blank and give the confidence limits (p ± 1.96·SE)"
            f"{hint}. The value was imported as entered"
        )

    count += log.flag(wild_pct, "se", pct_message)

    # an SE beside a CI that implies another SE (the CI is used)
    both = np.isfinite(low) & np.isfinite(high) & np.isfinite(se) & (se > 0) & (high > low)
    ok_log = ratio & (low > 0)
    ok_pct = pct & (low > -100)
    ident = ~ratio & ~pct
    usable = both & (ok_log | ok_pct | ident) & (level > 0) & (level < 1)
    if usable.any():
        with np.errstate(invalid="ignore", divide="ignore"):
            h_low = np.where(ratio, np.log(low), np.where(pct, np.log1p(low / 100.0), low))
            h_high = np.where(ratio, np.log(high), np.where(pct, np.log1p(high / 100.0), high))
            z = stats.norm.ppf((1.0 + np.where(usable, level, 0.95)) / 2.0)
            se_ci = (h_high - h_low) / (2.0 * z)
            factor = np.where(usable, np.maximum(se / se_ci, se_ci / se), 1.0)
        off = usable & ~wild_ratio & ~wild_pct & (factor > SE_CI_FACTOR)
        count += log.flag(
            off,
            "se",
            lambda i: (
                f"SE {_g(se[i])} disagrees with the confidence interval on this row, which implies "
                f"an SE of {_g(se_ci[i])} on the analysis scale (a factor of {_g(factor[i])}); the "
                "interval is used and the SE ignored: check that the SE is on the analysis scale "
                "(log scale for ratios and percent changes)"
            ),
        )
    return count
