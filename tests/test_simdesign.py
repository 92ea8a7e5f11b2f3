"""Simulated power for mediation and moderation (pooler.planning.simdesign).

Every simulation is seeded; tolerances are stated in Monte Carlo standard errors (MC SE =
sqrt(p (1 - p) / reps)) of the simulated estimate, with a small stated allowance where the
reference formula is itself a large-sample approximation.
"""
from __future__ import annotations

import dataclasses
import doctest
import math

import numpy as np
import pytest
from scipy import special as sp

from pooler.planning import simdesign as sd
from pooler.errors import OptionError
from pooler.planning.simdesign import (Moderation, ParallelMediation, SerialMediation,
                                       SimpleMediation, find_n, simulate_power)


def t_power(f2, n, predictors, alpha=0.05):
    """Two-sided power of the t test of one regression coefficient (Cohen 1988, ch. 9:
    f^2 of the coefficient's increment, noncentrality lambda = f^2 N; t = sqrt(F) with
    noncentrality sqrt(lambda), df = N - predictors - 1), from the noncentral t CDF."""
    df = n - predictors - 1
    ncp = math.sqrt(f2 * n)
    c = sp.stdtrit(df, 1 - alpha / 2)
    return 1 - sp.nctdtr(df, ncp, c) + sp.nctdtr(df, ncp, -c)


def t_power_random(k, df_chi, df_t, alpha=0.05):
    """Two-sided power of a coefficient's t test when the predictors are random (measured,
    normal) rather than fixed: given the predictors, t is noncentral with lambda = k sqrt(W),
    W the predictor's residual sum of squares / its variance ~ chi^2(df_chi); the power is
    averaged over W by quadrature (the conditioning argument of Gatsonis & Sampson 1989).
    Here k = coefficient x residual SD of the predictor / residual SD of the outcome."""
    # averaged over the quantiles u of W (a bounded, smooth integrand on (0, 1)):
    # W = chdtri(df_chi, 1 - u)
    from scipy import integrate
    c = sp.stdtrit(df_t, 1 - alpha / 2)

    def integrand(u):
        lam = k * math.sqrt(sp.chdtri(df_chi, 1 - u))
        return 1 - sp.nctdtr(df_t, lam, c) + sp.nctdtr(df_t, lam, -c)
    return integrate.quad(integrand, 1e-12, 1 - 1e-12, limit=200)[0]


def path_powers(d, n):
    """Exact random-predictor power of the a path (M on X: df_chi = n - 1, df_t = n - 2) and
    the b path (Y on X and M: the residual SD of M given X is sqrt(1 - a^2),
    df_chi = n - 2, df_t = n - 3) of a simple mediation design."""
    a, b = d.a, d.b
    pa = t_power_random(a / math.sqrt(1 - a * a), n - 1, n - 2)
    pb = t_power_random(b * math.sqrt(1 - a * a) / math.sqrt(d.residual_variances()["Y"]),
                        n - 2, n - 3)
    return pa, pb


def f_power(f2, n, u, predictors, alpha=0.05):
    """Power of the F test of u coefficients (Cohen 1988, ch. 9, lambda = f^2 N),
    noncentral F CDF from scipy.special.ncfdtr."""
    df2 = n - predictors - 1
    c = sp.fdtri(u, df2, 1 - alpha)
    return 1 - sp.ncfdtr(u, df2, f2 * n, c)


def within(sim, expected, k=3.0, extra=0.0):
    return abs(sim.power - expected) <= k * max(sim.mc_se, 1e-3) + extra


# ---------------------------------------------------------------------------- designs

def test_module_doctests():
    res = doctest.testmod(sd, optionflags=doctest.ELLIPSIS)
    assert res.failed == 0 and res.attempted >= 8


def test_unit_variances_and_residuals():
    # Residual variance of Y in simple mediation by hand: 1 - (b^2 + c^2 + 2 a b c)
    d = SimpleMediation(0.5, 0.4, 0.2)
    assert d.residual_variances()["Y"] == pytest.approx(1 - (0.16 + 0.04 + 2 * 0.5 * 0.4 * 0.2))
    rng = np.random.default_rng(1)
    for design in (d, ParallelMediation((0.4, 0.3, 0.2), (0.3, 0.2, 0.1), 0.1, mediator_r=0.4),
                   SerialMediation(0.4, 0.5, 0.3, a2=0.2, b1=0.2, direct=0.1)):
        x = design.simulate(rng, 1, 200_000)[0]
        assert np.allclose(x.var(axis=0), 1, atol=0.015)
    m = Moderation(0.3, 0.2, 0.2, xz_r=0.4)
    y = m.simulate(rng, 1, 200_000)[0][:, -1]
    assert y.var() == pytest.approx(1, abs=0.02)


