"""Restricted likelihood of the three-level model and its maximisation (see :mod:`.multilevel`).

*Per-block algebra, no N × N matrix.* With a_ij = 1/(v_ij + σ²_within), s_i = Σ_j a_ij and
t_i = 1 + σ²_event s_i, the Sherman–Morrison–Woodbury identity gives
V_i⁻¹ = diag(a_i) − (σ²_event/t_i) a_i a_i' and log|V_i| = Σ_j log(1/a_ij) + log t_i (Harville
1977, JASA 72:320; Searle, Casella & McCulloch 1992, Variance Components), so every
quadratic form and trace below needs only per-event sums (one small m × N indicator product).

*Restricted likelihood* (Harville 1977; Patterson & Thompson 1971, Biometrika 58:545):

    ℓ_R(θ) = −½[(N − p) log 2π + log|V| + log|X'V⁻¹X| + (y − Xβ̂)'V⁻¹(y − Xβ̂)],

β̂ = (X'V⁻¹X)⁻¹X'V⁻¹y (GLS, Aitken 1935), with score ∂ℓ_R/∂θ_k = −½[tr(PV_k) − y'PV_kPy],
P = V⁻¹ − V⁻¹X(X'V⁻¹X)⁻¹X'V⁻¹, V_event = blockdiag(11'), V_within = I (Harville 1977).
It is maximised over (σ²_event, σ²_within) ∈ [0, big]² by projected Newton steps with the
observed information y'PV_kPV_lPy − ½tr(PV_kPV_l) (falling back to the average information of
Gilmour, Thompson & Cullis 1995, Biometrics 51:1440, then to steepest descent), steps stopped at
the first bound and halved while ℓ_R would fall, from two interior starts; then, as the boundary
check, on each edge (one component fixed at 0) unless a run already ended there, and at the
origin. The best of all is kept, so no boundary point is better than the reported one.
``converged`` requires the chosen run to have stopped normally, no component at the upper bound,
and the Karush–Kuhn–Tucker conditions (zero score inside, a score of ℓ_R that is not positive at
a zero component). The singleton case fits the sum only (σ²_within held at 0).
"""

from __future__ import annotations

import numpy as np

from exposhift.errors import AnalysisError
from exposhift.synthesis.robust import ClusterIndex

#: interior starting shares of (event, within) in the total variance
STARTS: tuple[tuple[float, float], ...] = ((0.8, 0.2), (0.2, 0.8))
#: projected-score tolerance (scaled variances) for ``converged``
KKT_TOL = 1e-6
#: a Newton run stops when its full step changes no component by more than this × (value + scale)
STEP_TOL = 1e-10
MAX_ITER = 200
ZERO_SNAP = 1e-12
LOG_2PI = float(np.log(2 * np.pi))


