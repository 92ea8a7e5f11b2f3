"""Stage 4: the bias-sensitivity suite.

Every method asks the same question from a different angle: how large would the mean
effect be if small, non-significant studies had not gone missing? Each returns a frozen
result or :class:`NotEstimable` with the reason, never a bare NaN.

References
----------
.. [E97] Egger, M., Davey Smith, G., Schneider, M., & Minder, C. (1997). Bias in
   meta-analysis detected by a simple, graphical test. *BMJ*, 315, 629-634.
.. [SD14] Stanley, T. D., & Doucouliagos, H. (2014). Meta-regression approximations to
   reduce publication selection bias. *Research Synthesis Methods*, 5(1), 60-78.
.. [DT00] Duval, S., & Tweedie, R. (2000). Trim and fill: A simple funnel-plot-based method
   of testing and adjusting for publication bias in meta-analysis. *Biometrics*, 56(2),
   455-463 (L0 and R0, eqs. 2-3).
.. [VH95] Vevea, J. L., & Hedges, L. V. (1995). A general linear model for estimating effect
   size in the presence of publication bias. *Psychometrika*, 60(3), 419-435.
.. [SDI17] Stanley, T. D., Doucouliagos, H., & Ioannidis, J. P. A. (2017). Finding the
   power to reduce publication bias. *Statistics in Medicine*, 36(10), 1580-1598.
.. [IT07] Ioannidis, J. P. A., & Trikalinos, T. A. (2007). An exploratory test for an excess
   of significant findings. *Clinical Trials*, 4(3), 245-253.
.. [MV20] Mathur, M. B., & VanderWeele, T. J. (2020). Sensitivity analysis for publication
   bias in meta-analyses. *JRSS C*, 69(5), 1091-1119.
.. [PR19] Pustejovsky, J. E., & Rodgers, M. A. (2019). Testing for funnel plot asymmetry of
   standardized mean differences. *Research Synthesis Methods*, 10(1), 57-71 (the SE of a
   standardised mean difference contains the effect itself; regress on a size-based SE).
"""
from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from pooler._results import (Interval, NotEstimable, ShowsAsTable, estimable, p_text, plural,
                             to_jsonable)
from pooler.evidence.pooling import random_effects

Z975 = 1.959963984540054
MIN_PER_INTERVAL = 3  # studies needed on each side of the cutpoint for the selection model


@dataclass(frozen=True)
class Regression:
    """An intercept-type estimate from a meta-regression (Egger, PET, PEESE)."""

    estimate: float
    se: float
    ci: Interval
    p: float
    slope: float
    df: int

    def to_dict(self) -> dict:
        return to_jsonable({"estimate": self.estimate, "intercept": self.estimate, "se": self.se,
                            "ci_low": self.ci.low, "ci_high": self.ci.high, "p": self.p,
                            "slope": self.slope, "df": self.df})


def _line_fit(x, y, w):
    """Weighted least squares of ``y`` on a constant and ``x`` in closed form (centred sums;
    Draper & Smith 1998, sec. 1.2 and 9.2): intercept, its SE with the residual variance
    Σ w e² / (k - 2) as the multiplicative dispersion, slope and residual df. Two columns do not
    need a linear-algebra library (the tests compare with statsmodels WLS/OLS)."""
    sw = w.sum()
    xm, ym = (w * x).sum() / sw, (w * y).sum() / sw
    dx = x - xm
    sxx = (w * dx * dx).sum()
    b1 = (w * dx * (y - ym)).sum() / sxx
    b0 = ym - b1 * xm
    e = y - b0 - b1 * x
    df = len(y) - 2
    s2 = (w * e * e).sum() / df
    return b0, math.sqrt(s2 * (1 / sw + xm * xm / sxx)), b1, df


def _fit_line(x, y, weights=None, level=0.95) -> Regression | NotEstimable:
    from scipy.special import stdtr, stdtrit
    w = np.ones_like(x) if weights is None else np.asarray(weights, float)
    with np.errstate(all="ignore"):
        b0, se0, b1, df = _line_fit(x, y, w)
    b0, se0, b1 = float(b0), float(se0), float(b1)
    if not (math.isfinite(b0) and math.isfinite(se0) and se0 > 0):
        return NotEstimable("the regression line fits the studies exactly (no residual "
                            "variation), so it has no standard error")
    t = float(stdtrit(df, 0.5 + level / 2))
    p = float(2 * stdtr(df, -abs(b0 / se0)))
    return Regression(b0, se0, Interval(b0 - t * se0, b0 + t * se0, level), p, b1, df)


