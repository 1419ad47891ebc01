"""Inverse-variance pooling of one set of estimates: fixed effect and random effects.

All numbers are on the analysis scale (log scale for ratio measures, see
:mod:`exposhift.synthesis.harmonise`).

Between-study variance τ² (always truncated at 0):

* ``fe``   fixed effect, τ² = 0 by assumption (inverse-variance weights 1/vᵢ).
* ``dl``   DerSimonian & Laird (1986, Control Clin Trials 7:177), method of moments, truncated.
* ``pm``   Paule & Mandel (1982, J Res Natl Bur Stand 87:377): the root of the generalised Q
           equation Σ wᵢ*(yᵢ − μ*)² = k − 1 (DerSimonian & Kacker 2007, Contemp Clin Trials 28:105),
           found with a bracketing root finder (scipy ``brentq``) on a bracket that is proved to
           hold (see :func:`pm_upper_bracket`), 0 when Q ≤ k − 1.
* ``reml`` restricted maximum likelihood (Harville 1977, JASA 72:320; Viechtbauer 2005,
           J Educ Behav Stat 30:261) by Newton–Raphson from the DL value (Fisher scoring where
           the observed information is not positive), with step halving when the restricted
           log-likelihood would fall, truncated at 0, and converged when
           a step changes τ² by less than 1e-12 × (τ² + smallest vᵢ) — i.e. relative to the
           smallest total variance that enters a weight. ``converged`` says whether it did.

Confidence interval for μ:

* ``wald``  μ ± z₁₋α/₂ · SE, SE = 1/√Σwᵢ*.
* ``hksj``  Hartung & Knapp (2001, Stat Med 20:3875) / Sidik & Jonkman (2002, Stat Med 21:3153):
            SE² = q/Σwᵢ*, q = Σwᵢ*(yᵢ − μ)²/(k − 1), and t with k − 1 df. By default q is
            floored at 1, SE² = max(q, 1)/Σwᵢ* (Röver, Knapp & Friede 2015, BMC Med Res Methodol
            15:99): the untruncated form (IntHout, Ioannidis & Borm 2014, BMC Med Res Methodol
            14:25) collapses to a zero-width interval when the estimates coincide (two equal
            rounded estimates give p = 0) and undercovers at small k. The floored interval is
            never narrower than the Wald one (SE ≥ Wald SE and t > z). ``hksj_floor=False``
            gives the untruncated form, with a note when it is narrower than the Wald interval.

Heterogeneity: Cochran's Q with its χ²(k − 1) p value; ``i2`` is always the Q-based
I² = max(0, (Q − (k − 1))/Q) and ``h2`` = Q/(k − 1) (Higgins & Thompson 2002, Stat Med
21:1539), whatever the τ² method; ``i2_tau2`` = τ²/(τ² + s²) and ``h2_tau2`` = (τ² + s²)/s² use
the method's τ² with the "typical" within-study variance s² = (k − 1)Σw/((Σw)² − Σw²) (same
paper, eq. 9); the two definitions agree only for DL.

Prediction interval: μ ± t(k − 2) · √(τ² + SE²) (Higgins, Thompson & Spiegelhalter 2009, JRSS
A 172:137), only for k ≥ 3, with the SE of the chosen CI method (the HKSJ SE for ``hksj``;
Partlett & Riley 2017, Stat Med 36:301, show that the Wald SE there gives prediction intervals
narrower than the HKSJ confidence interval). With the same SE and t(k − 2) ≥ t(k − 1) the
prediction interval always contains the confidence interval; the code also clamps it so, as a
guard against rounding.

Pooled numbers support, never replace, expert judgement; see the cautions in the docs.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import optimize, stats

from exposhift import cautions
from exposhift.errors import AnalysisError

METHODS: tuple[str, ...] = ("fe", "dl", "pm", "reml")
CI_METHODS: tuple[str, ...] = ("wald", "hksj")

#: REML stops when a step changes τ² by less than this × (τ² + smallest variance)
REML_RTOL = 1e-12
REML_MAX_ITER = 500
#: relative tolerance of the Paule–Mandel root
PM_RTOL = 1e-14
#: relative margin before a note says "floored" / "narrower" (PM makes the HKSJ scale 1 exactly
#: in theory; rounding must not decide whether a note appears)
NOTE_TOL = 1e-9

#: the caution to show beside pooled numbers (METHODS.md section 7; text in exposhift.cautions)
CAUTION = cautions.POOLING

#: the scalar fields of :class:`PoolResult`, in column order (used by ``pool_groups``)
SCALAR_FIELDS: tuple[str, ...] = (
    "k",
    "method",
    "ci_method",
    "estimate",
    "se",
    "ci_lower",
    "ci_upper",
    "z_or_t",
    "pvalue",
    "df",
    "tau2",
    "tau",
    "q",
    "q_df",
    "q_pvalue",
    "i2",
    "i2_tau2",
    "h2",
    "h2_tau2",
    "hksj_scale",
    "pi_lower",
    "pi_upper",
    "pi_note",
    "converged",
    "iterations",
    "notes",
)


# --------------------------------------------------------------------------------------------
# validation


def check_options(method: str, ci: str, alpha: float) -> None:
    """Raise :class:`AnalysisError` for an unknown method / CI method or an alpha outside (0, 1)."""
    if method not in METHODS:
        raise AnalysisError(f"unknown pooling method '{method}'; use one of: {', '.join(METHODS)}")
    if ci not in CI_METHODS:
        raise AnalysisError(
            f"unknown confidence-interval method '{ci}'; use one of: {', '.join(CI_METHODS)}"
        )
    if not (isinstance(alpha, float | int) and 0.0 < float(alpha) < 1.0):
        raise AnalysisError(f"alpha must be between 0 and 1 (e.g. 0.05), got {alpha!r}")


def check_inputs(y: Any, v: Any) -> tuple[np.ndarray, np.ndarray]:
    """Return ``y`` and ``v`` as 1-D float arrays, or raise naming the first bad positions."""
    y = np.asarray(y, dtype=float)
    v = np.asarray(v, dtype=float)
    if y.ndim != 1 or v.ndim != 1:
        raise AnalysisError("estimates and variances must be one-dimensional sequences")
    if y.shape != v.shape:
        raise AnalysisError(
            f"{y.size} estimates but {v.size} variances; give one variance per estimate"
        )
    if y.size == 0:
        raise AnalysisError("nothing to pool: no estimates were given")
    bad_y = np.flatnonzero(~np.isfinite(y))
    if bad_y.size:
        raise AnalysisError(
            f"estimate(s) at position(s) {_positions(bad_y)} are missing or not finite; "
            "harmonise the estimates first"
        )
    bad_v = np.flatnonzero(~(np.isfinite(v) & (v > 0)))
    if bad_v.size:
        raise AnalysisError(
            f"variance(s) at position(s) {_positions(bad_v)} are zero, negative or not finite "
            f"({', '.join(repr(float(x)) for x in v[bad_v[:5]])}); every estimate needs a "
            "positive variance (check the CI, SE or p value it came from)"
        )
    check_extremes(y, v)
    return y, v


#: variances may span at most this ratio within one pool (``vmax/vmin``); beyond it the weights
#: of the largest variances vanish next to rounding (numerical limit, common practice)
MAX_VARIANCE_RATIO = 1e100
#: an estimate may lie at most this many (smallest) standard errors from another, and no
#: estimate may exceed this in size: squares of larger numbers overflow (numerical limit)
MAX_SPREAD_SE = 1e100
MAX_ABS_Y = 1e150


def check_extremes(y: np.ndarray, v: np.ndarray, where: str = "") -> None:
    """Raise :class:`AnalysisError` for inputs whose sums or squares cannot be represented.

    ``y`` and ``v`` are finite with ``v > 0`` (see :func:`check_inputs`). The τ² estimators
    rescale (:func:`standardise`), so any common scale works; what is refused is a set whose
    own spread is too wide for double precision: variances more than
    :data:`MAX_VARIANCE_RATIO` apart, an estimate more than :data:`MAX_SPREAD_SE` smallest SEs
    from another, or an estimate larger than :data:`MAX_ABS_Y` in size. Such sets almost always
    mix scales (a percent entered as a log ratio, a variance entered as an SE ...).
    """
    vmin, vmax = float(v.min()), float(v.max())
    prefix = f"{where}: " if where else ""
    if vmax > MAX_VARIANCE_RATIO * vmin:
        raise AnalysisError(
            f"{prefix}the variances range from {vmin:.3g} to {vmax:.3g}, more than "
            f"{MAX_VARIANCE_RATIO:.0e} apart: they cannot all be on one scale; check the "
            "scale of the SEs, CIs or p values they came from"
        )
    big = float(np.max(np.abs(y)))
    if big > MAX_ABS_Y:
        raise AnalysisError(
            f"{prefix}an estimate of size {big:.3g} is too large to pool on the analysis "
            "scale; check that it is on the analysis scale (log ratios, differences)"
        )
    spread = float(y.max()) - float(y.min())  # finite: |y| ≤ MAX_ABS_Y
    if spread > MAX_SPREAD_SE * np.sqrt(vmin):
        raise AnalysisError(
            f"{prefix}the estimates differ by {spread:.3g}, more than {MAX_SPREAD_SE:.0e} "
            f"times the smallest SE ({np.sqrt(vmin):.3g}): they cannot all be on one scale; "
            "check the estimates and their SEs"
        )


def standardise(y: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Centre and scale for the τ² estimators: ((y − y₀)/√s, v/s, s) with s = min vᵢ, y₀ = y₁.

    Every τ² estimator here is invariant to a shift of y and equivariant to scale
    (τ²(a + c·y, c²·v) = c²·τ²(y, v), as each is a function of the standardised residuals), so
    τ² = s·τ²(standardised). The standardised variances are ≥ 1 and the weights ≤ 1, so the
    sums of squared and cubed weights neither overflow nor underflow for variances anywhere
    in the double range. Centring at the first estimate makes equal estimates exactly equal
    (residuals exactly 0) whatever their size.
    """
    s = float(v.min())
    return (y - y[0]) / np.sqrt(s), v / s, s


