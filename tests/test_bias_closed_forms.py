"""The bias suite's closed forms against their statsmodels / scipy.stats references: the
two-column WLS / OLS of Egger, PET and PEESE (statsmodels OLS/WLS), the WLS mean of WAAP-WLS
(statsmodels WLS on a constant), average ranks (scipy.stats.rankdata), the selection model's
finite-difference Hessian (statsmodels approx_hess) and its chi-square tail (scipy.stats)."""
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from pooler.evidence.bias import (_average_ranks, _hessian, _wls_mean, egger_test, pet, peese,
                                  selection_loglik)

from test_bias import literature

sm = pytest.importorskip("statsmodels.api")
stats = pytest.importorskip("scipy.stats")


@pytest.mark.parametrize("seed", range(8))
def test_regressions_match_statsmodels(seed):
    y, v, _ = literature(5 + 7 * seed, publish_ns=0.4, seed=seed)
    se = np.sqrt(v)
    cases = [(egger_test(y, v), sm.OLS(y / se, sm.add_constant(1 / se)).fit()),
             (pet(y, v), sm.WLS(y, sm.add_constant(se), weights=1 / v).fit()),
             (peese(y, v), sm.WLS(y, sm.add_constant(v), weights=1 / v).fit())]
    for ours, ref in cases:
        t = stats.t.ppf(0.975, ref.df_resid)
        assert ours.df == ref.df_resid
        assert_allclose([ours.estimate, ours.se, ours.p, ours.slope,
                         ours.ci.low, ours.ci.high],
                        [ref.params[0], ref.bse[0], ref.pvalues[0], ref.params[1],
                         ref.params[0] - t * ref.bse[0], ref.params[0] + t * ref.bse[0]],
                        rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("seed", range(5))
def test_wls_mean_matches_statsmodels(seed):
    y, v, _ = literature(4 + 9 * seed, seed=10 + seed)
    ref = sm.WLS(y, np.ones((len(y), 1)), weights=1 / v).fit()
    b, se, ci = _wls_mean(y, v)
    t = stats.t.ppf(0.975, len(y) - 1)
    assert_allclose([b, se, ci.low, ci.high],
                    [ref.params[0], ref.bse[0], ref.params[0] - t * ref.bse[0],
                     ref.params[0] + t * ref.bse[0]], rtol=1e-10)


def test_average_ranks_match_rankdata_with_ties():
    rng = np.random.default_rng(5)
    for n in (1, 2, 7, 50, 400):
        a = rng.integers(0, max(2, n // 3), n).astype(float)  # many ties
        assert_allclose(_average_ranks(a), stats.rankdata(a), rtol=0, atol=0)
        b = rng.normal(size=n)
        assert_allclose(_average_ranks(b), stats.rankdata(b), rtol=0, atol=0)


def test_selection_hessian_matches_statsmodels_approx_hess():
    from statsmodels.tools.numdiff import approx_hess
    y, v, _ = literature(60, publish_ns=0.3, seed=21)

    def nll(t):
        return -selection_loglik(t[0], t[1], math.exp(t[2]), y, v)

    for theta in ([0.2, 0.03, math.log(0.4)], [0.05, 0.0, 0.0], [-0.3, 0.2, -2.0]):
        theta = np.array(theta)
        assert_allclose(_hessian(nll, theta), approx_hess(theta, nll), rtol=1e-10, atol=1e-10)
        sub = [0, 2]
        assert_allclose(_hessian(lambda t: nll(np.array([t[0], theta[1], t[1]])), theta[sub]),
                        approx_hess(theta[sub], lambda t: nll(np.array([t[0], theta[1], t[1]]))),
                        rtol=1e-10, atol=1e-10)


def test_special_functions_equal_scipy_stats():
    # the product uses scipy.special directly; scipy.stats' t, chi2 and norm call the same
    from scipy.special import chdtrc, fdtrc, ndtri, stdtr, stdtrit
    for df in (1, 2, 5, 23, 998):
        assert_allclose(stdtrit(df, 0.975), stats.t.ppf(0.975, df), rtol=1e-12)
        assert_allclose(2 * stdtr(df, -1.7), 2 * stats.t.sf(1.7, df), rtol=1e-12)
        assert_allclose(fdtrc(3, df, 2.2), stats.f.sf(2.2, 3, df), rtol=1e-12)
    for x in (0.0, 0.5, 3.84, 30.2):
        assert_allclose(chdtrc(1, x), stats.chi2.sf(x, 1), rtol=1e-12)
    assert_allclose(ndtri(0.975), stats.norm.ppf(0.975), rtol=1e-14)