def size_variances(studies, metric: str) -> np.ndarray:
    """Each study's sampling variance at a zero effect: the precision that depends on its
    size alone, the predictor of the regression methods (Egger, PET, PEESE).

    The variance of a standardised mean difference contains the effect itself
    (1/n1 + 1/n2 + d²/(2N) between groups, Borenstein et al. 2009 eq. 4.20; (1/n + d²/(2n))
    2(1 - r) within, eq. 4.28), so a regression of g on its own SE finds "asymmetry" where the
    studies merely differ in effect: with equal group sizes the SE varies only through g, and
    PET's intercept ran to g = -14 for eight positive studies. Pustejovsky & Rodgers (2019)
    regress on the size-based SE instead, as here: 1/n1 + 1/n2 between groups (4/N when only
    the total N is known), 2(1 - r)/n within (Hedges' J, within 2 % of 1 for 20 people or more,
    is left out as they do; a common factor would not move the intercept). Fisher z's variance
    1/(n - 3) is already free of the effect, and a study without sizes keeps its variance.

    Examples
    --------
    >>> from types import SimpleNamespace as S
    >>> two = [S(variance=0.11, n1=20, n2=20, n_total=40, design="between", within_r=None)]
    >>> float(size_variances(two, "g")[0])   # 1/20 + 1/20
    0.1
    """
    from pooler.evidence.effects import d_variance, d_variance_within
    out = []
    for u in studies:   # the converters' own variance formulas at d = 0
        v = u.variance
        if metric == "g" and u.design == "within" and u.n_total and u.within_r is not None:
            v = d_variance_within(0.0, u.n_total, u.within_r)
        elif metric == "g" and u.design == "between" and u.n1 and u.n2:
            v = d_variance(0.0, u.n1, u.n2)
        elif metric == "g" and u.design == "between" and u.n_total:
            v = d_variance(0.0, u.n_total / 2, u.n_total / 2)
        out.append(v)
    return np.array(out, float)


def _same_size(x) -> bool:
    return bool(np.ptp(x) <= 1e-9 * np.max(x))


_SAME_SIZE = NotEstimable("every study has the same size-based standard error, so there is no "
                          "spread in precision to regress on (Pustejovsky & Rodgers 2019)")


def egger_test(y, v, v0=None) -> Regression | NotEstimable:
    """Egger's regression test (Egger et al. 1997): OLS of y/SE on 1/SE; the intercept
    measures funnel asymmetry (t test, k - 2 df). ``v0``: the size-based variances of
    :func:`size_variances` for SE (default ``v``; Pustejovsky & Rodgers 2019)."""
    y, v = np.asarray(y, float), np.asarray(v, float)
    x = v if v0 is None else np.asarray(v0, float)
    if len(y) < 3:
        return NotEstimable(f"Egger's test needs at least 3 studies (k = {len(y)})")
    se = np.sqrt(x)
    return _SAME_SIZE if _same_size(x) else _fit_line(1 / se, y / se)


def pet(y, v, v0=None) -> Regression | NotEstimable:
    """PET: WLS of y on SE with weights 1/SE² and multiplicative dispersion; the intercept
    is the effect of a study with SE = 0 (Stanley & Doucouliagos 2014). ``v0`` as in
    :func:`egger_test`."""
    y, v = np.asarray(y, float), np.asarray(v, float)
    x = v if v0 is None else np.asarray(v0, float)
    if len(y) < 3:
        return NotEstimable(f"PET needs at least 3 studies (k = {len(y)})")
    return _SAME_SIZE if _same_size(x) else _fit_line(np.sqrt(x), y, 1 / x)


def peese(y, v, v0=None) -> Regression | NotEstimable:
    """PEESE: WLS of y on SE² with weights 1/SE² (Stanley & Doucouliagos 2014). ``v0`` as
    in :func:`egger_test`."""
    y, v = np.asarray(y, float), np.asarray(v, float)
    x = v if v0 is None else np.asarray(v0, float)
    if len(y) < 3:
        return NotEstimable(f"PEESE needs at least 3 studies (k = {len(y)})")
    return _SAME_SIZE if _same_size(x) else _fit_line(x, y, 1 / x)


@dataclass(frozen=True)
class PetPeese:
    """The conditional PET-PEESE estimate and which model was chosen, and why."""

    estimate: float
    se: float
    ci: Interval
    chosen: str  # "PET" or "PEESE"
    why: str

    def to_dict(self) -> dict:
        return to_jsonable({"estimate": self.estimate, "se": self.se, "ci_low": self.ci.low,
                            "ci_high": self.ci.high, "chosen": self.chosen, "why": self.why})


def pet_peese(pet_fit, peese_fit, alpha=0.05) -> PetPeese | NotEstimable:
    """Conditional PET-PEESE (Stanley & Doucouliagos 2014): PEESE when PET's intercept is
    significantly positive (two-tailed test at ``alpha``), else PET."""
    if not estimable(pet_fit):
        return pet_fit
    if pet_fit.p < alpha and pet_fit.estimate > 0:
        if not estimable(peese_fit):
            return peese_fit
        return PetPeese(peese_fit.estimate, peese_fit.se, peese_fit.ci, "PEESE",
                        f"PET's intercept is significantly positive ({p_text(pet_fit.p)}), "
                        "so an effect exists and PEESE estimates it with less bias")
    why = (f"PET's intercept is not significantly positive ({p_text(pet_fit.p)})"
           if pet_fit.estimate > 0 or pet_fit.p >= alpha else
           f"PET's intercept is negative ({p_text(pet_fit.p)}), so no effect is shown")
    return PetPeese(pet_fit.estimate, pet_fit.se, pet_fit.ci, "PET", why)


# ------------------------------------------------------------------ trim-and-fill

@dataclass(frozen=True)
class TrimAndFill:
    """Trim-and-fill result: number and values of the imputed studies, adjusted estimate."""

    k0: int
    side: str  # side of the funnel where studies were imputed: "left" or "right"
    estimator: str  # "L0" or "R0"
    estimate: float
    se: float
    ci: Interval
    tau2: float
    filled_effects: tuple[float, ...]
    filled_variances: tuple[float, ...]
    iterations: int

    def to_dict(self) -> dict:
        return to_jsonable({"k0": self.k0, "side": self.side, "estimator": self.estimator,
                            "estimate": self.estimate, "se": self.se, "ci_low": self.ci.low,
                            "ci_high": self.ci.high, "tau2": self.tau2,
                            "filled": [{"effect": e, "variance": v, "imputed": True}
                                       for e, v in zip(self.filled_effects,
                                                       self.filled_variances)],
                            "iterations": self.iterations})


