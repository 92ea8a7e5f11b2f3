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

from ._results import Interval, NotEstimable, estimable, to_jsonable
from .choices import ESTIMATORS, INTERVALS
from .errors import OptionError
ESTIMATOR_NAMES = {"reml": "restricted maximum likelihood (REML)", "ml": "maximum likelihood",
                   "pm": "Paule-Mandel", "dl": "DerSimonian-Laird"}
INTERVAL_NAMES = {"hksj": "Hartung-Knapp-Sidik-Jonkman", "wald": "Wald (normal)"}


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
    mu = np.dot(w, y) / w.sum()
    w2 = w * w
    s = np.dot(w2, (y - mu) ** 2) - w.sum()
    if restricted:
        s += w2.sum() / w.sum()
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


def estimate_tau2(y, v, estimator="reml") -> Tau2Fit:
    """Between-study variance τ², truncated at 0.

    ``dl``: DerSimonian & Laird (1986) moment estimator. ``pm``: Paule & Mandel (1982),
    the root of Q(τ²) = k - 1. ``ml`` / ``reml``: the root of the (restricted) likelihood
    score (Viechtbauer 2005), found with ``scipy.optimize.brentq``; 0 when the score is
    not positive at τ² = 0.
    """
    from scipy.optimize import brentq
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    if k < 2:
        return Tau2Fit(0.0, True, 0, "one study: no between-study variance")
    w = 1.0 / v
    q0 = q_statistic(y, v)
    if estimator == "dl":
        c = w.sum() - np.dot(w, w) / w.sum()
        return Tau2Fit(max(0.0, (q0 - (k - 1)) / c), True, 0, "closed form")
    if estimator == "pm":
        if q0 <= k - 1:
            return Tau2Fit(0.0, True, 0, "Q(0) <= k - 1: tau^2 = 0")
        f = lambda t: q_statistic(y, v, t) - (k - 1)  # noqa: E731
    elif estimator in ("ml", "reml"):
        restricted = estimator == "reml"
        if _score(y, v, 0.0, restricted) <= 0:
            return Tau2Fit(0.0, True, 0, "likelihood maximal at tau^2 = 0")
        f = lambda t: _score(y, v, t, restricted)  # noqa: E731
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

    ``hksj``: SE² = Σ w (y - μ)² / ((k - 1) Σ w) with t(k - 1) (Hartung & Knapp 2001;
    Sidik & Jonkman 2002). ``wald``: SE² = 1 / Σ w with the normal distribution.
    """
    from scipy import stats
    if interval not in INTERVALS:
        raise OptionError(f"`interval` must be 'hksj' or 'wald', not {interval!r}")
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    tf = estimate_tau2(y, v, estimator)
    tau2 = tf.tau2 if math.isfinite(tf.tau2) else 0.0
    w = 1.0 / (v + tau2)
    mu = _wmean(y, w)
    if interval == "hksj" and k >= 2:
        se = math.sqrt(float(np.dot(w, (y - mu) ** 2)) / ((k - 1) * w.sum()))
        df = k - 1
        crit = stats.t.ppf(0.5 + level / 2, df)
        p = float(2 * stats.t.sf(abs(mu / se), df)) if se > 0 else (0.0 if mu else 1.0)
    else:
        se = math.sqrt(1.0 / w.sum())
        df = None
        crit = stats.norm.ppf(0.5 + level / 2)
        p = float(2 * stats.norm.sf(abs(mu / se)))
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
    from scipy import stats
    from scipy.optimize import brentq
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    a = 1 - level
    q0 = q_statistic(y, v)
    limits = []
    for target in (stats.chi2.ppf(1 - a / 2, k - 1), stats.chi2.ppf(a / 2, k - 1)):
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
    from scipy import stats
    y = np.asarray(y, float)
    v = np.asarray(v, float)
    k = len(y)
    s2 = typical_variance(v)
    q = q_statistic(y, v)
    ci = tau2_qprofile_ci(y, v, level)
    i2ci = Interval(ci.low / (ci.low + s2), ci.high / (ci.high + s2), level)
    return Heterogeneity(tau2=tau2, tau2_ci=ci, i2=tau2 / (tau2 + s2), i2_ci=i2ci,
                         h2=(tau2 + s2) / s2, q=q, q_df=k - 1,
                         q_p=float(stats.chi2.sf(q, k - 1)), typical_variance=s2)


def prediction_interval(fit: Fit, level=0.95) -> Interval | NotEstimable:
    """μ ± t(k - 2) √(τ² + SE²) (Higgins, Thompson & Spiegelhalter 2009, eq. 12), with the SE
    of the chosen interval method; needs k ≥ 3."""
    from scipy import stats
    if fit.k < 3:
        return NotEstimable(f"a prediction interval needs at least 3 studies (k = {fit.k})")
    half = stats.t.ppf(0.5 + level / 2, fit.k - 2) * math.sqrt(fit.tau2 + fit.se ** 2)
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
    tau2: float
    i2: float | NotEstimable

    def to_dict(self) -> dict:
        return to_jsonable(dict(self.__dict__))


def _row(label, y, v, estimator, interval, level) -> InfluenceRow:
    f = random_effects(y, v, estimator, interval, level)
    i2 = (f.tau2 / (f.tau2 + typical_variance(v)) if len(y) >= 2
          else NotEstimable("one study"))
    return InfluenceRow(label, f.k, f.mu, f.ci.low, f.ci.high, f.tau2, i2)


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


# ------------------------------------------------------------------ the stage

@dataclass(frozen=True)
class PooledResult:
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
    studies : tuple of pooler.effects.Unit
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
    """Pool the independent units of an :class:`pooler.effects.Effects`.

    Parameters
    ----------
    effects : Effects
        From :func:`pooler.convert`.
    estimator : {"reml", "ml", "pm", "dl"}
    interval : {"hksj", "wald"}
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
    >>> from pooler import read_sheet, convert, pool, demo_sheet_path
    >>> res = pool(convert(read_sheet(demo_sheet_path())))
    >>> res.k
    24
    """
    return pool_studies(effects.units, effects.metric, estimator, interval, level,
                        influence=influence, file=effects.file)


def pool_studies(studies, metric, estimator="reml", interval="hksj", level=0.95, *,
                 influence=True, file=None) -> PooledResult:
    """Pool a sequence of :class:`pooler.effects.Unit` on ``metric`` ("g" or "z"): what
    :func:`pool` does once it has the units of an ``Effects`` (the stress test calls it on
    simulated studies)."""
    from scipy import stats
    # validation
    if estimator not in ESTIMATORS:
        raise OptionError(f"`estimator` must be one of {', '.join(ESTIMATORS)}, not {estimator!r}")
    if interval not in INTERVALS:
        raise OptionError(f"`interval` must be 'hksj' or 'wald', not {interval!r}")
    if not 0 < level < 1:
        raise OptionError(f"`level` must lie in (0, 1), not {level!r}")
    units = tuple(studies)
    k = len(units)
    if k == 0:
        from .errors import InputError
        raise InputError("no rows are left to pool (every row is excluded); remove an "
                         "'exclude' mark or add studies", file=file)
    y = np.array([u.effect for u in units])
    v = np.array([u.variance for u in units])
    labels = tuple(u.label for u in units)
    notes = []

    w = 1.0 / v
    mu_f = _wmean(y, w)
    se_f = math.sqrt(1.0 / w.sum())
    zc = stats.norm.ppf(0.5 + level / 2)
    fixed = Estimate(mu_f, se_f, Interval(mu_f - zc * se_f, mu_f + zc * se_f, level),
                     float(2 * stats.norm.sf(abs(mu_f / se_f))), "inverse-variance common effect")

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
        loo = tuple(_row(f"without {labels[i]}", y[idx != i], v[idx != i], estimator, interval,
                         level) for i in range(k))
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
        cum = tuple(_row(f"up to {labels[order[j - 1]]} ({years[order[j - 1]]:g})",
                         y[order[:j]], v[order[:j]], estimator, interval, level)
                    for j in range(1, k + 1))

    subs = None
    if any(u.subgroup for u in units):
        subs = _subgroups(units, y, v, estimator, interval, level)
    return PooledResult(metric, k, estimator, interval, level, pooled, fixed, het, pred,
                        fit.tau2_fit, labels, tuple(float(x) for x in y),
                        tuple(float(x) for x in v), weights, loo, cum, subs, tuple(notes), units)


def _subgroups(units, y, v, estimator, interval, level) -> Subgroups | NotEstimable:
    """Separate-τ² subgroup estimates and Q_between = Σ w_j (μ_j - μ̄)², w_j = 1/SE_j²
    (Borenstein et al. 2009, ch. 19), SE_j from the Wald fit."""
    from scipy import stats
    names = [u.subgroup or "(no subgroup)" for u in units]
    groups = list(dict.fromkeys(names))
    if len(groups) < 2:
        return NotEstimable("only one subgroup")
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
    return Subgroups(tuple(rows), qb, df, float(stats.chi2.sf(qb, df)))
