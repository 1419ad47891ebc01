"""Where each harmonised number came from: per-row provenance flags and their words.

:func:`exposhift.synthesis.harmonise.harmonise` adds, per row, one boolean column per code of
:data:`PROVENANCE_CODES` and a column ``provenance`` holding the codes that apply, ';'-joined in
the order of :data:`PROVENANCE_CODES` ("" when none). The codes are stable: reports, the store
and tests may rely on them. :func:`provenance_summary` counts them over the rows of one pool and
:func:`provenance_lines` puts the counts into words ("2 of 7 estimates: ...") for every output
that shows a pooled number.

What each flag means, and why it matters (the sources are in :data:`PROVENANCE_WORDS`):

* ``or_converted``: an odds ratio converted to a risk ratio with the baseline risk (Zhang & Yu
  1998, JAMA 280:1690). For adjusted odds ratios the conversion is biased and its interval too
  narrow (McNutt et al. 2003, Am J Epidemiol 157:940).
* ``se_from_p``: the SE was recovered from a two-sided p value, SE = |y|/z (Altman & Bland 2011,
  BMJ 343:d2090); it is only as good as the p value's rounding.
* ``p_bound``: that p value was reported as a bound ("p < 0.001"): the recovered SE is an upper
  bound, so the estimate weighs less than it should (conservative).
* ``se_from_ci_z``: the SE came from a CI as width/(2z), but the study had few data points
  (``pre_points + post_points`` recorded and below :data:`SMALL_SERIES_POINTS`), so its CI was
  probably built with t: the SE is then overstated by t/z. Only the time points of a series are
  recorded in the sheet (no sample size or df), so this is the only case where exposhift can
  tell; CIs of other studies are not flagged.
* ``smd_converted``: an SMD converted to a log odds ratio (Chinn 2000, Stat Med 19:3127), which
  assumes a logistic latent distribution.
* ``ci_asymmetric``: the CI is asymmetric on the analysis scale (limits probably on another
  scale, or rounded).
* ``per_unit_rescaled``: a per-unit estimate rescaled log-linearly to the common increment
  (assumes linearity over the range).
* ``sign_flipped``: the effect of a change in the other direction re-expressed by a sign flip
  (assumes the effect of a decrease mirrors that of an increase).
* ``se_implausible``: the SE entered in the sheet is implausibly large for the scale it is read
  on (log-scale SE above :data:`MAX_LOG_SE_RATIO` for a ratio, above :data:`MAX_LOG_SE_PCT` for a
  percent change): it was probably entered on another scale (the import warns as well).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd
from scipy import stats

PROVENANCE_CODES: tuple[str, ...] = (
    "or_converted",
    "se_from_p",
    "p_bound",
    "se_from_ci_z",
    "smd_converted",
    "ci_asymmetric",
    "per_unit_rescaled",
    "sign_flipped",
    "se_implausible",
)

#: code -> what it means, in a few words (shown beside every pool that has such rows)
PROVENANCE_WORDS: dict[str, str] = {
    "or_converted": "odds ratio converted to a risk ratio with the baseline risk (Zhang & Yu "
    "1998); adjusted odds ratios convert with bias (McNutt et al. 2003, Am J "
    "Epidemiol 157:940)",
    "se_from_p": "SE recovered from a p value (Altman & Bland 2011): only as precise as the "
    "p value's rounding",
    "p_bound": "p value reported as a bound ('p < x'): the SE recovered from it is an upper "
    "bound, so the estimate weighs less than it should (conservative)",
    "se_from_ci_z": "SE from a CI taken as built with z, but the study has few time points and "
    "probably used t: the SE is overstated by t/z (conservative)",
    "smd_converted": "standardised mean difference converted to a log odds ratio (Chinn 2000), "
    "assuming a logistic latent distribution",
    "ci_asymmetric": "CI asymmetric on the analysis scale: the limits may be on another scale "
    "or heavily rounded",
    "per_unit_rescaled": "per-unit estimate rescaled log-linearly to the common increment "
    "(assumes a linear effect over that range)",
    "sign_flipped": "effect of a change in the other direction re-expressed by a sign flip "
    "(assumes a mirrored effect)",
    "se_implausible": "SE entered implausibly large for its scale (probably entered on another "
    "scale, e.g. percent points instead of the log scale): check it",
}

#: a log-scale SE above this for a ratio measure is implausible (a 95 % CI wider than a factor
#: of exp(2·1.96·1.5) ≈ 360): common practice, no published rule
MAX_LOG_SE_RATIO = 1.5
#: an SE for a percent change is read on the log scale; above 1 (a 95 % CI from −86 % to
#: +610 %) it was almost surely entered in percent points: common practice, no published rule
MAX_LOG_SE_PCT = 1.0
#: fewer time points than this (pre + post) and a CI was probably built with t, not z (below
#: about 30 points t and z differ by more than 5 % after the 4 parameters of a segmented
#: regression; Wagner et al. 2002, J Clin Pharm Ther 27:299 for that model): common practice
SMALL_SERIES_POINTS = 30
#: parameters of a segmented regression (level, trend, level change, trend change)
SERIES_PARAMETERS = 4

_RATIOS = ("RR", "OR", "HR", "IRR")


def se_implausible(measure: np.ndarray, se: np.ndarray) -> np.ndarray:
    """Rows whose entered SE is implausibly large for the scale it is read on (see the limits
    :data:`MAX_LOG_SE_RATIO` and :data:`MAX_LOG_SE_PCT`). NaN SEs are never flagged."""
    measure = np.asarray(measure, dtype=object)
    se = np.asarray(se, dtype=float)
    with np.errstate(invalid="ignore"):
        ratio = np.isin(measure, _RATIOS) & (se > MAX_LOG_SE_RATIO)
        pct = (measure == "pct_change") & (se > MAX_LOG_SE_PCT)
    return ratio | pct


def series_t_over_z(points: np.ndarray, level: np.ndarray) -> np.ndarray:
    """t/z for a CI of ``level`` from a series of ``points`` time points (df = points − 4);
    NaN where the number of points is unknown or leaves no df."""
    points = np.asarray(points, dtype=float)
    df = points - SERIES_PARAMETERS
    out = np.full(points.shape, np.nan)
    ok = np.isfinite(df) & (df >= 1)
    if ok.any():
        q = (1.0 + np.asarray(level, dtype=float)[ok]) / 2.0
        out[ok] = stats.t.ppf(q, df[ok]) / stats.norm.ppf(q)
    return out


def provenance_text(flags: Mapping[str, np.ndarray], n: int) -> np.ndarray:
    """The ``provenance`` column: the codes that apply, ';'-joined in code order."""
    out = np.full(n, "", dtype=object)
    for code in PROVENANCE_CODES:
        mask = np.asarray(flags.get(code, np.zeros(n, bool)), dtype=bool)
        pos = np.flatnonzero(mask)
        if pos.size:
            cur = out[pos]
            out[pos] = np.where(cur == "", code, cur + ";" + code)
    return out


def provenance_summary(frame: pd.DataFrame) -> dict[str, int]:
    """Code -> number of rows of ``frame`` carrying it, for the codes carried by at least one
    row, in :data:`PROVENANCE_CODES` order.

    Reads the boolean columns when present, else the ``provenance`` column; a frame with
    neither (not harmonised) gives ``{}``.
    """
    out: dict[str, int] = {}
    text = None
    if "provenance" in frame.columns:
        text = frame["provenance"].fillna("").astype(str).str.split(";")
    for code in PROVENANCE_CODES:
        if code in frame.columns:
            n = int(frame[code].fillna(False).astype(bool).sum())
        elif text is not None:
            n = int(text.map(lambda parts, c=code: c in parts).sum())
        else:
            continue
        if n:
            out[code] = n
    return out


def provenance_lines(frame: pd.DataFrame, what: str = "estimates") -> list[str]:
    """One line per flag carried in ``frame``: "k of n estimates: <what the flag means>
    [code]"; empty when no row is flagged."""
    n = len(frame)
    return [
        f"{k} of {n} {what}: {PROVENANCE_WORDS[code]} [{code}]"
        for code, k in provenance_summary(frame).items()
    ]