def _average_ranks(a):
    """Ranks 1..n of ``a``, ties given the mean of the ranks they span (as
    scipy.stats.rankdata's default, which the tests compare with)."""
    order = np.argsort(a, kind="mergesort")
    sa = a[order]
    new = np.r_[True, sa[1:] != sa[:-1]]
    starts = np.flatnonzero(new)
    ends = np.r_[starts[1:], len(a)]
    mean_rank = (starts + 1 + ends) / 2.0  # ranks starts+1 .. ends
    ranks = np.empty(len(a))
    ranks[order] = np.repeat(mean_rank, ends - starts)
    return ranks


def _k0(dev, estimator):
    """Duval & Tweedie (2000) eqs. 2-3 for studies missing on the left: ranks of |dev|;
    L0 = (4 T - n(n + 1)) / (2n - 1) with T the rank sum of positive deviations;
    R0 = γ - 1 with γ the length of the run of positive deviations at the top ranks."""
    n = len(dev)
    ranks = _average_ranks(np.abs(dev))
    if estimator == "L0":
        t = ranks[dev > 0].sum()
        return max(0, int(round((4 * t - n * (n + 1)) / (2 * n - 1))))
    order = np.argsort(-np.abs(dev), kind="stable")
    run = 0
    for i in order:
        if dev[i] > 0:
            run += 1
        else:
            break
    return max(0, run - 1)


def trim_and_fill(y, v, side=None, estimator="L0", tau2_estimator="reml",
                  interval="hksj", max_iter=100) -> TrimAndFill | NotEstimable:
    """Trim-and-fill (Duval & Tweedie 2000).

    ``side`` is where studies are missing ("left" = small effects missing, the usual case);
    by default it is taken from the sign of Egger's intercept (positive → left). The trimming
    uses the random-effects mean with ``tau2_estimator``.
    """
    y, v = np.asarray(y, float), np.asarray(v, float)
    k = len(y)
    if k < 3:
        return NotEstimable(f"trim-and-fill needs at least 3 studies (k = {k})")
    if estimator not in ("L0", "R0"):
        raise ValueError("estimator must be 'L0' or 'R0'")
    if side is None:
        eg = egger_test(y, v)
        side = "left" if (not estimable(eg) or eg.estimate >= 0) else "right"
    sign = 1.0 if side == "left" else -1.0
    ys = sign * y  # work as if studies were missing on the left
    order = np.argsort(ys, kind="stable")  # ascending; the largest are trimmed
    k0, it = 0, 0
    mu = random_effects(ys, v, tau2_estimator, "wald").mu
    for it in range(1, max_iter + 1):
        keep = order[: k - k0] if k0 else order
        mu = random_effects(ys[keep], v[keep], tau2_estimator, "wald").mu
        new = min(_k0(ys - mu, estimator), k - 2)
        if new == k0:
            break
        k0 = new
    trimmed = order[k - k0:] if k0 else np.array([], int)
    fill_y = 2 * mu - ys[trimmed]
    fill_v = v[trimmed]
    all_y = np.concatenate([ys, fill_y])
    all_v = np.concatenate([v, fill_v])
    fit = random_effects(all_y, all_v, tau2_estimator, interval)
    est = sign * fit.mu
    ci = Interval(min(sign * fit.ci.low, sign * fit.ci.high),
                  max(sign * fit.ci.low, sign * fit.ci.high), fit.ci.level)
    return TrimAndFill(int(k0), side, estimator, float(est), float(fit.se), ci, float(fit.tau2),
                       tuple(float(x) for x in sign * fill_y), tuple(float(x) for x in fill_v), it)


# ------------------------------------------------------------------ selection model

@dataclass(frozen=True)
class SelectionModel:
    """Three-parameter selection model (one cutpoint at one-sided p = .025).

    ``omega`` is the relative probability that a non-significant result is published
    (1 = no selection). ``identified`` follows the planning rule of DEVELOPERS.md.
    """

    estimate: float
    se: float | NotEstimable
    ci: Interval | NotEstimable
    tau2: float
    omega: float
    omega_se: float | NotEstimable
    loglik: float
    lrt_stat: float
    lrt_p: float
    k: int
    k_significant: int
    k_nonsignificant: int
    converged: bool
    at_bound: tuple[str, ...]
    gradient: tuple[float, ...]
    starts: int

    def to_dict(self) -> dict:
        ci_lo = self.ci.low if estimable(self.ci) else self.ci
        ci_hi = self.ci.high if estimable(self.ci) else self.ci
        return to_jsonable({"estimate": self.estimate, "se": self.se, "ci_low": ci_lo,
                            "ci_high": ci_hi, "tau2": self.tau2, "omega": self.omega,
                            "omega_se": self.omega_se, "loglik": self.loglik,
                            "lrt_stat": self.lrt_stat, "lrt_p": self.lrt_p, "k": self.k,
                            "k_significant": self.k_significant,
                            "k_nonsignificant": self.k_nonsignificant,
                            "converged": self.converged, "at_bound": list(self.at_bound),
                            "gradient": list(self.gradient), "starts": self.starts})


