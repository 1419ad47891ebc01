"""Cluster-robust (sandwich) variance of a weighted least-squares fit: CR0 and CR2.

The fit is the generalised least-squares (GLS) estimator β̂ = M X'Wy, M = (X'WX)⁻¹, with
block-diagonal working weights W = Φ⁻¹, Φ = diag(Φ₁, …, Φ_m) the *working* covariance of the m
clusters (events). With e = y − Xβ̂ the residuals,

    V^CR = M [Σ_j X_j'W_j A_j e_j e_j'A_j'W_j X_j] M       (Liang & Zeger 1986, Biometrika 73:13)

* ``CR0``: A_j = I (no small-sample adjustment).
* ``CR2``: A_j = (I − H_jj)^(−1/2), H = X M X'W, the bias-reduced linearisation of Bell &
  McCaffrey (2002, Surv Methodol 28:169), in the working-model form of Pustejovsky & Tipton
  (2018, J Bus Econ Stat 36:672, sec. 2), used for meta-analysis by Tipton (2015, Psychol Methods
  20:375) after Hedges, Tipton & Johnson (2010, Res Synth Methods 1:39).

*Which form, exactly.* H_jj = X_j M X_j'W_j is not symmetric when W_j ≠ cI. We compute its
principal inverse square root through a factor L_j of the working covariance (Φ_j = L_j L_j'):
whitened design X̃_j = L_j⁻¹X_j, residual ẽ_j = L_j⁻¹e_j, whitened leverage H̃_jj = X̃_j M X̃_j'
(symmetric), Ã_j = (I − H̃_jj)^(−1/2) its symmetric inverse square root, and

    X_j'W_j A_j e_j = X̃_j' Ã_j ẽ_j,   i.e.  A_j = L_j Ã_j L_j⁻¹ = (I − H_jj)^(−1/2).

This is Bell & McCaffrey's CR2 applied to the GLS-whitened regression; it does not depend on the
factor chosen (L_j → L_j Q, Q orthogonal, gives the same result) and it satisfies the
unbiasedness criterion of Pustejovsky & Tipton (2018, eq. 5): A_j (I − H)_j Φ (I − H)_j' A_j' = Φ_j,
so E[V^CR2] = M exactly when the working model is the true covariance. Pustejovsky & Tipton state
A_j with a Cholesky factor D_j of Φ_j as A_j = D_j'B_j^(+1/2)D_j; that satisfies the same
criterion but is in general a different matrix when Φ_j is not a multiple of I. We implement the
whitened form above because it is the one that reduces to A_j = (I − H_jj)^(−1/2) as the CR2
formula is usually written, and because it is invariant to the factor. Where I − H̃_jj is
singular (a cluster fitted exactly, e.g. by a cluster-level indicator), the Moore–Penrose
inverse square root is used (eigenvalues below 1e-10 set to 0), as in Pustejovsky & Tipton.

Only inverse-variance working weights (W = Φ⁻¹) are supported: the multilevel model uses its
fitted covariance as the working model.

*Satterthwaite degrees of freedom* for a contrast c (Bell & McCaffrey 2002, sec. 4; Pustejovsky
& Tipton 2018, eq. 7): c'V^CR c = Σ_j (p_j'y)² with p_j = (I − H)_j'A_j'W_j X_j M c, and

    df = (Σ_j p_j'Φp_j)² / Σ_j Σ_k (p_j'Φp_k)².

With W = Φ⁻¹ the m × m matrix G_jk = p_j'Φp_k is (our algebra, checked densely in the tests)
G_jk = δ_jk g_j'g_j − q_j'M q_k with g_j = Ã_j X̃_j M c and q_j = X̃_j'g_j, so no N × N matrix is
formed.

*HTZ test* of q > 1 constraints Cβ = c₀ (Pustejovsky & Tipton 2018, sec. 3.2): with Ω = CMC',
standardised contrasts the rows of Ω^(−1/2)C, and the Wald statistic Q = d'(CV^CR2C')⁻¹d,
d = Cβ̂ − c₀, the CR2 matrix is approximated by a Wishart with η degrees of freedom,
η = q(q + 1) / Σ_s Σ_t Var(d_st), Var(d_st) = Σ_i Σ_j [G^ss_ij G^tt_ij + G^st_ij G^ts_ij]
(normal quadratic forms under the working model), and F = Q(η − q + 1)/(ηq) ~ F(q, η − q + 1).
For q = 1 it is the squared t test with Satterthwaite df.

A general-purpose library with CR2 and these degrees of freedom would be used instead: statsmodels
0.14/0.15 offers cluster-robust variance of the CR1 type only (factor G/(G − 1)·(N − 1)/(N − K),
or none), and linearmodels / pyfixest document CR1-type and jackknife (CRV3) variants, not CR2
with Satterthwaite df, so it is written here once.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import linalg, stats

from exposhift.errors import AnalysisError

#: eigenvalues of I − H̃_jj below this are treated as 0 (Moore–Penrose inverse square root)
EIG_TOL = 1e-10
KINDS: tuple[str, ...] = ("CR0", "CR2")


@dataclass(frozen=True, eq=False)
class ClusterIndex:
    """Clusters as contiguous blocks: ``order`` sorts the rows by cluster, ``idx`` is the cluster
    number of each sorted row, ``starts``/``counts`` the blocks (clusters in ``labels`` order)."""

    labels: np.ndarray
    order: np.ndarray
    idx: np.ndarray
    starts: np.ndarray
    counts: np.ndarray

    @property
    def m(self) -> int:
        return int(self.counts.size)

    @classmethod
    def from_labels(cls, cluster: Any, n: int) -> ClusterIndex:
        cl = np.asarray(cluster)
        if cl.ndim != 1 or cl.size != n:
            raise AnalysisError(
                f"{cl.size} cluster labels for {n} estimates; give one event label per estimate"
            )
        missing = [i for i, c in enumerate(cl.tolist()) if c is None or c != c]
        if missing:
            raise AnalysisError(
                f"event label missing at position(s) {', '.join(map(str, missing[:10]))}; every "
                "estimate needs the event it comes from"
            )
        try:
            labels, codes = np.unique(cl, return_inverse=True)
        except TypeError as exc:
            raise AnalysisError("event labels must be all text or all numbers") from exc
        codes = codes.reshape(-1)
        order = np.argsort(codes, kind="stable")
        counts = np.bincount(codes, minlength=labels.size)
        starts = np.concatenate(([0], np.cumsum(counts)[:-1]))
        return cls(labels=labels, order=order, idx=codes[order], starts=starts, counts=counts)

    def sums(self, a: np.ndarray) -> np.ndarray:
        """Per-cluster sums of the rows of ``a`` (sorted order), shape (m, ...)."""
        return np.add.reduceat(a, self.starts, axis=0)


@dataclass(frozen=True, eq=False)
class ClusterRobust:
    """A cluster-robust covariance of GLS coefficients, with what contrasts and tests need.

    ``df`` holds the Satterthwaite degrees of freedom of each coefficient under the working
    model. ``bread`` is M = (X'WX)⁻¹; ``K``/``L`` are the per-cluster p × p matrices X̃_j'Ã_jX̃_j
    and X̃_j'Ã_j²X̃_j from which :meth:`df_contrast` and :meth:`htz` work.
    """

    kind: str
    coef: np.ndarray
    vcov: np.ndarray
    se: np.ndarray
    df: np.ndarray
    k_clusters: int
    bread: np.ndarray = field(repr=False)
    K: np.ndarray = field(repr=False)
    L: np.ndarray = field(repr=False)
    notes: tuple[str, ...] = ()

    def _g(self, C: np.ndarray) -> np.ndarray:
        """G[s, t, i, j] = p_i(c_s)'Φ p_j(c_t) for the rows c_s of C (see module docstring)."""
        ct = self.bread @ C.T                                   # (p, q): M c_s
        kc = np.einsum("jab,bs->jas", self.K, ct)               # q_j(c_s) = K_j M c_s
        gg = np.einsum("as,jab,bt->jst", ct, self.L, ct)        # g_j(c_s)'g_j(c_t)
        qmq = np.einsum("ias,ab,jbt->stij", kc, self.bread, kc)
        eye = np.eye(self.k_clusters)
        return np.einsum("jst,ij->stij", gg, eye) - qmq

    def df_contrast(self, c: Any) -> float:
        """Satterthwaite df of c'β̂ (Pustejovsky & Tipton 2018, eq. 7)."""
        c = np.asarray(c, dtype=float).reshape(1, -1)
        g = self._g(c)[0, 0]
        denom = float(np.sum(g * g))
        if not denom > 0:
            raise AnalysisError("the Satterthwaite degrees of freedom are undefined for this "
                                "contrast (its robust variance is identically 0)")
        return float(np.trace(g) ** 2 / denom)

    def htz(self, C: Any, d: Any) -> tuple[float, float, float, float, float]:
        """Approximate Hotelling-T² test of Cβ = c₀ given d = Cβ̂ − c₀ (Pustejovsky & Tipton
        2018, sec. 3.2). Returns (F, q, η − q + 1, p value, Wald Q)."""
        C = np.atleast_2d(np.asarray(C, dtype=float))
        d = np.asarray(d, dtype=float).reshape(-1)
        q = C.shape[0]
        omega = C @ self.bread @ C.T
        w, u = np.linalg.eigh(omega)
        if not np.all(w > 0):
            raise AnalysisError("the constraint matrix is not of full row rank")
        root_inv = (u / np.sqrt(w)) @ u.T
        g = self._g(root_inv @ C)
        var_sum = float(np.einsum("ssij,ttij->", g, g) + np.einsum("stij,tsij->", g, g))
        eta = q * (q + 1) / var_sum
        qstat = float(d @ np.linalg.solve(C @ self.vcov @ C.T, d))
        df2 = eta - q + 1
        if not df2 > 0:
            raise AnalysisError(
                f"too few events for an HTZ test of {q} constraints (eta = {eta:.3g}); test fewer "
                "constraints or use vcov='model'"
            )
        f = qstat * df2 / (eta * q)
        return float(f), float(q), float(df2), float(stats.f.sf(f, q, df2)), qstat


def robust_whitened(
    Xt: np.ndarray, et: np.ndarray, bread: np.ndarray, coef: np.ndarray, groups: ClusterIndex,
    kind: str = "CR2",
) -> ClusterRobust:
    """CR0/CR2 from the whitened design X̃ = L⁻¹X and residual ẽ = L⁻¹e, rows sorted by cluster.

    Clusters of equal size are processed together (batched ``eigh``), so the only Python loop is
    over the distinct cluster sizes.
    """
    if kind not in KINDS:
        raise AnalysisError(f"unknown robust variance '{kind}'; use one of: {', '.join(KINDS)}")
    m, p = groups.m, Xt.shape[1]
    meat_rows = np.empty((m, p))
    K = np.empty((m, p, p))
    L = np.empty((m, p, p))
    pinv_clusters = 0
    xm = Xt @ bread
    for n in np.unique(groups.counts):
        ids = np.flatnonzero(groups.counts == n)
        rows = groups.starts[ids][:, None] + np.arange(n)
        xb, eb = Xt[rows], et[rows][..., None]                 # (mb, n, p), (mb, n, 1)
        xbt = xb.transpose(0, 2, 1)
        if kind == "CR0":
            axb, aeb = xb, eb
        elif n == 1:
            lev = np.sum(xm[rows] * xb, axis=2)[..., None]       # (mb, 1, 1)
            ok = (1.0 - lev) > EIG_TOL
            pinv_clusters += int(np.sum(~ok))
            a = np.where(ok, 1.0 / np.sqrt(np.where(ok, 1.0 - lev, 1.0)), 0.0)
            axb, aeb = a * xb, a * eb
        else:
            lam, vec = np.linalg.eigh(np.eye(n) - xm[rows] @ xbt)
            ok = lam > EIG_TOL
            pinv_clusters += int(np.sum(~ok.all(axis=1)))
            inv_root = np.where(ok, 1.0 / np.sqrt(np.where(ok, lam, 1.0)), 0.0)
            a = (vec * inv_root[:, None, :]) @ vec.transpose(0, 2, 1)   # Ã_j, symmetric
            axb, aeb = a @ xb, a @ eb
        meat_rows[ids] = (xbt @ aeb)[..., 0]                    # X̃_j'Ã_j ẽ_j
        K[ids] = xbt @ axb
        L[ids] = axb.transpose(0, 2, 1) @ axb
    half = meat_rows @ bread
    vcov = half.T @ half
    notes = ()
    if pinv_clusters:
        notes = (f"CR2 adjustment used a pseudo-inverse in {pinv_clusters} event(s) fitted "
                 "exactly by the model (Pustejovsky & Tipton 2018)",)
    out = ClusterRobust(
        kind=kind, coef=coef, vcov=vcov, se=np.sqrt(np.clip(np.diag(vcov), 0.0, None)),
        df=np.full(p, np.nan), k_clusters=m, bread=bread, K=K, L=L, notes=notes,
    )
    object.__setattr__(out, "df", _coefficient_df(bread, K, L))
    return out


def _coefficient_df(bread: np.ndarray, K: np.ndarray, L: np.ndarray) -> np.ndarray:
    """Satterthwaite df of every coefficient at once: G^(t) for c = e_t (module docstring)."""
    kc = K @ bread                                                # (m, p, t): K_j M e_t
    gg = np.einsum("at,jab,bt->tj", bread, L, bread)              # ‖g_j(e_t)‖²
    qmq = np.einsum("iat,ab,jbt->tij", kc, bread, kc)              # q_i'M q_j
    g = -qmq
    diag = np.arange(K.shape[0])
    g[:, diag, diag] += gg
    tr = np.einsum("tjj->t", g)
    den = np.einsum("tij,tij->t", g, g)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, tr * tr / np.where(den > 0, den, 1.0), np.nan)