class RemlProblem:
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
        the observed information of ℓ_R is y'PV_kPV_lPy − ½tr(PV_kPV_l) (Harville 1977)
        and the average information AI_kl = ½(V_kPy)'P(V_lPy) (Gilmour, Thompson & Cullis 1995,
        Biometrics 51:1440) its fallback when the observed one is not positive definite.
        """
        S, idx, p = self.S, self.idx, self.p
        d = self.v + s2w
        a = 1.0 / d
        buf = self.buf  # [a, a², a³, aZ]
        buf[:, 0] = a
        np.multiply(a, a, out=buf[:, 1])
        np.multiply(buf[:, 1], a, out=buf[:, 2])
        np.multiply(a[:, None], self.Z, out=buf[:, 3:])
        sums = S @ buf  # event sums, (m, 3 + p + 1)
        s, sa2, sa3, G = sums[:, 0], sums[:, 1], sums[:, 2], sums[:, 3:]
        t = 1.0 + s2e * s
        c = s2e / t
        za = buf[:, 3:]
        cross = self.Z.T @ za - (G.T * c) @ G  # Z'V⁻¹Z
        bread, logdet_x = _inv_logdet(cross[:p, :p])
        beta = bread @ cross[:p, p]
        rss = cross[p, p] - cross[:p, p] @ beta
        logdet = np.log(d).sum() + np.log(t).sum() + logdet_x
        nll = 0.5 * ((self.n - p) * LOG_2PI + logdet + rss)
        if not info:
            return nll, None, None, beta, bread
        T = np.eye(p + 1)
        T[:p, p] = -beta
        vz = za - a[:, None] * (c[:, None] * G)[idx]  # V⁻¹[X y]
        qp = vz @ T  # [Q, Py], Q = V⁻¹X
        aqp = a[:, None] * qp
        r2 = S @ aqp
        vqp = aqp - a[:, None] * (c[:, None] * r2)[idx]  # V⁻¹[Q, Py]
        e = (G / t[:, None]) @ T  # event sums of [Q, Py]
        w = s / t
        k1, k2 = qp.T @ qp, qp.T @ vqp
        k3, k4, k5 = e.T @ e, (e.T * w) @ e, e.T @ (r2 / t[:, None])
        qq, cc = k1[:p, :p], k3[:p, :p]
        xw, xe = k1[:p, p], k3[:p, p]  # X'V⁻¹u_within, X'V⁻¹u_event
        d_within = s.sum() - c @ sa2 - (bread * qq).sum() - k1[p, p]
        d_event = w.sum() - (bread * cc).sum() - k3[p, p]
        grad = 0.5 * np.array([d_event, d_within])
        # average information AI_kl = ½ u_k'P u_l, u_event = event sums of Py, u_within = Py
        mxe, mxw = bread @ xe, bread @ xw
        ai = 0.5 * np.array(
            [[k4[p, p] - xe @ mxe, k5[p, p] - xe @ mxw], [k5[p, p] - xe @ mxw, k2[p, p] - xw @ mxw]]
        )
        # Fisher information ½tr(PV_kPV_l), P = V⁻¹ − QMQ', block by block
        mqq, mcc = bread @ qq, bread @ cc
        tr_ee = (w * w).sum() - 2 * (bread * k4[:p, :p]).sum() + (mcc * mcc.T).sum()
        tr_ew = (sa2 / (t * t)).sum() - 2 * (bread * k5[:p, :p]).sum() + (mcc * mqq.T).sum()
        tr_ww = (
            sa2.sum()
            - 2 * c @ sa3
            + (c * c) @ (sa2 * sa2)
            - 2 * (bread * k2[:p, :p]).sum()
            + (mqq * mqq.T).sum()
        )
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


def _newton(
    prob: RemlProblem,
    x0: np.ndarray,
    free: np.ndarray,
    scale: float,
    big: float,
    max_iter: int = MAX_ITER,
) -> tuple[float, np.ndarray, int, bool]:
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
            if not step @ grad < 0:  # not a descent direction
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
            new[new <= ZERO_SNAP * scale] = 0.0  # land exactly on the bound
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


def maximise_reml(prob: RemlProblem, singleton: bool) -> tuple[np.ndarray, int, bool]:
    """Best (σ²_event, σ²_within) over the starts, the two edges and the origin, its iterations
    and whether it converged and satisfies the Karush–Kuhn–Tucker conditions."""
    v, Z = prob.v, prob.Z
    resid = Z[:, -1] - Z[:, :-1] @ np.linalg.lstsq(Z[:, :-1], Z[:, -1], rcond=None)[0]
    scale = float(np.median(v))
    total = max(float(np.mean(resid**2) - np.mean(v)), 0.1 * scale)
    big = 1e4 * (float(np.var(Z[:, -1])) + float(v.max()))
    both, event_only, within_only = (
        np.array([True, True]),
        np.array([True, False]),
        np.array([False, True]),
    )
    if singleton:
        runs = [_newton(prob, np.array([total, 0.0]), event_only, scale, big)]
    else:
        runs = [_newton(prob, np.array(sh) * total, both, scale, big) for sh in STARTS]
        # boundary check: the best point on each edge, unless a run already ended there
        for k, free in ((1, event_only), (0, within_only)):
            if not any(r[1][k] == 0.0 and r[3] for r in runs):
                runs.append(_newton(prob, np.where(free, total, 0.0), free, scale, big))
    runs.append((prob.evaluate(0.0, 0.0, info=False)[0], np.zeros(2), 0, True))
    f, x, nit, ok = min(runs, key=lambda r: r[0])
    grad = prob.evaluate(*x)[1] * scale
    free = [0] if singleton else [0, 1]
    kkt = all(
        (abs(grad[k]) <= KKT_TOL * (1.0 + x[k] / scale))
        if x[k] > ZERO_SNAP * scale
        else (grad[k] >= -KKT_TOL)
        for k in free
    )
    at_top = bool(np.any(x >= big * (1 - 1e-9)))
    return x, nit, bool(ok and kkt and not at_top)
