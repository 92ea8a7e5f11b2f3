"""Re-weighting a fitted model average under other prior model probabilities
(ModelAverage.with_model_prior, and pooler.evidence.bma.reweighted, which shares its checks)
against a full refit with those priors.

The check rests on Bayes' rule over models (Hoeting, Madigan, Raftery & Volinsky 1999,
eq. 2): P(M | y) ∝ P(M) p(y | M), with each model's own posterior free of P(M). The refit
reuses the same deterministic grids, so the two agree to rounding: tolerance 1e-12.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from pooler.evidence.bma import (DEFAULT_PRIORS, WIDE_PRIORS, Priors, model_average,
                                 reweighted)
from pooler.errors import OptionError

# invented literatures: a plain one on g, one on Fisher z
Y = np.array([0.42, 0.18, 0.55, 0.31, 0.08, 0.47, 0.61, 0.12])
V = np.array([0.040, 0.031, 0.062, 0.045, 0.028, 0.051, 0.070, 0.020])
YZ = np.array([0.21, 0.09, 0.33, 0.15, 0.02, 0.26])
VZ = 1 / (np.array([40, 55, 30, 80, 120, 45]) - 3.0)


def _same(a, b, tol=1e-12):
    assert [m.posterior for m in a.models] == pytest.approx([m.posterior for m in b.models],
                                                            abs=tol)
    assert [m.prior for m in a.models] == pytest.approx([m.prior for m in b.models], abs=tol)
    for key in ("effect", "heterogeneity", "bias"):
        if isinstance(b.inclusion_bf[key], float):
            assert a.inclusion_bf[key] == pytest.approx(b.inclusion_bf[key], rel=tol)
        else:   # not estimable (every model, or none, includes it): the same reason
            assert a.inclusion_bf[key] == b.inclusion_bf[key]
    qs = [0.025, 0.1, 0.25, 0.33, 0.5, 0.75, 0.975]
    assert [a.mu_quantile(q, positive=True) for q in qs] == pytest.approx(
        [b.mu_quantile(q, positive=True) for q in qs], abs=tol)
    assert a.p_positive == pytest.approx(b.p_positive, abs=tol)
    assert (a.mu.median, a.mu.interval.low, a.mu.interval.high) == pytest.approx(
        (b.mu.median, b.mu.interval.low, b.mu.interval.high), abs=tol)
    assert (a.tau.median, a.tau.interval.high) == pytest.approx(
        (b.tau.median, b.tau.interval.high), abs=tol)
    np.testing.assert_allclose(a.predictive_mass, b.predictive_mass, atol=tol)
    np.testing.assert_allclose(a.predictive_edges, b.predictive_edges, atol=tol)
    assert a.priors == b.priors


@pytest.mark.parametrize("y, v, metric", [(Y, V, "g"), (YZ, VZ, "z")])
@pytest.mark.parametrize("changes", [{"p_no_bias": 0.2}, {"p_no_bias": 0.35},
                                     {"p_no_bias": 0.8, "p_effect": 0.3},
                                     {"p_heterogeneity": 0.7,
                                      "bias_shares": (("one-step selection", 0.5),
                                                      ("two-step selection", 0.2),
                                                      ("PET", 0.2), ("PEESE", 0.1))}])
def test_reweighting_equals_a_full_refit(y, v, metric, changes):
    avg = model_average(y, v, metric)
    refit = model_average(y, v, metric, replace(DEFAULT_PRIORS, **changes))
    _same(avg.with_model_prior(**changes), refit)
    # the re-weighting for other parameter priors takes model probabilities the same way
    _same(reweighted(avg, replace(DEFAULT_PRIORS, **changes)), refit)


def test_more_prior_weight_on_bias_lowers_the_planning_effect():
    # a literature whose small studies show the larger effects (invented): more prior
    # weight on the bias models moves the posterior of mu down, never up
    y = np.array([0.75, 0.62, 0.55, 0.40, 0.30, 0.22, 0.18, 0.15])
    v = np.array([0.09, 0.08, 0.06, 0.045, 0.03, 0.02, 0.015, 0.01])
    avg = model_average(y, v)
    med = [avg.with_model_prior(p_no_bias=w).mu_quantile(0.5, positive=True)
           for w in (0.8, 0.5, 0.35, 0.2)]
    assert all(b < a for a, b in zip(med, med[1:]))
    # and the weight on "no bias" falls with its prior
    post = [avg.with_model_prior(p_no_bias=w).posterior_of(bias="no bias")
            for w in (0.8, 0.5, 0.2)]
    assert post[0] > post[1] > post[2]


def test_reweighting_back_gives_the_original():
    avg = model_average(Y, V)
    back = avg.with_model_prior(p_no_bias=0.2).with_model_prior(p_no_bias=0.5)
    _same(back, avg)


def test_reweighting_refuses_what_needs_a_refit():
    avg = model_average(Y, V, models=[("no bias", True, True), ("PET", True, True)])
    with pytest.raises(OptionError, match="not fitted"):
        avg.with_model_prior(p_no_bias=0.4)
    full = model_average(Y, V)
    with pytest.raises(OptionError, match="p_no_bias"):
        full.with_model_prior(p_no_bias=1.5)
    with pytest.raises(OptionError, match="bias_shares"):
        full.with_model_prior(bias_shares=(("funnel", 1.0),))
    # all weight on no bias: the bias models drop out, as in a refit that never fits them
    only = full.with_model_prior(p_no_bias=1.0)
    assert only.posterior_of(bias="no bias") == pytest.approx(1.0)
    refit = model_average(Y, V, priors=replace(DEFAULT_PRIORS, p_no_bias=1.0))
    assert only.mu_quantile(0.5, True) == pytest.approx(refit.mu_quantile(0.5, True), abs=1e-12)


def test_reweighted_refuses_what_needs_a_refit_as_with_model_prior_does():
    # both entry points hold the models a fit with the new priors would hold (those with
    # positive prior weight): a fit restricted to two models cannot stand for the other 18
    part = model_average(Y, V, models=[("no bias", True, True), ("PET", True, True)])
    with pytest.raises(OptionError, match="not fitted"):
        reweighted(part, WIDE_PRIORS)
    with pytest.raises(OptionError, match="effect_sd"):
        reweighted(model_average(Y, V), Priors(effect_sd=-1.0))
    with pytest.raises(OptionError, match="bias_shares"):
        reweighted(model_average(Y, V), Priors(bias_shares=(("funnel", 1.0),)))
    # models whose prior weight becomes 0 drop out, as in a refit that never fits them
    full = model_average(Y, V)
    only = reweighted(full, replace(DEFAULT_PRIORS, p_no_bias=1.0))
    refit = model_average(Y, V, priors=replace(DEFAULT_PRIORS, p_no_bias=1.0))
    assert {m.bias for m in only.models} == {"no bias"}
    _same(only, refit)


def test_a_fit_with_no_regression_share_is_not_taken_for_equal_sizes():
    # priors that give PET and PEESE no share (studies of different sizes): the fit leaves
    # them out, and giving them a share afterwards needs a refit; it is not moved to the
    # selection models as it is when every study has the same size
    no_reg = replace(DEFAULT_PRIORS, bias_shares=(("one-step selection", 0.5),
                                                  ("two-step selection", 0.5),
                                                  ("PET", 0.0), ("PEESE", 0.0)))
    avg = model_average(Y, V, priors=no_reg)
    assert not avg.same_sizes
    with pytest.raises(OptionError, match="not fitted"):
        avg.with_model_prior(bias_shares=DEFAULT_PRIORS.bias_shares)
    with pytest.raises(OptionError, match="not fitted"):
        reweighted(avg, WIDE_PRIORS)


def test_equal_sizes_keep_the_split_under_other_model_probabilities():
    # every study 20 per group (size-based variance 1/20 + 1/20): PET and PEESE are left out
    # and their share goes to the selection models, in the fit and in every re-weighting,
    # which then equals a refit with the same priors (Hoeting et al. 1999, eq. 2)
    g = np.array([0.71, 0.34, 0.80, 0.12, 0.56, 0.90, 0.43, 0.65])   # invented
    size_v = np.full(8, 0.1)
    v = size_v + g * g / 80
    avg = model_average(g, v, size_v=size_v)
    assert avg.same_sizes
    shares = (("one-step selection", 0.5), ("two-step selection", 0.2), ("PET", 0.2),
              ("PEESE", 0.1))
    for changes in ({"p_no_bias": 0.3}, {"bias_shares": shares}):
        refit = model_average(g, v, priors=replace(DEFAULT_PRIORS, **changes), size_v=size_v)
        for got in (avg.with_model_prior(**changes),
                    reweighted(avg, replace(DEFAULT_PRIORS, **changes))):
            assert {m.bias for m in got.models} == {"no bias", "one-step selection",
                                                    "two-step selection"}
            assert got.same_sizes
            _same(got, refit)