OMEGA_BOUNDS = (1e-3, 1e3)


def selection_loglik(mu, tau2, omega, y, v) -> float:
    """Log-likelihood of the three-parameter selection model (Vevea & Hedges 1995, eq. 8
    with one cutpoint): each study's density is w(y) φ((y - μ)/s)/s / A, s² = v + τ²,
    w = 1 when y/√v > 1.96 (one-sided p < .025) and ω otherwise, and
    A = P(significant) + ω P(not significant)."""
    from scipy.special import log_ndtr
    y, v = np.asarray(y, float), np.asarray(v, float)
    s = np.sqrt(v + tau2)
    c = Z975 * np.sqrt(v)
    sig = y > c
    z = (y - mu) / s
    a = (c - mu) / s
    log_a = np.logaddexp(log_ndtr(-a), math.log(omega) + log_ndtr(a))
    ll = -0.5 * z * z - np.log(s) - 0.5 * math.log(2 * math.pi) - log_a
    ll = ll + np.where(sig, 0.0, math.log(omega))
    return float(ll.sum())


def selection_loglik_grad(mu, tau2, omega, y, v) -> np.ndarray:
    """Gradient of :func:`selection_loglik` in (μ, τ², log ω), differentiated by hand from
    the same expression (checked against finite differences in the tests)."""
    from scipy.special import log_ndtr
    s2 = v + tau2
    s = np.sqrt(s2)
    c = Z975 * np.sqrt(v)
    z = (y - mu) / s
    a = (c - mu) / s
    log_a = np.logaddexp(log_ndtr(-a), math.log(omega) + log_ndtr(a))
    phi_over_a = np.exp(-0.5 * a * a - 0.5 * math.log(2 * math.pi) - log_a)
    g_mu = np.sum(z / s - phi_over_a * (1 - omega) / s)
    g_tau2 = np.sum(0.5 * z * z / s2 - 0.5 / s2 - phi_over_a * a * (1 - omega) / (2 * s2))
    nonsig = ~(y > c)
    g_eta = np.sum(nonsig - omega * np.exp(log_ndtr(a) - log_a))
    return np.array([g_mu, g_tau2, g_eta])


def selection_model(y, v, min_per_interval=MIN_PER_INTERVAL) -> SelectionModel | NotEstimable:
    """Fit the three-parameter selection model by maximum likelihood (L-BFGS-B from several
    starting points), SE from the observed information (numerical Hessian), and the
    likelihood-ratio test against the unadjusted (ω = 1) random-effects model."""
    from scipy import optimize
    from scipy.special import chdtrc
    y, v = np.asarray(y, float), np.asarray(v, float)
    k = len(y)
    sig = y > Z975 * np.sqrt(v)
    ks, kn = int(sig.sum()), int(k - sig.sum())
    if ks < min_per_interval or kn < min_per_interval:
        return NotEstimable(f"the selection model needs at least {min_per_interval} significant "
                            f"and {min_per_interval} non-significant studies "
                            f"(here {ks} and {kn})")
    tau2_hi = 10 * (float(np.var(y)) + float(np.max(v)))
    lo_w, hi_w = math.log(OMEGA_BOUNDS[0]), math.log(OMEGA_BOUNDS[1])
    bounds = [(None, None), (0.0, tau2_hi), (lo_w, hi_w)]

    def nll(theta):
        return -selection_loglik(theta[0], theta[1], math.exp(theta[2]), y, v)

    def nll_and_grad(theta):
        w = math.exp(theta[2])
        return (-selection_loglik(theta[0], theta[1], w, y, v),
                -selection_loglik_grad(theta[0], theta[1], w, y, v))

    ml = random_effects(y, v, "ml", "wald")
    starts = [(ml.mu, ml.tau2, 0.0), (ml.mu, ml.tau2, math.log(0.3)),
              (ml.mu / 2, ml.tau2, math.log(0.1)), (float(np.median(y)), ml.tau2 / 2 + 1e-3, 0.0),
              (0.0, ml.tau2 + 0.01, math.log(0.05)), (ml.mu, 0.0, math.log(0.5))]
    best = None
    for s0 in starts:
        r = optimize.minimize(nll_and_grad, np.array(s0), method="L-BFGS-B", jac=True,
                              bounds=bounds,
                              options={"maxiter": 2000, "ftol": 1e-14, "gtol": 1e-9})
        if np.isfinite(r.fun) and (best is None or r.fun < best.fun):
            best = r
    if best is None:
        return NotEstimable("the selection-model likelihood could not be evaluated")
    theta = best.x
    mu, tau2, omega = float(theta[0]), float(theta[1]), float(math.exp(theta[2]))
    grad = nll_and_grad(theta)[1]
    at_bound = []
    if tau2 <= 1e-10:
        at_bound.append("tau2 = 0")
    if theta[2] <= lo_w + 1e-6 or theta[2] >= hi_w - 1e-6:
        at_bound.append("omega at its bound")
    scale = max(1.0, abs(best.fun))
    free = [0] + ([1] if tau2 > 1e-10 else []) + ([2] if "omega at its bound" not in at_bound else [])
    ok_free = all(abs(grad[i]) < 1e-3 * scale for i in free)
    # at a lower bound the gradient of -loglik must point into the bound (>= 0)
    ok_bound = (tau2 > 1e-10 or grad[1] > -1e-3 * scale)
    converged = bool(best.success or ok_free) and ok_free and ok_bound

    se: float | NotEstimable
    ci: Interval | NotEstimable
    omega_se: float | NotEstimable
    try:
        h = _hessian(lambda t: nll(_expand(t, theta, free)), theta[free])
        cov = np.linalg.inv(h)
        if not np.all(np.isfinite(cov)) or cov[0, 0] <= 0:
            raise np.linalg.LinAlgError
        se = float(math.sqrt(cov[0, 0]))
        ci = Interval(mu - Z975 * se, mu + Z975 * se, 0.95)
        if 2 in free:
            j = free.index(2)
            omega_se = float(omega * math.sqrt(cov[j, j])) if cov[j, j] > 0 else \
                NotEstimable("observed information not positive for omega")
        else:
            omega_se = NotEstimable("omega at its bound")
    except (np.linalg.LinAlgError, ValueError):
        se = ci = omega_se = NotEstimable("the observed information matrix is singular")
    ll1 = -float(best.fun)
    ll0 = selection_loglik(ml.mu, ml.tau2, 1.0, y, v)
    lrt = max(0.0, 2 * (ll1 - ll0))
    return SelectionModel(mu, se, ci, tau2, omega, omega_se, ll1, lrt,
                          float(chdtrc(1, lrt)), k, ks, kn, converged, tuple(at_bound),
                          tuple(float(g) for g in grad), len(starts))


