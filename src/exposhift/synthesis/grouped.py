"""Pool many groups at once with array operations (same results as :func:`pool`, row by row).

The rows are sorted by group once; every per-group sum is one ``np.add.reduceat`` over the
sorted arrays, and per-group values are broadcast back to rows by indexing. The iterative
τ² estimators run on all groups together:

* Paule–Mandel: the Illinois variant of regula falsi (Dowell & Jarratt 1971, BIT 11:168) on the
  per-group bracket [0, sample variance of y] (proved in
  :func:`exposhift.synthesis.pooling.pm_upper_bracket`), each group stopping when its bracket is
  narrower than 1e-14 relative; groups with Q ≤ k − 1 get 0 without iterating.
* REML: the same Newton–Raphson / Fisher scoring steps with step halving as
  :func:`exposhift.synthesis.pooling.tau2_reml`, vectorised, with a per-group convergence mask.

The formulas and their sources are those of :mod:`exposhift.synthesis.pooling`. The scalar
route there is written separately (``brentq``, a Python loop) so each checks the other.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from scipy import special, stats

from exposhift.errors import AnalysisError
from exposhift.synthesis.pooling import (
    MAX_ABS_Y,
    MAX_SPREAD_SE,
    MAX_VARIANCE_RATIO,
    NOTE_TOL,
    PI_NOTE_FEW,
    PM_RTOL,
    REML_MAX_ITER,
    REML_RTOL,
    SCALAR_FIELDS,
    check_extremes,
    check_options,
    note_codes,
)

PM_MAX_ITER = 200
#: iterate on a compacted copy of the running groups once fewer than this share still run
COMPACT_AT = 0.8


class Segments:
    """Estimates sorted into contiguous groups: ``starts`` of each group, row → group index."""

    def __init__(self, y: np.ndarray, v: np.ndarray, starts: np.ndarray):
        self.y = y
        self.v = v
        self.starts = starts
        self.n_groups = starts.size
        self.k = np.diff(np.append(starts, y.size))
        self.g = np.repeat(np.arange(self.n_groups), self.k)

    def subset(self, ids: np.ndarray) -> Segments:
        """The groups ``ids`` (increasing) only, as a new, smaller set of segments."""
        k = self.k[ids]
        new_starts = np.concatenate([[0], np.cumsum(k)[:-1]]).astype(self.starts.dtype)
        rows = np.repeat(self.starts[ids] - new_starts, k) + np.arange(k.sum())
        return Segments(self.y[rows], self.v[rows], new_starts)

    def sum(self, x: np.ndarray) -> np.ndarray:
        """Per-group sums of a row array (Σ within each group)."""
        return np.add.reduceat(x, self.starts)

    def weighted_mean(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per-group Σw and weighted mean Σwy/Σw."""
        sw = self.sum(w)
        return sw, self.sum(w * self.y) / sw

    def gen_q(self, tau2: np.ndarray) -> np.ndarray:
        """Generalised Q per group at per-group τ² (DerSimonian & Kacker 2007, eq. 7)."""
        w = 1.0 / (self.v + tau2[self.g])
        _, mu = self.weighted_mean(w)
        return self.sum(w * (self.y - mu[self.g]) ** 2)

    def reml_parts(self, tau2: np.ndarray) -> tuple[np.ndarray, ...]:
        """Per group at τ²: twice the REML score, twice the Fisher and twice the observed
        information, and the restricted log-likelihood, in one pass (formulas in
        :func:`exposhift.synthesis.pooling._reml_derivatives` and ``restricted_loglik``)."""
        tv = self.v + tau2[self.g]
        w = 1.0 / tv
        sw, mu = self.weighted_mean(w)
        r = self.y - mu[self.g]
        wr = w * r
        w2 = w * w
        sw2 = self.sum(w2)
        wr2 = wr * r
        score = self.sum(w * wr2) - (sw - sw2 / sw)
        fisher = sw2 - 2.0 * self.sum(w2 * w) / sw + (sw2 / sw) ** 2
        upu = self.sum(w2 * wr2) - self.sum(w * wr) ** 2 / sw
        with np.errstate(invalid="ignore", divide="ignore"):
            ll = -0.5 * (self.sum(np.log(tv)) + np.log(sw) + self.sum(wr2))
        return score, fisher, 2.0 * upu - fisher, ll


