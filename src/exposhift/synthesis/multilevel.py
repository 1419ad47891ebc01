"""Three-level random-effects meta-regression: estimates within events, the event as the unit.

Model (Konstantopoulos 2011, Res Synth Methods 2:61; Van den Noortgate, López-López, Marín-Martínez
& Sánchez-Meca 2013, Behav Res Methods 45:576):

    y_ij = x_ij'β + u_i + w_ij + e_ij,   u_i ~ N(0, σ²_event), w_ij ~ N(0, σ²_within),
    e_ij ~ N(0, v_ij) with v_ij the known sampling variance,

so the covariance is block diagonal, V_i = diag(v_i + σ²_within) + σ²_event 11' per event i.

*Per-block algebra, no N × N matrix.* With a_ij = 1/(v_ij + σ²_within), s_i = Σ_j a_ij and
t_i = 1 + σ²_event s_i, the Sherman–Morrison–Woodbury identity gives
V_i⁻¹ = diag(a_i) − (σ²_event/t_i) a_i a_i' and log|V_i| = Σ_j log(1/a_ij) + log t_i (Harville
1977, JASA 72:320; Searle, Casella & McCulloch 1992, Variance Components, app. M), so every
quadratic form and trace below needs only per-event sums (one small m × N indicator product).

*Restricted likelihood* (Harville 1977; Patterson & Thompson 1971, Biometrika 58:545):

    ℓ_R(θ) = −½[(N − p) log 2π + log|V| + log|X'V⁻¹X| + (y − Xβ̂)'V⁻¹(y − Xβ̂)],

β̂ = (X'V⁻¹X)⁻¹X'V⁻¹y (GLS, Aitken 1935), with score ∂ℓ_R/∂θ_k = −½[tr(PV_k) − y'PV_kPy],
P = V⁻¹ − V⁻¹X(X'V⁻¹X)⁻¹X'V⁻¹, V_event = blockdiag(11'), V_within = I (Harville 1977, sec. 6).
It is maximised over (σ²_event, σ²_within) ∈ [0, big]² by L-BFGS-B (scipy) with the analytic
score, from three interior starts and on each edge (one component fixed at 0) and at the origin;
the best of all is kept, so no boundary point is better than the reported one. ``converged``
requires the chosen run to report success and the projected score to vanish (Karush–Kuhn–Tucker:
zero score inside, non-positive score of ℓ_R at a zero component).

*Singleton events* (every event with one estimate): σ²_event and σ²_within enter only as their
sum and are not separately identified; the sum is fitted (two-level REML) and reported as
σ²_event with σ²_within = 0, and a note says so.

*Inference.* Model-based: (X'V̂⁻¹X)⁻¹ with normal (Wald) tests. Robust: CR2 with the fitted model
as working model and Satterthwaite df, and the HTZ test for several constraints
(:mod:`exposhift.synthesis.robust`; Hedges, Tipton & Johnson 2010; Tipton 2015; Pustejovsky &
Tipton 2018). With few events CR2 inference is unreliable when df < 4 (Tipton 2015).

Pooled numbers support, never replace, expert judgement; see the cautions in the docs.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from exposhift.errors import AnalysisError
from exposhift.synthesis.pooling import check_inputs
from exposhift.synthesis.robust import ClusterIndex, ClusterRobust, robust_blocks

INFERENCE: tuple[str, ...] = ("cr2", "model")
#: interior starting shares of (event, within) in the total variance
STARTS: tuple[tuple[float, float], ...] = ((0.8, 0.2), (0.2, 0.8))
#: projected-score tolerance (scaled variances) for ``converged``
KKT_TOL = 1e-6
#: a Newton run stops when no component moves by more than this × (value + median variance)
STEP_TOL = 1e-10
MAX_ITER = 200
ZERO_SNAP = 1e-12
DF_UNRELIABLE = 4.0
LOG_2PI = float(np.log(2 * np.pi))
NOTE_SINGLETON = (
    "every event has one estimate: between-event and within-event variance are not separately "
    "identified; their sum is reported as sigma2_event (sigma2_within = 0)"
)


@dataclass(frozen=True, eq=False)
class MultilevelFit:
    """REML fit of the three-level model; ``vcov_cr2``/``se_cr2``/``df_cr2`` are CR2 with
    Satterthwaite df per coefficient; ``loglik_reml`` is ℓ_R with its constant."""

    names: tuple[str, ...]
    coef: np.ndarray
    vcov_model: np.ndarray
    se_model: np.ndarray
    vcov_cr2: np.ndarray
    se_cr2: np.ndarray
    df_cr2: np.ndarray
    sigma2_event: float
    sigma2_within: float
    k_estimates: int
    k_events: int
    converged: bool
    iterations: int
    loglik_reml: float
    notes: tuple[str, ...] = ()
    robust: ClusterRobust | None = field(default=None, repr=False)

    def to_dict(self) -> dict[str, Any]:
        """Plain Python values (lists for arrays), without the robust helper object."""
        out: dict[str, Any] = {}
        for name in ("names", "coef", "vcov_model", "se_model", "vcov_cr2", "se_cr2", "df_cr2",
                     "sigma2_event", "sigma2_within", "k_estimates", "k_events", "converged",
                     "iterations", "loglik_reml", "notes"):
            val = getattr(self, name)
            out[name] = val.tolist() if isinstance(val, np.ndarray) else (
                list(val) if isinstance(val, tuple) else val)
        return out


@dataclass(frozen=True)
class WaldTest:
    """Test of Rβ = r. ``method``: 'chi2' (model-based, statistic Q on q df), 't-satterthwaite'
    (CR2, q = 1: statistic t, df_den the Satterthwaite df) or 'htz' (CR2, q > 1: statistic F
    on (q, df_den); ``wald_q`` is the unscaled Q)."""

    method: str
    statistic: float
    df_num: float
    df_den: float
    pvalue: float
    wald_q: float
    estimate: tuple[float, ...]


@dataclass(frozen=True)
class MultilevelPool:
    """One event-level pooled estimate (intercept-only three-level model). ``k`` is the number of
    estimates, as in :class:`exposhift.synthesis.pooling.PoolResult`; ``df`` is inf for
    ``inference='model'`` (normal interval)."""

    k: int
    k_estimates: int
    k_events: int
    inference: str
    alpha: float
    estimate: float
    se: float
    ci_lower: float
    ci_upper: float
    z_or_t: float
    pvalue: float
    df: float
    sigma2_event: float
    sigma2_within: float
    converged: bool
    iterations: int
    notes: tuple[str, ...] = ()


class _Problem:
    """The data of one fit, sorted by event; restricted likelihood, score and information."""

    def __init__(self, y: np.ndarray, v: np.ndarray, X: np.ndarray, groups: ClusterIndex):
        o = groups.order
        self.g = groups
        self.idx = groups.idx
        self.v = v[o]
        self.Z = np.column_stack([X[o], y[o]])
        self.p = X.shape[1]
        self.n = y.size
        # per-event sums as one small (m × N) indicator product (never N × N)
        self.S = (groups.idx[None, :] == np.arange(groups.m)[:, None]).astype(float)
        self.buf = np.empty((self.n, 3 + self.p + 1))

    def evaluate(self, s2e: float, s2w: float, info: bool = True):
        """(−ℓ_R, its gradient, (observed, average) information, β̂, M) at (σ²_event, σ²_within).

        Z'V⁻¹Z = Z'D⁻¹Z − G'diag(c)G with G the event sums of D⁻¹Z and c = σ²_event/t (Woodbury);
        the observed information of ℓ_R is y'PV_kPV_lPy − ½tr(PV_kPV_l) (Harville 1977, sec. 6)
        and the average information AI_kl = ½(V_kPy)'P(V_lPy) (Gilmour, Thompson & Cullis 1995,
        Biometrics 51:1440) its fallback when the observed one is not positive definite.
        """
        S, idx, p = self.S, self.idx, self.p
        d = self.v + s2w
        a = 1.0 / d
        buf = self.buf                                           # [a, a², a³, aZ]
        buf[:, 0] = a
        np.multiply(a, a, out=buf[:, 1])
        np.multiply(buf[:, 1], a, out=buf[:, 2])
        np.multiply(a[:, None], self.Z, out=buf[:, 3:])
        sums = S @ buf                                           # event sums, (m, 3 + p + 1)
        s, sa2, sa3, G = sums[:, 0], sums[:, 1], sums[:, 2], sums[:, 3:]
        t = 1.0 + s2e * s
        c = s2e / t
        za = buf[:, 3:]
        cross = self.Z.T @ za - (G.T * c) @ G                    # Z'V⁻¹Z
        bread, logdet_x = _inv_logdet(cross[:p, :p])
        beta = bread @ cross[:p, p]
        rss = cross[p, p] - cross[:p, p] @ beta
        logdet = np.log(d).sum() + np.log(t).sum() + logdet_x
        nll = 0.5 * ((self.n - p) * LOG_2PI + logdet + rss)
        if not info:
            return nll, None, None, beta, bread
        T = np.eye(p + 1)
        T[:p, p] = -beta
        vz = za - a[:, None] * (c[:, None] * G)[idx]             # V⁻¹[X y]
        qp = vz @ T                                              # [Q, Py], Q = V⁻¹X
        aqp = a[:, None] * qp
        r2 = S @ aqp
        vqp = aqp - a[:, None] * (c[:, None] * r2)[idx]          # V⁻¹[Q, Py]
        e = (G / t[:, None]) @ T                                 # event sums of [Q, Py]
        w = s / t
        k1, k2 = qp.T @ qp, qp.T @ vqp
        k3, k4, k5 = e.T @ e, (e.T * w) @ e, e.T @ (r2 / t[:, None])
        qq, cc = k1[:p, :p], k3[:p, :p]
        xw, xe = k1[:p, p], k3[:p, p]                            # X'V⁻¹u_within, X'V⁻¹u_event
        d_within = s.sum() - c @ sa2 - (bread * qq).sum() - k1[p, p]
        d_event = w.sum() - (bread * cc).sum() - k3[p, p]
        grad = 0.5 * np.array([d_event, d_within])
        # average information AI_kl = ½ u_k'P u_l, u_event = event sums of Py, u_within = Py
        mxe, mxw = bread @ xe, bread @ xw
        ai = 0.5 * np.array([[k4[p, p] - xe @ mxe, k5[p, p] - xe @ mxw],
                             [k5[p, p] - xe @ mxw, k2[p, p] - xw @ mxw]])
        # Fisher information ½tr(PV_kPV_l), P = V⁻¹ − QMQ', block by block
        mqq, mcc = bread @ qq, bread @ cc
        tr_ee = (w * w).sum() - 2 * (bread * k4[:p, :p]).sum() + (mcc * mcc.T).sum()
        tr_ew = (sa2 / (t * t)).sum() - 2 * (bread * k5[:p, :p]).sum() + (mcc * mqq.T).sum()
        tr_ww = (sa2.sum() - 2 * c @ sa3 + (c * c) @ (sa2 * sa2)
                 - 2 * (bread * k2[:p, :p]).sum() + (mqq * mqq.T).sum())
        hess = 2.0 * ai - 0.5 * np.array([[tr_ee, tr_ew], [tr_ew, tr_ww]])
        return nll, grad, (hess, ai), beta, bread


def _inv_logdet(a: np.ndarray) -> tuple[np.ndarray, float]:
    """Inverse and log-determinant of the small SPD matrix X'V⁻¹X (closed form for p ≤ 2)."""
    p = a.shape[0]
    if p == 1:
        det = a[0, 0]
        inv = np.array([[1.0 / det]]) if det > 0 else None
    elif p == 2:
        det = a[0, 0] * a[1, 1] - a[0, 1] * a[1, 0]
        inv = np.array([[a[1, 1], -a[0, 1]], [-a[1, 0], a[0, 0]]]) / det if det > 0 else None
    else:
        sign, logdet = np.linalg.slogdet(a)
        det = np.exp(logdet) if sign > 0 else 0.0
        inv = np.linalg.inv(a) if sign > 0 else None
        if inv is not None:
            return inv, float(logdet)
    if inv is None or not np.all(np.isfinite(inv)):
        raise AnalysisError("X'V^-1X is singular; check the moderators for collinearity")
    return inv, float(np.log(det))