def _hessian(f, x):
    """Numerical Hessian of ``f`` at ``x`` by central differences of four points,
    [f(x+h_i+h_j) - f(x+h_i-h_j) - f(x-h_i+h_j) + f(x-h_i-h_j)] / (4 h_i h_j)
    (Abramowitz & Stegun 1964, 25.3.26-27; Ridout 2009, eq. 7), steps
    h_i = ε^(1/4) max(|x_i|, 0.1). The same steps and formula as statsmodels' approx_hess,
    which the tests compare with."""
    x = np.asarray(x, float)
    n = len(x)
    h = np.finfo(float).eps ** 0.25 * np.maximum(np.abs(x), 0.1)
    ee = np.diag(h)
    hess = np.outer(h, h)
    for i in range(n):
        for j in range(i, n):
            hess[i, j] = ((f(x + ee[i] + ee[j]) - f(x + ee[i] - ee[j])
                           - (f(x - ee[i] + ee[j]) - f(x - ee[i] - ee[j])))
                          / (4.0 * hess[i, j]))
            hess[j, i] = hess[i, j]
    return hess


def _expand(t, theta, free):
    full = np.array(theta, float).copy()
    full[free] = t
    return full


# ------------------------------------------------------------------ WAAP-WLS

@dataclass(frozen=True)
class WaapWls:
    """WAAP-WLS: the WLS estimate of the adequately powered studies, or of all (fallback)."""

    estimate: float
    se: float
    ci: Interval
    k_adequate: int
    wls_estimate: float
    threshold_se: float
    fallback: bool
    note: str

    def to_dict(self) -> dict:
        return to_jsonable({"estimate": self.estimate, "se": self.se, "ci_low": self.ci.low,
                            "ci_high": self.ci.high, "k_adequate": self.k_adequate,
                            "wls_estimate": self.wls_estimate, "threshold_se": self.threshold_se,
                            "fallback": self.fallback, "note": self.note})


def _wls_mean(y, v):
    """Unrestricted WLS mean (Stanley & Doucouliagos 2015): the inverse-variance mean with a
    multiplicative-dispersion SE, sqrt(Σ w e² / (k - 1) / Σ w), as WLS on a constant (the
    tests compare with statsmodels WLS)."""
    from scipy.special import stdtrit
    w = 1 / v
    sw = w.sum()
    b = float((w * y).sum() / sw)
    e = y - b
    df = max(1, len(y) - 1)
    se = float(math.sqrt((w * e * e).sum() / (len(y) - 1) / sw)) if len(y) > 1 else math.nan
    t = float(stdtrit(df, 0.975))
    return b, se, Interval(b - t * se, b + t * se, 0.95)


def waap_wls(y, v) -> WaapWls | NotEstimable:
    """WAAP-WLS (Stanley, Doucouliagos & Ioannidis 2017): adequately powered studies have
    SE ≤ |WLS| / 2.8; with fewer than two of them, fall back to WLS on all studies."""
    y, v = np.asarray(y, float), np.asarray(v, float)
    if len(y) < 2:
        return NotEstimable(f"WAAP-WLS needs at least 2 studies (k = {len(y)})")
    b, se, ci = _wls_mean(y, v)
    thr = abs(b) / 2.8
    adequate = np.sqrt(v) <= thr
    ka = int(adequate.sum())
    if ka >= 2:
        bw, sew, ciw = _wls_mean(y[adequate], v[adequate])
        return WaapWls(bw, sew, ciw, ka, b, thr, False,
                       f"{ka} adequately powered studies (SE <= {thr:.3f})")
    return WaapWls(b, se, ci, ka, b, thr, True,
                   ("no study is" if ka == 0 else "only 1 study is") + " adequately powered "
                   f"(SE <= {thr:.3f}): WLS on all studies reported instead")


# ------------------------------------------------------------------ selection ratio

