"""Power with a sampled (normal) covariate or sampled predictors: ANCOVA and the R² increment.

Sources of the checks:
- Hotelling (1953), the exact density of r: for one predictor (u = p = 1) the power of the
  regression test must equal the power of the exact test of a correlation
  (``pooler.planning.power._r_exact_power``, itself checked in tests/test_power.py).
- Gatsonis & Sampson (1989): power with random normal predictors is below the fixed-predictor
  (Cohen 1988, λ = f² N) figure.
- Borm, Fransen & Lemmens (2007): their noncentrality is the fixed-covariate figure,
  compared with statsmodels/scipy in tests/test_power.py.
- Adaptive quadrature (``scipy.integrate.quad``) of the conditional power over the exact
  distribution of the random part (Beta((N - 2)/2, 1/2) for ANCOVA, χ²(N - p + u - 1) for the
  increment), derived in ``pooler.planning._random_predictors``.
- Seeded Monte Carlo of the whole analysis: data simulated, least squares fitted with numpy,
  rejections counted; tolerance 4 Monte Carlo standard errors.
- statsmodels ``FTestPowerF2`` for the fixed-predictor figure (nobs = N with ncc = p + 1 - u).
"""
import itertools
import math

import numpy as np
import pytest
from click.testing import CliRunner
from numpy.testing import assert_allclose
from scipy import integrate, stats

from pooler.planning._random_predictors import ancova_power, increment_power
from pooler.cli import main
from pooler.planning.power import Design, _r_exact_power, n_for_power, power_at


def f2_of(r):
    return r * r / (1 - r * r)


# ------------------------------------------------------------------ external checks

@pytest.mark.parametrize("alternative", ["two-sided", "greater"])
def test_one_predictor_equals_exact_correlation_test(alternative):
    # Hotelling (1953): with u = p = 1 the partial F (or t) test is the test of r
    for n, r, a in itertools.product([5, 12, 40, 85, 300, 2500], [0.05, 0.2, 0.45, 0.8],
                                     [0.01, 0.05]):
        des = Design("regression-increment", predictors_added=1, predictors_total=1)
        ours = float(power_at(f2_of(r), n, des, a, alternative))
        ref = float(_r_exact_power(r, n, a, alternative))
        assert_allclose(ours, ref, atol=1e-9, err_msg=f"n={n} r={r} alpha={a}")


def test_one_predictor_plans_the_same_n_as_the_exact_correlation_design():
    # issue example: u = p = 1, r = .3 was 82 (fixed predictors); the test of r needs 84
    reg = Design("regression-increment")
    cor = Design("correlation", exact_r=True)
    for r, target in itertools.product([0.15, 0.3, 0.5], [0.8, 0.9]):
        assert int(n_for_power(f2_of(r), target, reg).n) == int(n_for_power(r, target, cor).n)
    assert int(n_for_power(f2_of(0.3), 0.8, reg).n) == 84
    assert int(n_for_power(f2_of(0.3), 0.8, Design("regression-increment",
                                                     fixed_covariates=True)).n) == 82


def _quad_increment(f2, n, u, p, alpha, m=None):
    """E over K ~ χ²(m) of the noncentral-F power, by adaptive quadrature; the derived
    m = n - p + u - 1 by default."""
    m = n - p + u - 1 if m is None else m
    df2 = n - p - 1
    crit = stats.f.isf(alpha, u, df2)

    def g(k):
        return stats.ncf.sf(crit, u, df2, f2 * k) * stats.chi2.pdf(k, m)
    lo, hi = stats.chi2.ppf([1e-15, 1 - 1e-15], m)
    return integrate.quad(g, lo, hi, points=[m], limit=400, epsabs=1e-12)[0]


def _quad_ancova(d, n1, n2, rho, alpha):
    """E over the covariate imbalance of the noncentral-t power, by adaptive quadrature.

    Written over F = D² (1/n1 + 1/n2)⁻¹ / (W / (N - 2)) ~ F(1, N - 2) (D the difference in
    covariate means, W the within-group sum of squares), the noncentrality being
    δ₀ / √(1 + F / (N - 2)); the module integrates over B = 1 / (1 + F / (N - 2)) instead.
    """
    n = n1 + n2
    delta0 = d * math.sqrt(n1 * n2 / n) / math.sqrt(1 - rho * rho)
    crit = stats.t.isf(alpha / 2, n - 3)

    def g(f):
        lam = delta0 / math.sqrt(1 + f / (n - 2))
        return (stats.nct.sf(crit, n - 3, lam) + stats.nct.cdf(-crit, n - 3, lam)) * \
            stats.f.pdf(f, 1, n - 2)
    body = integrate.quad(g, 0, 5, points=[1e-6, 1e-3, 1], limit=500, epsabs=1e-14,
                          epsrel=1e-13)[0]
    return body + integrate.quad(g, 5, np.inf, limit=500, epsabs=1e-14)[0]


