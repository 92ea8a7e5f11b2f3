"""Checks of the Bayesian model average (pooler.evidence.bma) against independent computations.

Every literature here is simulated (seeded) or invented.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from pooler.evidence.bma import (DEFAULT_PRIORS, WIDE_PRIORS, Priors, log_likelihood,
                                 model_average, posterior_scenarios, reweighted)
from pooler.errors import InputError, OptionError

Z975 = stats.norm.ppf(0.975)


def _literature(rng, k, delta, tau, keep_nonsig, n_range=(20, 80)):
    """Two-group studies (n per group in n_range); a non-significant result is published with
    probability keep_nonsig (one-sided p < .025 always)."""
    ys, vs = [], []
    while len(ys) < k:
        n = rng.integers(*n_range)
        v = 2 / n
        y = rng.normal(delta + rng.normal(0, tau), math.sqrt(v))
        if y / math.sqrt(v) > Z975 or rng.random() < keep_nonsig:
            ys.append(y)
            vs.append(v)
    return np.array(ys), np.array(vs)


# ------------------------------------------------------------------ likelihoods

@pytest.mark.parametrize("mu,tau,w2,w3", [(0.3, 0.2, 0.4, 0.1), (-0.2, 0.0, 0.9, 0.5),
                                          (0.8, 0.5, 0.05, 0.05), (0.0, 0.1, 1.0, 1.0)])
def test_two_step_selection_likelihood_matches_numerical_normaliser(mu, tau, w2, w3):
    # Vevea & Hedges (1995, eq. 8): density w(y) φ((y - μ)/σ)/σ / ∫ w(t) φ((t - μ)/σ)/σ dt;
    # the normaliser here by scipy.integrate.quad over the three p-value intervals
    y = np.array([0.9, 0.25, -0.1, 0.6])
    v = np.array([0.05, 0.04, 0.08, 0.02])
    got = [float(log_likelihood("two-step selection", y[i:i + 1], v[i:i + 1], mu, tau,
                                w2, w3 / w2)) for i in range(len(y))]
    for i, (yi, vi) in enumerate(zip(y, v)):
        s = math.sqrt(vi + tau ** 2)
        c = Z975 * math.sqrt(vi)
        dens = stats.norm(mu, s).pdf
        norm = (integrate.quad(dens, c, np.inf)[0] + w2 * integrate.quad(dens, 0, c)[0]
                + w3 * integrate.quad(dens, -np.inf, 0)[0])
        w = 1.0 if yi > c else (w2 if yi > 0 else w3)
        assert got[i] == pytest.approx(math.log(w * dens(yi) / norm), abs=1e-8)


def test_one_step_selection_likelihood_matches_numerical_normaliser():
    # the same check with one cutpoint at one-sided p = .025 (Vevea & Hedges 1995, eq. 8),
    # and against pooler's own maximum-likelihood selection model's log-likelihood
    from pooler.evidence.bias import selection_loglik
    y = np.array([0.9, 0.25, -0.1, 0.6, 0.05])
    v = np.array([0.05, 0.04, 0.08, 0.02, 0.03])
    mu, tau, w = 0.2, 0.15, 0.3
    total = 0.0
    for yi, vi in zip(y, v):
        s = math.sqrt(vi + tau ** 2)
        c = Z975 * math.sqrt(vi)
        dens = stats.norm(mu, s).pdf
        norm = integrate.quad(dens, c, np.inf)[0] + w * integrate.quad(dens, -np.inf, c)[0]
        total += math.log((1.0 if yi > c else w) * dens(yi) / norm)
    got = float(log_likelihood("one-step selection", y, v, mu, tau, w))
    assert got == pytest.approx(total, abs=1e-8)
    assert got == pytest.approx(selection_loglik(mu, tau ** 2, w, y, v), abs=1e-10)


@pytest.mark.parametrize("bias,power", [("PET", 0.5), ("PEESE", 1.0)])
def test_pet_peese_likelihood_is_maximised_at_the_wls_fit(bias, power):
    # Stanley & Doucouliagos (2014): with τ fixed the PET/PEESE mean is a weighted regression
    # of y on SE (or SE²) with weights 1/(v + τ²); its maximum-likelihood (μ, β) are the
    # statsmodels WLS estimates, and the likelihood is the normal density (scipy.stats)
    import statsmodels.api as sm
    rng = np.random.default_rng(11)
    v = rng.uniform(0.01, 0.1, 15)
    y = 0.2 + 1.5 * v ** power + rng.normal(0, np.sqrt(v + 0.01))
    tau = 0.1
    fit = sm.WLS(y, sm.add_constant(v ** power), weights=1 / (v + tau ** 2)).fit()
    mu_hat, b_hat = fit.params
    ll = float(log_likelihood(bias, y, v, mu_hat, tau, b_hat))
    direct = stats.norm.logpdf(y, mu_hat + b_hat * v ** power, np.sqrt(v + tau ** 2)).sum()
    assert ll == pytest.approx(direct, rel=1e-12)
    eps = np.array([-1e-4, 1e-4])
    for dm, db in [(eps, 0 * eps), (0 * eps, eps)]:
        around = log_likelihood(bias, y, v, mu_hat + dm, tau, b_hat + db)
        assert np.all(around < ll)
        # zero gradient at the WLS estimates (central difference)
        assert abs(around[1] - around[0]) / 2e-4 < 1e-5 * len(y)


# ------------------------------------------------------------------ closed forms

def test_fixed_tau_no_bias_posterior_is_the_conjugate_normal():
    # Normal prior N(0, σ0²) and y_i ~ N(μ, v_i + τ²) with τ known: μ | y is normal with
    # precision 1/σ0² + Σ w_i and mean Σ w_i y_i / precision (Gelman et al. 2013, BDA3,
    # eq. 2.12). A fixed τ = 0.2 enters as v_i + τ² in the no-heterogeneity model.
    rng = np.random.default_rng(3)
    y, v = rng.normal(0.3, 0.3, 8), rng.uniform(0.02, 0.09, 8)
    tau = 0.2
    res = model_average(y, v + tau ** 2, models=[("no bias", True, False)])
    w = 1 / (v + tau ** 2)
    prec = 1 / DEFAULT_PRIORS.effect_sd ** 2 + w.sum()
    post = stats.norm(np.dot(w, y) / prec, 1 / math.sqrt(prec))
    for q in (0.025, 0.25, 0.5, 0.75, 0.975):
        assert res.mu_quantile(q) == pytest.approx(post.ppf(q), abs=2e-4)
    assert res.p_positive == pytest.approx(post.sf(0), abs=2e-4)


def test_bayes_factor_for_an_effect_is_the_savage_dickey_ratio():
    # Savage-Dickey (Dickey 1971; Wagenmakers et al. 2010, eq. 3): BF10 = p(μ = 0) /
    # p(μ = 0 | y) in the no-bias, fixed-τ model, both densities normal in closed form
    rng = np.random.default_rng(4)
    for delta in (0.0, 0.15, 0.4):
        y, v = rng.normal(delta, 0.25, 6), rng.uniform(0.03, 0.08, 6)
        res = model_average(y, v, models=[("no bias", False, False), ("no bias", True, False)])
        w = 1 / v
        prec = 1 / DEFAULT_PRIORS.effect_sd ** 2 + w.sum()
        post0 = stats.norm.pdf(0, np.dot(w, y) / prec, 1 / math.sqrt(prec))
        bf10 = stats.norm.pdf(0, 0, DEFAULT_PRIORS.effect_sd) / post0
        assert res.inclusion_bf["effect"] == pytest.approx(bf10, rel=1e-6)


@pytest.mark.slow
def test_quadrature_error_in_the_median_is_below_0002():
    # refining every grid (twice the nodes in every dimension) moves the model-averaged
    # posterior median of μ, and the realistic effect (median given μ > 0), by < 0.002
    rng = np.random.default_rng(7)
    for k, keep in [(4, 1.0), (10, 0.1), (25, 0.3)]:
        y, v = _literature(rng, k, 0.25, 0.15, keep)
        a, b = model_average(y, v), model_average(y, v, resolution=2)
        assert abs(a.mu.median - b.mu.median) < 0.002
        assert abs(a.mu_quantile(0.5, True) - b.mu_quantile(0.5, True)) < 0.002
        assert abs(a.mu_quantile(0.25, True) - b.mu_quantile(0.25, True)) < 0.002
        # and the upper credible limit (it moved by up to 0.006 while each model's CDF was
        # interpolated linearly between its μ nodes)
        assert abs(a.mu_quantile(0.975, True) - b.mu_quantile(0.975, True)) < 0.002


def test_smooth_cdf_is_exact_for_a_normal_density_and_close_for_a_skewed_one():
    # pooler.evidence.bma._smooth_cdf reads a CDF from a density known at nodes one SD apart
    # by interpolating the log density (cubic Hermite, fourth-order slopes): the log of a
    # normal density is quadratic, which both reproduce exactly; against scipy.stats.norm.cdf
    from pooler.evidence.bma import _smooth_cdf
    x = np.linspace(-7.7, 8.3, 17)
    d = stats.norm(0.3, 1.0)
    p, c = _smooth_cdf(x, d.pdf(x))
    want = (d.cdf(p) - d.cdf(x[0])) / (d.cdf(x[-1]) - d.cdf(x[0]))
    assert len(p) > 10 * len(x)
    np.testing.assert_allclose(c, want, atol=1e-12)
    # a skewed density (gamma, shape 6; SD 0.245) at nodes 0.1 apart: within 2e-3 of
    # scipy.stats.gamma.cdf (1.6e-3), where reading the exact node CDFs linearly is 8e-3 off
    g = stats.gamma(6, scale=0.1)
    x = np.arange(0.05, 2.5, 0.1)
    p, c = _smooth_cdf(x, g.pdf(x))
    want = (g.cdf(p) - g.cdf(x[0])) / (g.cdf(x[-1]) - g.cdf(x[0]))
    linear = np.interp(p, x, (g.cdf(x) - g.cdf(x[0])) / (g.cdf(x[-1]) - g.cdf(x[0])))
    assert np.abs(c - want).max() < 2e-3
    assert np.abs(linear - want).max() > 2 * np.abs(c - want).max()
    assert np.all(np.diff(c) >= 0) and c[0] == 0 and c[-1] == pytest.approx(1.0, abs=1e-15)


# ------------------------------------------------------------------ maximum likelihood

def test_one_model_with_wide_priors_centres_on_the_ml_fit():
    # Bernstein-von Mises: with k = 300 studies and wide priors, the posterior of one model is
    # centred on its maximum-likelihood fit (pooler.evidence.pooling ML; pooler.evidence.bias.selection_model),
    # within a small fraction of the ML standard error
    from pooler.evidence.bias import selection_model
    from pooler.evidence.pooling import random_effects
    rng = np.random.default_rng(12)
    y, v = _literature(rng, 300, 0.2, 0.15, 0.4)
    wide = Priors(effect_sd=10.0, tau_scale=0.01)
    ml = random_effects(y, v, "ml", "wald")
    res = model_average(y, v, priors=wide, models=[("no bias", True, True)])
    assert abs(res.mu.median - ml.mu) < 0.1 * ml.se
    assert abs(res.tau.median - math.sqrt(ml.tau2)) < 0.01
    sm = selection_model(y, v)
    res = model_average(y, v, priors=wide, models=[("one-step selection", True, True)])
    # the posterior median sits O(1/k) from the mode in this skewed model: 0.17 SE here
    assert abs(res.mu.median - sm.estimate) < 0.25 * sm.se
    assert abs(res.tau.median - math.sqrt(sm.tau2)) < 0.015
    omega_v, omega_m = res.models[0].marginal("omega")
    omega_med = np.interp(0.5, np.cumsum(omega_m) - omega_m / 2, omega_v)
    assert abs(omega_med - sm.omega) < 0.3 * sm.omega_se


# ------------------------------------------------------------------ simulation

@pytest.mark.slow
def test_simulation_unbiased_without_selection_and_less_biased_than_reml_under_it():
    # Direction as in Carter, Schönbrodt, Gervais & Hilgard (2019): under strong selection the
    # random-effects (REML) estimate is inflated; the model average corrects most of it.
    # 16 seeded literatures of 10 studies per condition; the estimate is the realistic effect
    # (posterior median given μ > 0).
    from pooler.evidence.pooling import random_effects
    delta = 0.3
    out = {}
    for keep in (1.0, 0.1):
        rng = np.random.default_rng(2026)
        est, reml = [], []
        for _ in range(16):
            y, v = _literature(rng, 10, delta, 0.1, keep)
            est.append(model_average(y, v).mu_quantile(0.5, positive=True))
            reml.append(random_effects(y, v).mu)
        out[keep] = (np.mean(est) - delta, np.mean(reml) - delta)
    assert abs(out[1.0][0]) < 0.05
    assert out[0.1][1] > 0.12                   # REML is inflated under selection
    assert out[0.1][0] < 0.6 * out[0.1][1]      # the model average much less so


# ------------------------------------------------------------------ result and edges

def test_result_is_consistent_and_serialisable():
    from pooler._results import to_jsonable
    import json
    rng = np.random.default_rng(8)
    y, v = _literature(rng, 12, 0.3, 0.1, 0.3)
    res = model_average(y, v)
    assert sum(m.posterior for m in res.models) == pytest.approx(1.0)
    assert sum(m.prior for m in res.models) == pytest.approx(1.0)
    assert len(res.models) == 20
    # prior: ½ no bias, 1/8 per bias model; ½ effect; ½ heterogeneity
    assert res.posterior_of() == pytest.approx(1.0)
    assert sum(m.prior for m in res.models if m.bias == "PET") == pytest.approx(0.125)
    x, p = res.predictive_points()
    assert p.sum() == pytest.approx(1.0)
    assert np.all(p >= 0)
    assert res.mu.interval.low <= res.mu.median <= res.mu.interval.high
    assert 0 <= res.p_positive <= 1
    assert res.mu_cdf(0.0) == pytest.approx(1 - res.p_positive, abs=1e-9)
    json.dumps(to_jsonable(res.to_dict()))
    assert list(res.to_frame().columns)[:3] == ["bias", "effect", "heterogeneity"]


def test_predictive_mean_and_variance_match_the_posterior_moments():
    # E[θ] = E[μ] and Var θ = Var μ + E[τ²] for θ = μ + τ ε (law of total variance)
    rng = np.random.default_rng(9)
    y, v = _literature(rng, 20, 0.3, 0.2, 1.0)
    res = model_average(y, v, models=[("no bias", True, True)])
    m = res.models[0]
    mu_v, tau_v, jm = m.mu_tau()
    e_mu = (jm.sum(axis=1) * mu_v).sum()
    var_mu = (jm.sum(axis=1) * mu_v ** 2).sum() - e_mu ** 2
    e_tau2 = (jm.sum(axis=0) * tau_v ** 2).sum()
    x, p = res.predictive_points()
    mean = (x * p).sum()
    assert mean == pytest.approx(e_mu, abs=2e-3)
    assert (p * (x - mean) ** 2).sum() == pytest.approx(var_mu + e_tau2, rel=0.02)


def test_one_or_two_studies_work_with_a_warning_and_zero_is_an_error():
    res = model_average([0.5], [0.04])
    assert "cannot be told apart" in res.warnings[0]
    res2 = model_average([0.5, 0.3], [0.04, 0.05])
    assert res2.warnings
    # one significant study (z = 2.5): the average does not plan on its face value
    sc = posterior_scenarios(res)
    assert sc.realistic < 0.5
    with pytest.raises(InputError, match="no studies"):
        model_average([], [])


def test_bad_options_are_refused():
    with pytest.raises(OptionError, match="metric"):
        model_average([0.1], [0.1], metric="r2")
    with pytest.raises(OptionError, match="variance"):
        model_average([0.1], [0.0])
    with pytest.raises(OptionError, match="effect_sd"):
        model_average([0.1], [0.1], Priors(effect_sd=0.0))
    with pytest.raises(OptionError, match="unknown bias model"):
        model_average([0.1], [0.1], models=[("funnel", True, True)])
    res = model_average([0.3, 0.2], [0.05, 0.05])
    with pytest.raises(OptionError, match="pessimistic_quantile"):
        posterior_scenarios(res, pessimistic_quantile=0.7)


def test_fisher_z_priors_are_the_d_priors_rescaled():
    # z ≈ d/2 near 0 (d = 2r/√(1 - r²), z = atanh r; Borenstein et al. 2009, ch. 7)
    z = DEFAULT_PRIORS.on_metric("z")
    assert (z.effect_sd, z.tau_scale, z.pet_scale, z.peese_scale) == (0.5, 0.075, 1.0, 10.0)
    assert DEFAULT_PRIORS.on_metric("g") is DEFAULT_PRIORS
    r = 2 * 0.05 / math.sqrt(1 - 0.05 ** 2)
    assert math.atanh(0.05) / r == pytest.approx(0.5, abs=0.001)


def test_scenarios_order_sesoi_floor_and_null():
    rng = np.random.default_rng(10)
    y, v = _literature(rng, 10, 0.4, 0.1, 1.0)
    res = model_average(y, v)
    sc = posterior_scenarios(res)
    assert 0 < sc.pessimistic < sc.realistic
    assert sc.interval.low < sc.realistic < sc.interval.high
    assert not sc.favours_null
    assert posterior_scenarios(res, sesoi=0.05).pessimistic >= 0.05
    high = posterior_scenarios(res, sesoi=5.0)
    assert high.pessimistic == sc.realistic          # never above the realistic effect
    # a literature of null results: the posterior favours no effect
    y0 = rng.normal(0, 0.12, 30)
    v0 = np.full(30, 0.12 ** 2)
    null = posterior_scenarios(model_average(y0, v0))
    assert null.favours_null and null.p_positive < 0.25


def test_wider_priors_are_wider():
    assert WIDE_PRIORS.effect_sd > DEFAULT_PRIORS.effect_sd
    assert WIDE_PRIORS.tau_scale > DEFAULT_PRIORS.tau_scale
    rng = np.random.default_rng(13)
    y, v = _literature(rng, 8, 0.3, 0.1, 1.0)
    a, b = model_average(y, v), model_average(y, v, priors=WIDE_PRIORS)
    # a wider prior on μ favours the null more (Lindley 1957): a smaller Bayes factor
    assert b.inclusion_bf["effect"] < a.inclusion_bf["effect"]


def test_identical_on_every_run():
    rng = np.random.default_rng(14)
    y, v = _literature(rng, 7, 0.3, 0.1, 0.5)
    a, b = model_average(y, v), model_average(y, v)
    assert a.mu == b.mu and a.p_positive == b.p_positive


def test_assurance_over_the_model_averaged_predictive():
    # O'Hagan, Stevens & Campbell (2005): assurance = E[power(θ)] over the predictive of θ.
    # The EffectDensity built for pooler.planning.power.assurance_over must agree with the plain sum
    # Σ p_j power(θ_j) over the tabulated predictive (cells plus the mass at exactly 0)
    from pooler.planning.power import assurance_over
    from pooler.planning.scenarios import assurance_over_table, predictive_effect_density
    rng = np.random.default_rng(15)
    y, v = rng.normal(0.2, 0.25, 6), rng.uniform(0.03, 0.08, 6)
    res = model_average(y, v)
    assert res.predictive_atom > 0.05          # the no-effect, no-heterogeneity models count
    dens = predictive_effect_density(res)
    # the density is piecewise linear with kinks at its breaks: a fine grid that contains
    # every break integrates it exactly (a uniform grid alone misses a narrow triangle next
    # to 0 when a cell centre lands there; review finding 5)
    grid = np.union1d(np.linspace(dens.lower, dens.upper, 20001), dens.breaks)
    assert np.trapezoid(dens.pdf(grid), grid) == pytest.approx(1.0, abs=1e-3)
    x, p = res.predictive_points()
    assert dens.ceiling == pytest.approx(p[x > 0].sum(), abs=0.03)
    for n in (20, 100, 400):
        assert float(assurance_over(dens, n)) == pytest.approx(
            float(assurance_over_table(x, p, np.array([n]))[0]), abs=0.006)


# ------------------------------------------------------------------ work that scales with k

def test_normal_part_by_weighted_sums_equals_the_direct_sum():
    # the normal models' likelihood is summed once per τ through the weighted least-squares
    # decomposition; on a grid of (μ, τ, β) it equals the sum of scipy.stats normal log
    # densities, study by study
    rng = np.random.default_rng(31)
    v = rng.uniform(0.005, 0.3, 57)
    y = rng.normal(0.3, 0.4, 57)
    mu = np.linspace(-1, 1.5, 7)[:, None, None]
    tau = np.array([0.0, 0.05, 0.4, 2.0])[None, :, None]
    slope = np.array([0.0, 0.7, 6.0])[None, None, :]
    for bias, x in [("no bias", 0 * v), ("PET", np.sqrt(v)), ("PEESE", v)]:
        got = log_likelihood(bias, y, v, mu, tau, slope) if bias != "no bias" else \
            np.broadcast_to(log_likelihood(bias, y, v, mu, tau), (7, 4, 3))
        m = mu[..., None] + slope[..., None] * x
        direct = stats.norm.logpdf(y, m, np.sqrt(v + tau[..., None] ** 2)).sum(axis=-1)
        np.testing.assert_allclose(got, direct, rtol=1e-11, atol=1e-9)


def test_pet_and_peese_regress_on_the_given_size_based_predictor():
    # with size_v the regression models' mean is μ + β x with x = √size_v (PET) or size_v
    # (PEESE) while the variance stays v + τ² (Pustejovsky & Rodgers 2019: the predictor is
    # the SE at a zero effect); checked against scipy.stats normal log densities
    rng = np.random.default_rng(32)
    size_v = rng.uniform(0.01, 0.2, 23)
    y = rng.normal(0.4, 0.3, 23)
    v = size_v + y * y / 80            # the own variance contains the effect
    mu = np.linspace(-0.5, 1.0, 5)[:, None, None]
    tau = np.array([0.0, 0.2])[None, :, None]
    slope = np.array([0.3, 2.5])[None, None, :]
    for bias, x in [("PET", np.sqrt(size_v)), ("PEESE", size_v)]:
        got = log_likelihood(bias, y, v, mu, tau, slope, size_v=size_v)
        m = mu[..., None] + slope[..., None] * x
        direct = stats.norm.logpdf(y, m, np.sqrt(v + tau[..., None] ** 2)).sum(axis=-1)
        np.testing.assert_allclose(got, direct, rtol=1e-11, atol=1e-9)


def test_equal_sizes_leave_pet_and_peese_out_and_keep_the_prior_of_bias():
    # every study 20 per group (tests/data/newuser/equal_n.csv): the size-based SE is the
    # same for all, so the slope is not identified; PET and PEESE are left out, their prior
    # share goes to the selection models and P(no bias) keeps its prior of 1/2
    g = np.array([0.71, 0.34, 0.80, 0.12, 0.56, 0.90, 0.43, 0.65])
    size_v = np.full(8, 0.1)                       # 1/20 + 1/20
    v = size_v + g * g / 80                         # + g²/(2N), Borenstein et al. 2009 eq. 4.20
    avg = model_average(g, v, size_v=size_v)
    assert {m.bias for m in avg.models} == {"no bias", "one-step selection",
                                            "two-step selection"}
    assert any("same size" in w for w in avg.warnings)
    prior_bias = sum(m.prior for m in avg.models if m.bias != "no bias")
    assert prior_bias == pytest.approx(0.5, abs=1e-12)
    # a model average without the regression models, fitted directly, is the same
    sel = Priors(bias_shares=(("one-step selection", 0.5), ("two-step selection", 0.5),
                              ("PET", 0.0), ("PEESE", 0.0)))
    direct = model_average(g, v, priors=sel)
    assert avg.mu_quantile(0.5, True) == pytest.approx(direct.mu_quantile(0.5, True), abs=1e-12)
    # the wider-prior line keeps the same split
    wide = reweighted(avg, WIDE_PRIORS)
    assert sum(m.prior for m in wide.models if m.bias != "no bias") == pytest.approx(0.5)
    # with the own SE (varying only through g) PET and PEESE stay in the average
    own = model_average(g, v)
    assert {"PET", "PEESE"} <= {m.bias for m in own.models}


def test_size_v_equal_to_v_changes_nothing_and_bad_size_v_is_refused():
    y = np.array([0.42, 0.18, 0.55, 0.31, 0.08, 0.47])   # invented
    v = np.array([0.040, 0.031, 0.062, 0.045, 0.028, 0.051])
    a, b = model_average(y, v), model_average(y, v, size_v=v)
    assert a.mu_quantile(0.5, True) == b.mu_quantile(0.5, True)
    with pytest.raises(OptionError, match="size_v"):
        model_average(y, v, size_v=v[:3])
    with pytest.raises(OptionError, match="size_v"):
        model_average(y, v, size_v=-v)


def _continuous_se_literature(rng, k, delta=0.25, tau=0.1, keep_nonsig=0.3):
    """Studies with sampling variances spread continuously over (0.01, 0.15)."""
    ys, vs = [], []
    while len(ys) < k:
        v = rng.uniform(0.01, 0.15)
        y = rng.normal(delta + rng.normal(0, tau), math.sqrt(v))
        if y / math.sqrt(v) > Z975 or rng.random() < keep_nonsig:
            ys.append(y)
            vs.append(v)
    return np.array(ys), np.array(vs)


def test_se_groups_above_the_documented_k_move_mu_by_less_than_0002(monkeypatch):
    # above GROUP_ABOVE_K studies the selection models evaluate their normalising constant
    # once per group of studies whose SEs agree within 1 %; against every study on its own
    # (the exact sum), the posterior quantiles of μ and P(μ > 0) move by < 0.002
    from pooler.evidence import bma
    rng = np.random.default_rng(32)
    k = bma.GROUP_ABOVE_K + 50
    y, v = _continuous_se_literature(rng, k)
    coarse = model_average(y, v)
    assert len(bma._data(y, v).nb) < k / 2  # it did group
    monkeypatch.setattr(bma, "GROUP_ABOVE_K", 10 * k)
    fine = model_average(y, v)
    for q in (0.025, 0.5, 0.975):
        assert abs(coarse.mu_quantile(q) - fine.mu_quantile(q)) < 0.002
    for q in (0.25, 0.5):
        assert abs(coarse.mu_quantile(q, True) - fine.mu_quantile(q, True)) < 0.002
    assert abs(coarse.p_positive - fine.p_positive) < 0.002
    for a, b in zip(coarse.models, fine.models):
        assert abs(a.posterior - b.posterior) < 0.01


@pytest.mark.slow
@pytest.mark.parametrize("k,delta,tau,keep,metric,resolution", [
    (2, 0.3, 0.1, 1.0, "g", 1), (5, 0.2, 0.2, 0.3, "g", 1), (25, 0.25, 0.15, 0.3, "z", 1),
    (60, 0.4, 0.3, 0.5, "g", 2)])
def test_reweighted_to_wider_priors_matches_a_full_fit(k, delta, tau, keep, metric,
                                                      resolution):
    # the sensitivity line re-weights the default fit's nodes by p_wide/p_default (importance
    # re-weighting on the same quadrature rule); against a full, refined fit under the wider
    # priors the planning quantiles (median and 25th percentile of μ given μ > 0) agree within
    # 0.002, P(μ > 0) within 0.01 and the inclusion Bayes factor for an effect within 5 %.
    # The re-weighted fit inherits the default fit's quadrature error: for the k = 60
    # literature the default fit at resolution 1 is itself 0.010 off in its 25th percentile
    # and 0.012 in its 15th, so that case re-weights a refined fit. The error is in the nodes,
    # not in reading the CDF off them: its two-step model with an effect and heterogeneity
    # has 10 Gauss-Legendre nodes per u axis over a τ box reaching τ = 12 (log marginal
    # likelihood 0.14 below the refined fit's, that model's own 15th percentile of μ 0.211
    # against 0.175); resolutions 2 and 4 agree within 2e-4
    from pooler.evidence.bma import reweighted
    rng = np.random.default_rng(41 + k)
    y, v = _literature(rng, k, delta, tau, keep)
    if metric == "z":  # Fisher z ≈ d/2 (module docstring of pooler.evidence.bma)
        y, v = y / 2, v / 4
    quick = reweighted(model_average(y, v, metric, resolution=resolution), WIDE_PRIORS)
    full = model_average(y, v, metric, WIDE_PRIORS, resolution=2)
    assert quick.priors == full.priors
    for q in (0.25, 0.5):
        assert abs(quick.mu_quantile(q, True) - full.mu_quantile(q, True)) < 0.002
    assert abs(quick.p_positive - full.p_positive) < 0.01
    assert quick.inclusion_bf["effect"] == pytest.approx(full.inclusion_bf["effect"], rel=0.05)


def test_reweighting_to_the_same_priors_changes_nothing():
    from pooler.evidence.bma import reweighted
    rng = np.random.default_rng(45)
    y, v = _literature(rng, 12, 0.3, 0.1, 0.4)
    same = model_average(y, v)
    back = reweighted(same, DEFAULT_PRIORS)
    assert abs(back.mu_quantile(0.5, True) - same.mu_quantile(0.5, True)) < 1e-12
    assert back.inclusion_bf["effect"] == pytest.approx(same.inclusion_bf["effect"],
                                                        rel=1e-12)
    assert back.p_positive == pytest.approx(same.p_positive, abs=1e-12)