@dataclass(frozen=True)
class SelectionRatio:
    """Mathur & VanderWeele (2020) sensitivity to selection of affirmative results."""

    eta: tuple[float, ...]
    estimates: tuple[float, ...]
    worst_case: float | NotEstimable
    s_value: float | NotEstimable
    k_affirmative: int
    k_nonaffirmative: int

    def to_dict(self) -> dict:
        return to_jsonable({"rows": [{"eta": e, "estimate": m}
                                     for e, m in zip(self.eta, self.estimates)],
                            "worst_case": self.worst_case, "s_value": self.s_value,
                            "k_affirmative": self.k_affirmative,
                            "k_nonaffirmative": self.k_nonaffirmative})


def eta_adjusted(y, v, tau2, eta) -> float:
    """Estimate if affirmative results (significant, positive) were ``eta`` times more
    likely to be published (Mathur & VanderWeele 2020): non-affirmative studies are
    up-weighted by η in the random-effects mean, τ² held at its unadjusted estimate."""
    y, v = np.asarray(y, float), np.asarray(v, float)
    w = 1 / (v + tau2)
    aff = y > Z975 * np.sqrt(v)
    w = np.where(aff, w, eta * w)
    return float(np.dot(w, y) / w.sum())


def selection_ratio(y, v, tau2, etas=(2.0, 5.0, 10.0)) -> SelectionRatio | NotEstimable:
    """η-adjusted estimates, the worst case (non-affirmative studies only) and the S-value,
    the η that brings the estimate to 0 (Mathur & VanderWeele 2020)."""
    y, v = np.asarray(y, float), np.asarray(v, float)
    aff = y > Z975 * np.sqrt(v)
    ka, kn = int(aff.sum()), int((~aff).sum())
    if len(y) < 2:
        return NotEstimable("needs at least 2 studies")
    if kn == 0:
        # up-weighting non-affirmative studies changes nothing when there are none: the
        # "adjusted" estimates would all repeat the unadjusted one and read as robustness
        return NotEstimable(f"every study is affirmative ({ka} of {ka}), so there is no "
                            "non-affirmative study to up-weight: this sensitivity analysis "
                            "cannot show what selection would do here (a literature of only "
                            "significant results is itself a warning sign)")
    ests = tuple(eta_adjusted(y, v, tau2, e) for e in etas)
    w = 1 / (v + tau2)
    worst = float(np.dot(w[~aff], y[~aff]) / w[~aff].sum())
    s: float | NotEstimable
    sa, sn = float(np.dot(w[aff], y[aff])), float(np.dot(w[~aff], y[~aff]))
    if eta_adjusted(y, v, tau2, 1.0) <= 0:
        s = NotEstimable("the unadjusted estimate is already not above 0")
    elif sn >= 0:
        s = NotEstimable("no amount of selection brings the estimate to 0: even the "
                         "non-affirmative studies alone give a positive estimate")
    else:
        with np.errstate(all="ignore"):
            s = -sa / sn  # solves Σ_A w y + η Σ_N w y = 0
        if not math.isfinite(s):
            s = NotEstimable("the non-affirmative studies sum to an effect of almost "
                             "exactly 0, so no finite selection ratio reaches 0")
    return SelectionRatio(tuple(etas), ests, worst, s, ka, kn)


# ------------------------------------------------------------------ the registry

@dataclass(frozen=True)
class BiasData:
    """What every registered method is given: the pooled studies' effects ``y`` and
    variances ``v``, the pooled τ², the τ² estimator and interval method to reuse, the metric,
    ``earlier``: the results of the methods registered before it, by key, and ``v0``: the
    size-based variances of :func:`size_variances` (the regression methods' predictor)."""

    y: np.ndarray
    v: np.ndarray
    tau2: float
    estimator: str
    interval: str
    metric: str
    earlier: Mapping[str, object]
    v0: np.ndarray | None = None


@dataclass(frozen=True)
class BiasMethod:
    """One bias-sensitivity method, as the registry knows it.

    Attributes
    ----------
    key : str
        Stable identifier: the :class:`BiasResult` attribute and the key of the method's
        object in the JSON ``bias`` section. Never shown to users, never changed.
    label : str
        Short display label (estimate ladder, scenario bases, stress-test columns).
    compute : callable(BiasData) -> result or NotEstimable
        The method. A result that can set the planning effect exposes ``estimate`` and
        ``se`` (a float, or NotEstimable when it has none); one shown in the table or on
        the ladder exposes ``estimate`` and, if it has one, ``ci`` (an Interval). Any richer
        object with those attributes will do.
    citation : str
        Author-year source, as the methods paragraph cites it.
    adjuster : str or None
        The ``--adjuster`` value with which it alone sets the planning effect; None when it
        cannot set the planning effect.
    table_label : str or None
        Its row in the bias table (None: no row).
    note : callable(result) -> str, optional
        The table note when the method is estimable.
    phrase : str or None
        How the methods paragraph names it when estimable (None: not named).
    plan_order : int
        Order among the methods that can set the planning effect (scenario bases, the
        median's list, stress-test columns).
    robust : bool
        Corrects under publication selection: one of the estimates the default rule falls
        back on (DEVELOPERS.md, "The planning-effect rule").
    own_tau2 : bool
        Its result's ``tau2`` replaces the pooled τ² in the predictive distribution when it
        alone sets the realistic effect.
    ladder : bool
        Shown on the estimate ladder.
    table_row, ladder_row : callable(result) -> row, optional
        Replace the default table row (label, estimate, CI, note) or ladder row (label,
        estimate, low, high; None for no row) for methods that are not an estimate.
    """

    key: str
    label: str
    compute: Callable[[BiasData], object]
    citation: str
    adjuster: str | None = None
    table_label: str | None = None
    note: Callable[[object], str] | None = None
    phrase: str | None = None
    plan_order: int = 0
    robust: bool = False
    own_tau2: bool = False
    ladder: bool = True
    table_row: Callable[[object], tuple] | None = None
    ladder_row: Callable[[object], tuple | None] | None = None

    @property
    def can_plan(self) -> bool:
        """Whether the method can set the planning effect."""
        return self.adjuster is not None

    def adjusted(self, res) -> tuple[float, float] | None:
        """(estimate, se) of an estimable result with a standard error, else None."""
        if not estimable(res) or not estimable(getattr(res, "se", None)):
            return None
        return float(res.estimate), float(res.se)

    def row(self, res) -> tuple[str, object, object, str]:
        """This method's row of the bias table."""
        if not estimable(res):
            return (self.table_label, res, None, str(res))
        if self.table_row is not None:
            return self.table_row(res)
        return (self.table_label, res.estimate, getattr(res, "ci", None),
                self.note(res) if self.note else "")

    def rung(self, res) -> tuple | None:
        """This method's row of the estimate ladder (label, estimate, low, high) or None."""
        if not estimable(res):
            return None
        if self.ladder_row is not None:
            return self.ladder_row(res)
        ci = getattr(res, "ci", None)
        lo, hi = (ci.low, ci.high) if ci is not None and estimable(ci) else (None, None)
        return (self.label, res.estimate, lo, hi)