def _newton_step(h: np.ndarray, grad: np.ndarray, move: np.ndarray) -> np.ndarray:
    """−h⁻¹·gradient on the moving components (closed form, 2 × 2 at most); zeros when h is
    not positive definite there, so that the caller falls back."""
    step = np.zeros(2)
    if move.all():
        det = h[0, 0] * h[1, 1] - h[0, 1] ** 2
        if h[0, 0] > 0 and det > 1e-12 * h[0, 0] * h[1, 1]:
            step[0] = -(h[1, 1] * grad[0] - h[0, 1] * grad[1]) / det
            step[1] = -(h[0, 0] * grad[1] - h[0, 1] * grad[0]) / det
        return step
    k = 0 if move[0] else 1
    if h[k, k] > 0:
        step[k] = -grad[k] / h[k, k]
    return step


def _newton(prob: _Problem, x0: np.ndarray, free: np.ndarray, scale: float, big: float,
            max_iter: int = MAX_ITER) -> tuple[float, np.ndarray, int, bool]:
    """Projected Newton on the free components (observed information, else average
    information, else steepest descent), with step halving.

    Components at 0 whose score points outward are held there for the step (active set).
    Stops when the full Newton step changes no component by more than ``STEP_TOL`` × (value +
    scale); values below ``ZERO_SNAP`` × scale are set to the bound 0.
    """
    x = np.where(free, np.clip(x0, 0.0, big), 0.0)
    f, grad, hess, _, _ = prob.evaluate(*x)
    for it in range(1, max_iter + 1):
        move = free & ~((x <= 0.0) & (grad > 0.0))
        step = np.zeros(2)
        while move.any():
            step = _newton_step(hess[0], grad, move)
            if not step @ grad < 0:
                step = _newton_step(hess[1], grad, move)
            if not step @ grad < 0:                             # not a descent direction
                step = np.where(move, -grad * scale * scale, 0.0)
            blocked = move & (x <= 0.0) & (step < 0.0)
            if not blocked.any():
                break
            move = move & ~blocked
        if not move.any():
            return f, x, it, True
        # go no further than the first bound along the direction, then halve while f rises
        neg = step < 0.0
        lam = min(1.0, float(np.min(x[neg] / -step[neg]))) if neg.any() else 1.0
        for _ in range(60):
            new = np.clip(x + lam * step, 0.0, big)
            new[new <= ZERO_SNAP * scale] = 0.0                 # land exactly on the bound
            f_new, g_new, h_new, _, _ = prob.evaluate(*new)
            if f_new <= f + 1e-13 * (1.0 + abs(f)):
                break
            lam *= 0.5
        else:
            return f, x, it, False
        # converged when the full (undamped, untruncated) Newton step is negligible
        done = bool(np.all(np.abs(step) <= STEP_TOL * (x + scale)))
        x, f, grad, hess = new, f_new, g_new, h_new
        if done:
            return f, x, it, True
    return f, x, max_iter, False