def _positions(idx: np.ndarray, limit: int = 10) -> str:
    shown = ", ".join(str(int(i)) for i in idx[:limit])
    return shown + (f" and {idx.size - limit} more" if idx.size > limit else "")


# --------------------------------------------------------------------------------------------
# building blocks (scalar route)


def cochran_q(y: np.ndarray, v: np.ndarray) -> tuple[float, float]:
    """Fixed-effect mean and Cochran's Q = Σ(yᵢ − μ_FE)²/vᵢ (Cochran 1954, Biometrics 10:101)."""
    w = 1.0 / v
    mu = float(np.dot(w, y) / w.sum())
    return mu, float(np.dot(w, (y - mu) ** 2))


def generalised_q(y: np.ndarray, v: np.ndarray, tau2: float) -> float:
    """Generalised Q: Σwᵢ*(yᵢ − μ*)², wᵢ* = 1/(vᵢ + τ²) (DerSimonian & Kacker 2007, eq. 7)."""
    w = 1.0 / (v + tau2)
    mu = np.dot(w, y) / w.sum()
    return float(np.dot(w, (y - mu) ** 2))


def tau2_dl(y: np.ndarray, v: np.ndarray) -> float:
    """DerSimonian–Laird τ² = max(0, (Q − (k − 1))/(Σw − Σw²/Σw)) (DerSimonian & Laird 1986)."""
    k = y.size
    if k < 2:
        return float("nan")
    y, v, s = standardise(y, v)
    w = 1.0 / v
    _, q = cochran_q(y, v)
    c = cross_sum(w) / w.sum()  # Σw − Σw²/Σw = ((Σw)² − Σw²)/Σw, without cancellation
    return s * max(0.0, (q - (k - 1)) / c)