def test_increment_quadrature_against_adaptive_quadrature():
    for f2, n, u, p in [(0.02, 400, 1, 8), (0.0667, 120, 1, 8), (0.15, 60, 3, 5),
                        (0.35, 20, 2, 4), (0.5, 9, 2, 2), (0.01, 3000, 4, 10),
                        (0.3, 4, 1, 1), (0.001, 20000, 1, 3), (2.0, 6, 2, 3)]:
        ours = float(power_at(f2, n, Design("regression-increment", predictors_added=u,
                                                 predictors_total=p)))
        assert_allclose(ours, _quad_increment(f2, n, u, p, 0.05), atol=1e-9, rtol=0,
                        err_msg=f"f2={f2} n={n} u={u} p={p}")


@pytest.mark.slow
def test_ancova_quadrature_against_adaptive_quadrature():
    for d, n1, n2, rho in [(0.4, 64, 64, 0.6), (1.0, 5, 5, 0.5), (0.8, 7, 11, 0.8),
                           (0.15, 500, 300, 0.3), (0.3, 40, 80, 0.9), (2.0, 2, 2, 0.5),
                           (1.5, 3, 3, 0.9), (0.02, 20000, 20000, 0.5)]:
        ours = float(ancova_power(d, n1, n2, rho, 0.05))
        assert_allclose(ours, _quad_ancova(d, n1, n2, rho, 0.05), atol=1e-9, rtol=0,
                        err_msg=f"d={d} n={n1}+{n2} rho={rho}")


def test_fixed_predictors_match_statsmodels_ftestpowerf2():
    # statsmodels: nc = f2 (df_denom + df_num + ncc); ncc = p + 1 - u makes nobs = N
    from statsmodels.stats.power import FTestPowerF2
    ref = FTestPowerF2()
    for f2, n, u, p, a in itertools.product([0.02, 0.15, 0.35], [20, 90, 400], [1, 3],
                                            [3, 6], [0.01, 0.05]):
        if u > p:
            continue
        des = Design("regression-increment", predictors_added=u, predictors_total=p,
                     fixed_covariates=True)
        theirs = ref.power(effect_size=f2, df_num=u, df_denom=n - p - 1, alpha=a, ncc=p + 1 - u)
        assert_allclose(float(power_at(f2, n, des, a)), theirs, atol=1e-7)


# ------------------------------------------------------------------ Monte Carlo

def _batched_ols_t(x, y, column):
    """t statistic of one coefficient in each replicate's least-squares fit (numpy)."""
    xtx = np.einsum("rni,rnj->rij", x, x)
    xty = np.einsum("rni,rn->ri", x, y)
    beta = np.linalg.solve(xtx, xty[..., None])[..., 0]
    resid = y - np.einsum("rni,ri->rn", x, beta)
    df = x.shape[1] - x.shape[2]
    s2 = np.einsum("rn,rn->r", resid, resid) / df
    var = s2 * np.linalg.inv(xtx)[:, column, column]
    return beta[:, column] / np.sqrt(var), np.einsum("rn,rn->r", resid, resid)


def test_ancova_monte_carlo_with_a_normal_covariate():
    # y = d g + rho x + sqrt(1 - rho^2) e, x ~ N(0, 1): outcome SD 1 within groups,
    # within-group covariate-outcome correlation rho; OLS on (1, g, x), two-sided t on g
    rng = np.random.default_rng(20261202)
    d, rho, n1, n2, alpha = 1.0, 0.6, 7, 11, 0.05
    n = n1 + n2
    reps, hits = 200_000, 0
    g = np.r_[np.zeros(n1), np.ones(n2)]
    crit = stats.t.isf(alpha / 2, n - 3)
    for _ in range(4):
        r = reps // 4
        x = rng.standard_normal((r, n))
        y = d * g + rho * x + math.sqrt(1 - rho * rho) * rng.standard_normal((r, n))
        design = np.stack([np.ones((r, n)), np.broadcast_to(g, (r, n)), x], axis=-1)
        t, _ = _batched_ols_t(design, y, 1)
        hits += int(np.sum(np.abs(t) > crit))
    mc = hits / reps
    se = math.sqrt(mc * (1 - mc) / reps)
    ours = float(power_at(d, n1, Design("ancova", covariate_r=rho, ratio=n2 / n1)))
    fixed = float(power_at(d, n1, Design("ancova", covariate_r=rho, ratio=n2 / n1,
                                         fixed_covariates=True)))
    assert abs(mc - ours) < 4 * se, (mc, ours, se)
    assert fixed - mc > 8 * se, (fixed, mc, se)   # the fixed-covariate figure is too high


