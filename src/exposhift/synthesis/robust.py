"""Cluster-robust (sandwich) variance of a weighted least-squares fit: CR0 and CR2.

The fit is the generalised least-squares (GLS) estimator β̂ = M X'Wy, M = (X'WX)⁻¹, with
block-diagonal working weights W = Φ⁻¹, Φ = diag(Φ₁, …, Φ_m) the *working* covariance of the m
clusters (events). With e = y − Xβ̂ the residuals,

    V^CR = M [Σ_j X_j'W_j A_j e_j e_j'A_j'W_j X_j] M       (Liang & Zeger 1986, Biometrika 73:13)

* ``CR0``: A_j = I (no small-sample adjustment).
* ``CR2``: the bias-reduced linearisation of Bell & McCaffrey (2002, Surv Methodol 28:169) in
  the working-model form of Pustejovsky & Tipton (2018, J Bus Econ Stat 36:672), used for
  meta-analysis by Tipton (2015, Psychol Methods 20:375) after Hedges, Tipton & Johnson (2010,
  Res Synth Methods 1:39):

      A_j = D_j' B_j^(+1/2) D_j,   B_j = D_j (I − H)_j Φ (I − H)_j' D_j',   H = X M X'W,

  with D_j a square-root factor of the working block, D_j'D_j = Φ_j (Pustejovsky & Tipton use
  the upper Cholesky factor; the result is the same for every factor, since D_j → QD_j with Q
  orthogonal gives B_j → QB_jQ' and the same A_j; we use the symmetric root Φ_j^(1/2)) and
  B^(+1/2) the symmetric square root of the Moore–Penrose inverse (eigenvalues below 1e-10 × the
  largest treated as 0: a cluster fitted exactly, e.g. by a cluster-level indicator). With W = Φ⁻¹,
  (I − H)_jΦ(I − H)_j' = Φ_j − X_jMX_j'. It satisfies the unbiasedness criterion
  A_j(I − H)_jΦ(I − H)_j'A_j' = Φ_j, so E[V^CR2] = M when the working model is the true
  covariance. For Φ_j = I (ordinary least squares) it is BM's A_j = (I − H_jj)^(−1/2).

*Which form, and why.* The criterion has more than one solution when Φ_j is not a multiple of I.
Another solution is the CR2 of the GLS-whitened regression, A_j = (I − H_jj)^(−1/2) as a
principal power of the non-symmetric H_jj; it gives different numbers (a few per cent in our
checks) when the working blocks are not spherical. We implement the factorised form above
because it is the one Pustejovsky & Tipton (2018) publish (written here from the paper as we
recall it; it is checked against a dense, written-out form of that formula and against hand-worked
cases, not against another implementation). Note: for non-spherical working blocks this CR2 can
fall below CR0 (unlike the whitened form, which inflates every cluster's score for an intercept);
for Φ_j = φ_j I both forms agree and CR2 ≥ CR0 for an intercept.

Only inverse-variance working weights (W = Φ⁻¹) are supported: the multilevel model uses its
fitted covariance as the working model.

*Satterthwaite degrees of freedom* for a contrast c (Bell & McCaffrey 2002; Pustejovsky &
Tipton 2018): c'V^CR c = Σ_j (p_j'y)² with p_j = (I − H)_j'A_j'W_j X_j M c, and

    df = (Σ_j p_j'Φp_j)² / Σ_j Σ_k (p_j'Φp_k)².

With W = Φ⁻¹ the m × m matrix G_jk = p_j'Φp_k is (our algebra, checked densely in the tests)
G_jk = δ_jk u_j'Φ_ju_j − q_j'M q_k with u_j = A_j'W_jX_jMc and q_j = X_j'u_j, so no N × N matrix
is formed: per cluster only K_j = X_j'A_j'W_jX_j and L_j = X_j'W_jA_jΦ_jA_j'W_jX_j are kept.

*HTZ test* of q > 1 constraints Cβ = c₀ (Pustejovsky & Tipton 2018): with Ω = CMC',
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

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from exposhift.errors import AnalysisError

#: eigenvalues of B_j below this × its largest are treated as 0 (Moore–Penrose inverse root)
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
    model. ``bread`` is M = (X'WX)⁻¹; ``K``/``L`` are the per-cluster p × p matrices
    X_j'A_j'W_jX_j and X_j'W_jA_jΦ_jA_j'W_jX_j from which :meth:`df_contrast` and :meth:`htz`
    work.
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
        ct = self.bread @ C.T  # (p, q): M c_s
        kc = np.einsum("jab,bs->jas", self.K, ct)  # q_j(c_s) = K_j M c_s
        gg = np.einsum("as,jab,bt->jst", ct, self.L, ct)  # u_j(c_s)'Φ_j u_j(c_t)
        qmq = np.einsum("ias,ab,jbt->stij", kc, self.bread, kc)
        eye = np.eye(self.k_clusters)
        return np.einsum("jst,ij->stij", gg, eye) - qmq

    def df_contrast(self, c: Any) -> float:
        """Satterthwaite df of c'β̂ (Pustejovsky & Tipton 2018)."""
        c = np.asarray(c, dtype=float).reshape(1, -1)
        g = self._g(c)[0, 0]
        denom = float(np.sum(g * g))
        if not denom > 0:
            raise AnalysisError(
                "the Satterthwaite degrees of freedom are undefined for this "
                "contrast (its robust variance is identically 0)"
            )
        return float(np.trace(g) ** 2 / denom)

    def htz(self, C: Any, d: Any) -> tuple[float, float, float, float, float]:
        """Approximate Hotelling-T² test of Cβ = c₀ given d = Cβ̂ − c₀ (Pustejovsky & Tipton
        2018). Returns (F, q, η − q + 1, p value, Wald Q)."""
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