def _whiten_general(
    X: np.ndarray, y: np.ndarray, groups: ClusterIndex, working: Any,
) -> tuple[np.ndarray, np.ndarray]:
    """Sorted, whitened X̃ = L⁻¹X and ỹ = L⁻¹y for the working covariance ``working``."""
    Xs, ys = X[groups.order], y[groups.order]
    if working is None:
        return Xs, ys
    if isinstance(working, list | tuple) and len(working) and np.ndim(working[0]) == 2:
        if len(working) != groups.m:
            raise AnalysisError(f"{len(working)} working covariance blocks for {groups.m} "
                                "clusters; give one block per cluster, in sorted label order")
        Xt, yt = np.empty_like(Xs), np.empty_like(ys)
        for j, (s, n) in enumerate(zip(groups.starts, groups.counts, strict=True)):
            phi = np.asarray(working[j], dtype=float)
            if phi.shape != (n, n) or not np.all(np.isfinite(phi)):
                raise AnalysisError(f"working covariance block {j} must be a finite {n} x {n} "
                                    "matrix")
            try:
                lo = linalg.cholesky(phi, lower=True)
            except linalg.LinAlgError as exc:
                raise AnalysisError(f"working covariance block {j} is not positive "
                                    "definite") from exc
            Xt[s:s + n] = linalg.solve_triangular(lo, Xs[s:s + n], lower=True)
            yt[s:s + n] = linalg.solve_triangular(lo, ys[s:s + n], lower=True)
        return Xt, yt
    phi = np.asarray(working, dtype=float).reshape(-1)
    if phi.size != y.size or not np.all(np.isfinite(phi) & (phi > 0)):
        raise AnalysisError("working variances must be one positive finite number per row")
    r = 1.0 / np.sqrt(phi[groups.order])
    return Xs * r[:, None], ys * r