def _t_isf(q: float, df: np.ndarray) -> np.ndarray:
    """t quantiles, computed once per distinct df (scipy's t.isf is slow per element)."""
    uniq, inv = np.unique(df, return_inverse=True)
    return stats.t.isf(q, uniq)[inv.reshape(-1)]


# --------------------------------------------------------------------------------------------
# τ² estimators over all groups


def standardise(seg: Segments) -> tuple[Segments, np.ndarray]:
    """Per group ((y − y₀)/√s, v/s) with s = the group's smallest variance and y₀ its first
    estimate, and s per group (see :func:`exposhift.synthesis.pooling.standardise`: the τ²
    estimators are shift invariant and scale equivariant, τ² = s·τ²(standardised))."""
    s = np.minimum.reduceat(seg.v, seg.starts)
    y0 = seg.y[seg.starts]
    std = Segments((seg.y - y0[seg.g]) / np.sqrt(s)[seg.g], seg.v / s[seg.g], seg.starts)
    return std, s


def cross_sums(seg: Segments, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per group (Σw)² − Σw² without cancellation, and the largest weight m, returned as
    (Σᵢ uᵢ·Σ_{j≠i} uⱼ, m) with u = w/m (so the cross sum is the first times m²).

    As :func:`exposhift.synthesis.pooling.cross_sum`: Σ_{j≠i} uⱼ = Σu − uᵢ for every weight but
    the group's largest (first of ties), for which it is the sum of the others taken directly.
    """
    m = np.maximum.reduceat(w, seg.starts)
    u = w / m[seg.g]
    total = seg.sum(u)
    pos = np.arange(u.size)
    is_top = u == 1.0
    first_top = np.minimum.reduceat(np.where(is_top, pos, u.size), seg.starts)
    top = np.zeros(u.size, dtype=bool)
    top[first_top] = True
    rest = seg.sum(np.where(top, 0.0, u))
    others = np.where(top, rest[seg.g], total[seg.g] - u)
    return seg.sum(u * others), m


def s2_typical(seg: Segments, w: np.ndarray) -> np.ndarray:
    """Per group typical within-study variance (k − 1)Σw/((Σw)² − Σw²) (Higgins & Thompson
    2002, eq. 9) in the cancellation-free form of :func:`exposhift.synthesis.pooling.s2_typical`;
    NaN for single-estimate groups."""
    cross, m = cross_sums(seg, w)
    u_sum = seg.sum(w / m[seg.g])
    with np.errstate(invalid="ignore", divide="ignore"):
        s2 = (seg.k - 1) * u_sum / cross / m
    return np.where(seg.k >= 2, s2, np.nan)


def _tau2_dl(seg: Segments, q: np.ndarray, w: np.ndarray, sw: np.ndarray) -> np.ndarray:
    """DerSimonian–Laird per group, (Q − (k − 1))/c with c = ((Σw)² − Σw²)/Σw from
    :func:`cross_sums` (``w`` = 1/v; ``sw`` is kept for the call signature)."""
    cross, m = cross_sums(seg, w)
    u_sum = seg.sum(w / m[seg.g])
    with np.errstate(invalid="ignore", divide="ignore"):
        c = (cross / u_sum) * m  # = Σw − Σw²/Σw
        t = np.maximum(0.0, (q - (seg.k - 1)) / c)
    return np.where(seg.k >= 2, t, np.nan)


def _tau2_pm(seg: Segments, q0: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Paule–Mandel over all groups by the Illinois method. Returns (τ², iterations, converged).

    Only groups with Q(0) > k − 1 iterate; they are gathered into a smaller set of segments,
    which shrinks again whenever a fifth of its groups have converged.
    """
    G = seg.n_groups
    tau2 = np.where(seg.k >= 2, 0.0, np.nan)
    iters = np.zeros(G, dtype=int)
    conv = np.ones(G, dtype=bool)
    ids = np.flatnonzero((seg.k >= 2) & (q0 > seg.k - 1))
    if not ids.size:
        return tau2, iters, conv
    sub, scale = standardise(seg.subset(ids))
    t_loc, it_loc, conv_loc = _tau2_pm_std(sub, q0[ids])
    tau2[ids] = t_loc * scale
    iters[ids] = it_loc
    conv[ids] = conv_loc
    return tau2, iters, conv


def _tau2_pm_std(sub: Segments, q0: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The Illinois iteration on (standardised) groups that all have Q(0) > k − 1 (``q0``).
    Returns (τ², iterations, converged) per group of ``sub``."""
    n = sub.n_groups
    tau2 = np.zeros(n)
    iters = np.zeros(n, dtype=int)
    conv = np.ones(n, dtype=bool)
    ids = np.arange(n)
    df = (sub.k - 1).astype(float)
    ybar = sub.sum(sub.y) / sub.k
    hi = sub.sum((sub.y - ybar[sub.g]) ** 2) / df  # pm_upper_bracket, per group
    a = np.zeros(ids.size)
    fa = q0 - df
    b = hi
    fb = sub.gen_q(b) - df
    for _ in range(200):  # rounding guard at the proved bound
        bad = fb >= 0
        if not bad.any():
            break
        b = np.where(bad, b * 2.0, b)
        fb = np.where(bad, sub.gen_q(b) - df, fb)
    run = np.ones(ids.size, dtype=bool)
    it = np.zeros(ids.size, dtype=int)
    for _ in range(PM_MAX_ITER):
        if not run.any():
            break
        if run.sum() < COMPACT_AT * run.size:  # compact: keep the running groups only
            keep = np.flatnonzero(run)
            tau2[ids[~run]] = np.maximum(0.0, b[~run])
            iters[ids[~run]] = it[~run]
            ids, sub, df = ids[keep], sub.subset(keep), df[keep]
            a, fa, b, fb, it = a[keep], fa[keep], b[keep], fb[keep], it[keep]
            run = np.ones(ids.size, dtype=bool)
        with np.errstate(invalid="ignore", divide="ignore"):
            c = b - fb * (b - a) / (fb - fa)
        bad = ~np.isfinite(c) | (c <= np.minimum(a, b)) | (c >= np.maximum(a, b))
        c = np.where(bad, 0.5 * (a + b), c)
        c = np.where(run, c, b)
        fc = sub.gen_q(c) - df
        it += run
        sign_change = fc * fb < 0
        move_a = run & sign_change
        a = np.where(move_a, b, a)
        fa = np.where(move_a, fb, np.where(run & ~sign_change, 0.5 * fa, fa))
        b = np.where(run, c, b)
        fb = np.where(run, fc, fb)
        run &= ~((np.abs(b - a) <= PM_RTOL * np.abs(b)) | (fc == 0))
    tau2[ids] = np.maximum(0.0, b)
    iters[ids] = it
    conv[ids] = ~run
    return tau2, iters, conv


def _tau2_reml(seg: Segments, start: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """REML by Newton/Fisher steps with halving, all groups together (see pooling.tau2_reml).

    One pass per iteration evaluates the log-likelihood at the proposed value (to accept it)
    and the derivatives there (for the next step). Converged groups drop out of the working
    set whenever a fifth of it has converged.
    """
    G = seg.n_groups
    tau2 = np.where(seg.k >= 2, start, np.nan)
    iters = np.zeros(G, dtype=int)
    conv = np.ones(G, dtype=bool)
    ids = np.flatnonzero(seg.k >= 2)
    if not ids.size:
        return tau2, iters, conv
    sub, scale = standardise(seg.subset(ids))
    t_loc, it_loc, conv_loc = _tau2_reml_std(sub, tau2[ids] / scale)
    tau2[ids] = t_loc * scale
    iters[ids] = it_loc
    conv[ids] = conv_loc
    return tau2, iters, conv


def _tau2_reml_std(sub: Segments, start: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The REML iteration on (standardised) groups with k ≥ 2, from ``start``.
    Returns (τ², iterations, converged) per group of ``sub``."""
    n = sub.n_groups
    tau2 = np.zeros(n)
    iters = np.zeros(n, dtype=int)
    conv = np.ones(n, dtype=bool)
    ids = np.arange(n)
    vmin = np.minimum.reduceat(sub.v, sub.starts)
    t = np.maximum(0.0, start)
    score, fisher, observed, ll = sub.reml_parts(t)
    run = np.ones(ids.size, dtype=bool)
    it = np.zeros(ids.size, dtype=int)
    for _ in range(REML_MAX_ITER):
        if not run.any():
            break
        if run.sum() < COMPACT_AT * run.size:  # compact: keep the running groups only
            keep = np.flatnonzero(run)
            tau2[ids[~run]] = t[~run]
            iters[ids[~run]] = it[~run]
            ids, sub, vmin, t, it = ids[keep], sub.subset(keep), vmin[keep], t[keep], it[keep]
            score, fisher, observed, ll = score[keep], fisher[keep], observed[keep], ll[keep]
            run = np.ones(ids.size, dtype=bool)
        with np.errstate(invalid="ignore", divide="ignore"):
            step = np.where(run, score / np.where(observed > 0, observed, fisher), 0.0)
        new = np.maximum(0.0, t + step)
        s2, f2, o2, ll2 = sub.reml_parts(new)
        for _ in range(50):  # step halving, evaluated on the groups that need it only
            wi = np.flatnonzero(run & (ll2 < ll - 1e-12 * (1.0 + np.abs(ll))))
            if not wi.size:
                break
            step[wi] *= 0.5
            new[wi] = np.maximum(0.0, t[wi] + step[wi])
            s2[wi], f2[wi], o2[wi], ll2[wi] = sub.subset(wi).reml_parts(new[wi])
        done = run & (np.abs(new - t) <= REML_RTOL * (new + vmin))
        it += run
        t = np.where(run, new, t)
        score = np.where(run, s2, score)
        fisher = np.where(run, f2, fisher)
        observed = np.where(run, o2, observed)
        ll = np.where(run, ll2, ll)
        run &= ~done
    tau2[ids] = t
    iters[ids] = it
    conv[ids] = ~run
    return tau2, iters, conv


# --------------------------------------------------------------------------------------------
# core


def pool_segments(
    y: np.ndarray,
    v: np.ndarray,
    starts: np.ndarray,
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
) -> dict[str, np.ndarray]:
    """Pool contiguous groups of already-validated, group-sorted ``y``/``v``.

    ``starts`` holds the first row of each group (increasing, starting at 0). Returns one array
    per field of :data:`~exposhift.synthesis.pooling.SCALAR_FIELDS`.
    """
    check_options(method, ci, alpha)
    alpha = float(alpha)
    seg = Segments(y, v, starts)
    k = seg.k
    G = seg.n_groups
    single = k == 1
    df_q = (k - 1).astype(float)
    z = float(stats.norm.isf(alpha / 2))

    w_fe = 1.0 / v
    sw_fe, mu_fe = seg.weighted_mean(w_fe)
    q = seg.sum(w_fe * (y - mu_fe[seg.g]) ** 2)

    iters = np.zeros(G, dtype=int)
    conv = np.ones(G, dtype=bool)
    if method == "fe":
        tau2 = np.where(single, np.nan, 0.0)
    elif method == "dl":
        tau2 = _tau2_dl(seg, q, w_fe, sw_fe)
    elif method == "pm":
        tau2, iters, conv = _tau2_pm(seg, q)
    else:
        tau2, iters, conv = _tau2_reml(seg, _tau2_dl(seg, q, w_fe, sw_fe))

    t0 = np.where(single, 0.0, tau2)
    w = 1.0 / (v + t0[seg.g])
    sw, mu = seg.weighted_mean(w)
    se_wald = np.sqrt(1.0 / sw)
    with np.errstate(invalid="ignore", divide="ignore"):
        hk = seg.sum(w * (y - mu[seg.g]) ** 2) / df_q
    if ci == "wald":
        se = se_wald
        df = np.full(G, np.inf)
        crit = np.full(G, z)
        hk_out = np.full(G, np.nan)
        narrower = floored = np.zeros(G, dtype=bool)
    else:
        used = np.maximum(hk, 1.0) if hksj_floor else hk
        floored = (hk < 1.0 - NOTE_TOL) if hksj_floor else np.zeros(G, dtype=bool)
        se = np.where(single, se_wald, np.sqrt(used / sw))
        df = np.where(single, np.inf, df_q)
        crit = np.where(single, z, _t_isf(alpha / 2, np.where(single, 1.0, df_q)))
        hk_out = np.where(single, np.nan, hk)
        narrower = ~single & (crit * se < z * se_wald * (1.0 - NOTE_TOL))
        floored = ~single & floored
    with np.errstate(invalid="ignore", divide="ignore"):
        stat = mu / se
    # scipy.special ufuncs behind scipy.stats' norm.sf, t.sf and chi2.sf (faster per element)
    with np.errstate(invalid="ignore"):
        pvalue = np.where(
            np.isinf(df),
            2 * special.ndtr(-np.abs(stat)),
            2 * special.stdtr(np.where(np.isinf(df), 1.0, df), -np.abs(stat)),
        )

    # heterogeneity
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        s2 = s2_typical(seg, w_fe)
        i2 = np.where(q > df_q, (q - df_q) / q, 0.0)
        h2 = q / df_q
        i2_tau2 = tau2 / (tau2 + s2)
        h2_tau2 = (tau2 + s2) / s2
        q_p = special.chdtrc(np.maximum(df_q, 1.0), q)
    nan = np.full(G, np.nan)

    # prediction interval: the SE of the chosen CI method (Partlett & Riley 2017), never
    # narrower than the confidence interval
    ci_lower, ci_upper = mu - crit * se, mu + crit * se
    many = k >= 3
    tq = _t_isf(alpha / 2, np.maximum(k - 2, 1))
    half = tq * np.sqrt(t0 + se**2)
    pi_lower = np.where(many, np.minimum(mu - half, ci_lower), np.nan)
    pi_upper = np.where(many, np.maximum(mu + half, ci_upper), np.nan)
    pi_note = np.where(many, "", PI_NOTE_FEW).astype(object)

    codes, texts = note_codes(k, method, ci, tau2 == 0.0, conv, narrower, floored)
    notes = np.array(["; ".join(t) for t in texts], dtype=object)[codes]
    return {
        "k": k,
        "method": np.full(G, method, dtype=object),
        "ci_method": np.where(single, "wald", ci).astype(object),
        "estimate": mu,
        "se": se,
        "ci_lower": ci_lower,
        "ci_upper": ci_upper,
        "z_or_t": stat,
        "pvalue": pvalue,
        "df": df,
        "tau2": tau2,
        "tau": np.sqrt(tau2),
        "q": np.where(single, nan, q),
        "q_df": k - 1,
        "q_pvalue": np.where(single, nan, q_p),
        "i2": np.where(single, nan, i2),
        "i2_tau2": np.where(single, nan, i2_tau2),
        "h2": np.where(single, nan, h2),
        "h2_tau2": np.where(single, nan, h2_tau2),
        "hksj_scale": hk_out,
        "pi_lower": pi_lower,
        "pi_upper": pi_upper,
        "pi_note": pi_note,
        "converged": conv,
        "iterations": iters,
        "notes": notes,
    }


def _validate(frame: pd.DataFrame, by: list[str], y: str, v: str) -> tuple[np.ndarray, np.ndarray]:
    missing = [c for c in [*by, y, v] if c not in frame.columns]
    if missing:
        raise AnalysisError(
            f"column(s) {', '.join(missing)} not in the frame; harmonise the estimates first "
            "(it adds y and v) or name the right columns"
        )
    try:
        yy = pd.to_numeric(frame[y]).to_numpy(dtype=float, na_value=np.nan)
        vv = pd.to_numeric(frame[v]).to_numpy(dtype=float, na_value=np.nan)
    except (TypeError, ValueError) as exc:
        raise AnalysisError(f"columns '{y}' and '{v}' must be numbers ({exc})") from None
    bad = ~np.isfinite(yy) | ~np.isfinite(vv) | ~(vv > 0)
    if bad.any():
        idx = frame.index[bad]
        shown = ", ".join(str(i) for i in idx[:10])
        more = f" and {idx.size - 10} more" if idx.size > 10 else ""
        raise AnalysisError(
            f"row(s) {shown}{more}: '{y}' must be finite and '{v}' positive and finite; "
            "fix or drop those estimates before pooling"
        )
    return yy, vv


def check_group_extremes(y: np.ndarray, v: np.ndarray, starts: np.ndarray, index: pd.Index) -> None:
    """Per group, the limits of :func:`exposhift.synthesis.pooling.check_extremes` (variances
    at most MAX_VARIANCE_RATIO apart, estimates at most MAX_SPREAD_SE smallest SEs apart and
    at most MAX_ABS_Y in size); raises :class:`AnalysisError` naming the rows of the first
    failing groups."""
    vmin = np.minimum.reduceat(v, starts)
    vmax = np.maximum.reduceat(v, starts)
    ymin = np.minimum.reduceat(y, starts)
    ymax = np.maximum.reduceat(y, starts)
    big = np.maximum.reduceat(np.abs(y), starts)
    with np.errstate(over="ignore"):  # an overflowing ratio or spread is itself "too wide"
        bad = (
            (vmax / vmin > MAX_VARIANCE_RATIO)
            | (big > MAX_ABS_Y)
            | (ymax - ymin > MAX_SPREAD_SE * np.sqrt(vmin))
        )
    if not bad.any():
        return
    ends = np.append(starts[1:], y.size)
    first = int(np.flatnonzero(bad)[0])
    rows = ", ".join(str(i) for i in index[starts[first] : ends[first]][:10])
    try:
        check_extremes(
            y[starts[first] : ends[first]],
            v[starts[first] : ends[first]],
            where=f"the group of rows {rows}",
        )
    except AnalysisError as exc:
        n_bad = int(bad.sum())
        more = f" ({n_bad - 1} more group(s) likewise)" if n_bad > 1 else ""
        raise AnalysisError(f"{exc}{more}") from None


def pool_groups(
    frame: pd.DataFrame,
    by: Sequence[str],
    y: str = "y",
    v: str = "v",
    method: str = "reml",
    ci: str = "hksj",
    alpha: float = 0.05,
    hksj_floor: bool = True,
) -> pd.DataFrame:
    """Pool every group of ``frame`` defined by the columns ``by`` at once.

    Returns one row per group (sorted by the keys; missing key values form their own group)
    with the key columns followed by the scalar fields of :class:`PoolResult`
    (:data:`~exposhift.synthesis.pooling.SCALAR_FIELDS`, ``notes`` joined with '; '). An empty
    ``by`` pools the whole frame as one group. The grouping is generic: to keep incompatible
    estimates apart, include :func:`exposhift.synthesis.independence.pooling_keys`.
    """
    by = list(by)
    check_options(method, ci, alpha)
    yy, vv = _validate(frame, by, y, v)
    if len(frame) == 0:
        return pd.DataFrame(columns=[*by, *SCALAR_FIELDS])
    if by:
        codes = frame.groupby(by, sort=True, dropna=False, observed=True).ngroup().to_numpy()
    else:
        codes = np.zeros(len(frame), dtype=np.int64)
    order = np.argsort(codes, kind="stable")
    cs = codes[order]
    starts = np.flatnonzero(np.r_[True, cs[1:] != cs[:-1]])
    check_group_extremes(yy[order], vv[order], starts, frame.index[order])
    res = pool_segments(yy[order], vv[order], starts, method, ci, alpha, hksj_floor)
    keys = frame[by].iloc[order[starts]].reset_index(drop=True)
    return pd.concat([keys, pd.DataFrame(res)], axis=1)