def robust_blocks(
    Xs: np.ndarray,
    es: np.ndarray,
    bread: np.ndarray,
    coef: np.ndarray,
    groups: ClusterIndex,
    phi_blocks: Callable[[np.ndarray, int], np.ndarray],
    kind: str = "CR2",
) -> ClusterRobust:
    """CR0/CR2 from the design ``Xs`` and GLS residuals ``es`` (rows sorted by cluster).

    ``phi_blocks(ids, n)`` returns the working covariance blocks Φ_j, shape (len(ids), n, n), of
    the clusters ``ids``, all of size n; ``bread`` is M = (X'Φ⁻¹X)⁻¹. Clusters of equal size are
    processed together (batched ``eigh``): the only Python loop is over distinct sizes.
    """
    if kind not in KINDS:
        raise AnalysisError(f"unknown robust variance '{kind}'; use one of: {', '.join(KINDS)}")
    m, p = groups.m, Xs.shape[1]
    meat_rows = np.empty((m, p))
    K = np.empty((m, p, p))
    L = np.empty((m, p, p))
    pinv_clusters = 0
    for n in np.unique(groups.counts):
        ids = np.flatnonzero(groups.counts == n)
        rows = groups.starts[ids][:, None] + np.arange(n)
        xb, eb = Xs[rows], es[rows][..., None]  # (mb, n, p), (mb, n, 1)
        xbt = xb.transpose(0, 2, 1)
        phi = phi_blocks(ids, int(n))
        lam, vec = np.linalg.eigh(phi)
        if not np.all(lam > 0):
            raise AnalysisError("a working covariance block is not positive definite")
        vt = vec.transpose(0, 2, 1)
        root = (vec * np.sqrt(lam)[:, None, :]) @ vt  # Φ_j^(1/2)
        root_inv = (vec / np.sqrt(lam)[:, None, :]) @ vt  # Φ_j^(−1/2)
        if kind == "CR0":
            wa = root_inv @ root_inv  # W_j A_j = W_j
        else:
            b = root @ (phi - xb @ bread @ xbt) @ root  # B_j (W = Φ⁻¹)
            lb, vb = np.linalg.eigh(0.5 * (b + b.transpose(0, 2, 1)))
            ok = lb > EIG_TOL * np.max(np.abs(lb), axis=1, keepdims=True)
            pinv_clusters += int(np.sum(~ok.all(axis=1)))
            inv_root = np.where(ok, 1.0 / np.sqrt(np.where(ok, lb, 1.0)), 0.0)
            b_half = (vb * inv_root[:, None, :]) @ vb.transpose(0, 2, 1)
            wa = root_inv @ b_half @ root  # W_j A_j = Φ^(−1/2)B^(+1/2)Φ^(1/2)
        meat_rows[ids] = (xbt @ (wa @ eb))[..., 0]  # X_j'W_jA_j e_j
        ex = wa.transpose(0, 2, 1) @ xb  # A_j'W_j X_j
        K[ids] = xbt @ ex
        L[ids] = ex.transpose(0, 2, 1) @ phi @ ex
    half = meat_rows @ bread
    vcov = half.T @ half
    notes: tuple[str, ...] = ()
    if pinv_clusters:
        notes = (
            f"CR2 adjustment used a pseudo-inverse in {pinv_clusters} event(s) fitted "
            "exactly by the model (Pustejovsky & Tipton 2018)",
        )
    out = ClusterRobust(
        kind=kind,
        coef=coef,
        vcov=vcov,
        se=np.sqrt(np.clip(np.diag(vcov), 0.0, None)),
        df=np.full(p, np.nan),
        k_clusters=m,
        bread=bread,
        K=K,
        L=L,
        notes=notes,
    )
    object.__setattr__(out, "df", _coefficient_df(bread, K, L))
    return out