def test_increment_monte_carlo_with_normal_predictors():
    # p = 3 correlated normal predictors (equicorrelation .4), the first u = 2 tested;
    # f2 = beta_u' Sigma_{u.rest} beta_u / sigma^2; partial F from the two residual sums of
    # squares of numpy least-squares fits
    rng = np.random.default_rng(7)
    n, p, u, alpha = 14, 3, 2, 0.05
    sigma = np.full((p, p), 0.4) + 0.6 * np.eye(p)
    beta = np.array([0.45, -0.3, 0.5])
    s_uu, s_ur, s_rr = sigma[:u, :u], sigma[:u, u:], sigma[u:, u:]
    cond = s_uu - s_ur @ np.linalg.solve(s_rr, s_ur.T)
    f2 = float(beta[:u] @ cond @ beta[:u])            # error SD 1
    chol = np.linalg.cholesky(sigma)
    crit = stats.f.isf(alpha, u, n - p - 1)
    reps, hits = 200_000, 0
    for _ in range(4):
        r = reps // 4
        x = rng.standard_normal((r, n, p)) @ chol.T
        y = x @ beta + rng.standard_normal((r, n))
        ones = np.ones((r, n, 1))
        _, sse_full = _batched_ols_t(np.concatenate([ones, x], axis=-1), y, 1)
        _, sse_red = _batched_ols_t(np.concatenate([ones, x[..., u:]], axis=-1), y, 0)
        f = (sse_red - sse_full) / u / (sse_full / (n - p - 1))
        hits += int(np.sum(f > crit))
    mc = hits / reps
    se = math.sqrt(mc * (1 - mc) / reps)
    des = Design("regression-increment", predictors_added=u, predictors_total=p)
    ours = float(power_at(f2, n, des, alpha))
    assert abs(mc - ours) < 4 * se, (mc, ours, se)
    # the check can fail: Cohen's fixed λ = f² N, and the χ² df off by one either way, are
    # all outside the Monte Carlo interval
    fixed = float(power_at(f2, n, Design("regression-increment", predictors_added=u,
                                         predictors_total=p, fixed_covariates=True), alpha))
    assert abs(mc - fixed) > 8 * se
    for m in (n - p + u - 2, n - p + u):
        wrong = _quad_increment(f2, n, u, p, alpha, m)
        assert abs(mc - wrong) > 4 * se, (m, wrong, mc)


# ------------------------------------------------------------------ planning

def test_issue_examples():
    # 64 + 64, rho = .6, d = .4: Borm's fixed covariate gives .8014; averaged .7983 and
    # 65 per group are needed
    des = Design("ancova", covariate_r=0.6)
    fixed = Design("ancova", covariate_r=0.6, fixed_covariates=True)
    assert_allclose(float(power_at(0.4, 64, fixed)), 0.8014, atol=5e-5)
    assert_allclose(float(power_at(0.4, 64, des)), 0.7983, atol=5e-5)
    assert int(n_for_power(0.4, 0.8, des).n) == 65
    assert int(n_for_power(0.4, 0.8, fixed).n) == 64
    # d = .8, rho = .7: 14 per group held fixed (.813), but 14 really gives .797; 15 needed
    des, fixed = (Design("ancova", covariate_r=0.7, fixed_covariates=f) for f in (False, True))
    assert (int(n_for_power(0.8, 0.8, fixed).n), int(n_for_power(0.8, 0.8, des).n)) == (14, 15)
    assert_allclose(float(power_at(0.8, 14, des)), 0.7973, atol=5e-5)
    # u = 1 of p = 8, partial r = .25: 120 with λ = f² N, 130 with normal predictors
    reg = dict(predictors_added=1, predictors_total=8)
    assert int(n_for_power(f2_of(0.25), 0.8, Design("regression-increment", **reg)).n) == 130
    assert int(n_for_power(f2_of(0.25), 0.8, Design("regression-increment", fixed_covariates=True,
                                                     **reg)).n) == 120


