"""Review checks of pooler.planning.simdesign: its power against an exact integral and against plain
Monte Carlo written independently here (own generator, own seed stream, own least squares with
an intercept column).

Sources: the t test of an OLS slope with normal predictors is noncentral t given the
predictors, with the predictors' residual sum of squares chi-square (e.g. Cohen 1988, ch. 9;
the conditional argument of Sampson 1974, JASA 69:682-689, from memory); joint significance
(MacKinnon et al. 2002); Sobel (1982); Monte Carlo CI (Preacher & Selig 2012); classical
measurement error: observed = true + error with Var(error) = (1 - rel)/rel for a true score of
variance 1 (Lord & Novick 1968).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from pooler.planning.simdesign import (Moderation, ParallelMediation, SerialMediation,
                                       SimpleMediation, find_n, simulate_power)


def _legendre01(n):
    t, w = np.polynomial.legendre.leggauss(n)
    return (t + 1) / 2, w / 2


def exact_simple_mediation(a, b, direct, n, alpha=0.05, nodes=60):
    """Exact powers of the a-path t test, the b-path t test and their joint significance.

    M = aX + e_M (Var e_M = 1 - a²), Y = c'X + bM + e_Y. Given SSx = Σ(x - x̄)² ~ χ²(n-1) and
    W = RSS(M | X)/(1 - a²) ~ χ²(n-2) (independent), â ~ N(a, (1 - a²)/SSx), t_a = â √SSx /
    √((1 - a²) W/(n-2)); given W, b̂ ~ N(b, ψ_Y/((1 - a²) W)) and t_b = b̂ √((1 - a²) W) /
    √(ψ_Y V/(n-3)) with V ~ χ²(n-3) independent. Integrated over (SSx, W, V) by
    Gauss-Legendre on their CDF scale.
    """
    s2m = 1 - a * a
    psi = 1 - (direct ** 2 + b * b + 2 * direct * b * a)
    u, w = _legendre01(nodes)
    ssx = stats.chi2.ppf(u, n - 1)[:, None, None]
    big_w = stats.chi2.ppf(u, n - 2)[None, :, None]
    big_v = stats.chi2.ppf(u, n - 3)[None, None, :]
    wt = w[:, None, None] * w[None, :, None] * w[None, None, :]
    ca, cb = stats.t.ppf(1 - alpha / 2, n - 2), stats.t.ppf(1 - alpha / 2, n - 3)
    m = a * np.sqrt(ssx) / math.sqrt(s2m)
    thr = ca * np.sqrt(big_w / (n - 2))
    pa = stats.norm.sf(thr - m) + stats.norm.cdf(-thr - m)
    delta = b * math.sqrt(s2m) * np.sqrt(big_w) / math.sqrt(psi)
    tb = cb * np.sqrt(big_v / (n - 3))
    pb = stats.norm.sf(tb - delta) + stats.norm.cdf(-tb - delta)
    return (float((wt * pa).sum()), float((wt * pb).sum()), float((wt * pa * pb).sum()))


def _within(got, want, se, k=4.0):
    assert abs(got - want) <= k * se, (got, want, se)


def test_the_implied_covariance_gives_back_the_standardized_paths():
    # population regressions Σ_PP⁻¹ Σ_PY of the implied covariance must return the paths, every
    # variance must be 1, and the mediators' partial correlation given X must be mediator_r
    def reg(sig, names, out, preds):
        i = [names.index(p) for p in preds]
        return np.linalg.solve(sig[np.ix_(i, i)], sig[i, names.index(out)])
    d = SerialMediation(a1=0.4, m1_m2=0.35, b2=0.3, a2=0.2, b1=0.15, direct=0.1)
    sig, names = d._chol @ d._chol.T, list(d.variables)
    np.testing.assert_allclose(np.diag(sig), 1, atol=1e-12)
    np.testing.assert_allclose(reg(sig, names, "Y", ["X", "M1", "M2"]), [0.1, 0.15, 0.3],
                               atol=1e-12)
    np.testing.assert_allclose(reg(sig, names, "M2", ["X", "M1"]), [0.2, 0.35], atol=1e-12)
    d = ParallelMediation(a=(0.3, 0.25, 0.4), b=(0.3, 0.2, 0.1), direct=0.1, mediator_r=0.3)
    sig, names = d._chol @ d._chol.T, list(d.variables)
    np.testing.assert_allclose(np.diag(sig), 1, atol=1e-12)
    np.testing.assert_allclose(reg(sig, names, "Y", names[:-1]), [0.1, 0.3, 0.2, 0.1],
                               atol=1e-12)
    part = sig[1:4, 1:4] - np.outer(sig[1:4, 0], sig[0, 1:4])
    assert part[0, 1] / math.sqrt(part[0, 0] * part[1, 1]) == pytest.approx(0.3, abs=1e-12)
    for i, ai in enumerate((0.3, 0.25, 0.4), start=1):
        assert d.residual_variances()[f"M{i}"] == pytest.approx(1 - ai * ai, abs=1e-12)


@pytest.mark.parametrize("a,b,direct,n", [(0.39, 0.39, 0.0, 60), (0.3, -0.2, 0.1, 120)])
def test_path_and_joint_powers_match_the_exact_integral(a, b, direct, n):
    pa, pb, pj = exact_simple_mediation(a, b, direct, n)
    res = simulate_power(SimpleMediation(a, b, direct), n, test="joint", reps=20000, seed=404)
    for target, want in (("X-M", pa), ("M-Y", pb), ("X-M-Y", pj)):
        _within(res[target].power, want, math.sqrt(want * (1 - want) / 20000))


def _plain_mediation(rng, a, b, direct, n, reps):
    x = rng.standard_normal((reps, n))
    m = a * x + math.sqrt(1 - a * a) * rng.standard_normal((reps, n))
    psi = 1 - (direct ** 2 + b * b + 2 * direct * b * a)
    y = direct * x + b * m + math.sqrt(psi) * rng.standard_normal((reps, n))
    return x, m, y


def _ols(design, y):
    """Slopes and SEs with an intercept column, per replication."""
    xtx = np.einsum("rni,rnj->rij", design, design)
    beta = np.linalg.solve(xtx, np.einsum("rni,rn->ri", design, y)[..., None])[..., 0]
    res = y - np.einsum("rni,ri->rn", design, beta)
    s2 = (res ** 2).sum(axis=1) / (y.shape[1] - design.shape[-1])
    se = np.sqrt(s2[:, None] * np.diagonal(np.linalg.inv(xtx), axis1=1, axis2=2))
    return beta, se


def test_sobel_and_monte_carlo_interval_match_plain_monte_carlo():
    a, b, direct, n, reps, draws = 0.26, 0.26, 0.1, 100, 4000, 1000
    rng = np.random.Generator(np.random.PCG64(2468))
    x, m, y = _plain_mediation(rng, a, b, direct, n, reps)
    one = np.ones((reps, n))
    ba, sa = _ols(np.stack([one, x], -1), m)
    bb, sb = _ols(np.stack([one, x, m], -1), y)
    ah, se_a, bh, se_b = ba[:, 1], sa[:, 1], bb[:, 2], sb[:, 2]
    # Sobel (1982): |ab| / sqrt(a² s_b² + b² s_a²) > z
    sobel = np.mean(np.abs(ah * bh) > stats.norm.ppf(0.975)
                    * np.sqrt(ah ** 2 * se_b ** 2 + bh ** 2 * se_a ** 2))
    # Monte Carlo CI (Preacher & Selig 2012): independent normal draws of a and b
    prod = ((ah[:, None] + se_a[:, None] * rng.standard_normal((reps, draws)))
            * (bh[:, None] + se_b[:, None] * rng.standard_normal((reps, draws))))
    lo, hi = np.quantile(prod, [0.025, 0.975], axis=1)
    mc = np.mean((lo > 0) | (hi < 0))
    for test, want in (("sobel", sobel), ("monte-carlo", mc)):
        got = simulate_power(SimpleMediation(a, b, direct), n, test=test, reps=reps, seed=5)
        p = got["X-M-Y"].power
        _within(p, want, math.sqrt(2 * want * (1 - want) / reps))


def test_serial_monte_carlo_interval_matches_plain_monte_carlo():
    # X -> M1 -> M2 -> Y, indirect a1 d21 b2: three regressions, independent normal draws
    a1, d21, b2, n, reps, draws = 0.4, 0.4, 0.4, 80, 2000, 1000
    rng = np.random.Generator(np.random.PCG64(1357))
    x = rng.standard_normal((reps, n))
    m1 = a1 * x + math.sqrt(1 - a1 ** 2) * rng.standard_normal((reps, n))
    m2 = d21 * m1 + math.sqrt(1 - d21 ** 2) * rng.standard_normal((reps, n))
    y = b2 * m2 + math.sqrt(1 - b2 ** 2) * rng.standard_normal((reps, n))
    one = np.ones((reps, n))
    e1, s1 = _ols(np.stack([one, x], -1), m1)
    e2, s2 = _ols(np.stack([one, x, m1], -1), m2)
    e3, s3 = _ols(np.stack([one, x, m1, m2], -1), y)
    prod = np.ones((reps, draws))
    for est, se in ((e1[:, 1], s1[:, 1]), (e2[:, 2], s2[:, 2]), (e3[:, 3], s3[:, 3])):
        prod = prod * (est[:, None] + se[:, None] * rng.standard_normal((reps, draws)))
    lo, hi = np.quantile(prod, [0.025, 0.975], axis=1)
    want = np.mean((lo > 0) | (hi < 0))
    got = simulate_power(SerialMediation(a1=a1, m1_m2=d21, b2=b2), n, test="monte-carlo",
                         reps=reps, seed=9)["X-M1-M2-Y"].power
    _within(got, want, math.sqrt(2 * want * (1 - want) / reps))


@pytest.mark.parametrize("x_eff,z_eff,xz,r,rel_x,rel_z,binary,n", [
    (0.2, 0.1, 0.15, 0.3, 0.8, 0.7, False, 200),
    (0.2, 0.0, 0.2, 0.2, 0.7, 1.0, True, 150),
])
def test_moderation_with_unreliable_measures_matches_plain_monte_carlo(
        x_eff, z_eff, xz, r, rel_x, rel_z, binary, n):
    reps = 4000
    rng = np.random.Generator(np.random.PCG64(97531))
    if binary:  # two equal groups coded -1/+1
        z = np.tile(np.repeat([-1.0, 1.0], [n // 2, n - n // 2]), (reps, 1))
    else:
        z = rng.standard_normal((reps, n))
    x = r * z + math.sqrt(1 - r * r) * rng.standard_normal((reps, n))
    var_xz = 1 - r * r if binary else 1 + r * r  # Var(XZ): E X²Z² - (E XZ)²
    psi = 1 - (x_eff ** 2 + z_eff ** 2 + 2 * r * x_eff * z_eff + xz ** 2 * var_xz)
    y = x_eff * x + z_eff * z + xz * x * z + math.sqrt(psi) * rng.standard_normal((reps, n))
    xo = x + math.sqrt((1 - rel_x) / rel_x) * rng.standard_normal((reps, n))
    zo = z + math.sqrt((1 - rel_z) / rel_z) * rng.standard_normal((reps, n))
    xo -= xo.mean(axis=1, keepdims=True)
    zo -= zo.mean(axis=1, keepdims=True)
    est, se = _ols(np.stack([np.ones((reps, n)), xo, zo, xo * zo], -1), y)
    want = np.mean(np.abs(est[:, 3] / se[:, 3]) > stats.t.ppf(0.975, n - 4))
    d = Moderation(x_eff, z_eff, xz, xz_r=r, x_reliability=rel_x, z_reliability=rel_z,
                   binary_moderator=binary)
    got = simulate_power(d, n, reps=reps, seed=8)["XZ-Y"].power
    _within(got, want, math.sqrt(2 * want * (1 - want) / reps))


@pytest.mark.parametrize("goal,exact_n", [(0.8, 69), (0.9, 86)])
def test_sample_size_search_brackets_the_exact_n(goal, exact_n):
    # exact_n: the smallest n whose exact joint-significance power (the integral above) reaches
    # the goal for a = b = 0.39, c' = 0; checked here at exact_n and exact_n - 1
    assert exact_simple_mediation(0.39, 0.39, 0.0, exact_n)[2] >= goal
    assert exact_simple_mediation(0.39, 0.39, 0.0, exact_n - 1)[2] < goal
    s = find_n(SimpleMediation(0.39, 0.39), test="joint", powers=(goal,), reps=1000,
               seed=21).solutions[0]
    assert abs(s.n - exact_n) <= 3
    assert s.interval.low <= exact_n <= s.interval.high