def cross_sum(w: np.ndarray) -> float:
    """(Σw)² − Σw² = Σᵢ wᵢ·Σ_{j≠i} wⱼ, computed without cancellation (positive w).

    Subtracting Σw² from (Σw)² cancels when one weight dominates (and gives 0 or a negative
    number for equal weights by rounding); here every term is a product of positive numbers.
    For every weight but the largest, Σ_{j≠i} wⱼ = Σw − wᵢ ≥ Σw/2 is well conditioned; for the
    largest it is summed directly. Weights are divided by the largest first (no overflow).
    With k equal weights it returns exactly k(k − 1)·w².
    """
    w = np.asarray(w, dtype=float)
    top = int(np.argmax(w))
    m = float(w[top])
    u = w / m
    total = u.sum()
    others = total - u
    rest = np.delete(u, top).sum()
    others[top] = rest
    return float(np.dot(u, others)) * m * m


def pm_upper_bracket(y: np.ndarray, v: np.ndarray) -> float:
    """An upper bracket for the Paule–Mandel root: the unweighted sample variance of y.

    Proof: μ* minimises Σwᵢ*(yᵢ − m)², so Q(τ²) ≤ Σ(yᵢ − ȳ)²/(vᵢ + τ²) ≤ SS/(v_min + τ²),
    which is < k − 1 at τ² = SS/(k − 1). (Our own bound; Q(τ²) is decreasing in τ², DerSimonian
    & Kacker 2007.)
    """
    return float(np.sum((y - y.mean()) ** 2) / (y.size - 1))


