"""Power when the covariate or the predictors are sampled, not set by the design.

The usual planning formulas for ANCOVA (Borm, Fransen & Lemmens 2007) and for the R²
increment of a regression (Cohen 1988, ch. 9: λ = f² N) hold the covariate or predictor
values fixed. In most studies they are measured on people who happen to be recruited, so the
test's noncentrality is itself random. Given the predictors the test statistic has its usual
noncentral t or F distribution; its noncentrality depends on the predictors only through one
scalar whose distribution under multivariate normal predictors is known. The power is the
conditional power averaged over that scalar: exact up to the quadrature, whose error is below
1e-9 in the checks of ``tests/test_random_predictors.py``.

ANCOVA, covariate x ~ Normal in both groups (randomised): the adjusted group difference has
variance σ²_e (1/n1 + 1/n2 + D²/W) given x, with D = x̄1 - x̄2 and W the pooled within-group
sum of squares of x (ordinary least squares). D ~ N(0, σ²_x (1/n1 + 1/n2)) and
W ~ σ²_x χ²(N - 2) are independent, so

    1 / (1 + D² / (W (1/n1 + 1/n2)))  =  B  ~  Beta((N - 2)/2, 1/2),

and given x, t is noncentral t with df N - 3 and noncentrality δ₀ √B, where
δ₀ = d √(n1 n2 / N) / √(1 - ρ²) is the Borm et al. noncentrality (d the raw-score effect,
ρ the within-group covariate-outcome correlation). Borm's figure is the power when the groups
happen to be exactly balanced on the covariate (D = 0, B = 1), an upper bound.

R² increment, predictors (u tested, p in the full model) multivariate normal: given X the
partial F is noncentral F(u, N - p - 1) with λ = β_u' E'M E β_u / σ², where E holds the
residuals of the tested predictors on the intercept and the other p - u predictors. E'ME is
Wishart with N - (p - u) - 1 df and scale Σ_{u·rest}, so

    λ = f² K,   K ~ χ²(N - p + u - 1),   f² = β_u' Σ_{u·rest} β_u / σ² = ΔR² / (1 - R²_full).

For u = p = 1 this is the test of a correlation, and the power equals the one from the exact
distribution of r (Hotelling 1953), which the tests check.

Both averages are taken on the normal-score scale: with Z ~ N(0, 1) and the quantile
transform B = Q_B(Φ(Z)) (likewise K), E g(B) = E g(Q_B(Φ(Z))), a smooth function of Z
integrated by Gauss-Hermite quadrature (probabilists' weights). Tail quantiles are taken
from the complementary functions so that no precision is lost near 0 or 1.

References
----------
.. [BFL] Borm, G. F., Fransen, J., & Lemmens, W. A. J. G. (2007). A simple sample size
   formula for analysis of covariance in randomized clinical trials. *Journal of Clinical
   Epidemiology*, 60(12), 1234-1238.
.. [C88] Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
   (2nd ed.). Erlbaum. Ch. 9 (λ = f² N, fixed predictors).
.. [S74] Sampson, A. R. (1974). A tale of two regressions. *Journal of the American
   Statistical Association*, 69(347), 682-689 (regression with fixed versus normal
   predictors).
.. [GS89] Gatsonis, C., & Sampson, A. R. (1989). Multiple correlation: exact power and sample
   size calculations. *Psychological Bulletin*, 106(3), 516-524 (power of tests on the
   squared multiple correlation under random normal predictors).
.. [H53] Hotelling, H. (1953). New light on the correlation coefficient and its transforms.
   *JRSS B*, 15(2), 193-232.
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy import special as sp

NODES = 40   # Gauss-Hermite points; 32 already agree with adaptive quadrature to ~1e-12


@lru_cache(maxsize=4)
def _normal_scores(k: int = NODES):
    """Nodes and weights (summing to 1) for E g(Z), Z ~ N(0, 1).

    The outermost nodes, whose weights sum to less than 1e-15 (ten of 40, |z| > 7.7), are
    dropped: g is a probability, so they cannot move the result by more than that, and they
    cost a quarter of the work.
    """
    z, w = sp.roots_hermitenorm(k)
    w = w / w.sum()
    keep = w > 1e-14
    return z[keep], w[keep]


def _beta_quantiles(a, z):
    """Quantiles of Beta(a, 1/2) at probabilities Φ(z), accurate in both tails."""
    with np.errstate(invalid="ignore"):
        low = sp.betaincinv(a, 0.5, sp.ndtr(z))
        high = 1.0 - sp.betaincinv(0.5, a, sp.ndtr(-z))
    return np.where(z < 0, low, high)


def _chi2_quantiles(df, z):
    """Quantiles of χ²(df) at probabilities Φ(z), accurate in both tails."""
    with np.errstate(invalid="ignore"):
        low = 2.0 * sp.gammaincinv(df / 2, sp.ndtr(z))
        high = 2.0 * sp.gammainccinv(df / 2, sp.ndtr(-z))
    return np.where(z < 0, low, high)


def ancova_power(d, n1, n2, covariate_r, alpha, alternative="two-sided", upper_only=False):
    """Power of the ANCOVA t test of the group difference, averaged over a normal covariate.

    Parameters
    ----------
    d : array_like
        Raw-score standardised mean difference (outcome SD units).
    n1, n2 : array_like
        Group sizes.
    covariate_r : float
        Within-group correlation between covariate and outcome.
    alpha : array_like
    alternative : {"two-sided", "greater"}
    upper_only : bool
        Count only rejections in the hypothesised direction.

    Returns
    -------
    ndarray
        E_B[P(reject | B)], B ~ Beta((N - 2)/2, 1/2) (see the module docstring).

    Examples
    --------
    64 per group, ρ = .6, d = .4 (Borm et al. give .8014 with the covariate held fixed):

    >>> round(float(ancova_power(0.4, 64, 64, 0.6, 0.05)), 4)
    0.7983
    """
    from pooler.planning.power import _t_power
    z, w = _normal_scores()
    d, n1, n2, alpha = np.broadcast_arrays(*(np.asarray(x, float) for x in (d, n1, n2, alpha)))
    total = n1 + n2
    delta0 = d * np.sqrt(n1 * n2 / total) / math.sqrt(1 - covariate_r ** 2)
    b = _beta_quantiles((total[..., None] - 2) / 2, z)
    cond = _t_power(delta0[..., None] * np.sqrt(b), total[..., None] - 3,
                    alpha[..., None], alternative, upper_only)
    out = np.sum(np.asarray(cond) * w, axis=-1)
    return np.clip(out, 0.0, 1.0)


def increment_power(f2, n, added, total, alpha, alternative="two-sided", upper_only=False):
    """Power of the partial F test of ``added`` of ``total`` normal predictors.

    Parameters
    ----------
    f2 : array_like
        Cohen's f² of the increment, signed (the sign is the direction of the single
        tested predictor when ``added`` is 1 and the test is one-tailed).
    n : array_like
        Total N.
    added, total : int
        u predictors tested, p in the full model.
    alpha : array_like
    alternative : {"two-sided", "greater"}
        ``"greater"`` (one-tailed t) only when one predictor is tested.
    upper_only : bool
        Count only rejections in the hypothesised direction.

    Returns
    -------
    ndarray
        E_K[P(reject | λ = f² K)], K ~ χ²(N - p + u - 1) (see the module docstring).

    Examples
    --------
    One tested predictor of eight, partial r = .25 (f² = .0667), N = 120 (Cohen's fixed
    λ = f² N gives .801):

    >>> round(float(increment_power(0.25**2 / (1 - 0.25**2), 120, 1, 8, 0.05)), 3)
    0.768
    """
    from pooler.planning.power import _f_power, _t_power
    z, w = _normal_scores()
    f2, n, alpha = np.broadcast_arrays(*(np.asarray(x, float) for x in (f2, n, alpha)))
    df2 = n - total - 1
    k = _chi2_quantiles(n[..., None] - total + added - 1, z)
    lam = np.abs(f2)[..., None] * k
    if added == 1 and (alternative == "greater" or upper_only):
        cond = _t_power(np.sign(f2)[..., None] * np.sqrt(lam), df2[..., None],
                        alpha[..., None], alternative, upper_only)
    else:
        cond = _f_power(lam, added, df2[..., None], alpha[..., None])
    out = np.sum(np.asarray(cond) * w, axis=-1)
    return np.clip(out, 0.0, 1.0)