def _check_design(X: Any, n: int, names: Any) -> tuple[np.ndarray, tuple[str, ...]]:
    if X is None:
        X = np.ones((n, 1))
        default = ("intercept",)
    else:
        X = np.asarray(X, dtype=float)
        if X.ndim == 1:
            X = X[:, None]
        default = tuple(f"x{j}" for j in range(X.shape[1]))
    if X.shape[0] != n:
        raise AnalysisError(f"the design matrix has {X.shape[0]} rows for {n} estimates")
    bad = np.flatnonzero(~np.all(np.isfinite(X), axis=1))
    if bad.size:
        raise AnalysisError(f"moderator value(s) missing or not finite in row(s) "
                            f"{', '.join(map(str, bad[:10]))}")
    if np.linalg.matrix_rank(X) < X.shape[1]:
        raise AnalysisError("the moderators are collinear (design not of full column rank); "
                            "drop a redundant column")
    names = default if names is None else tuple(str(x) for x in names)
    if len(names) != X.shape[1]:
        raise AnalysisError(f"{len(names)} names for {X.shape[1]} coefficients")
    return X, names


def _optimise(prob: _Problem, singleton: bool) -> tuple[np.ndarray, int, bool]:
    """Best (σ²_event, σ²_within) over the starts, the two edges and the origin, its iterations
    and whether it converged and satisfies the Karush–Kuhn–Tucker conditions."""
    v, Z = prob.v, prob.Z
    resid = Z[:, -1] - Z[:, :-1] @ np.linalg.lstsq(Z[:, :-1], Z[:, -1], rcond=None)[0]
    scale = float(np.median(v))
    total = max(float(np.mean(resid**2) - np.mean(v)), 0.1 * scale)
    big = 1e4 * (float(np.var(Z[:, -1])) + float(v.max()))
    both, event_only, within_only = (np.array([True, True]), np.array([True, False]),
                                     np.array([False, True]))
    if singleton:
        runs = [_newton(prob, np.array([total, 0.0]), event_only, scale, big)]
    else:
        runs = [_newton(prob, np.array(sh) * total, both, scale, big) for sh in STARTS]
        # boundary check: the best point on each edge, unless a run already ended there
        for k, free in ((1, event_only), (0, within_only)):
            if not any(r[1][k] == 0.0 for r in runs):
                runs.append(_newton(prob, np.where(free, total, 0.0), free, scale, big))
    runs.append((prob.evaluate(0.0, 0.0, info=False)[0], np.zeros(2), 0, True))
    f, x, nit, ok = min(runs, key=lambda r: r[0])
    grad = prob.evaluate(*x)[1] * scale
    free = [0] if singleton else [0, 1]
    kkt = all((abs(grad[k]) <= KKT_TOL * (1.0 + x[k] / scale)) if x[k] > ZERO_SNAP * scale else
              (grad[k] >= -KKT_TOL) for k in free)
    at_top = bool(np.any(x >= big * (1 - 1e-9)))
    return x, nit, bool(ok and kkt and not at_top)