def tau2_pm(y: np.ndarray, v: np.ndarray) -> tuple[float, int, bool]:
    """Paule–Mandel τ²: root of Q(τ²) = k − 1, 0 when Q(0) ≤ k − 1 (Paule & Mandel 1982).

    Returns (τ², iterations, converged). Solved with :func:`scipy.optimize.brentq` on
    [0, :func:`pm_upper_bracket`].
    """
    k = y.size
    if k < 2:
        return float("nan"), 0, True
    y, v, s = standardise(y, v)
    tau2, it, ok = _tau2_pm_std(y, v)
    return s * tau2, it, ok


def _tau2_pm_std(y: np.ndarray, v: np.ndarray) -> tuple[float, int, bool]:
    df = y.size - 1
    if generalised_q(y, v, 0.0) <= df:
        return 0.0, 0, True
    hi = pm_upper_bracket(y, v)
    for _ in range(200):  # guard against rounding at the bound; the proof says once suffices
        if generalised_q(y, v, hi) < df:
            break
        hi *= 2.0
    root, info = optimize.brentq(
        lambda t: generalised_q(y, v, t) - df,
        0.0,
        hi,
        xtol=1e-300,
        rtol=PM_RTOL,
        maxiter=500,
        full_output=True,
        disp=False,
    )
    return max(0.0, float(root)), int(info.iterations), bool(info.converged)


def restricted_loglik(y: np.ndarray, v: np.ndarray, tau2: float) -> float:
    """Restricted (REML) log-likelihood of τ², without the constant −(k − 1)/2·log 2π.

    ℓ_R(τ²) = −½[Σ log(vᵢ + τ²) + log Σwᵢ* + Σwᵢ*(yᵢ − μ*)²] (Viechtbauer 2005, eq. 11).
    """
    w = 1.0 / (v + tau2)
    sw = w.sum()
    mu = np.dot(w, y) / sw
    return float(-0.5 * (np.log(v + tau2).sum() + np.log(sw) + np.dot(w, (y - mu) ** 2)))


def _reml_derivatives(y: np.ndarray, v: np.ndarray, tau2: float) -> tuple[float, float, float]:
    """Twice the REML score, twice the Fisher information and twice the observed information.

    With wᵢ = 1/(vᵢ + τ²), rᵢ = yᵢ − μ*, uᵢ = wᵢrᵢ (= Py): score·2 = Σw²r² − (Σw − Σw²/Σw),
    Fisher·2 = tr(PP) = Σw² − 2Σw³/Σw + (Σw²/Σw)², observed·2 = 2u'Pu − tr(PP) with
    u'Pu = Σwu² − (Σwu)²/Σw (Harville 1977, JASA 72:320, sec. 3; Viechtbauer 2005, eq. 12).
    """
    w = 1.0 / (v + tau2)
    sw = w.sum()
    mu = np.dot(w, y) / sw
    r = y - mu
    w2 = w * w
    sw2 = w2.sum()
    score = np.dot(w2, r * r) - (sw - sw2 / sw)
    fisher = sw2 - 2.0 * np.dot(w2, w) / sw + (sw2 / sw) ** 2
    u = w * r
    upu = np.dot(w, u * u) - np.dot(w, u) ** 2 / sw
    return float(score), float(fisher), float(2.0 * upu - fisher)


