"""Cluster-robust variance (CR0, CR2), Satterthwaite df and the HTZ test, against outside routes.

Sources: hand-computed intercept-only examples (Bell & McCaffrey 2002, Surv Methodol 28:169, the
CR2 definition A_j = (I − H_jj)^(−1/2)); statsmodels WLS/OLS ``cov_type="cluster"`` (a
general-purpose library) for CR0; and a dense N × N implementation written here of the formulas
of Pustejovsky & Tipton (2018, J Bus Econ Stat 36:672) for CR2, df and HTZ.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import linalg

from exposhift.errors import AnalysisError
from exposhift.synthesis.robust import cr0_vcov, cr2_vcov

# --------------------------------------------------------------------------------------------
# hand-computed examples


def test_cr2_intercept_only_ols_by_hand():
    # 3 clusters of sizes 1, 2, 3; y = [0 | 1, 3 | 2, 4, 8]; OLS (working model Φ = I).
    # mean = 18/6 = 3, residuals [-3 | -2, 0 | -1, 1, 5], cluster sums -3, -2, 5.
    # H = J/6, so H_jj = J_n/6 and (I - H_jj)^(-1/2) has eigenvalue 1/sqrt(1 - n/6) along 1 and
    # 1 elsewhere: 1'A_j e_j = sum(e_j)/sqrt(1 - n_j/6).
    # CR2 var = (1/36)[9/(5/6) + 4/(4/6) + 25/(3/6)] = (10.8 + 6 + 50)/36 = 66.8/36 (by hand)
    # CR0 var = (9 + 4 + 25)/36 = 38/36 (by hand)
    y = np.array([0.0, 1.0, 3.0, 2.0, 4.0, 8.0])
    cl = np.array([1, 2, 2, 3, 3, 3])
    # the size-2 adjustment matrix written out: (I - J/6)^(-1/2) = I + (sqrt(3/2) - 1) J/2
    a2 = np.array(
        [[1.1123724356957945, 0.1123724356957945], [0.1123724356957945, 1.1123724356957945]]
    )
    i_minus_h = np.eye(2) - np.full((2, 2), 1 / 6)
    assert a2 @ a2 @ i_minus_h == pytest.approx(np.eye(2), abs=1e-14)
    e2 = np.array([-2.0, 0.0])
    assert np.ones(2) @ a2 @ e2 == pytest.approx(-2.0 / np.sqrt(4 / 6), rel=1e-14)

    cr2 = cr2_vcov(np.ones(6), y, cl)
    cr0 = cr0_vcov(np.ones(6), y, cl)
    assert cr2.coef[0] == pytest.approx(3.0, rel=1e-14)
    assert cr2.vcov[0, 0] == pytest.approx(66.8 / 36, rel=1e-12)
    assert cr0.vcov[0, 0] == pytest.approx(38 / 36, rel=1e-12)


def test_cr2_intercept_only_weighted_by_hand():
    # 4 clusters of sizes 1, 2, 3, 1 with equal weights within a cluster, w = 1/v =
    # [1 | 2, 2 | 1, 1, 1 | 1], S = 9; y = [0 | 0, 2 | 3, 0, 2 | 0]: mu = 9/9 = 1, residuals
    # [-1 | -1, 1 | 2, -1, 1 | -1], cluster sums of w*e: -1, 0, 2, -1; S_j = 1, 4, 3, 1.
    # With Phi_j = I/w_j, B_j = Phi_j^(1/2)(Phi_j - J/S)Phi_j^(1/2) has eigenvalue
    # (1 - S_j/S)/w_j^2 along 1 and 1/w_j^2 elsewhere, so 1'W_jA_j e_j = sum(w e)_j/sqrt(1 - S_j/S):
    # CR2 var = (1/(8/9) + 0 + 4/(6/9) + 1/(8/9))/81 = 8.25/81 (by hand)
    # CR0 var = (1 + 0 + 4 + 1)/81 = 6/81 (by hand)
    w = np.array([1.0, 2, 2, 1, 1, 1, 1])
    y = np.array([0.0, 0, 2, 3, 0, 2, 0])
    cl = np.array(["a", "b", "b", "c", "c", "c", "d"])
    cr2 = cr2_vcov(np.ones(7), y, cl, working=1 / w)
    cr0 = cr0_vcov(np.ones(7), y, cl, working=1 / w)
    assert cr2.coef[0] == pytest.approx(1.0, rel=1e-14)
    assert cr2.vcov[0, 0] == pytest.approx(8.25 / 81, rel=1e-12)
    assert cr0.vcov[0, 0] == pytest.approx(6 / 81, rel=1e-12)


# --------------------------------------------------------------------------------------------
# CR0 against statsmodels


def _data(seed: int, m: int = 8):
    rng = np.random.default_rng(seed)
    sizes = rng.integers(1, 5, m)
    cl = np.repeat(np.arange(m), sizes)
    n = cl.size
    x = rng.normal(size=n)
    X = np.column_stack([np.ones(n), x])
    v = rng.uniform(0.02, 0.3, n)
    y = 0.3 + 0.2 * x + rng.normal(0, 0.3, m)[cl] + rng.normal(size=n) * np.sqrt(v)
    perm = rng.permutation(n)  # clusters need not be contiguous
    return X[perm], y[perm], v[perm], cl[perm]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_cr0_matches_statsmodels_wls_cluster_without_correction(seed):
    # statsmodels (general-purpose library) WLS with cov_type="cluster": use_correction=False
    # gives the plain sandwich M [sum_j X_j'W e_j e_j'W X_j] M, our CR0.
    X, y, v, cl = _data(seed)
    ours = cr0_vcov(X, y, cl, working=v)
    res = sm.WLS(y, X, weights=1 / v).fit(
        cov_type="cluster", cov_kwds={"groups": cl, "use_correction": False}
    )
    assert ours.coef == pytest.approx(res.params, rel=1e-12)
    assert ours.vcov == pytest.approx(res.cov_params(), rel=1e-10)


def test_cr0_matches_statsmodels_ols_cluster_with_its_correction_removed():
    # statsmodels' default use_correction=True multiplies by G/(G-1) * (N-1)/(N-K) (CR1-type,
    # statsmodels docs for cov_type="cluster"); dividing it out gives CR0.
    X, y, _, cl = _data(4, m=10)
    ours = cr0_vcov(X, y, cl)
    res = sm.OLS(y, X).fit(cov_type="cluster", cov_kwds={"groups": cl})
    g, n, k = 10, y.size, X.shape[1]
    factor = g / (g - 1) * (n - 1) / (n - k)
    assert ours.vcov * factor == pytest.approx(res.cov_params(), rel=1e-10)


# --------------------------------------------------------------------------------------------
# dense reference implementation of CR2, Satterthwaite df and HTZ (Pustejovsky & Tipton 2018)


def _dense_pieces(X, y, cl, blocks):
    """Rows sorted by cluster; Phi dense; H = X M X'W; A_j = D_j' B_j^(-1/2) D_j with D_j the
    upper Cholesky factor of Phi_j and B_j = D_j (I - H)_j Phi (I - H)_j' D_j' (Pustejovsky &
    Tipton 2018)."""
    labels = np.unique(cl)
    order = np.argsort(np.searchsorted(labels, cl), kind="stable")
    X, y, cl = X[order], y[order], cl[order]
    phi = linalg.block_diag(*blocks)
    W = np.linalg.inv(phi)
    M = np.linalg.inv(X.T @ W @ X)
    beta = M @ X.T @ W @ y
    H = X @ M @ X.T @ W
    IH = np.eye(y.size) - H
    e = y - X @ beta
    idx = [np.flatnonzero(cl == lab) for lab in labels]
    A = []
    for r in idx:
        D = linalg.cholesky(phi[np.ix_(r, r)], lower=False)  # D'D = Phi_j
        B = D @ IH[r] @ phi @ IH[r].T @ D.T
        A.append(D.T @ np.real(linalg.fractional_matrix_power(B, -0.5)) @ D)
    return X, y, phi, W, M, beta, IH, e, idx, A


def _dense_cr2(X, y, cl, blocks):
    X, y, phi, W, M, beta, IH, e, idx, A = _dense_pieces(X, y, cl, blocks)
    meat = np.zeros((X.shape[1], X.shape[1]))
    for r, a in zip(idx, A, strict=True):
        u = X[r].T @ W[np.ix_(r, r)] @ a @ e[r]
        meat += np.outer(u, u)
    return beta, M @ meat @ M


def _dense_p(X, y, cl, blocks, c):
    """p_j = (I - H)_j' A_j' W_j X_j M c for every cluster j (Pustejovsky & Tipton 2018)."""
    X, y, phi, W, M, beta, IH, e, idx, A = _dense_pieces(X, y, cl, blocks)
    ps = [IH[r].T @ a.T @ W[np.ix_(r, r)] @ X[r] @ M @ c for r, a in zip(idx, A, strict=True)]
    return ps, phi


def _dense_df(X, y, cl, blocks, c):
    ps, phi = _dense_p(X, y, cl, blocks, c)
    G = np.array([[pj @ phi @ pk for pk in ps] for pj in ps])
    return np.trace(G) ** 2 / np.sum(G * G)


def _blocks_for(cl, v, s2e, s2w):
    labels = np.unique(cl)
    return [np.diag(v[cl == lab] + s2w) + s2e for lab in labels]


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_cr2_and_df_match_dense_formulas_with_block_working_model(seed):
    X, y, v, cl = _data(seed)
    blocks = _blocks_for(cl, v, 0.05, 0.02)
    ours = cr2_vcov(X, y, cl, working=blocks)
    beta, vcov = _dense_cr2(X, y, cl, blocks)
    assert ours.coef == pytest.approx(beta, rel=1e-10)
    assert ours.vcov == pytest.approx(vcov, rel=1e-9)
    for t in range(2):
        c = np.eye(2)[t]
        assert ours.df[t] == pytest.approx(_dense_df(X, y, cl, blocks, c), rel=1e-9)
    c = np.array([1.0, -2.0])
    assert ours.df_contrast(c) == pytest.approx(_dense_df(X, y, cl, blocks, c), rel=1e-9)


def test_cr2_adjustment_meets_the_unbiasedness_criterion():
    # A_j (I - H)_j Phi (I - H)_j' A_j' = Phi_j (Pustejovsky & Tipton 2018), for the dense A_j
    X, y, v, cl = _data(11)
    blocks = _blocks_for(cl, v, 0.05, 0.03)
    X, y, phi, W, M, beta, IH, e, idx, A = _dense_pieces(X, y, cl, blocks)
    for r, a in zip(idx, A, strict=True):
        s = IH[r] @ phi @ IH[r].T
        assert a @ s @ a.T == pytest.approx(phi[np.ix_(r, r)], rel=1e-9, abs=1e-12)


def test_cr2_is_unbiased_under_the_working_model():
    # Pustejovsky & Tipton (2018): E[c'V^CR2 c] = sum_j p_j' Phi p_j equals c'Mc
    X, y, v, cl = _data(8)
    blocks = _blocks_for(cl, v, 0.03, 0.01)
    c = np.array([0.5, 1.0])
    ps, phi = _dense_p(X, y, cl, blocks, c)
    ours = cr2_vcov(X, y, cl, working=blocks)
    assert sum(p @ phi @ p for p in ps) == pytest.approx(c @ ours.bread @ c, rel=1e-10)


def test_htz_eta_matches_dense_quadratic_form_variances():
    # Var(d_st) = 2 tr(A_st Phi A_st Phi), A_st = (1/2) sum_j (p_sj p_tj' + p_tj p_sj') for the
    # standardised contrasts (normal quadratic forms; Pustejovsky & Tipton 2018)
    rng = np.random.default_rng(9)
    X0, y, v, cl = _data(9, m=12)
    X = np.column_stack([X0, rng.normal(size=y.size)])
    blocks = _blocks_for(cl, v, 0.04, 0.01)
    ours = cr2_vcov(X, y, cl, working=blocks)
    C = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    omega = C @ ours.bread @ C.T
    w, u = np.linalg.eigh(omega)
    Cs = (u / np.sqrt(w)) @ u.T @ C
    ps = [_dense_p(X, y, cl, blocks, Cs[s])[0] for s in range(2)]
    phi = _dense_p(X, y, cl, blocks, Cs[0])[1]
    total = 0.0
    for s in range(2):
        for t in range(2):
            a = sum(
                0.5 * (np.outer(ps[s][j], ps[t][j]) + np.outer(ps[t][j], ps[s][j]))
                for j in range(len(ps[s]))
            )
            total += 2 * np.trace(a @ phi @ a @ phi)
    eta = 2 * 3 / total
    d = C @ ours.coef
    f, q, df2, p, qstat = ours.htz(C, d)
    assert df2 == pytest.approx(eta - 1, rel=1e-9)
    assert qstat == pytest.approx(d @ np.linalg.solve(C @ ours.vcov @ C.T, d), rel=1e-12)
    assert f == pytest.approx(qstat * (eta - 1) / (2 * eta), rel=1e-9)
    assert 0 < p < 1


def test_htz_with_one_constraint_is_the_squared_satterthwaite_t():
    X, y, v, cl = _data(10)
    ours = cr2_vcov(X, y, cl, working=v)
    c = np.array([[0.0, 1.0]])
    f, q, df2, p, qstat = ours.htz(c, c @ ours.coef)
    assert q == 1
    assert df2 == pytest.approx(ours.df[1], rel=1e-10)
    assert f == pytest.approx((ours.coef[1] / ours.se[1]) ** 2, rel=1e-10)


# --------------------------------------------------------------------------------------------
# input errors


def test_bad_inputs_raise_analysis_error():
    X = np.ones(4)
    with pytest.raises(AnalysisError, match="at least 2 clusters"):
        cr2_vcov(X, [1.0, 2, 3, 4], [1, 1, 1, 1])
    with pytest.raises(AnalysisError, match="one event label per estimate"):
        cr2_vcov(X, [1.0, 2, 3, 4], [1, 1, 2])
    with pytest.raises(AnalysisError, match="working variances"):
        cr2_vcov(X, [1.0, 2, 3, 4], [1, 1, 2, 2], working=[1, 0, 1, 1])
    with pytest.raises(AnalysisError, match="finite"):
        cr2_vcov(X, [1.0, np.nan, 3, 4], [1, 1, 2, 2])
    with pytest.raises(AnalysisError, match="not positive definite"):
        cr2_vcov(X, [1.0, 2, 3, 4], [1, 1, 2, 2], working=[np.array([[1.0, 2], [2, 1]]), np.eye(2)])