def fit_multilevel(y: Any, v: Any, cluster: Any, X: Any = None, names: Any = None) -> MultilevelFit:
    """Fit the three-level model by REML; see the module docstring for the formulas.

    ``cluster`` gives the event of each estimate. Raises :class:`AnalysisError` for non-finite
    estimates, non-positive or non-finite variances, missing event labels, fewer than 2 events,
    no more events than coefficients, or a collinear design.
    """
    y, v = check_inputs(y, v)
    n = y.size
    X, names = _check_design(X, n, names)
    groups = ClusterIndex.from_labels(cluster, n)
    p = X.shape[1]
    if groups.m < 2:
        raise AnalysisError(f"{groups.m} event: the event-level model needs estimates from at "
                            "least 2 events")
    if groups.m <= p:
        raise AnalysisError(f"{groups.m} events for {p} coefficients: cluster-robust inference "
                            "needs more events than coefficients")
    prob = _Problem(y, v, X, groups)
    singleton = bool(np.all(groups.counts == 1))
    theta, nit, converged = _optimise(prob, singleton)
    s2e, s2w = float(theta[0]), float(theta[1])
    nll, _, _, beta, bread = prob.evaluate(s2e, s2w, info=False)
    xs, ys = prob.Z[:, :p], prob.Z[:, p]
    d = prob.v + s2w

    def phi_blocks(ids: np.ndarray, m: int) -> np.ndarray:
        rows = groups.starts[ids][:, None] + np.arange(m)
        return d[rows][:, :, None] * np.eye(m) + s2e              # V̂_i = diag(v + σ²_w) + σ²_e 11'

    rob = robust_blocks(xs, ys - xs @ beta, bread, beta, groups, phi_blocks, "CR2")
    notes = [NOTE_SINGLETON] if singleton else []
    if not converged:
        notes.append("REML maximisation did not converge: variance components are the best "
                     "point found")
    notes.extend(rob.notes)
    vm = 0.5 * (bread + bread.T)
    arrays = [beta, vm, np.sqrt(np.diag(vm)), rob.vcov, rob.se, rob.df]
    for arr in arrays:
        arr.setflags(write=False)
    beta, vm, se_model, vcov_cr2, se_cr2, df_cr2 = arrays
    return MultilevelFit(
        names=names, coef=beta, vcov_model=vm, se_model=se_model,
        vcov_cr2=vcov_cr2, se_cr2=se_cr2, df_cr2=df_cr2, sigma2_event=s2e, sigma2_within=s2w,
        k_estimates=n, k_events=groups.m, converged=converged, iterations=nit,
        loglik_reml=float(-nll), notes=tuple(notes), robust=rob,
    )