def tau2_reml(
    y: np.ndarray,
    v: np.ndarray,
    start: float | None = None,
    rtol: float = REML_RTOL,
    max_iter: int = REML_MAX_ITER,
) -> tuple[float, int, bool]:
    """REML τ² by Newton–Raphson with Fisher-scoring fallback, truncated at 0.

    Step S/J with S the score and J the observed information when J > 0, else S/I with I the
    Fisher information (Fisher scoring, Jennrich & Sampson 1976, Technometrics 18:11); the
    step is halved (up to 50 times) while the restricted log-likelihood would fall by more
    than rounding, and τ² is kept ≥ 0. Starts at the DL value. Stops when
    |Δτ²| ≤ rtol·(τ² + min vᵢ). Returns (τ², iterations, converged).
    """
    if y.size < 2:
        return float("nan"), 0, True
    y, v, s = standardise(y, v)
    start = None if start is None else float(start) / s
    tau2, it, ok = _tau2_reml_std(y, v, start, rtol, max_iter)
    return s * tau2, it, ok


def _tau2_reml_std(
    y: np.ndarray,
    v: np.ndarray,
    start: float | None,
    rtol: float,
    max_iter: int,
) -> tuple[float, int, bool]:
    tau2 = tau2_dl(y, v) if start is None else max(0.0, float(start))
    floor = float(v.min())
    ll = restricted_loglik(y, v, tau2)
    for it in range(1, max_iter + 1):
        score, fisher, observed = _reml_derivatives(y, v, tau2)
        step = score / (observed if observed > 0 else fisher)
        new = max(0.0, tau2 + step)
        ll_new = restricted_loglik(y, v, new)
        for _ in range(50):
            if ll_new >= ll - 1e-12 * (1.0 + abs(ll)):
                break
            step *= 0.5
            new = max(0.0, tau2 + step)
            ll_new = restricted_loglik(y, v, new)
        done = abs(new - tau2) <= rtol * (new + floor)
        tau2, ll = new, ll_new
        if done:
            return tau2, it, True
    return tau2, max_iter, False


def s2_typical(w: np.ndarray) -> float:
    """Typical within-study variance (k − 1)Σw/((Σw)² − Σw²) (Higgins & Thompson 2002, eq. 9).

    Written as (k − 1)·Σu / Σᵢ uᵢ·Σ_{j≠i} uⱼ · (1/max w) with u = w/max w (see
    :func:`cross_sum`): no cancellation, no overflow, and exactly 1/w for k equal weights.
    NaN for k < 2.
    """
    w = np.asarray(w, dtype=float)
    if w.size < 2:
        return float("nan")
    m = float(w.max())
    u = w / m
    return float((w.size - 1) * u.sum() / cross_sum(u) / m)


# --------------------------------------------------------------------------------------------
# notes shared with the grouped route


def note_codes(
    k: np.ndarray,
    method: str,
    ci: str,
    tau2_zero: np.ndarray,
    converged: np.ndarray,
    hksj_narrower: np.ndarray,
    hksj_floored: np.ndarray,
) -> tuple[np.ndarray, list[tuple[str, ...]]]:
    """The notes of each pooled result as (code per result, tuple of sentences per code).

    Vectorised: the conditions become bits, and each distinct combination is put into words
    once. Shared by :func:`pool` and :func:`exposhift.synthesis.grouped.pool_groups` so both
    say the same thing for the same situation.
    """
    k = np.asarray(k)
    two = k >= 2
    conditions: list[tuple[np.ndarray, str]] = [
        (
            k == 1,
            "single estimate: returned as reported with its own Wald interval "
            "(tau2, Q and I2 need at least 2 estimates)",
        ),
    ]
    if method != "fe":
        conditions.append(
            (
                two & np.asarray(tau2_zero, dtype=bool),
                "tau2 estimate is 0 (truncated at the boundary)",
            )
        )
    conditions.append(
        (
            two & ~np.asarray(converged, dtype=bool),
            f"{method.upper()} iteration did not converge: tau2 is the last iterate",
        )
    )
    if ci == "hksj":
        conditions += [
            (k == 2, "k = 2: the HKSJ interval uses t with 1 df and is very wide"),
            (
                two & np.asarray(hksj_narrower, dtype=bool),
                "HKSJ interval narrower than the Wald interval (untruncated form, IntHout et al. "
                "2014): hksj_floor=True never is",
            ),
            (
                two & np.asarray(hksj_floored, dtype=bool),
                "HKSJ scale floored at 1 (Roever et al. 2015)",
            ),
        ]
    bits = np.zeros(k.size, dtype=np.int64)
    for j, (mask, _) in enumerate(conditions):
        bits |= np.asarray(mask, dtype=np.int64) << j
    uniq, codes = np.unique(bits, return_inverse=True)
    texts = [tuple(t for j, (_, t) in enumerate(conditions) if (u >> j) & 1) for u in uniq]
    return codes.reshape(-1), texts


