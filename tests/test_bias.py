"""The bias-sensitivity suite and the planning scenarios.

Sources named beside each check: Egger et al. (1997); Stanley & Doucouliagos (2014);
Duval & Tweedie (2000); Vevea & Hedges (1995); Stanley, Doucouliagos & Ioannidis (2017);
Ioannidis & Trikalinos (2007); Mathur & VanderWeele (2020); Carter, Schönbrodt, Gervais &
Hilgard (2019) for the simulated pattern; Perugini, Gallucci & Costantini (2014).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, stats

from pooler.evidence.audit import excess_significance, unit_powers
from pooler.evidence.bias import (Z975, _k0, bias_suite, egger_test, eta_adjusted, pet, peese,
                                  pet_peese, selection_loglik, selection_model, selection_ratio,
                                  trim_and_fill, waap_wls)
from pooler.evidence.pooling import pool, random_effects
from pooler.planning.scenarios import make_scenarios

from test_pooling import make_effects

sm = pytest.importorskip("statsmodels.api")


def literature(k, delta=0.2, tau=0.1, publish_ns=1.0, seed=1):
    """Simulated two-group literature: n per group 20-100, selection on significance."""
    rng = np.random.default_rng(seed)
    ys, vs, ns = [], [], []
    while len(ys) < k:
        n = int(rng.integers(20, 101))
        theta = rng.normal(delta, tau)
        v = 2 / n + theta ** 2 / (4 * n)
        y = rng.normal(theta, math.sqrt(v))
        if y / math.sqrt(v) > Z975 or rng.random() < publish_ns:
            ys.append(y)
            vs.append(v)
            ns.append(n)
    return np.array(ys), np.array(vs), np.array(ns)


# ---------------------------------------------------------------- regression methods

def test_egger_against_statsmodels_ols_and_wls_equivalence():
    # Egger et al. (1997): OLS of y/SE on 1/SE, intercept tested with t(k-2)
    y, v, _ = literature(15, seed=3)
    se = np.sqrt(v)
    ref = sm.OLS(y / se, sm.add_constant(1 / se)).fit()
    ours = egger_test(y, v)
    assert_allclose([ours.estimate, ours.se, ours.p], [ref.params[0], ref.bse[0], ref.pvalues[0]],
                    rtol=1e-10)
    # the same intercept is the slope of WLS(y ~ SE, weights 1/SE^2)
    wls = sm.WLS(y, sm.add_constant(se), weights=1 / v).fit()
    assert_allclose(ours.estimate, wls.params[1], rtol=1e-10)


def test_pet_and_peese_by_weighted_least_squares_by_hand():
    # Stanley & Doucouliagos (2014): WLS with multiplicative dispersion; by hand:
    # beta = (X'WX)^-1 X'Wy, cov = s^2 (X'WX)^-1 with s^2 = residual weighted SS / (k - 2)
    y, v, _ = literature(18, seed=4)
    for fit_fn, x in ((pet, np.sqrt(v)), (peese, v)):
        X = np.column_stack([np.ones_like(x), x])
        W = np.diag(1 / v)
        xtwx = X.T @ W @ X
        beta = np.linalg.solve(xtwx, X.T @ W @ y)
        r = y - X @ beta
        s2 = (r @ W @ r) / (len(y) - 2)
        se0 = math.sqrt(s2 * np.linalg.inv(xtwx)[0, 0])
        ours = fit_fn(y, v)
        assert_allclose([ours.estimate, ours.se], [beta[0], se0], rtol=1e-9)
        ref = sm.WLS(y, sm.add_constant(x), weights=1 / v).fit()
        assert_allclose(ours.p, ref.pvalues[0], rtol=1e-9)


def test_pet_peese_condition():
    y, v, _ = literature(40, delta=0.5, seed=5)
    p, q = pet(y, v), peese(y, v)
    res = pet_peese(p, q)
    if p.p < 0.05 and p.estimate > 0:
        assert res.chosen == "PEESE" and res.estimate == q.estimate
    else:
        assert res.chosen == "PET" and res.estimate == p.estimate
    y0, v0, _ = literature(12, delta=0.0, seed=6)
    p0 = pet(y0, v0)
    assert pet_peese(p0, peese(y0, v0)).chosen == ("PEESE" if p0.p < .05 and p0.estimate > 0
                                                    else "PET")


# ---------------------------------------------------------------- trim-and-fill

def test_l0_r0_by_hand():
    # Duval & Tweedie (2000), eqs. 2-3. deviations ranked by |dev|: 1..6, positives at
    # ranks 2, 3, 5, 6 -> T = 16, L0 = (4*16 - 6*7) / 11 = 2; the top ranks 6, 5 are
    # positive and rank 4 is not -> gamma = 2, R0 = 1
    dev = np.array([-0.1, 0.2, 0.3, -0.4, 0.5, 0.6])
    assert _k0(dev, "L0") == 2
    assert _k0(dev, "R0") == 1


def symmetric_funnel(mu=0.3):
    se = np.repeat(np.linspace(0.08, 0.45, 10), 2)
    a = np.tile([1.0, -1.0], 10) * np.linspace(0.2, 1.6, 20)
    return mu + a * se, se ** 2


def test_trim_and_fill_symmetric_funnel_imputes_nothing():
    y, v = symmetric_funnel()
    for est in ("L0", "R0"):
        res = trim_and_fill(y, v, estimator=est, side="left")
        assert res.k0 == 0
        assert_allclose(res.estimate, random_effects(y, v).mu, rtol=1e-9)


def test_trim_and_fill_recovers_deleted_studies():
    y, v = symmetric_funnel()
    mu = random_effects(y, v).mu
    dev = y - mu
    # delete the 3 most extreme studies on the left of the funnel
    drop = np.argsort(dev)[:3]
    keep = np.setdiff1d(np.arange(len(y)), drop)
    res = trim_and_fill(y[keep], v[keep], estimator="L0")
    assert res.side == "left"
    assert 2 <= res.k0 <= 4
    assert res.estimate < random_effects(y[keep], v[keep]).mu
    assert len(res.filled_effects) == res.k0


# ---------------------------------------------------------------- selection model

def test_selection_loglik_equals_numerical_integration():
    # Vevea & Hedges (1995): density w(y) phi(y; mu, s) / integral of w(t) phi(t; mu, s) dt,
    # the normalising integral computed here by scipy.integrate.quad
    y, v, _ = literature(12, seed=8)
    mu, tau2, omega = 0.15, 0.02, 0.3
    total = 0.0
    for yi, vi in zip(y, v):
        s = math.sqrt(vi + tau2)
        c = Z975 * math.sqrt(vi)
        def dens(t):
            return stats.norm.pdf(t, mu, s)
        norm = omega * integrate.quad(dens, -np.inf, c)[0] + integrate.quad(dens, c, np.inf)[0]
        w = 1.0 if yi > c else omega
        total += math.log(w * dens(yi) / norm)
    assert_allclose(selection_loglik(mu, tau2, omega, y, v), total, rtol=1e-9)


def test_selection_model_without_selection():
    y, v, _ = literature(200, delta=0.3, tau=0.1, publish_ns=1.0, seed=9)
    res = selection_model(y, v)
    assert res.converged
    assert 0.5 < res.omega < 2.0
    assert abs(res.estimate - random_effects(y, v, "reml").mu) < 0.05


def test_selection_model_under_strong_selection_is_closer_to_truth():
    # Carter, Schönbrodt, Gervais & Hilgard (2019): under strong selection the
    # random-effects estimate is inflated and the 3PSM recovers much of the truth
    delta = 0.2
    y, v, _ = literature(200, delta=delta, tau=0.1, publish_ns=0.1, seed=10)
    reml = random_effects(y, v, "reml").mu
    res = selection_model(y, v)
    assert res.converged
    assert reml > delta + 0.05
    assert abs(res.estimate - delta) < abs(reml - delta)
    assert res.omega < 0.5 and res.lrt_p < 0.05


def test_selection_model_needs_studies_on_both_sides():
    y = np.array([0.8, 0.9, 1.0, 0.7, 0.1])
    v = np.full(5, 0.04)
    res = selection_model(y, v)
    assert not res and "at least 3 significant and 3 non-significant" in str(res)


# ---------------------------------------------------------------- WAAP-WLS

def test_waap_wls_by_hand():
    # Stanley, Doucouliagos & Ioannidis (2017): WLS = inverse-variance mean, SE with the
    # multiplicative dispersion; adequately powered: SE <= |WLS| / 2.8
    y = np.array([0.50, 0.42, 0.30, 0.65, 0.10, 0.80])
    v = np.array([0.010, 0.012, 0.030, 0.090, 0.060, 0.200])
    w = 1 / v
    b = np.sum(w * y) / w.sum()
    thr = abs(b) / 2.8
    adequate = np.sqrt(v) <= thr
    wa, ya = w[adequate], y[adequate]
    ba = np.sum(wa * ya) / wa.sum()
    sea = math.sqrt(np.sum(wa * (ya - ba) ** 2) / (len(ya) - 1) / wa.sum())
    res = waap_wls(y, v)
    assert res.k_adequate == int(adequate.sum()) == 2 and not res.fallback
    assert_allclose([res.estimate, res.se, res.wls_estimate], [ba, sea, b], rtol=1e-10)


def test_waap_wls_falls_back_and_says_so():
    y = np.array([0.5, 0.4, 0.6])
    v = np.array([0.2, 0.3, 0.25])
    res = waap_wls(y, v)
    assert res.fallback and "WLS on all studies" in res.note
    assert_allclose(res.estimate, np.sum(y / v) / np.sum(1 / v), rtol=1e-12)


# ---------------------------------------------------------------- selection ratio

def test_selection_ratio_and_s_value_by_hand():
    # Mathur & VanderWeele (2020): non-affirmative studies up-weighted by eta;
    # S-value: the eta at which the estimate reaches 0
    y = np.array([0.60, 0.55, 0.70, -0.20, -0.35, 0.05])
    v = np.array([0.04, 0.05, 0.06, 0.05, 0.04, 0.05])
    tau2 = 0.01
    w = 1 / (v + tau2)
    aff = y > Z975 * np.sqrt(v)
    assert aff.tolist() == [True, True, True, False, False, False]
    res = selection_ratio(y, v, tau2)
    for eta, est in zip(res.eta, res.estimates):
        ww = np.where(aff, w, eta * w)
        assert_allclose(est, np.sum(ww * y) / ww.sum(), rtol=1e-12)
    assert_allclose(res.worst_case, np.sum(w[~aff] * y[~aff]) / w[~aff].sum(), rtol=1e-12)
    s = -np.sum(w[aff] * y[aff]) / np.sum(w[~aff] * y[~aff])
    assert_allclose(res.s_value, s, rtol=1e-12)
    assert abs(eta_adjusted(y, v, tau2, res.s_value)) < 1e-12


def test_s_value_not_estimable_when_worst_case_positive():
    y = np.array([0.60, 0.55, 0.20, 0.10])
    v = np.array([0.04, 0.05, 0.05, 0.04])
    res = selection_ratio(y, v, 0.0)
    assert not res.s_value and "no amount of selection" in str(res.s_value)


# ---------------------------------------------------------------- excess significance

def test_excess_significance_by_hand():
    # Ioannidis & Trikalinos (2007): A = (O - E)^2 / E + (O - E)^2 / (k - E), chi2(1)
    y, v, _ = literature(20, delta=0.3, publish_ns=0.2, seed=12)
    eff = make_effects(y, v)
    powers = [r.power for r in unit_powers(eff.units, 0.3, "g")]
    res = excess_significance(eff.units, powers)
    o = int(np.sum(y / np.sqrt(v) > Z975) + np.sum(y / np.sqrt(v) < -Z975))
    e = sum(powers)
    a = (o - e) ** 2 / e + (o - e) ** 2 / (20 - e)
    assert res.observed == o
    assert_allclose([res.expected, res.chi2, res.p], [e, a, stats.chi2.sf(a, 1)], rtol=1e-12)


def test_unit_power_is_exact_two_group_power():
    from pooler.planning.power import power_at
    eff = make_effects([0.3], [0.04])      # n1 = n2 = 50
    (sp,) = unit_powers(eff.units, 0.4, "g")
    assert_allclose(sp.power, power_at(0.4, 50, "two-group"), rtol=1e-12)


# ---------------------------------------------------------------- scenarios

def scenario_inputs(k, **kw):
    y, v, n = literature(k, **kw)
    eff = make_effects(y, v)
    pooled = pool(eff)
    return eff, pooled, bias_suite(pooled)


def test_scenarios_use_identified_selection_model():
    eff, pooled, bias = scenario_inputs(40, delta=0.2, publish_ns=0.2, seed=13)
    sc = make_scenarios(pooled, bias, adjuster="safeguard")  # the earlier rule
    assert "selection model" in sc.realistic.basis
    assert sc.realistic.effect == min(bias.selection_3psm.estimate, pooled.mu)
    z = stats.norm.ppf(0.8)   # 60 % two-sided safeguard (Perugini et al. 2014)
    assert_allclose(sc.pessimistic.effect, sc.realistic.effect - z * sc.realistic.se, rtol=1e-12)
    assert sc.optimistic.effect == pooled.mu
    assert sc.optimistic.effect >= sc.realistic.effect >= sc.pessimistic.effect


def test_scenarios_fall_back_to_robust_median_safeguard_below_20_studies():
    # default fallback: the safeguard limit (Perugini et al. 2014) of the median of the
    # selection-robust adjusters (selection model, PET-PEESE)
    eff, pooled, bias = scenario_inputs(12, delta=0.3, publish_ns=0.3, seed=14)
    sc = make_scenarios(pooled, bias, adjuster="safeguard")  # the earlier rule
    adj = {k: v for k, v in bias.adjusted().items() if k in ("selection_3psm", "pet_peese")}
    assert len(adj) == 2
    med = np.median([e for e, _ in adj.values()])
    se = np.median([s for _, s in adj.values()])
    expect = min(med - stats.norm.ppf(0.8) * se, pooled.mu)
    assert "too few studies for a selection model" in sc.realistic.basis
    assert "median of 2 adjusted estimates (selection model, PET-PEESE" in sc.realistic.basis
    assert_allclose(sc.realistic.effect, expect, rtol=1e-12)
    # --adjuster median: all four adjusted estimates
    allm = make_scenarios(pooled, bias, adjuster="median")
    a4 = bias.adjusted()
    med4 = np.median([e for e, _ in a4.values()])
    se4 = np.median([s for _, s in a4.values()])
    assert_allclose(allm.realistic.effect, min(med4 - stats.norm.ppf(0.8) * se4, pooled.mu),
                    rtol=1e-12)
    assert "median of 4 adjusted estimates" in allm.realistic.basis


def test_sesoi_floor_and_unsupported_verdict():
    eff, pooled, bias = scenario_inputs(40, delta=0.2, publish_ns=0.2, seed=13)
    sc = make_scenarios(pooled, bias, sesoi=0.15)
    assert sc.pessimistic.effect >= 0.15
    eff0, pooled0, bias0 = scenario_inputs(30, delta=-0.1, tau=0.0, publish_ns=0.05, seed=15)
    sc0 = make_scenarios(pooled0, bias0, adjuster="pet-peese")
    assert sc0.realistic.effect <= 0      # a null literature under strong selection (seed 15)
    assert not sc0.supported and "--smallest-effect" in sc0.verdict
    sc1 = make_scenarios(pooled0, bias0, adjuster="pet-peese", sesoi=5.0)
    assert not sc1.supported
    assert sc1.realistic.effect == 5.0 == sc1.pessimistic.effect


def test_single_adjuster_option():
    eff, pooled, bias = scenario_inputs(25, delta=0.3, publish_ns=0.3, seed=16)
    sc = make_scenarios(pooled, bias, adjuster="trim-and-fill")
    assert sc.realistic.effect == min(bias.trim_and_fill.estimate, pooled.mu)
    assert "trim-and-fill alone" in sc.realistic.basis


def test_demo_pool_has_bias_table_scenarios_and_audit(run_cli, demo_path):
    import json
    res = run_cli("pool", demo_path)
    assert res.exit_code == 0
    for text in ("Bias-sensitivity suite", "PET-PEESE", "trim-and-fill (L0)",
                 "selection model (3PSM)", "WAAP-WLS", "published more often than the rest",
                 "Excess significance",
                 "Planning scenarios", "optimistic", "realistic", "pessimistic",
                 "Literature audit"):
        assert text in res.stdout, text
    doc = json.loads(run_cli("pool", demo_path, "--json").stdout)
    b = doc["bias"]
    for key, sub in {"egger": ["intercept", "se", "p"], "pet": ["estimate", "se", "p"],
                     "peese": ["estimate", "se", "p"], "pet_peese": ["estimate", "chosen"],
                     "trim_and_fill": ["k0", "side", "estimate"],
                     "selection_3psm": ["estimate", "se", "tau2", "omega", "lrt_p"],
                     "waap_wls": ["estimate", "k_adequate"],
                     "excess_significance": ["observed", "expected", "p"],
                     "selection_ratio": ["worst_case", "s_value"]}.items():
        for s in sub:
            assert s in b[key], (key, s)
    for name in ("optimistic", "realistic", "pessimistic"):
        assert {"effect", "basis"} <= set(doc["scenarios"][name])


def test_plan_from_sheet(run_cli, demo_path):
    import json
    res = run_cli("plan", demo_path, "--design", "paired", "--n", "120")
    assert res.exit_code == 0
    for text in ("optimistic", "realistic", "pessimistic", "Assurance", "fixed total N = 120"):
        assert text in res.stdout
    doc = json.loads(run_cli("plan", demo_path, "--json").stdout)
    scen = [r["scenario"] for r in doc["rows"]]
    assert scen.count("realistic") == 3
    assert run_cli("plan").exit_code == 2


def test_selection_gradient_matches_finite_differences():
    from pooler.evidence.bias import selection_loglik_grad
    from statsmodels.tools.numdiff import approx_fprime
    y, v, _ = literature(30, seed=21, publish_ns=0.3)
    for mu, tau2, omega in [(0.2, 0.02, 0.4), (0.0, 0.1, 1.5), (0.5, 0.001, 0.05)]:
        f = lambda t: selection_loglik(t[0], t[1], math.exp(t[2]), y, v)  # noqa: E731
        num = approx_fprime(np.array([mu, tau2, math.log(omega)]), f, centered=True)
        assert_allclose(selection_loglik_grad(mu, tau2, omega, y, v), num, rtol=1e-5, atol=1e-6)


def test_s_value_never_infinite():
    # found by fuzzing: a non-affirmative study at an effect of -2e-311 made -sa/sn overflow
    y = np.array([1.2, -2.225073858507e-311])
    v = np.array([0.04, 0.5])
    res = selection_ratio(y, v, 0.0)
    assert not res.s_value and "almost exactly 0" in str(res.s_value)


def test_realistic_interval_is_the_safeguard_interval():
    # Perugini, Gallucci & Costantini (2014): the pessimistic value is the lower limit of the
    # two-sided safeguard interval (60 %) around the realistic estimate
    eff, pooled, bias = scenario_inputs(40, delta=0.2, publish_ns=0.2, seed=13)
    sc = make_scenarios(pooled, bias, adjuster="safeguard")  # the earlier rule
    iv = sc.realistic_interval()
    z = stats.norm.ppf(0.8)
    assert_allclose([iv.low, iv.high], [sc.realistic.effect - z * sc.realistic.se,
                                        sc.realistic.effect + z * sc.realistic.se], rtol=1e-12)
    assert_allclose(iv.low, sc.pessimistic.effect, rtol=1e-12)
    ci = sc.realistic_interval(0.95)
    assert_allclose(ci.high - ci.low, 2 * stats.norm.ppf(0.975) * sc.realistic.se, rtol=1e-12)


def test_selection_ratio_not_estimable_when_every_study_is_affirmative():
    """Mathur & VanderWeele (2020) up-weight the non-affirmative studies; with none, every
    "adjusted" estimate would repeat the unadjusted one and read as robustness (new-user
    trial, inflated.csv): the analysis says it cannot inform instead."""
    y = np.array([0.70, 0.75, 0.68, 0.80])
    v = np.array([0.05, 0.06, 0.05, 0.07])       # every y > 1.96 SE
    res = selection_ratio(y, v, 0.0)
    assert not res and "every study is affirmative (4 of 4)" in str(res)


def test_regressions_on_size_based_se_with_equal_groups():
    """Eight positive studies, all 20 per group (new-user trial, equal_n.csv): regressing g on
    its own SE, whose square contains g²/(2N), gave Egger's intercept 47 and PET g = -14.4.
    On the size-based SE (Pustejovsky & Rodgers 2019) there is no spread in precision, so the
    three regressions say they cannot be fitted."""
    from types import SimpleNamespace as S
    from pooler.evidence.bias import egger_test, size_variances
    from pooler.evidence.effects import d_variance, hedges_j
    d = np.array([0.9, 0.7, 0.5, 0.8, 0.3, 0.6, 0.4, 0.55])
    j = hedges_j(38)
    y, v = j * d, j ** 2 * np.array([d_variance(x, 20, 20) for x in d])
    units = [S(variance=b, n1=20, n2=20, n_total=40, design="between", within_r=None) for b in v]
    v0 = size_variances(units, "g")
    assert_allclose(v0, 0.1, rtol=1e-12)                    # 1/20 + 1/20
    assert egger_test(y, v).p < 0.001                       # the artefact on the raw SE
    for fit in (egger_test(y, v, v0), pet(y, v, v0), peese(y, v, v0)):
        assert not fit and "same size-based standard error" in str(fit)


def test_size_based_se_regression_matches_statsmodels_wls():
    """PET on the size-based SE (Pustejovsky & Rodgers 2019): WLS of g on sqrt(v0) with
    weights 1/v0, compared with statsmodels WLS (its intercept and SE)."""
    import statsmodels.api as sm
    from types import SimpleNamespace as S
    from pooler.evidence.bias import size_variances
    rng = np.random.default_rng(11)
    n1 = rng.integers(10, 80, 9).astype(float)
    n2 = n1 + rng.integers(0, 10, 9)
    y = rng.normal(0.4, 0.2, 9)
    units = [S(variance=0.1, n1=a, n2=b, n_total=a + b, design="between", within_r=None)
             for a, b in zip(n1, n2)]
    v0 = size_variances(units, "g")
    ref = sm.WLS(y, sm.add_constant(np.sqrt(v0)), weights=1 / v0).fit()
    fit = pet(y, np.full(9, 0.1), v0)
    assert_allclose([fit.estimate, fit.se], [ref.params[0], ref.bse[0]], rtol=1e-10)


def test_egger_row_warns_below_ten_studies():
    """Sterne et al. (2011, BMJ 343:d4002): tests for funnel asymmetry need 10 or more
    studies; below that the row says so beside the p-value."""
    from pooler.evidence.bias import _egger_row
    y5, v5 = literature(5, seed=3)[:2]
    y12, v12 = literature(12, seed=3)[:2]
    assert "Sterne et al. 2011" in _egger_row(egger_test(y5, v5))[3]
    assert "Sterne" not in _egger_row(egger_test(y12, v12))[3]