def wald_test(fit: MultilevelFit, R: Any, r: Any = None, vcov: str = "model") -> WaldTest:
    """Test Rβ = r: χ²(q) with the model covariance; with CR2 the t test on Satterthwaite df
    (q = 1) or the HTZ F test (q > 1; Pustejovsky & Tipton 2018, sec. 3.2)."""
    p = fit.coef.size
    R = np.atleast_2d(np.asarray(R, dtype=float))
    if R.shape[1] != p or not np.all(np.isfinite(R)):
        raise AnalysisError(f"the constraint matrix needs {p} finite columns, one per coefficient")
    q = R.shape[0]
    if np.linalg.matrix_rank(R) < q:
        raise AnalysisError("the constraints are redundant (R is not of full row rank)")
    r = np.zeros(q) if r is None else np.asarray(r, dtype=float).reshape(-1)
    if r.size != q:
        raise AnalysisError(f"{r.size} right-hand values for {q} constraints")
    d = R @ fit.coef - r
    est = tuple(float(x) for x in d)
    if vcov == "model":
        qstat = float(d @ np.linalg.solve(R @ fit.vcov_model @ R.T, d))
        return WaldTest("chi2", qstat, float(q), float("inf"), float(stats.chi2.sf(qstat, q)),
                        qstat, est)
    if vcov != "cr2":
        raise AnalysisError(f"unknown vcov '{vcov}'; use 'model' or 'cr2'")
    rob = fit.robust
    if rob is None:
        raise AnalysisError("this fit carries no robust covariance")
    if q == 1:
        se = float(np.sqrt(R[0] @ rob.vcov @ R[0]))
        df = rob.df_contrast(R[0])
        if not se > 0:
            raise AnalysisError("the robust SE of this contrast is 0; the test is undefined")
        tstat = float(d[0] / se)
        return WaldTest("t-satterthwaite", tstat, 1.0, df, float(2 * stats.t.sf(abs(tstat), df)),
                        tstat**2, est)
    f, df1, df2, pval, qstat = rob.htz(R, d)
    return WaldTest("htz", f, df1, df2, pval, qstat, est)