def compose_notes(*args: Any) -> list[tuple[str, ...]]:
    """One tuple of note sentences per result (see :func:`note_codes` for the arguments)."""
    codes, texts = note_codes(*args)
    return [texts[c] for c in codes]


PI_NOTE_FEW = "prediction interval needs at least 3 estimates (t with k - 2 df)"


# --------------------------------------------------------------------------------------------
# result object


@dataclass(frozen=True, eq=False)
class PoolResult:
    """One pooled estimate on the analysis scale, with heterogeneity and intervals.

    ``weights`` are the normalised weights wᵢ*/Σw* (they sum to 1). ``y`` and ``v`` are the
    inputs. ``df`` is the t degrees of freedom of the interval (inf for Wald).
    """

    k: int
    method: str
    ci_method: str
    alpha: float
    estimate: float
    se: float
    ci_lower: float
    ci_upper: float
    z_or_t: float
    pvalue: float
    df: float
    tau2: float
    tau: float
    q: float
    q_df: int
    q_pvalue: float
    i2: float
    i2_tau2: float
    h2: float
    h2_tau2: float
    hksj_scale: float
    pi_lower: float
    pi_upper: float
    pi_note: str
    converged: bool
    iterations: int
    hksj_floor: bool
    weights: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    v: np.ndarray = field(repr=False)
    notes: tuple[str, ...] = ()

    def conf_int(self) -> tuple[float, float]:
        """(lower, upper) of the confidence interval for μ."""
        return self.ci_lower, self.ci_upper

    def pred_int(self) -> tuple[float, float]:
        """(lower, upper) of the prediction interval for a new setting's true effect."""
        return self.pi_lower, self.pi_upper

    def scalars(self) -> dict[str, Any]:
        """The scalar fields in :data:`SCALAR_FIELDS` order; ``notes`` joined with '; '."""
        out = {name: getattr(self, name) for name in SCALAR_FIELDS}
        out["notes"] = "; ".join(self.notes)
        return out

    def summary_frame(self, labels: list[str] | None = None) -> pd.DataFrame:
        """One row per estimate (its Wald interval and weight), then the pooled row and the
        prediction row, for a forest plot or a table. Columns: label, estimate, se, ci_lower,
        ci_upper, weight."""
        labels = list(labels) if labels is not None else [str(i) for i in range(self.k)]
        if len(labels) != self.k:
            raise AnalysisError(f"{len(labels)} labels for {self.k} estimates")
        z = stats.norm.isf(self.alpha / 2)
        se_i = np.sqrt(self.v)
        rows = pd.DataFrame(
            {
                "label": labels,
                "estimate": self.y,
                "se": se_i,
                "ci_lower": self.y - z * se_i,
                "ci_upper": self.y + z * se_i,
                "weight": self.weights,
            }
        )
        pooled = pd.DataFrame(
            {
                "label": [f"pooled ({self.method}, {self.ci_method})", "prediction interval"],
                "estimate": [self.estimate, self.estimate],
                "se": [self.se, np.nan],
                "ci_lower": [self.ci_lower, self.pi_lower],
                "ci_upper": [self.ci_upper, self.pi_upper],
                "weight": [1.0, np.nan],
            }
        )
        return pd.concat([rows, pooled], ignore_index=True)


# --------------------------------------------------------------------------------------------
# pool