_REGISTRY: dict[str, BiasMethod] = {}


def register(method: BiasMethod) -> BiasMethod:
    """Add a method to the suite (after those already registered). Its key and its
    ``adjuster`` value must be new.

    Examples
    --------
    An invented toy method (not a published one) that can set the planning effect:

    >>> from pooler.evidence.bias import BiasMethod, adjuster_choices, register, unregister
    >>> toy = BiasMethod("toy", "toy", lambda d: NotEstimable("a toy"), "nobody",
    ...                  adjuster="toy-choice", plan_order=99)
    >>> _ = register(toy)
    >>> adjuster_choices()[-1]
    'toy-choice'
    >>> unregister("toy") is toy, "toy-choice" in adjuster_choices()
    (True, False)
    """
    # validation
    if method.key in _REGISTRY:
        raise ValueError(f"a bias method with key {method.key!r} is already registered")
    taken = {m.adjuster for m in _REGISTRY.values() if m.adjuster}
    if method.adjuster in taken or method.adjuster in ("default", "median"):
        raise ValueError(f"the adjuster name {method.adjuster!r} is already taken")
    _REGISTRY[method.key] = method
    return method


def unregister(key: str) -> BiasMethod:
    """Remove a registered method (tests that register a toy method use it)."""
    return _REGISTRY.pop(key)


def methods() -> tuple[BiasMethod, ...]:
    """Every registered method, in the suite's order (table and JSON order)."""
    return tuple(_REGISTRY.values())


def planning_methods() -> tuple[BiasMethod, ...]:
    """The methods that can set the planning effect, in their planning order."""
    return tuple(sorted((m for m in _REGISTRY.values() if m.can_plan),
                        key=lambda m: m.plan_order))


def adjuster_choices() -> tuple[str, ...]:
    """Every value ``--adjuster`` accepts: the three rules (the model average, the earlier
    safeguard rule, the median of the adjusters), then one per planning method."""
    return ("default", "safeguard", "median") + tuple(m.adjuster for m in planning_methods())


def _egger_row(e) -> tuple:
    k = e.df + 2
    few = (f"; with {k} studies the test has little power to find asymmetry and a significant "
           "one can come from heterogeneity alone (tests for funnel asymmetry need 10 or more "
           "studies; Sterne et al. 2011, BMJ 343:d4002)" if k < 10 else "")
    return ("Egger's test", None, None,
            f"asymmetry: intercept {e.estimate:.2f} [{e.ci.low:.2f}, {e.ci.high:.2f}], "
            f"{p_text(e.p)}{few}")


def _selection_note(r) -> str:
    return (f"omega = {r.omega:.2f}, LRT {p_text(r.lrt_p)}, "
            f"{r.k_significant} significant / {r.k_nonsignificant} not"
            + ("" if r.converged else ", did not converge")
            + (f", {', '.join(r.at_bound)}" if r.at_bound else ""))


def _worst_case_rung(r) -> tuple | None:
    return (("worst-case selection", r.worst_case, None, None) if estimable(r.worst_case)
            else None)