def _cluster_vcov(X: Any, y: Any, cluster: Any, working: Any, kind: str) -> ClusterRobust:
    y = np.asarray(y, dtype=float).reshape(-1)
    X = np.asarray(X, dtype=float)
    if X.ndim == 1:
        X = X[:, None]
    if X.shape[0] != y.size or not (np.all(np.isfinite(X)) and np.all(np.isfinite(y))):
        raise AnalysisError("X must have one finite row per finite outcome value")
    groups = ClusterIndex.from_labels(cluster, y.size)
    if groups.m < 2:
        raise AnalysisError("cluster-robust variance needs at least 2 clusters (events)")
    Xt, yt = _whiten_general(X, y, groups, working)
    xtx = Xt.T @ Xt
    if np.linalg.matrix_rank(xtx) < X.shape[1]:
        raise AnalysisError("the design matrix is not of full column rank")
    bread = np.linalg.inv(xtx)
    coef = bread @ (Xt.T @ yt)
    return robust_whitened(Xt, yt - Xt @ coef, bread, coef, groups, kind)


def cr2_vcov(X: Any, y: Any, cluster: Any, working: Any = None) -> ClusterRobust:
    """GLS fit of y on X with working weights W = Φ⁻¹ and its CR2 covariance (see module doc).

    ``working`` is the working covariance Φ: None (Φ = I, ordinary least squares), one variance
    per row (Φ diagonal, weights 1/variance), or a list of per-cluster matrices in the order of
    the sorted cluster labels. Returns coefficients, CR2 covariance, SEs and Satterthwaite df.
    """
    return _cluster_vcov(X, y, cluster, working, "CR2")


def cr0_vcov(X: Any, y: Any, cluster: Any, working: Any = None) -> ClusterRobust:
    """As :func:`cr2_vcov` with no small-sample adjustment (A_j = I; Liang & Zeger 1986)."""
    return _cluster_vcov(X, y, cluster, working, "CR0")