def pool(
    y: Any,
    v: Any,
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
) -> PoolResult:
    """Pool estimates ``y`` with within-study variances ``v`` (analysis scale).

    See the module docstring for the methods and their sources. k = 1 returns the estimate with
    its own Wald interval and a note. Raises :class:`AnalysisError` for mismatched lengths,
    non-finite estimates or non-positive variances, and unknown options.
    """
    check_options(method, ci, alpha)
    y, v = check_inputs(y, v)
    k = y.size
    alpha = float(alpha)
    z = float(stats.norm.isf(alpha / 2))
    nan = float("nan")

    if k == 1:
        se = float(np.sqrt(v[0]))
        est = float(y[0])
        notes = compose_notes(
            np.array([1]),
            method,
            ci,
            np.array([False]),
            np.array([True]),
            np.array([False]),
            np.array([False]),
        )[0]
        zstat = est / se
        return PoolResult(
            k=1,
            method=method,
            ci_method="wald",
            alpha=alpha,
            estimate=est,
            se=se,
            ci_lower=est - z * se,
            ci_upper=est + z * se,
            z_or_t=zstat,
            pvalue=float(2 * stats.norm.sf(abs(zstat))),
            df=float("inf"),
            tau2=nan,
            tau=nan,
            q=nan,
            q_df=0,
            q_pvalue=nan,
            i2=nan,
            i2_tau2=nan,
            h2=nan,
            h2_tau2=nan,
            hksj_scale=nan,
            pi_lower=nan,
            pi_upper=nan,
            pi_note=PI_NOTE_FEW,
            converged=True,
            iterations=0,
            hksj_floor=bool(hksj_floor),
            weights=_frozen(np.ones(1)),
            y=_frozen(y),
            v=_frozen(v),
            notes=notes,
        )

    _, q = cochran_q(y, v)
    q_df = k - 1
    iterations, converged = 0, True
    if method == "fe":
        tau2 = 0.0
    elif method == "dl":
        tau2 = tau2_dl(y, v)
    elif method == "pm":
        tau2, iterations, converged = tau2_pm(y, v)
    else:
        tau2, iterations, converged = tau2_reml(y, v)

    w = 1.0 / (v + tau2)
    sw = w.sum()
    mu = float(np.dot(w, y) / sw)
    se_wald = float(np.sqrt(1.0 / sw))
    hk_scale = float(np.dot(w, (y - mu) ** 2) / q_df)

    if ci == "wald":
        se, df = se_wald, float("inf")
        crit = z
        stat = mu / se
        pvalue = float(2 * stats.norm.sf(abs(stat)))
        narrower = floored = False
        hk_out = nan
    else:
        used = max(hk_scale, 1.0) if hksj_floor else hk_scale
        floored = bool(hksj_floor and hk_scale < 1.0 - NOTE_TOL)
        se, df = float(np.sqrt(used / sw)), float(q_df)
        crit = float(stats.t.isf(alpha / 2, df))
        with np.errstate(divide="ignore", invalid="ignore"):
            stat = float(np.float64(mu) / np.float64(se))
        pvalue = float(2 * stats.t.sf(abs(stat), df))
        narrower = bool(crit * se < z * se_wald * (1.0 - NOTE_TOL))
        hk_out = hk_scale

    w_fe = 1.0 / v
    s2 = s2_typical(w_fe)
    i2 = (q - q_df) / q if q > q_df else 0.0
    ci_lower, ci_upper = mu - crit * se, mu + crit * se
    if k >= 3:
        tq = float(stats.t.isf(alpha / 2, k - 2))
        half = tq * np.sqrt(tau2 + se**2)
        pi_lower, pi_upper, pi_note = min(mu - half, ci_lower), max(mu + half, ci_upper), ""
    else:
        pi_lower, pi_upper, pi_note = nan, nan, PI_NOTE_FEW

    notes = compose_notes(
        np.array([k]),
        method,
        ci,
        np.array([tau2 == 0.0]),
        np.array([converged]),
        np.array([narrower]),
        np.array([floored]),
    )[0]
    return PoolResult(
        k=k,
        method=method,
        ci_method=ci,
        alpha=alpha,
        estimate=mu,
        se=se,
        ci_lower=ci_lower,
        ci_upper=ci_upper,
        z_or_t=stat,
        pvalue=pvalue,
        df=df,
        tau2=float(tau2),
        tau=float(np.sqrt(tau2)),
        q=q,
        q_df=q_df,
        q_pvalue=float(stats.chi2.sf(q, q_df)),
        i2=float(i2),
        i2_tau2=float(tau2 / (tau2 + s2)),
        h2=float(q / q_df),
        h2_tau2=float((tau2 + s2) / s2),
        hksj_scale=hk_out,
        pi_lower=float(pi_lower),
        pi_upper=float(pi_upper),
        pi_note=pi_note,
        converged=bool(converged),
        iterations=int(iterations),
        hksj_floor=bool(hksj_floor),
        weights=_frozen(w / sw),
        y=_frozen(y),
        v=_frozen(v),
        notes=notes,
    )


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float, copy=True)
    a.setflags(write=False)
    return a
