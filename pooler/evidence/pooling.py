"""Stage 3: fixed- and random-effects pooling, heterogeneity, prediction interval, influence.

References
----------
.. [DL] DerSimonian, R., & Laird, N. (1986). Meta-analysis in clinical trials.
   *Controlled Clinical Trials*, 7(3), 177-188.
.. [PM] Paule, R. C., & Mandel, J. (1982). Consensus values and weighting factors.
   *Journal of Research of the National Bureau of Standards*, 87(5), 377-385.
.. [V05] Viechtbauer, W. (2005). Bias and efficiency of meta-analytic variance estimators
   in the random-effects model. *JEBS*, 30(3), 261-293 (ML and REML likelihoods, eqs. 6, 8).
.. [V07] Viechtbauer, W. (2007). Confidence intervals for the amount of heterogeneity in
   meta-analysis. *Statistics in Medicine*, 26(1), 37-52 (Q-profile, eq. 6).
.. [HK] Hartung, J., & Knapp, G. (2001). A refined method for the meta-analysis of
   controlled clinical trials with binary outcome. *Statistics in Medicine*, 20, 3875-3889.
.. [SJ] Sidik, K., & Jonkman, J. N. (2002). A simple confidence interval for meta-analysis.
   *Statistics in Medicine*, 21(21), 3153-3159.
.. [HT] Higgins, J. P. T., & Thompson, S. G. (2002). Quantifying heterogeneity in a
   meta-analysis. *Statistics in Medicine*, 21(11), 1539-1558 (I², H², eq. 9 for s²).
.. [HTS] Higgins, J. P. T., Thompson, S. G., & Spiegelhalter, D. J. (2009). A re-evaluation
   of random-effects meta-analysis. *JRSS A*, 172(1), 137-159 (prediction interval, eq. 12).
.. [B] Borenstein et al. (2009), *Introduction to Meta-Analysis*, ch. 19 (subgroups with
   separate τ², Q between).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from pooler._results import Interval, NotEstimable, ShowsAsTable, estimable, to_jsonable
from pooler.choices import ESTIMATORS, INTERVALS
from pooler.errors import OptionError
ESTIMATOR_NAMES = {"reml": "restricted maximum likelihood (REML)", "ml": "maximum likelihood",
                   "pm": "Paule-Mandel", "dl": "DerSimonian-Laird"}
INTERVAL_NAMES = {"hksj": "Hartung-Knapp-Sidik-Jonkman",
                  "hksj-plain": "Hartung-Knapp-Sidik-Jonkman (untruncated)",
                  "wald": "Wald (normal)"}


def _hk_factor(q, df, floor):
    """The Hartung-Knapp variance factor q / (k - 1), where q = Σ w (y - μ)²; with ``floor``
    it is kept at 1 or more (the ad hoc modification of Knapp & Hartung 2003, studied by
    Röver, Knapp & Friede 2015, *BMC Med Res Methodol* 15:99), so that the interval is never
    narrower than the Wald interval's standard error with the t quantile. Without it, a
    literature whose studies agree more closely than their sampling errors imply (Q < k - 1)
    gets an interval narrower than even the common-effect one: two small, near-identical
    studies then give an SE near 0."""
    f = np.maximum(q, 0.0) / df
    return np.maximum(f, 1.0) if floor else f


# ------------------------------------------------------------------ τ² estimators

@dataclass(frozen=True)
class Tau2Fit:
    """A τ² estimate with how it was found."""

    tau2: float
    converged: bool
    iterations: int
    message: str


def _wmean(y, w):
    return float(np.dot(w, y) / w.sum())


def q_statistic(y, v, tau2=0.0) -> float:
    """Generalised Q(τ²) = Σ (y - μ̂(τ²))² / (v + τ²) (Viechtbauer 2007, eq. 6); Q(0) is
    Cochran's Q."""
    w = 1.0 / (v + tau2)
    mu = _wmean(y, w)
    return float(np.dot(w, (y - mu) ** 2))


def _score(y, v, tau2, restricted):
    """Derivative of the (restricted) profile log-likelihood in τ² (Viechtbauer 2005)."""
    w = 1.0 / (v + tau2)
    sw = w.sum()
    r = y - w.dot(y) / sw
    w2 = w * w
    s = w2.dot(r * r) - sw
    if restricted:
        s += w2.sum() / sw
    return 0.5 * s


def loglik(y, v, tau2, restricted=True) -> float:
    """(Restricted) log-likelihood of the random-effects model at τ², μ profiled out
    (Viechtbauer 2005, eqs. 6 and 8, constants dropped)."""
    w = 1.0 / (v + tau2)
    mu = np.dot(w, y) / w.sum()
    ll = -0.5 * (np.sum(np.log(v + tau2)) + np.dot(w, (y - mu) ** 2))
    if restricted:
        ll -= 0.5 * math.log(w.sum())
    return float(ll)


def _bracket_root(f, start):
    """Find hi > 0 with f(hi) < 0, doubling from ``start`` (f decreasing in the tail)."""
    hi = max(start, 1e-8)
    for _ in range(200):
        if f(hi) < 0:
            return hi
        hi *= 2
    raise ArithmeticError("no upper bracket for τ²")


_GRID = 96          # grid points on the transformed τ² scale, after τ² = 0
_MAX_POLISH = 8     # local maxima polished at most (the best by their grid values)
_BLOCK = 1 << 18    # grid-by-study cells evaluated at once (bounds memory at large k)