def pool_multilevel(
    y: Any, v: Any, cluster: Any, alpha: float = 0.05, inference: str = "cr2",
) -> MultilevelPool:
    """Event-level pooled estimate: the intercept of :func:`fit_multilevel`.

    ``inference='cr2'``: CR2 SE and a t interval on the Satterthwaite df (with a note when
    df < 4, Tipton 2015); ``'model'``: the model-based SE and a normal (Wald) interval.
    """
    if inference not in INFERENCE:
        raise AnalysisError(f"unknown inference '{inference}'; use one of: {', '.join(INFERENCE)}")
    if not (isinstance(alpha, float | int) and 0.0 < float(alpha) < 1.0):
        raise AnalysisError(f"alpha must be between 0 and 1 (e.g. 0.05), got {alpha!r}")
    alpha = float(alpha)
    fit = fit_multilevel(y, v, cluster)
    est = float(fit.coef[0])
    notes = list(fit.notes)
    if inference == "cr2":
        se, df = float(fit.se_cr2[0]), float(fit.df_cr2[0])
        if not (se > 0 and df > 0):
            raise AnalysisError("the CR2 standard error is 0 or its degrees of freedom are "
                                "undefined; use inference='model'")
        crit = float(stats.t.isf(alpha / 2, df))
        stat = est / se
        pval = float(2 * stats.t.sf(abs(stat), df))
        if df < DF_UNRELIABLE:
            notes.append(f"CR2 Satterthwaite df = {df:.2f} < 4: robust inference is unreliable "
                         f"with so few events ({fit.k_events}) (Tipton 2015)")
    else:
        se, df = float(fit.se_model[0]), float("inf")
        crit = float(stats.norm.isf(alpha / 2))
        stat = est / se
        pval = float(2 * stats.norm.sf(abs(stat)))
    return MultilevelPool(
        k=fit.k_estimates, k_estimates=fit.k_estimates, k_events=fit.k_events,
        inference=inference, alpha=alpha, estimate=est, se=se, ci_lower=est - crit * se,
        ci_upper=est + crit * se, z_or_t=float(stat), pvalue=pval, df=df,
        sigma2_event=fit.sigma2_event, sigma2_within=fit.sigma2_within,
        converged=fit.converged, iterations=fit.iterations, notes=tuple(notes),
    )