for _m in (
    BiasMethod("egger", "Egger's test", lambda d: egger_test(d.y, d.v, d.v0), "Egger et al., 1997",
               table_label="Egger's test", phrase="Egger's regression test", ladder=False,
               table_row=_egger_row),
    BiasMethod("pet", "PET", lambda d: pet(d.y, d.v, d.v0), "Stanley & Doucouliagos, 2014",
               table_label="PET", note=lambda r: f"intercept {p_text(r.p)}"),
    BiasMethod("peese", "PEESE", lambda d: peese(d.y, d.v, d.v0), "Stanley & Doucouliagos, 2014",
               table_label="PEESE", note=lambda r: f"slope on SE^2 = {r.slope:.2f}"),
    BiasMethod("pet_peese", "PET-PEESE",
               lambda d: pet_peese(d.earlier["pet"], d.earlier["peese"]),
               "Stanley & Doucouliagos, 2014", adjuster="pet-peese", table_label="PET-PEESE",
               note=lambda r: f"{r.chosen}: {r.why}", phrase="PET-PEESE", plan_order=2,
               robust=True),
    BiasMethod("trim_and_fill", "trim-and-fill",
               lambda d: trim_and_fill(d.y, d.v, estimator="L0", tau2_estimator=d.estimator,
                                       interval=d.interval),
               "Duval & Tweedie, 2000", adjuster="trim-and-fill", table_label="trim-and-fill (L0)",
               note=lambda r: f"{plural(r.k0, 'study', 'studies')} imputed on the {r.side}", phrase="trim-and-fill",
               plan_order=3),
    BiasMethod("trim_and_fill_r0", "trim-and-fill (R0)",
               lambda d: trim_and_fill(d.y, d.v, estimator="R0", tau2_estimator=d.estimator,
                                       interval=d.interval),
               "Duval & Tweedie, 2000", table_label="trim-and-fill (R0)",
               note=lambda r: f"{plural(r.k0, 'study', 'studies')} imputed on the {r.side}", ladder=False),
    BiasMethod("selection_3psm", "selection model",
               lambda d: (selection_model(d.y, d.v) if len(d.y) >= 2
                          else NotEstimable("one study")),
               "Vevea & Hedges, 1995", adjuster="3psm", table_label="selection model (3PSM)",
               note=_selection_note, phrase="a three-parameter selection model", plan_order=1,
               robust=True, own_tau2=True),
    BiasMethod("waap_wls", "WAAP-WLS", lambda d: waap_wls(d.y, d.v), "Stanley et al., 2017",
               adjuster="waap-wls", table_label="WAAP-WLS", note=lambda r: r.note,
               phrase="WAAP-WLS", plan_order=4),
    BiasMethod("selection_ratio", "selection ratio",
               lambda d: selection_ratio(d.y, d.v, d.tau2), "Mathur & VanderWeele, 2020",
               ladder_row=_worst_case_rung),
):
    register(_m)
del _m


# ------------------------------------------------------------------ the suite

@dataclass(frozen=True)
class BiasResult(ShowsAsTable):
    """Every registered bias-sensitivity method, estimated or not estimable (with the reason).

    Each method's result is an attribute named by its key (``bias.selection_3psm``) and an
    item (``bias["selection_3psm"]``).
    """

    metric: str
    k: int
    results: Mapping[str, object]
    methods: tuple[BiasMethod, ...]

    def __getattr__(self, name):
        results = self.__dict__.get("results")
        if results is None or name not in results:
            raise AttributeError(name)
        return results[name]

    def __getitem__(self, key):
        return self.results[key]

    def adjusted(self) -> dict:
        """The bias-adjusted estimates the planning rule can use: key -> (estimate, se), in
        planning order."""
        out = {}
        for m in sorted((m for m in self.methods if m.can_plan), key=lambda m: m.plan_order):
            a = m.adjusted(self.results[m.key])
            if a is not None:
                out[m.key] = a
        return out

    def method(self, key) -> BiasMethod:
        """The registry entry of a method in this result."""
        return next(m for m in self.methods if m.key == key)

    def table(self) -> list[tuple[str, object, object, str]]:
        """(method, estimate or NotEstimable, CI or None, note) rows for reports."""
        return [m.row(self.results[m.key]) for m in self.methods if m.table_label]

    def ladder(self) -> list[tuple]:
        """(label, estimate, low, high) of every estimable method on the estimate ladder."""
        rows = [m.rung(self.results[m.key]) for m in self.methods if m.ladder]
        return [r for r in rows if r is not None]

    def cited(self) -> list[str]:
        """How the methods paragraph names each estimable method, with its source."""
        return [f"{m.phrase} ({m.citation})" for m in self.methods
                if m.phrase and estimable(self.results[m.key])]

    def to_dict(self) -> dict:
        return to_jsonable({m.key: self.results[m.key] for m in self.methods})

    def to_frame(self):
        import pandas as pd
        return pd.DataFrame([{"method": m, "estimate": e if estimable(e) else None,
                              "ci_low": c.low if c is not None and estimable(c) else None,
                              "ci_high": c.high if c is not None and estimable(c) else None,
                              "note": n} for m, e, c, n in self.table()])


def bias_suite(pooled, tau2_estimator=None, interval=None) -> BiasResult:
    """Run every registered bias-sensitivity method on the studies of a
    :class:`PooledResult`, in registry order.

    Examples
    --------
    >>> from pooler import read_sheet, convert, pool, demo_sheet_path
    >>> from pooler.evidence.bias import bias_suite
    >>> b = bias_suite(pool(convert(read_sheet(demo_sheet_path()))))
    >>> list(b.adjusted())
    ['selection_3psm', 'pet_peese', 'trim_and_fill', 'waap_wls']
    """
    done: dict[str, object] = {}
    data = BiasData(np.array(pooled.effects), np.array(pooled.variances), pooled.tau2,
                    tau2_estimator or pooled.estimator, interval or pooled.interval,
                    pooled.metric, MappingProxyType(done),
                    size_variances(pooled.studies, pooled.metric))
    registered = methods()
    for m in registered:
        done[m.key] = m.compute(data)
    return BiasResult(pooled.metric, len(data.y), dict(done), registered)