def test_random_is_below_fixed_over_a_grid():
    # Gatsonis & Sampson (1989); for ANCOVA, B <= 1 lowers the noncentrality
    d = np.linspace(0.1, 1.5, 15)[:, None]
    n = np.array([4, 10, 30, 100, 400])[None, :]
    for rho in (0.2, 0.7):
        rand = power_at(d, n, Design("ancova", covariate_r=rho))
        fixed = power_at(d, n, Design("ancova", covariate_r=rho, fixed_covariates=True))
        assert np.all(rand <= fixed + 1e-12)
    for u, p in ((1, 1), (2, 5)):
        f2 = np.linspace(0.01, 0.8, 15)[:, None]
        nn = n + p
        rand = power_at(f2, nn, Design("regression-increment", predictors_added=u,
                                       predictors_total=p))
        fixed = power_at(f2, nn, Design("regression-increment", predictors_added=u,
                                        predictors_total=p, fixed_covariates=True))
        assert np.all(rand <= fixed + 1e-12)


@pytest.mark.parametrize("alternative", ["two-sided", "greater"])
def test_n_search_round_trips(alternative):
    # power(n) >= target and power(n - 1) < target, over a generated grid
    targets = np.array([0.5, 0.8, 0.9, 0.95])[None, :]
    designs = [(Design("ancova", covariate_r=0.5), np.linspace(0.15, 1.2, 8)[:, None]),
               (Design("ancova", covariate_r=0.8, ratio=2.0), np.linspace(0.15, 1.2, 8)[:, None]),
               (Design("regression-increment", predictors_added=1, predictors_total=6),
                f2_of(np.linspace(0.08, 0.6, 8))[:, None])]
    if alternative == "two-sided":
        designs.append((Design("regression-increment", predictors_added=3, predictors_total=4),
                        f2_of(np.linspace(0.08, 0.6, 8))[:, None]))
    for des, e in designs:
        res = n_for_power(e, targets, des, 0.05, alternative)
        assert np.all(res.reachable)
        n = res.n
        assert np.all(power_at(e, n, des, 0.05, alternative) >= targets)
        below = n - 1 >= des.n_min
        p_below = power_at(e, np.maximum(n - 1, des.n_min), des, 0.05, alternative)
        assert np.all(p_below[below] < np.broadcast_to(targets, n.shape)[below])


def test_upper_only_counts_the_hypothesised_direction():
    des = Design("ancova", covariate_r=0.5)
    both = power_at(0.3, 20, des)
    up = power_at(0.3, 20, des, upper_only=True)
    down = power_at(-0.3, 20, des, upper_only=True)
    assert 0 < down < up < both
    assert_allclose(up + down, both, rtol=1e-12)
    reg = Design("regression-increment", predictors_added=2, predictors_total=3)
    assert float(power_at(-0.1, 50, reg, upper_only=True)) == 0.0
    assert_allclose(power_at(0.1, 50, reg, upper_only=True), power_at(0.1, 50, reg))


def test_cli_default_and_fixed_covariates_flag():
    runner = CliRunner()
    base = ["plan", "--effect", "0.4", "--design", "ancova", "--covariate-r", "0.6",
            "--power", "0.8"]
    out = runner.invoke(main, base + ["--table", "csv"])
    assert out.exit_code == 0, out.output
    assert ",0.8,65,130," in out.output
    fixed = runner.invoke(main, base + ["--table", "csv", "--fixed-covariates"])
    assert fixed.exit_code == 0, fixed.output
    assert ",0.8,64,128," in fixed.output
    text = runner.invoke(main, base)
    assert "power averaged over a normal covariate" in text.output
    text = runner.invoke(main, ["plan", "--effect", "0.25", "--metric", "r", "--design",
                                "regression-increment", "--predictors-total", "8",
                                "--power", "0.8", "--table", "csv", "--fixed-covariates"])
    assert text.exit_code == 0, text.output
    assert ",0.8,120,120," in text.output


def test_methods_sentence_says_exact_only_where_exact():
    from pooler.output.document import _power_basis
    assert _power_basis(Design("ancova")) == "exact noncentral distributions"
    assert "approximation" in _power_basis(Design("ancova", fixed_covariates=True))
    assert "approximation" in _power_basis(Design("regression-increment",
                                                  fixed_covariates=True))
    assert "approximation" in _power_basis(Design("correlation"))
    assert _power_basis(Design("correlation", exact_r=True)) == "the exact distribution of r"
    assert "averaged over normal predictors" in Design("regression-increment").describe()
    assert "held fixed" in Design("ancova", fixed_covariates=True).describe()