def _coefficient_df(bread: np.ndarray, K: np.ndarray, L: np.ndarray) -> np.ndarray:
    """Satterthwaite df of every coefficient at once: G^(t) for c = e_t (module docstring)."""
    kc = K @ bread  # (m, p, t): q_j(e_t)
    gg = np.einsum("at,jab,bt->tj", bread, L, bread)  # ‖g_j(e_t)‖²
    qmq = np.einsum("iat,ab,jbt->tij", kc, bread, kc)  # q_i'M q_j
    g = -qmq
    diag = np.arange(K.shape[0])
    g[:, diag, diag] += gg
    tr = np.einsum("tjj->t", g)
    den = np.einsum("tij,tij->t", g, g)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, tr * tr / np.where(den > 0, den, 1.0), np.nan)


def _block_source(
    y: np.ndarray,
    groups: ClusterIndex,
    working: Any,
) -> tuple[Callable[[np.ndarray, int], np.ndarray], np.ndarray | None]:
    """(Φ blocks by cluster ids and size, per-row inverse-variance weights for a diagonal Φ or
    None) for the working covariance ``working`` (see :func:`cr2_vcov`)."""
    if working is None:
        return (lambda ids, n: np.broadcast_to(np.eye(n), (ids.size, n, n))), None
    if isinstance(working, list | tuple) and len(working) and np.ndim(working[0]) == 2:
        if len(working) != groups.m:
            raise AnalysisError(
                f"{len(working)} working covariance blocks for {groups.m} "
                "clusters; give one block per cluster, in sorted label order"
            )
        blocks = []
        for j, n in enumerate(groups.counts):
            phi = np.asarray(working[j], dtype=float)
            if phi.shape != (n, n) or not np.all(np.isfinite(phi)):
                raise AnalysisError(
                    f"working covariance block {j} must be a finite {n} x {n} matrix"
                )
            if not np.allclose(phi, phi.T) or np.linalg.eigvalsh(phi)[0] <= 0:
                raise AnalysisError(f"working covariance block {j} is not positive definite")
            blocks.append(phi)
        return (lambda ids, n: np.stack([blocks[j] for j in ids])), None
    phi = np.asarray(working, dtype=float).reshape(-1)
    if phi.size != y.size or not np.all(np.isfinite(phi) & (phi > 0)):
        raise AnalysisError("working variances must be one positive finite number per row")
    ps = phi[groups.order]

    def diag_blocks(ids: np.ndarray, n: int) -> np.ndarray:
        rows = groups.starts[ids][:, None] + np.arange(n)
        return ps[rows][:, :, None] * np.eye(n)

    return diag_blocks, ps


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
    phi_blocks, _ = _block_source(y, groups, working)
    Xs, ys = X[groups.order], y[groups.order]
    # M = (X'Φ⁻¹X)⁻¹ and β̂ = M X'Φ⁻¹y, cluster by cluster
    xwx = np.zeros((X.shape[1], X.shape[1]))
    xwy = np.zeros(X.shape[1])
    for n in np.unique(groups.counts):
        ids = np.flatnonzero(groups.counts == n)
        rows = groups.starts[ids][:, None] + np.arange(n)
        wx = np.linalg.solve(phi_blocks(ids, int(n)), Xs[rows])
        xwx += np.einsum("jna,jnb->ab", Xs[rows], wx)
        xwy += np.einsum("jna,jn->a", wx, ys[rows])
    if np.linalg.matrix_rank(xwx) < X.shape[1]:
        raise AnalysisError("the design matrix is not of full column rank")
    bread = np.linalg.inv(xwx)
    coef = bread @ xwy
    return robust_blocks(Xs, ys - Xs @ coef, bread, coef, groups, phi_blocks, kind)


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