def _score_on_grid(y, v, t2, restricted):
    """The score of the (restricted) profile log-likelihood (the derivative in τ² of
    Viechtbauer 2005, eqs. 6 and 8, μ profiled out) at every τ² in ``t2`` at once."""
    sc = np.empty(len(t2))
    step = max(1, _BLOCK // len(y))
    for a in range(0, len(t2), step):
        w = 1.0 / (v[None, :] + t2[a:a + step, None])
        sw = w.sum(axis=1)
        r = y[None, :] - (np.einsum("ij,j->i", w, y) / sw)[:, None]   # no BLAS call
        w2 = w * w
        sc[a:a + step] = 0.5 * (np.einsum("ij,ij->i", w2, r * r) - sw)
        if restricted:
            sc[a:a + step] += 0.5 * w2.sum(axis=1) / sw
    return sc


def _likelihood_tau2(y, v, restricted) -> Tau2Fit:
    """The global maximum of the (restricted) profile log-likelihood over τ² ≥ 0.

    The score can have several roots, and a score ≤ 0 at τ² = 0 does not make 0 the maximum
    (the likelihood can fall and rise again). So the score is first evaluated on a grid
    uniform in log(τ² + c), c = min(v) / 10, from τ² = 0 to 10 ((max y - min y)² + max v)
    (beyond (max y - min y)² the ML score is negative, since Σ w² (y - μ̂)² ≤ (max y -
    min y)² Σ w max w). Every +/- sign change of the score between neighbouring grid points
    brackets a local maximum, which ``scipy.optimize.brentq`` polishes; the best of these and
    the boundary τ² = 0 is returned. A score still positive at the top extends the search.
    """
    from scipy.optimize import brentq
    c = 0.1 * float(v.min())
    top = 10.0 * (float(np.ptp(y)) ** 2 + float(v.max()))
    t2 = np.empty(_GRID + 1)
    t2[0] = 0.0
    t2[1:] = np.exp(np.linspace(math.log(c), math.log(top + c), _GRID)) - c
    t2[1] = max(t2[1], 0.0)
    sc = _score_on_grid(y, v, t2, restricted)
    f = lambda t: _score(y, v, t, restricted)  # noqa: E731
    ll = lambda t: loglik(y, v, t, restricted)  # noqa: E731
    # the highest grid value of the likelihood lies at τ² = 0 or next to a +/- sign change
    # of the score, so the likelihood is needed only there
    brackets = [(t2[i], t2[i + 1], max(ll(t2[i]), ll(t2[i + 1])))
                for i in np.flatnonzero((sc[:-1] > 0) & (sc[1:] <= 0))]
    if sc[-1] > 0:     # the score still rises at the top of the grid: extend it
        try:
            hi = _bracket_root(f, 2 * t2[-1])
        except ArithmeticError:
            return Tau2Fit(float("nan"), False, 0, "the likelihood still rises at very "
                           "large tau^2: no maximum found")
        brackets.append((t2[-1], hi, ll(t2[-1])))
    brackets.sort(key=lambda b: -b[2])
    n_max = len(brackets)
    best_t, best_ll, iters, ok = 0.0, ll(0.0), 0, True
    grid_best = max([best_ll] + [b[2] for b in brackets])
    for lo, hi, _ in brackets[:_MAX_POLISH]:
        root, res = brentq(f, lo, hi, xtol=1e-14, rtol=1e-12, maxiter=500, full_output=True,
                           disp=False)
        iters += int(res.iterations)
        root = max(0.0, float(root))
        val = ll(root)
        if val > best_ll:
            best_t, best_ll, ok = root, val, bool(res.converged)
    # honesty check: the polished maximum must be at least as high as every grid value
    if best_ll < grid_best - 1e-9 * max(1.0, abs(best_ll)):
        return Tau2Fit(best_t, False, iters, "a grid value of the likelihood exceeds the "
                       "polished maximum")
    where = ("likelihood maximal at tau^2 = 0" if best_t == 0.0
             else "global maximum of the likelihood, interior")
    extra = f" ({n_max} local maxima inside)" if n_max > 1 else ""
    return Tau2Fit(best_t, ok, iters, where + extra)


def estimate_tau2(y, v, estimator="reml") -> Tau2Fit:
    """Between-study variance τ², truncated at 0.

    ``dl``: DerSimonian & Laird (1986) moment estimator. ``pm``: Paule & Mandel (1982),
    the root of Q(τ²) = k - 1. ``ml`` / ``reml``: the global maximum over τ² ≥ 0 of the
    (restricted) profile log-likelihood (Viechtbauer 2005, eqs. 6 and 8): a grid on a
    log(τ² + c) scale brackets every local maximum, ``scipy.optimize.brentq`` polishes each
    on the score, and the highest (or the boundary τ² = 0) wins. A score ≤ 0 at τ² = 0 does
    not by itself make 0 the estimate: the likelihood can fall and rise again.

    Examples
    --------
    Two studies, one very large (d = 1.0, 20,000 per group; d = -0.4, 35 and 52): the ML
    score is negative at τ² = 0, but the likelihood is far higher at τ² ≈ 0.46.

    >>> fit = estimate_tau2([1.0, -0.4], [1.0e-4, 0.0481], "ml")
    >>> round(fit.tau2, 2), fit.converged
    (0.46, True)
    """
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    if k < 2:
        return Tau2Fit(0.0, True, 0, "one study: no between-study variance")
    if estimator in ("ml", "reml"):
        return _likelihood_tau2(y, v, estimator == "reml")
    from scipy.optimize import brentq
    w = 1.0 / v
    q0 = q_statistic(y, v)
    if estimator == "dl":
        c = w.sum() - np.dot(w, w) / w.sum()
        return Tau2Fit(max(0.0, (q0 - (k - 1)) / c), True, 0, "closed form")
    if estimator == "pm":
        if q0 <= k - 1:
            return Tau2Fit(0.0, True, 0, "Q(0) <= k - 1: tau^2 = 0")
        f = lambda t: q_statistic(y, v, t) - (k - 1)  # noqa: E731
    else:
        raise OptionError(f"`estimator` must be one of {', '.join(ESTIMATORS)}, not {estimator!r}")
    try:
        hi = _bracket_root(f, float(np.var(y)) or float(np.mean(v)))
    except ArithmeticError:
        return Tau2Fit(float("nan"), False, 0, "no root of the estimating equation found")
    root, res = brentq(f, 0.0, hi, xtol=1e-14, rtol=1e-12, maxiter=500, full_output=True,
                       disp=False)
    return Tau2Fit(max(0.0, float(root)), bool(res.converged), int(res.iterations), res.flag)


# ------------------------------------------------------------------ one fit

@dataclass(frozen=True)
class Estimate:
    """A pooled estimate with its SE, interval and p-value (H0: effect = 0)."""

    estimate: float
    se: float
    ci: Interval
    p: float
    method: str = ""

    def to_dict(self) -> dict:
        return to_jsonable({"estimate": self.estimate, "se": self.se, "ci_low": self.ci.low,
                            "ci_high": self.ci.high, "p": self.p, "method": self.method})


@dataclass(frozen=True)
class Fit:
    """One random-effects fit: the pieces every later stage reuses."""

    k: int
    mu: float
    se: float
    ci: Interval
    p: float
    tau2: float
    tau2_fit: Tau2Fit
    weights: np.ndarray  # random-effects weights 1/(v + τ²)
    df: int | None       # t df for HKSJ, None for Wald


def random_effects(y, v, estimator="reml", interval="hksj", level=0.95) -> Fit:
    """Random-effects estimate of the mean with the chosen τ² estimator and interval.

    ``hksj-plain``: SE² = Σ w (y - μ)² / ((k - 1) Σ w) with t(k - 1) (Hartung & Knapp 2001;
    Sidik & Jonkman 2002). ``hksj`` (the default): the same with the variance factor
    Σ w (y - μ)² / (k - 1) floored at 1 (Knapp & Hartung 2003; Röver, Knapp & Friede 2015),
    so never narrower than the Wald SE. ``wald``: SE² = 1 / Σ w with the normal distribution.

    Examples
    --------
    Two near-identical small studies: untruncated, the interval collapses; floored, it is
    as wide as one degree of freedom implies.

    >>> y, v = [0.68, 0.685], [0.1, 0.1]
    >>> round(random_effects(y, v, interval="hksj-plain").se, 4)
    0.0025
    >>> round(random_effects(y, v).se, 4), round(random_effects(y, v, interval="wald").se, 4)
    (0.2236, 0.2236)
    """
    from scipy import special
    if interval not in INTERVALS:
        raise OptionError(f"`interval` must be one of {', '.join(INTERVALS)}, not {interval!r}")
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    tf = estimate_tau2(y, v, estimator)
    tau2 = tf.tau2 if math.isfinite(tf.tau2) else 0.0
    w = 1.0 / (v + tau2)
    mu = _wmean(y, w)
    if interval.startswith("hksj") and k >= 2:
        factor = _hk_factor(float(np.dot(w, (y - mu) ** 2)), k - 1, interval == "hksj")
        se = math.sqrt(factor / w.sum())
        df = k - 1
        crit = special.stdtrit(df, 0.5 + level / 2)
        p = float(2 * special.stdtr(df, -abs(mu / se))) if se > 0 else (0.0 if mu else 1.0)
    else:
        se = math.sqrt(1.0 / w.sum())
        df = None
        crit = special.ndtri(0.5 + level / 2)
        p = float(2 * special.ndtr(-abs(mu / se)))
    return Fit(k, mu, se, Interval(mu - crit * se, mu + crit * se, level), p, tau2, tf, w, df)


# ------------------------------------------------------------------ heterogeneity

@dataclass(frozen=True)
class Heterogeneity:
    """τ², its Q-profile CI, I² (with the CI implied by τ²'s), H² and the Q test."""

    tau2: float
    tau2_ci: Interval | NotEstimable
    i2: float
    i2_ci: Interval | NotEstimable
    h2: float
    q: float
    q_df: int
    q_p: float
    typical_variance: float

    @property
    def tau(self) -> float:
        return math.sqrt(self.tau2)

    def to_dict(self) -> dict:
        lo, hi = ((self.tau2_ci.low, self.tau2_ci.high) if estimable(self.tau2_ci)
                  else (self.tau2_ci, self.tau2_ci))
        ilo, ihi = ((self.i2_ci.low, self.i2_ci.high) if estimable(self.i2_ci)
                    else (self.i2_ci, self.i2_ci))
        return to_jsonable({"tau2": self.tau2, "tau": self.tau, "tau2_ci_low": lo,
                            "tau2_ci_high": hi, "i2": self.i2, "i2_ci_low": ilo,
                            "i2_ci_high": ihi, "h2": self.h2, "q": self.q, "q_df": self.q_df,
                            "q_p": self.q_p})


def typical_variance(v) -> float:
    """The 'typical' within-study variance s² = (k - 1) Σw / ((Σw)² - Σw²)
    (Higgins & Thompson 2002, eq. 9)."""
    w = 1.0 / np.asarray(v, float)
    return float((len(w) - 1) * w.sum() / (w.sum() ** 2 - np.dot(w, w)))


def tau2_qprofile_ci(y, v, level=0.95) -> Interval:
    """Q-profile CI for τ² (Viechtbauer 2007): the τ² values where the generalised Q equals
    the χ²(k - 1) quantiles; a limit is 0 when Q(0) is already below its quantile."""
    from scipy import special
    from scipy.optimize import brentq
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    a = 1 - level
    q0 = q_statistic(y, v)
    limits = []
    for target in (special.chdtri(k - 1, a / 2), special.chdtri(k - 1, 1 - a / 2)):
        if q0 <= target:
            limits.append(0.0)
            continue
        f = lambda t: q_statistic(y, v, t) - target  # noqa: E731
        hi = _bracket_root(f, float(np.var(y)) or 1.0)
        limits.append(float(brentq(f, 0.0, hi, xtol=1e-14, rtol=1e-12, maxiter=500)))
    return Interval(limits[0], limits[1], level)


def heterogeneity(y, v, tau2, level=0.95) -> Heterogeneity:
    """Heterogeneity summary at the estimated τ² (I² = τ² / (τ² + s²), H² = (τ² + s²) / s²,
    Higgins & Thompson 2002)."""
    from scipy import special
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    s2 = typical_variance(v)
    q = q_statistic(y, v)
    ci = tau2_qprofile_ci(y, v, level)
    i2ci = Interval(ci.low / (ci.low + s2), ci.high / (ci.high + s2), level)
    return Heterogeneity(tau2=tau2, tau2_ci=ci, i2=tau2 / (tau2 + s2), i2_ci=i2ci,
                         h2=(tau2 + s2) / s2, q=q, q_df=k - 1,
                         q_p=float(special.chdtrc(k - 1, q)), typical_variance=s2)


def prediction_interval(fit: Fit, level=0.95) -> Interval | NotEstimable:
    """μ ± t(k - 2) √(τ² + SE²) (Higgins, Thompson & Spiegelhalter 2009, eq. 12), with the SE
    of the chosen interval method; needs k ≥ 3."""
    from scipy import special
    if fit.k < 3:
        return NotEstimable(f"a prediction interval needs at least 3 studies (k = {fit.k})")
    half = special.stdtrit(fit.k - 2, 0.5 + level / 2) * math.sqrt(fit.tau2 + fit.se ** 2)
    return Interval(fit.mu - half, fit.mu + half, level)


# ------------------------------------------------------------------ influence tables

@dataclass(frozen=True)
class InfluenceRow:
    """One line of a leave-one-out or cumulative table, or one subgroup."""

    label: str
    k: int
    estimate: float
    ci_low: float
    ci_high: float
    tau2: float | NotEstimable
    i2: float | NotEstimable

    def to_dict(self) -> dict:
        return to_jsonable(dict(self.__dict__))


def _row(label, y, v, estimator, interval, level) -> InfluenceRow:
    f = random_effects(y, v, estimator, interval, level)
    if len(y) >= 2:
        return InfluenceRow(label, f.k, f.mu, f.ci.low, f.ci.high, f.tau2,
                            f.tau2 / (f.tau2 + typical_variance(v)))
    # one study has no between-study variance to estimate: neither τ² nor I² (the fit's
    # τ² = 0 is a placeholder, not an estimate)
    one = NotEstimable("one study")
    return InfluenceRow(label, f.k, f.mu, f.ci.low, f.ci.high, one, one)


def _table(labels, y, v, sums, sizes, members, estimator, interval, level):
    """Influence rows for many subsets at once (:func:`_many_fits`); the few subsets it
    leaves are fitted one at a time. ``members(i)`` indexes subset i's studies."""
    tau2, mu, lo, hi, i2, undone = _many_fits(y, v, sums, sizes, estimator, interval, level)
    return tuple(_row(lab, y[members(i)], v[members(i)], estimator, interval, level)
                 if undone[i] else
                 InfluenceRow(lab, int(sizes[i]), float(mu[i]), float(lo[i]), float(hi[i]),
                              float(tau2[i]), float(i2[i]))
                 for i, lab in enumerate(labels))


@dataclass(frozen=True)
class Subgroups:
    """Random-effects estimate per subgroup (separate τ²) and the Q-between test."""

    rows: tuple[InfluenceRow, ...]
    q_between: float
    df: int
    p: float

    def to_dict(self) -> dict:
        return to_jsonable({"rows": [r.to_dict() for r in self.rows], "q_between": self.q_between,
                            "df": self.df, "p": self.p})


# ------------------------------------------------------------------ many fits at once

_SERIES_TOL = 1e-17   # truncation bound of the power series of _series


def _leave_one_out_sums(x):
    """Sums over every leave-one-out subset: row i of the result excludes study i.

    Built from the sums before and after i, never as total - own: subtracting a dominant
    term (one very large study) would cancel most digits of what remains."""
    out = np.zeros_like(x)
    np.cumsum(x[:-1], axis=0, out=out[1:])
    out[:-1] += np.cumsum(x[:0:-1], axis=0)[::-1]
    return out


def _prefix_sums(order):
    """Sums over the first 1, 2, ..., k studies in ``order`` (the cumulative table)."""
    return lambda x: np.cumsum(x[order], axis=0)


def _moments(sums, y, v, t, logs=True):
    """Per-subset Σw, Σwy, Σwy², Σw², Σw²y, Σw²y² and Σlog(v + t) (None unless ``logs``),
    w = 1/(v + t), at each τ² in ``t`` (one row per subset, one column per τ²)."""
    s = v[:, None] + t[None, :]
    w = 1.0 / s
    w2 = w * w
    yy = y[:, None]
    return [sums(a) for a in (w, w * yy, w * yy * yy, w2, w2 * yy, w2 * yy * yy)] + \
        [sums(np.log(s)) if logs else None]


def _profile(mo, restricted):
    """Log-likelihood and score in τ² (Viechtbauer 2005, eqs. 6 and 8, μ profiled out,
    constants dropped) from the sums of :func:`_moments`; also μ̂ and Σw(y - μ̂)²."""
    sw, swy, swyy, sw2, sw2y, sw2yy, slog = mo
    mu = swy / sw
    q = swyy - swy * mu
    r = sw2yy - 2 * mu * sw2y + mu * mu * sw2
    ll = -0.5 * (slog + q) if slog is not None else None
    sc = 0.5 * (r - sw)
    if restricted:
        ll = ll - 0.5 * np.log(sw) if ll is not None else None
        sc = sc + 0.5 * sw2 / sw
    return ll, sc, mu, q


def _series(sums, y, v, t0, sel, radius):
    """The sums of :func:`_moments` at τ² = t0 + δ, |δ| ≤ radius, for the subsets ``sel``, as
    functions of δ (one δ per subset).

    Σ (v + t0 + δ)^-m y^p and Σ log(v + t0 + δ) are power series in δ whose coefficients are
    power sums of w = 1/(v + t0) (geometric, binomial and logarithmic series); with
    x = radius · max w < 1/2, terms are kept until x^n is below ``_SERIES_TOL``. Returns the
    evaluator, or None when the radius is too large for the series.
    """
    a = 1.0 / (float(v.min()) + t0)               # max w
    x = radius * a
    if x >= 0.5:
        return None
    n = max(2, int(math.ceil(math.log(_SERIES_TOL) / math.log(max(x, 1e-300)))))
    u = (1.0 / (v + t0)) / a                      # scaled so that u <= 1
    pw = u[:, None] ** np.arange(0, n + 3)[None, :]          # u^0 .. u^(n+2)
    yy = y[:, None]
    ps = [sums(pw * yy ** p)[sel] for p in (0, 1, 2)]
    slog0 = sums(np.log(v + t0)[:, None])[sel, 0]
    j = np.arange(n + 1)
    sign = (-1.0) ** j
    # coefficients of x^j, x = aδ, in Σ (v + t)^-1 y^p / a, Σ (v + t)^-2 y^p / a² and
    # Σ log(v + t) - Σ log(v + t0)
    cl = np.zeros(n + 1)
    cl[1:] = -sign[1:] / j[1:]
    coef = np.stack([ps[p][:, 1:n + 2] * sign for p in (0, 1, 2)]
                    + [ps[p][:, 2:n + 3] * (sign * (j + 1)) for p in (0, 1, 2)]
                    + [ps[0][:, :n + 1] * cl])                     # (7, subsets, n + 1)
    scale = np.array([a, a, a, a * a, a * a, a * a, 1.0])[:, None]
    shift = np.zeros((7, len(sel)))
    shift[6] = slog0

    def at(d):
        powers = np.vander(d * a, n + 1, increasing=True)
        return list(np.einsum("qsj,sj->qs", coef, powers) * scale + shift)
    return at


def _illinois(f, lo, hi, xtol):
    """Roots of f (vectorised) inside [lo, hi] with f(lo) > 0 >= f(hi): the Illinois variant
    of regula falsi (Dowell & Jarratt 1971), bisecting when a step leaves the bracket.
    Returns the roots and whether every one met ``xtol``."""
    a, b = lo.copy(), hi.copy()
    fa, fb = f(a), f(b)
    x = b.copy()
    for _ in range(100):
        with np.errstate(divide="ignore", invalid="ignore"):
            x = b - fb * (b - a) / (fb - fa)
        out = ~((x > np.minimum(a, b)) & (x < np.maximum(a, b)))
        x[out] = 0.5 * (a + b)[out]
        fx = f(x)
        keep = np.sign(fx) == np.sign(fb)          # the root stays between a and x
        fa = np.where(keep, 0.5 * fa, fb)
        a = np.where(keep, a, b)
        b, fb = x, fx
        if np.all((np.abs(b - a) <= xtol) | (fx == 0)):
            return x, True
    return x, False


def _many_fits(y, v, sums, sizes, estimator, interval, level):
    """Random-effects fits of many subsets of the studies in one vectorised pass.

    ``sums`` maps an array with one row per study to one row per subset (leave-one-out or
    cumulative sums) and ``sizes`` gives each subset's number of studies. Each subset gets
    what :func:`random_effects` gives on its studies: ML / REML the global maximum of the
    likelihood (grid, then every bracketed local maximum polished and the best kept), PM
    the root of the generalised Q equation, DL the closed form; the mean, its interval and
    I² at that τ². Returns (τ², μ, CI low, CI high, I²) and a mask of the subsets this pass
    leaves to the caller (fewer than 2 studies, a likelihood still rising at the top of the
    grid, a root not polished).
    """
    from scipy import special
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    shift = float(np.dot(1 / v, y) / np.sum(1 / v))     # τ² is shift-free; μ is moved back
    y = y - shift
    sizes = np.asarray(sizes)
    m = len(sizes)
    undone = sizes < 2
    restricted = estimator == "reml"
    likelihood = estimator in ("ml", "reml")
    c = 0.1 * float(v.min())
    top = 10.0 * (float(np.ptp(y)) ** 2 + float(v.max()))
    grid = np.empty(_GRID + 1)
    grid[0] = 0.0
    grid[1:] = np.maximum(np.exp(np.linspace(math.log(c), math.log(top + c), _GRID)) - c, 0.0)

    # the grid: the score (ML/REML) or Q(τ²) - (k - 1) (PM), every subset at once
    fn = np.empty((m, len(grid)))
    if estimator != "dl":
        step = max(1, _BLOCK // len(y))
        for b in range(0, len(grid), step):
            _, sb, _, qb = _profile(_moments(sums, y, v, grid[b:b + step], False), restricted)
            fn[:, b:b + step] = sb if likelihood else qb - (sizes[:, None] - 1)
    mo0 = _moments(sums, y, v, np.zeros(1))
    ll0, _, mu0, q0 = (a[:, 0] for a in _profile(mo0, restricted))
    sw0 = mo0[0][:, 0]
    tau2, best, mu, sw, q = np.zeros(m), ll0.copy(), mu0.copy(), sw0.copy(), q0.copy()

    # (subset, grid interval) pairs: DL's τ², or a bracketed root to polish there
    if estimator == "dl":
        with np.errstate(divide="ignore", invalid="ignore"):
            t_dl = (q0 - (sizes - 1)) / (sw0 - mo0[3][:, 0] / sw0)
        sub = np.flatnonzero((t_dl > 0) & ~undone)
        g = np.clip(np.searchsorted(grid, t_dl[sub]) - 1, 0, _GRID - 1)
        undone[sub[t_dl[sub] > grid[-1]]] = True
        keep = t_dl[sub] <= grid[-1]
        sub, g = sub[keep], g[keep]
    else:
        brk = (fn[:, :-1] > 0) & (fn[:, 1:] <= 0)
        brk[undone] = False
        undone |= (fn[:, -1] > 0) & (sizes >= 2)
        sub, g = np.nonzero(brk)
    for gi in np.unique(g):
        sel = sub[g == gi]
        t0 = 0.5 * (grid[gi] + grid[gi + 1])
        half = 0.5 * (grid[gi + 1] - grid[gi])
        at = _series(sums, y, v, t0, sel, half * (1 + 1e-12))
        if at is None:
            undone[sel] = True
            continue
        if estimator == "dl":
            d = t_dl[sel] - t0
        else:
            if likelihood:
                f = lambda d: _profile(at(d), restricted)[1]  # noqa: E731
            else:
                f = lambda d: _profile(at(d), False)[3] - (sizes[sel] - 1)  # noqa: E731
            lo = np.full(len(sel), grid[gi] - t0)
            hi = np.full(len(sel), grid[gi + 1] - t0)
            d, ok = _illinois(f, lo, hi, 1e-14 + 1e-13 * t0)
            if not ok:
                undone[sel] = True
                continue
        lls, _, mus, qs = _profile(at(d), restricted)
        t_new = np.maximum(0.0, t0 + d)
        # ML/REML: a polished maximum replaces the current best only when higher
        better = lls > best[sel] if likelihood else np.ones(len(sel), bool)
        for arr, new in ((tau2, t_new), (best, lls), (mu, mus), (q, qs), (sw, at(d)[0])):
            arr[sel[better]] = new[better]
    if likelihood and len(sub):
        # the polished maximum must not lie below any grid value; the highest grid value
        # lies at τ² = 0 or next to a sign change of the score, so only those are checked
        ends = np.unique(np.concatenate([g, g + 1]))
        lle = _profile(_moments(sums, y, v, grid[ends]), restricted)[0]
        col = {e: i for i, e in enumerate(ends)}
        top_ll = np.maximum(lle[sub, [col[e] for e in g]], lle[sub, [col[e] for e in g + 1]])
        low = top_ll > best[sub] + 1e-9 * np.maximum(1.0, np.abs(best[sub]))
        undone[sub[low]] = True

    # the mean and its interval at each subset's τ² (as in random_effects)
    df = np.maximum(sizes - 1, 1)
    if interval.startswith("hksj"):
        se = np.sqrt(_hk_factor(q, df, interval == "hksj") / sw)
        crit = special.stdtrit(df, 0.5 + level / 2)
    else:
        se = np.sqrt(1.0 / sw)
        crit = special.ndtri(0.5 + level / 2)
    mu = mu + shift
    iv = sums((1.0 / v)[:, None])[:, 0]
    iv2 = sums((1.0 / v ** 2)[:, None])[:, 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        s2 = (sizes - 1) * iv / (iv * iv - iv2)
        i2 = tau2 / (tau2 + s2)
    undone |= ~np.isfinite(tau2 + mu + se + i2)
    return tau2, mu, mu - crit * se, mu + crit * se, i2, undone


# ------------------------------------------------------------------ the stage

@dataclass(frozen=True)
class PooledResult(ShowsAsTable):
    """Everything the pooling stage reports.

    Attributes
    ----------
    metric : {"g", "z"}
    k : int
        Independent samples pooled.
    estimator, interval : str
    pooled : Estimate or NotEstimable
        Random-effects mean (k = 1: not estimable, see ``single``).
    fixed : Estimate
        Common-effect (inverse-variance) mean.
    heterogeneity : Heterogeneity or NotEstimable
    prediction : Interval or NotEstimable
    tau2_fit : Tau2Fit
        How τ² was found (convergence, iterations).
    labels, effects, variances, weights : tuples, one entry per unit
        ``weights`` are random-effects weights as fractions summing to 1.
    leave_one_out, cumulative : tuple of InfluenceRow or NotEstimable
    subgroups : Subgroups, NotEstimable or None
    by_publication : Subgroups, NotEstimable or None
        Published against unpublished studies (the ``published`` column), as separate
        random-effects estimates with the Q-between test: a sensitivity analysis for
        publication bias (Borenstein et al. 2009, ch. 30; None without the column).
    studies : tuple of pooler.evidence.effects.Unit
        The pooled studies themselves (effect, variance, n per group, design, within-r,
        sheet rows), so later stages need nothing but this result.
    """

    metric: str
    k: int
    estimator: str
    interval: str
    level: float
    pooled: Estimate | NotEstimable
    fixed: Estimate
    heterogeneity: Heterogeneity | NotEstimable
    prediction: Interval | NotEstimable
    tau2_fit: Tau2Fit
    labels: tuple[str, ...]
    effects: tuple[float, ...]
    variances: tuple[float, ...]
    weights: tuple[float, ...]
    leave_one_out: tuple[InfluenceRow, ...] | NotEstimable
    cumulative: tuple[InfluenceRow, ...] | NotEstimable
    subgroups: Subgroups | NotEstimable | None
    notes: tuple[str, ...] = ()
    studies: tuple = ()
    by_publication: Subgroups | NotEstimable | None = None

    @property
    def tau2(self) -> float:
        return self.tau2_fit.tau2

    @property
    def mu(self) -> float:
        return self.pooled.estimate if estimable(self.pooled) else self.fixed.estimate

    def back(self, x):
        """An estimate on the reporting scale: r for the z metric, unchanged for g."""
        if not isinstance(x, (int, float)) or isinstance(x, bool):
            return x
        return math.tanh(x) if self.metric == "z" else x

    def to_frame(self):
        import pandas as pd
        return pd.DataFrame({"label": self.labels, "effect": self.effects,
                             "variance": self.variances, "weight": self.weights})

    def to_dict(self) -> dict:
        """The pooling part of the ``pooler.pool/1`` document."""
        pred = (self.prediction if not estimable(self.prediction)
                else {"low": self.prediction.low, "high": self.prediction.high,
                      "level": self.prediction.level})
        doc = {
            "metric": self.metric, "k": self.k, "estimator": self.estimator,
            "interval": self.interval, "level": self.level,
            "pooled": self.pooled, "fixed": self.fixed,
            "heterogeneity": self.heterogeneity, "prediction": pred,
            "tau2_fit": {"converged": self.tau2_fit.converged,
                         "iterations": self.tau2_fit.iterations,
                         "message": self.tau2_fit.message},
            "units": [{"label": lab, "effect": e, "variance": v, "weight": w}
                      for lab, e, v, w in zip(self.labels, self.effects, self.variances,
                                              self.weights)],
            "leave_one_out": (list(self.leave_one_out) if isinstance(self.leave_one_out, tuple)
                              else self.leave_one_out),
            "cumulative": (list(self.cumulative) if isinstance(self.cumulative, tuple)
                           else self.cumulative),
            "subgroups": self.subgroups if self.subgroups is not None else
            NotEstimable("no 'subgroup' column"),
            "by_publication": self.by_publication if self.by_publication is not None else
            NotEstimable("no 'published' column"),
            "notes": list(self.notes),
        }
        if self.metric == "z":
            doc["on_r_scale"] = _r_scale(self)
        return to_jsonable(doc)

    def __repr__(self) -> str:
        est = f"{self.pooled.estimate:.3f}" if estimable(self.pooled) else str(self.pooled)
        return (f"PooledResult(k={self.k}, {self.metric}={est}, tau2={self.tau2:.4f}, "
                f"{self.estimator}/{self.interval})")


def _r_scale(res: PooledResult) -> dict:
    out = {}
    if estimable(res.pooled):
        out["pooled"] = {"estimate": math.tanh(res.pooled.estimate),
                         "ci_low": math.tanh(res.pooled.ci.low),
                         "ci_high": math.tanh(res.pooled.ci.high)}
    out["fixed"] = {"estimate": math.tanh(res.fixed.estimate),
                    "ci_low": math.tanh(res.fixed.ci.low), "ci_high": math.tanh(res.fixed.ci.high)}
    if estimable(res.prediction):
        out["prediction"] = {"low": math.tanh(res.prediction.low),
                             "high": math.tanh(res.prediction.high)}
    return out


def pool(effects, estimator="reml", interval="hksj", level=0.95, *,
         influence=True) -> PooledResult:
    """Pool the independent units of an :class:`pooler.evidence.effects.Effects`.

    Parameters
    ----------
    effects : Effects
        From :func:`pooler.convert`.
    estimator : {"reml", "ml", "pm", "dl"}
    interval : {"hksj", "hksj-plain", "wald"}
        Hartung-Knapp-Sidik-Jonkman with the variance factor floored at 1 (default; never
        narrower than Wald), without the floor, or Wald.
    level : float
        Confidence level of every interval.
    influence : bool
        Compute the leave-one-out, cumulative and subgroup tables (the simulation stage
        turns them off; they are then "not estimable: not requested").

    Returns
    -------
    PooledResult

    Examples
    --------
    >>> from pooler import read_sheet, convert, demo_sheet_path
    >>> from pooler.evidence.pooling import pool
    >>> res = pool(convert(read_sheet(demo_sheet_path())))
    >>> res.k
    24
    """
    return pool_studies(effects.units, effects.metric, estimator, interval, level,
                        influence=influence, file=effects.file)


def pool_studies(studies, metric, estimator="reml", interval="hksj", level=0.95, *,
                 influence=True, file=None) -> PooledResult:
    """Pool a sequence of :class:`pooler.evidence.effects.Unit` on ``metric`` ("g" or "z"): what
    :func:`pool` does once it has the units of an ``Effects`` (the stress test calls it on
    simulated studies)."""
    from scipy import special
    # validation
    if estimator not in ESTIMATORS:
        raise OptionError(f"`estimator` must be one of {', '.join(ESTIMATORS)}, not {estimator!r}")
    if interval not in INTERVALS:
        raise OptionError(f"`interval` must be one of {', '.join(INTERVALS)}, not {interval!r}")
    if not 0 < level < 1:
        raise OptionError(f"`level` must lie in (0, 1), not {level!r}")
    units = tuple(studies)
    k = len(units)
    if k == 0:
        from pooler.errors import InputError
        raise InputError("no rows are left to pool (every row is excluded); remove an "
                         "'exclude' mark or add studies", file=file)
    y = np.array([u.effect for u in units])
    v = np.array([u.variance for u in units])
    labels = tuple(u.label for u in units)
    notes = []

    w = 1.0 / v
    mu_f = _wmean(y, w)
    se_f = math.sqrt(1.0 / w.sum())
    zc = special.ndtri(0.5 + level / 2)
    fixed = Estimate(mu_f, se_f, Interval(mu_f - zc * se_f, mu_f + zc * se_f, level),
                     float(2 * special.ndtr(-abs(mu_f / se_f))), "inverse-variance common effect")

    if k == 1:
        notes.append("one study: no pooling and no heterogeneity are possible; "
                     "the single study's estimate is shown")
        one = NotEstimable("only one study")
        return PooledResult(metric, 1, estimator, interval, level, one, fixed, one,
                            NotEstimable("a prediction interval needs at least 3 studies"),
                            Tau2Fit(0.0, True, 0, "one study"), labels, tuple(y), tuple(v),
                            (1.0,), one, one, None, tuple(notes), units)

    fit = random_effects(y, v, estimator, interval, level)
    if not fit.tau2_fit.converged:
        notes.append(f"the {ESTIMATOR_NAMES[estimator]} estimate of tau^2 did not converge "
                     f"({fit.tau2_fit.message})")
        pooled: Estimate | NotEstimable = NotEstimable(
            f"the tau^2 estimate did not converge ({fit.tau2_fit.message})")
    else:
        pooled = Estimate(fit.mu, fit.se, fit.ci, fit.p,
                          f"random effects, {ESTIMATOR_NAMES[estimator]} tau^2, "
                          f"{INTERVAL_NAMES[interval]} interval")
    het = heterogeneity(y, v, fit.tau2, level)
    if het.tau2_ci.high == 0.0:
        notes.append(f"the Q-profile interval of tau^2 is [0, 0] because Q = {het.q:.2f} lies "
                     f"below the {100 * (1 - level) / 2:g}th percentile of chi^2({k - 1}): the "
                     "studies agree more closely than their sampling errors imply, so the "
                     "interval is set to 0 (Viechtbauer 2007); this does not show that the "
                     "effects are homogeneous, only that these studies cannot show any variation")
    pred = prediction_interval(fit, level)
    if k == 2:
        notes.append("two studies: the random-effects estimate is shown but tau^2 is very "
                     "imprecise and no prediction interval can be given")
    weights = tuple(float(x) for x in fit.weights / fit.weights.sum())

    loo: tuple | NotEstimable
    if not influence:
        skip = NotEstimable("not requested")
        return PooledResult(metric, k, estimator, interval, level, pooled, fixed, het,
                            pred, fit.tau2_fit, labels, tuple(float(x) for x in y),
                            tuple(float(x) for x in v), weights, skip, skip, None, tuple(notes),
                            units)
    if k >= 3:
        idx = np.arange(k)
        loo = _table([f"without {lab}" for lab in labels], y, v, _leave_one_out_sums,
                     np.full(k, k - 1), lambda i: idx != i, estimator, interval, level)
    else:
        loo = NotEstimable("leave-one-out needs at least 3 studies")

    years = [u.year for u in units]
    cum: tuple | NotEstimable
    if all(yr is None for yr in years):
        cum = NotEstimable("no 'year' column")
    elif any(yr is None for yr in years):
        missing = [labels[i] for i, yr in enumerate(years) if yr is None]
        cum = NotEstimable(f"'year' missing for {', '.join(missing[:3])}"
                           + (" and others" if len(missing) > 3 else ""))
    else:
        order = np.argsort(np.array(years, float), kind="stable")
        cum = _table([f"up to {labels[order[j]]} ({years[order[j]]:g})" for j in range(k)],
                     y, v, _prefix_sums(order), np.arange(1, k + 1), lambda j: order[:j + 1],
                     estimator, interval, level)

    subs = None
    if any(u.subgroup for u in units):
        subs = _subgroups([u.subgroup or "(no subgroup)" for u in units], y, v, estimator,
                          interval, level)
    by_pub = None
    if any(u.published for u in units):
        by_pub = _subgroups([u.published or "(not said)" for u in units],
                            y, v, estimator, interval, level, what="publication status")
    return PooledResult(metric, k, estimator, interval, level, pooled, fixed, het, pred,
                        fit.tau2_fit, labels, tuple(float(x) for x in y),
                        tuple(float(x) for x in v), weights, loo, cum, subs, tuple(notes), units,
                        by_pub)


def _subgroups(names, y, v, estimator, interval, level,
               what="subgroup") -> Subgroups | NotEstimable:
    """Separate-τ² estimates of the groups of studies named by ``names`` and Q_between =
    Σ w_j (μ_j - μ̄)², w_j = 1/SE_j² (Borenstein et al. 2009, ch. 19), SE_j from the Wald fit."""
    from scipy import special
    groups = list(dict.fromkeys(names))
    if len(groups) < 2:
        return NotEstimable(f"every study has the same {what}")
    rows, mus, ses = [], [], []
    for g in groups:
        m = np.array([n == g for n in names])
        rows.append(_row(g, y[m], v[m], estimator, interval, level))
        f = random_effects(y[m], v[m], estimator, "wald", level)
        mus.append(f.mu)
        ses.append(f.se)
    wj = 1.0 / np.array(ses) ** 2
    mbar = float(np.dot(wj, mus) / wj.sum())
    qb = float(np.dot(wj, (np.array(mus) - mbar) ** 2))
    df = len(groups) - 1
    return Subgroups(tuple(rows), qb, df, float(special.chdtrc(df, qb)))