def test_parallel_mediator_residual_correlation_is_simulated():
    d = ParallelMediation((0.3, 0.3), (0.2, 0.2), mediator_r=0.5)
    x = d.simulate(np.random.default_rng(2), 1, 200_000)[0]
    # corr(M1, M2) = a1 a2 + r sqrt((1 - a1^2)(1 - a2^2)) from the model
    assert np.corrcoef(x[:, 1], x[:, 2])[0, 1] == pytest.approx(0.09 + 0.5 * 0.91, abs=0.01)


@pytest.mark.parametrize("make, fragment", [
    (lambda: SimpleMediation(0.8, 0.7, 0.5), "paths into Y explain 1.300"),
    (lambda: SerialMediation(0.7, 0.8, 0.3, a2=0.5), "paths into M2 explain"),
    (lambda: SimpleMediation(1.2, 0.1), "`a` must be a standardized path"),
    (lambda: ParallelMediation((0.3,), (0.3,)), "2 to 4 mediators"),
    (lambda: ParallelMediation((0.3, 0.2), (0.3,)), "one `a` and one `b`"),
    (lambda: ParallelMediation((0.3, 0.2, 0.1), (0.1, 0.1, 0.1), mediator_r=-0.5),
     "above -1/(k-1)"),
    (lambda: Moderation(0.6, 0.5, 0.4, xz_r=0.5), "explain 1.110"),
    (lambda: Moderation(0.3, 0.1, 0.1, binary_moderator=True, z_reliability=0.8),
     "binary moderator"),
    (lambda: Moderation(0.3, 0.1, 0.1, x_reliability=0), "`x_reliability`"),
])
def test_impossible_designs_are_refused(make, fragment):
    with pytest.raises(OptionError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        make()


def test_designs_are_frozen():
    d = SimpleMediation(0.3, 0.3)
    with pytest.raises(dataclasses.FrozenInstanceError):
        d.a = 0.5


@pytest.mark.parametrize("kw, fragment", [
    ({"test": "permutation"}, "`test` must be one of"),
    ({"reps": 0}, "`reps`"),
    ({"alpha": 1.5}, "`alpha`"),
    ({"workers": 0}, "`workers`"),
])
def test_bad_options(kw, fragment):
    with pytest.raises(OptionError, match=fragment):
        simulate_power(SimpleMediation(0.3, 0.3), 50, **kw)


def test_bad_options_other():
    with pytest.raises(OptionError, match="at least 5"):
        simulate_power(SimpleMediation(0.3, 0.3), 4, test="joint")
    with pytest.raises(OptionError, match="leave `test` unset"):
        simulate_power(Moderation(0.3, 0.1, 0.1), 50, test="joint")
    with pytest.raises(OptionError, match="unknown target"):
        find_n(SimpleMediation(0.3, 0.3), test="joint", targets=["X-Q-Y"])


def test_percentile_interval_by_counting_matches_order_statistics():
    rng = np.random.default_rng(3)
    draws = rng.standard_normal((400, 1000)) * 0.5 + rng.uniform(-1.5, 1.5, (400, 1))
    s = np.sort(draws, axis=1)
    lo, hi = s[:, 25], s[:, 974]  # ranks floor(1000 x .025) and ceil(1000 x .975) - 1
    exc, cov = sd._percentile_rejects(draws, 0.05, 0.3)
    assert np.array_equal(exc, (lo > 0) | (hi < 0))
    assert np.array_equal(cov, (lo <= 0.3) & (0.3 <= hi))


# ------------------------------------------------------------------- checks against theory

def test_single_paths_match_analytic_t_power():
    # Cohen (1988, ch. 9): a path alone is a regression t test. X-M: one predictor,
    # f^2 = a^2 / (1 - a^2). M-Y in Y ~ X + M with direct 0: f^2 = b^2 (1 - a^2) / psi_Y.
    # Cohen's noncentral t treats the predictors as fixed; the simulation draws them, so the
    # exact reference is the random-predictor power (t_power_random), and Cohen's value is
    # met within 3 MC SE plus its own small optimism (measured 0.01 at power 0.9, n = 112).
    for (a, b, n, seed) in ((0.25, 0.2, 120, 11), (0.3, 0.3, 112, 5)):
        d = SimpleMediation(a, b)
        res = simulate_power(d, n, test="joint", reps=4000, seed=seed)
        pa, pb = path_powers(d, n)
        ca = t_power(a * a / (1 - a * a), n, 1)
        cb = t_power(b * b * (1 - a * a) / d.residual_variances()["Y"], n, 2)
        assert within(res["X-M"], pa) and within(res["M-Y"], pb)
        assert within(res["X-M"], ca, extra=abs(ca - pa))
        assert within(res["M-Y"], cb, extra=abs(cb - pb))
        assert 0 <= ca - pa < 0.015 and 0 <= cb - pb < 0.015
        # the direct path is 0: its rejection rate is the type I error, alpha
        assert within(res["X-Y"], 0.05)


@pytest.mark.parametrize("a, b, n", [(0.14, 0.14, 500), (0.26, 0.1, 700), (0.1, 0.2, 900),
                                     (0.3, 0.3, 112)])
def test_joint_significance_is_product_of_path_powers(a, b, n):
    # The tests of a and b are nearly independent (exactly so given the data of X and M, in
    # large samples), so the joint significance power is about power(a) x power(b), each the
    # exact random-predictor power above (Cohen's fixed-predictor values are within 0.02).
    d = SimpleMediation(a, b)
    res = simulate_power(d, n, test="joint", reps=2000, seed=12)
    pa, pb = path_powers(d, n)
    assert within(res["X-M-Y"], pa * pb)


def test_monte_carlo_interval_coverage_and_type_one_error():
    # Setting of Fritz & MacKinnon (2007): coverage of ab at its true value near 95 % when
    # both paths are nonzero; with a = 0 the rejection rate stays at or below alpha.
    res = simulate_power(SimpleMediation(0.3, 0.3, 0.1), 200, test="monte-carlo", reps=2000,
                         seed=13, draws=1000)
    cov = res["X-M-Y"].coverage
    assert abs(cov - 0.95) <= 3 * math.sqrt(0.95 * 0.05 / 2000)
    null = simulate_power(SimpleMediation(0.0, 0.39), 200, test="monte-carlo", reps=2000,
                          seed=14)
    e = null["X-M-Y"]
    assert e.power <= 0.05 + 3 * math.sqrt(0.05 * 0.95 / e.reps)


def test_sobel_is_lower_powered_than_monte_carlo():
    # MacKinnon et al. (2002): the first-order (Sobel) test is conservative for ab.
    d = SimpleMediation(0.2, 0.2)
    sob = simulate_power(d, 200, test="sobel", reps=2000, seed=15)["X-M-Y"]
    mc = simulate_power(d, 200, test="monte-carlo", reps=2000, seed=15)["X-M-Y"]
    assert sob.power < mc.power - 2 * mc.mc_se
    assert "low-powered" in sd.TESTS["sobel"].note


def test_bootstrap_runs_and_agrees_with_monte_carlo():
    d = SimpleMediation(0.3, 0.3)
    boot = simulate_power(d, 80, test="bootstrap", reps=120, resamples=400, seed=16)["X-M-Y"]
    mc = simulate_power(d, 80, test="monte-carlo", reps=2000, seed=16)["X-M-Y"]
    # two simulations of (nearly) the same interval: agree within their combined MC error
    assert abs(boot.power - mc.power) <= 3 * math.hypot(boot.mc_se, mc.mc_se) + 0.02
    assert boot.coverage is not None


def test_parallel_targets_and_all_indirect():
    d = ParallelMediation((0.3, 0.25), (0.3, 0.2), 0.1, mediator_r=0.3)
    res = simulate_power(d, 150, test="joint", reps=1500, seed=17)
    names = [e.target for e in res.estimates]
    assert names[-3:] == ["X-M1-Y", "X-M2-Y", "all indirect"]
    assert res["all indirect"].power <= min(res["X-M1-Y"].power, res["X-M2-Y"].power)
    mc = simulate_power(d, 150, test="monte-carlo", reps=1000, seed=17)
    assert "total indirect" in [e.target for e in mc.estimates]
    assert abs(mc["total indirect"].coverage - 0.95) <= 3 * math.sqrt(0.95 * 0.05 / 1000) + 0.01


def test_moderation_perfect_reliability_matches_noncentral_f():
    # Cohen (1988, ch. 9): the product term's test is F(1, N - 4) with lambda = f^2 N,
    # f^2 = xz^2 Var(XZ) / (1 - R^2). The formula treats the predictors as fixed; here they
    # are random, and the product of two normal variables is heavy-tailed (kurtosis 9), so
    # its sum of squares varies between samples and the simulated power averages over a
    # spread of lambda, slightly below the fixed value (measured 0.713 vs 0.728 in the
    # first case; 0.711 vs 0.708 with the balanced binary moderator): allowance 0.02.
    for m, n in ((Moderation(0.3, 0.2, 0.15), 250), (Moderation(0.2, 0.3, 0.12, xz_r=0.3), 400),
                 (Moderation(0.3, 0.0, 0.15, binary_moderator=True), 250)):
        res = simulate_power(m, n, reps=3000, seed=18)
        assert within(res["XZ-Y"], f_power(m.interaction_f2(), n, 1, 3), extra=0.02)


def test_reliability_attenuates_interaction_as_predicted():
    # Observed product's reliability (Busemeyer & Jones 1983 for r = 0; Bohrnstedt & Marwell
    # 1978 for correlated X, Z): checked as the squared correlation of true and observed
    # product in a large sample.
    rng = np.random.default_rng(19)
    n, r, rx, rz = 400_000, 0.4, 0.7, 0.8
    z = rng.standard_normal(n)
    x = r * z + math.sqrt(1 - r * r) * rng.standard_normal(n)
    xo = x + math.sqrt((1 - rx) / rx) * rng.standard_normal(n)
    zo = z + math.sqrt((1 - rz) / rz) * rng.standard_normal(n)
    r_obs = np.corrcoef(xo, zo)[0, 1]
    assert np.corrcoef(x * z, xo * zo)[0, 1] ** 2 == pytest.approx(
        sd.product_reliability(rx, rz, r_obs), abs=0.01)
    # With X, Z uncorrelated the observed regressors are uncorrelated, so the observed
    # R^2 is bx^2 rx + bz^2 rz + xz^2 rx rz and the product's f^2 shrinks accordingly.
    bx, bz, bxz, n = 0.3, 0.2, 0.2, 200
    perfect = Moderation(bx, bz, bxz)
    noisy = Moderation(bx, bz, bxz, x_reliability=rx, z_reliability=rz)
    r2 = bx ** 2 * rx + bz ** 2 * rz + bxz ** 2 * rx * rz
    f2_obs = bxz ** 2 * sd.product_reliability(rx, rz) / (1 - r2)
    p_perfect = simulate_power(perfect, n, reps=3000, seed=20)["XZ-Y"]
    p_noisy = simulate_power(noisy, n, reps=3000, seed=20)["XZ-Y"]
    assert p_noisy.power < p_perfect.power - 3 * p_perfect.mc_se
    # measurement error in a product leaves the residuals heteroscedastic: allowance 0.02
    assert within(p_noisy, f_power(f2_obs, n, 1, 3), extra=0.02)


def test_interaction_needs_many_times_the_sample_common_practice():
    # Common practice: an interaction needs 8 to 16 times the sample of a main effect of
    # twice its size. Here the slope of X is 0.375 at +1 SD of Z and 0.225 at -1 SD
    # (attenuated; difference 0.15 = half the main effect 0.3 on average; Z itself 0.3);
    # the main-effect study is Y on X alone with slope 0.3 (Cohen 1988, noncentral t).
    mod = Moderation.from_slopes(0.375, 0.225, z_effect=0.3)
    res = find_n(mod, powers=(0.8,), reps=500, seed=21)
    sol = res.solutions[0]
    main = next(n for n in range(10, 500) if t_power(0.09 / 0.91, n, 1) >= 0.8)
    ratio = sol.n / main
    assert 8 <= ratio <= 16
    assert sol.interval.low / main <= ratio <= sol.interval.high / main


# ------------------------------------------------------------------- search and seeding

def test_find_n_confirms_its_solution():
    res = find_n(SimpleMediation(0.3, 0.3), test="joint", powers=(0.8, 0.9), reps=600, seed=22)
    for s in res.solutions:
        assert s.interval.low <= s.n <= s.interval.high
        assert abs(s.confirmed.power - s.goal) <= 3 * s.confirmed.mc_se + 0.01
        assert s.confirmed.reps == 1200
    a, b = res.solutions
    assert a.n < b.n
    # the fitted curve is monotone and passes near its points
    ns = np.array(sorted({p.n for p in res.points}))
    fitted = res.curve("X-M-Y", ns)
    assert np.all(np.diff(fitted) > 0)
    pts = sorted((p for p in res.points if p.target == "X-M-Y"), key=lambda p: p.n)
    z = [(p.power - f) / math.sqrt(max(f * (1 - f), 1e-4) / p.reps)
         for p, f in zip(pts, fitted)]
    assert np.median(np.abs(z)) < 1.5 and np.max(np.abs(z)) < 4
    doc = res.to_dict()
    assert doc["solutions"][0]["n"] == a.n and "curves" in doc


def test_find_n_says_when_power_cannot_be_reached():
    res = find_n(SimpleMediation(0.05, 0.05), test="joint", powers=(0.8,), reps=200, seed=23,
                 n_max=300)
    s = res.solutions[0]
    assert not s.n and "stays below" in s.n.reason
    assert res.to_dict()["solutions"][0]["n"]["status"] == "not estimable"


def test_results_do_not_depend_on_workers():
    d = ParallelMediation((0.3, 0.2), (0.2, 0.3), 0.1)
    one = simulate_power(d, 90, test="monte-carlo", reps=600, seed=24, workers=1)
    two = simulate_power(d, 90, test="monte-carlo", reps=600, seed=24, workers=2)
    assert one.to_dict() == two.to_dict()


def test_progress_is_reported():
    seen = []
    simulate_power(SimpleMediation(0.3, 0.3), 60, test="joint", reps=600, seed=26,
                   progress=lambda done, total: seen.append((done, total)))
    assert seen[-1] == (3, 3) and len(seen) == 3


def test_search_skips_indirect_effects_that_are_zero():
    # X-M1-Y and X-M2-Y are 0 here (b1 = a2 = 0): only the serial effect is planned for
    res = find_n(SerialMediation(0.4, 0.4, 0.4), test="joint", powers=(0.8,), reps=300,
                 seed=27)
    assert [s.target for s in res.solutions] == ["X-M1-M2-Y"]
    assert 40 < res.solutions[0].n < 120
    with pytest.raises(OptionError, match="every indirect effect"):
        find_n(SimpleMediation(0.0, 0.3), test="joint")


@pytest.mark.parametrize("name, design", [
    ("simple-mediation", SimpleMediation(0.4, 0.3, 0.15)),
    ("serial-mediation", SerialMediation(0.4, 0.35, 0.3, a2=0.1, b1=0.2, direct=-0.1)),
    ("parallel-mediation", ParallelMediation((0.4, 0.3, 0.2), (0.3, 0.2, 0.1), 0.1,
                                             mediator_r=0.25)),
])
def test_paths_from_correlations_round_trip(name, design):
    # The correlations the model implies, read back as standardized regression coefficients
    # (the path-analysis identities, e.g. Viswesvaran & Ones 1995), give the same paths.
    sigma = design._chol @ design._chol.T
    v = design.variables
    r = {f"{v[i]}-{v[j]}": float(sigma[i, j]) for i in range(len(v))
         for j in range(i + 1, len(v))}
    back = sd.design_from_correlations(name, r)
    for f in dataclasses.fields(design):
        if f.init:
            assert np.allclose(getattr(back, f.name), getattr(design, f.name), atol=1e-10)


def test_paths_from_correlations_refuses_impossible_matrices():
    with pytest.raises(OptionError, match="not positive definite"):
        sd.design_from_correlations("simple-mediation", {"X-M": 0.9, "M-Y": 0.9, "X-Y": -0.5})
    with pytest.raises(OptionError, match="X-Y is needed"):
        sd.design_from_correlations("simple-mediation", {"X-M": 0.3, "M-Y": 0.3})


def test_every_test_reports_the_total_indirect_effect():
    # the total a1 b1 + a2 b2 of two sizeable effects is detected at least as often as the
    # weaker specific effect, whatever the test
    d = ParallelMediation((0.35, 0.3), (0.3, 0.3), 0.1)
    for test in ("sobel", "monte-carlo"):
        res = simulate_power(d, 120, test=test, reps=500, seed=28)
        assert res["total indirect"].power >= res["X-M2-Y"].power - 3 * res["X-M2-Y"].mc_se
