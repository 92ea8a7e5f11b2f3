"""Stage 5: from the pooled estimate and the bias suite to three planning effects.

The default rule (``adjuster="default"``; :func:`posterior_rule`): optimistic = the
random-effects estimate; realistic = the posterior median of the mean effect given a positive
effect from the Bayesian model average over publication-bias models (:mod:`pooler.evidence.bma`);
pessimistic = its 15th percentile (chosen by calibration; README), never below the SESOI,
never above the realistic effect.

The earlier rule (``adjuster="safeguard"``; DEVELOPERS.md, "The planning-effect rule"):

- optimistic = the random-effects estimate (the literature taken as published);
- realistic = the three-parameter selection model's estimate when the model is identified
  (k ≥ 20, ≥ 3 significant and ≥ 3 non-significant studies, ω not at a bound, the fit
  converged), never above the optimistic one; otherwise the safeguard lower limit of the
  median of the selection-robust adjusted estimates that could be computed (the selection
  model, if it could be fitted at all, and PET-PEESE), with the median of their SEs as its
  SE (trim-and-fill and WAAP-WLS only when neither exists);
- pessimistic = the lower limit of a two-sided safeguard interval (default 60 %) around the
  realistic estimate (Perugini, Gallucci & Costantini 2014), never below the smallest
  effect size of interest (SESOI) when one is given.

References
----------
.. [PGC14] Perugini, M., Gallucci, M., & Costantini, G. (2014). Safeguard power as a
   protection against imprecise power estimates. *Perspectives on Psychological Science*,
   9(3), 319-332.
"""
from __future__ import annotations

import math
import statistics
from dataclasses import dataclass

import numpy as np

from pooler._results import NotEstimable, ShowsAsTable, estimable, to_jsonable
from pooler.evidence.bias import adjuster_choices, planning_methods
from pooler.errors import OptionError
from pooler.planning.sample_size import PlanningEffect

MIN_K_SELECTION = 20


def __getattr__(name):
    # read from the bias-method registry each time, so a newly registered method is a choice
    if name == "ADJUSTERS":
        return adjuster_choices()
    if name == "ROBUST":
        #: Keys of the adjusters that correct under publication selection (default fallback).
        return tuple(m.key for m in planning_methods() if m.robust)
    raise AttributeError(name)


@dataclass(frozen=True)
class Scenario:
    """One planning scenario on the literature's metric (g or Fisher z)."""

    name: str
    effect: float
    se: float | None
    basis: str
    methods: tuple[str, ...] = ()  # keys of the bias methods it was computed from

    def to_dict(self) -> dict:
        return to_jsonable({"effect": self.effect, "se": self.se, "basis": self.basis})


@dataclass(frozen=True)
class Scenarios(ShowsAsTable):
    """The three planning scenarios and their bases in words.

    Attributes
    ----------
    metric : {"g", "z"}
    optimistic, realistic, pessimistic : Scenario
    supported : bool
        False when the realistic effect is ≤ 0 or below the SESOI.
    verdict : str
        The plain-language summary.
    predictive : (mean, sd) or NotEstimable
        Predictive distribution of a new study's true effect, for assurance.
    """

    metric: str
    optimistic: Scenario
    realistic: Scenario
    pessimistic: Scenario
    rule: str
    safeguard_level: float
    sesoi: float | None
    supported: bool
    verdict: str
    predictive: tuple[float, float] | NotEstimable
    #: the model-averaged posterior (pooler.evidence.bma.ModelAverage) behind the default rule
    posterior: object = None
    #: realistic and pessimistic effects under the wider priors (pooler.evidence.bma.WIDE_PRIORS)
    sensitivity: object = None
    #: (nodes, probabilities) of the model-averaged predictive distribution of a new
    #: study's true effect, on the literature's metric
    predictive_table: object = None
    #: model-average rule: the posterior quantile that is the pessimistic scenario
    pessimistic_quantile: float | None = None

    def realistic_interval(self, level: float | None = None):
        """Interval around the realistic effect, or NotEstimable. Under the model-average
        rule: the credible interval of the mean effect given a positive effect (default
        level 0.95); otherwise the safeguard interval (default: the safeguard level)."""
        from scipy.special import ndtri
        from pooler._results import Interval
        if self.posterior is not None:
            level = 0.95 if level is None else level
            if self.posterior.p_positive <= 0:
                return NotEstimable("the posterior puts no mass on a positive effect")
            return Interval(self.posterior.mu_quantile((1 - level) / 2, positive=True),
                            self.posterior.mu_quantile((1 + level) / 2, positive=True), level)
        se = self.realistic.se
        if se is None or not math.isfinite(se) or se <= 0:
            return NotEstimable("the realistic effect has no standard error")
        level = self.safeguard_level if level is None else level
        z = float(ndtri(0.5 + level / 2))
        return Interval(self.realistic.effect - z * se, self.realistic.effect + z * se, level)

    def assurance_density(self):
        """The predictive distribution of a new study's true effect for assurance: under the
        model-average rule the model-averaged posterior predictive, tabulated
        (:func:`predictive_effect_density`); otherwise Normal(mean, sd²); None when there is
        none."""
        from pooler.planning.power import EffectDensity
        if self.posterior is not None:
            return predictive_effect_density(self.posterior)
        if isinstance(self.predictive, tuple):
            return EffectDensity.normal(*self.predictive, metric=self.metric)
        return None

    @property
    def planning_metric(self) -> str:
        return "d" if self.metric == "g" else "r"

    def _plan_value(self, x: float) -> float:
        # r = tanh(z), kept inside (-1, 1): tanh rounds to ±1 beyond |z| ≈ 19
        return max(-1 + 1e-9, min(1 - 1e-9, math.tanh(x))) if self.metric == "z" else x

    def planning_effects(self) -> list[PlanningEffect]:
        """The scenarios as planning effects on the planning metric (g, or r)."""
        return [PlanningEffect(s.name, self._plan_value(s.effect), s.basis)
                for s in (self.optimistic, self.realistic, self.pessimistic)]

    def to_dict(self) -> dict:
        extra = {}
        if self.posterior is not None:
            extra["model_average"] = model_average_summary(self)
        return to_jsonable({**extra,
                            "optimistic": self.optimistic, "realistic": self.realistic,
                            "pessimistic": self.pessimistic, "rule": self.rule,
                            "safeguard_level": self.safeguard_level, "sesoi": self.sesoi,
                            "supported": self.supported, "verdict": self.verdict,
                            "realistic_interval": self.realistic_interval(),
                            "realistic_ci95": self.realistic_interval(0.95),
                            "predictive": ({"mean": self.predictive[0], "sd": self.predictive[1]}
                                           if isinstance(self.predictive, tuple)
                                           else self.predictive)})

    def to_frame(self):
        import pandas as pd
        return pd.DataFrame([{"scenario": s.name, "effect": s.effect, "se": s.se,
                              "basis": s.basis}
                             for s in (self.optimistic, self.realistic, self.pessimistic)])


def selection_identified(sm, k) -> tuple[bool, str]:
    """Is the selection model identified enough to plan on? (the rule in DEVELOPERS.md)"""
    if not estimable(sm):
        return False, str(sm).removeprefix("not estimable: ")
    if k < MIN_K_SELECTION:
        return False, f"too few studies for a selection model ({k} < {MIN_K_SELECTION})"
    if sm.k_significant < 3 or sm.k_nonsignificant < 3:
        return False, (f"the selection model needs at least 3 significant and 3 non-significant "
                       f"studies ({sm.k_significant} and {sm.k_nonsignificant})")
    if sm.at_bound and any("omega" in b for b in sm.at_bound):
        return False, "the selection model's omega is at a bound"
    if not sm.converged:
        return False, "the selection-model fit did not converge"
    if not estimable(sm.se):
        return False, f"the selection model has no standard error ({sm.se.reason})"
    return True, ""


def make_scenarios(pooled, bias, *, adjuster="default", safeguard_level=0.6,
                   sesoi=None, pessimistic_quantile=0.15, priors=None,
                   sensitivity=True) -> Scenarios:
    """Derive the optimistic / realistic / pessimistic planning effects.

    Parameters
    ----------
    pooled : PooledResult
        With its studies (for the literature audit at the realistic effect).
    bias : BiasResult
    adjuster : {"default", "safeguard", "median", "3psm", "pet-peese", "trim-and-fill", "waap-wls"}
        ``default`` plans on the Bayesian model average (:func:`posterior_rule`);
        ``safeguard`` is the earlier rule above; ``median`` always uses the safeguard limit
        of the median of all the adjusted estimates; a method's ``adjuster`` name (see
        :func:`pooler.evidence.bias.adjuster_choices`) plans on that adjuster alone.
    safeguard_level : float
        Two-sided level of the safeguard interval (Perugini et al. 2014 use 0.60).
    sesoi : float or None
        Smallest effect size of interest on the planning metric (d, or r).
    pessimistic_quantile : float
        Model-average rule: the quantile of the mean effect given a positive effect that is
        the pessimistic scenario.
    priors : pooler.evidence.bma.Priors or None
        Model-average rule: the priors (default: the published defaults).
    sensitivity : bool
        Model-average rule: also report the realistic and pessimistic effects under
        :data:`pooler.evidence.bma.WIDE_PRIORS` (the fit re-weighted to them,
        :func:`pooler.evidence.bma.reweighted`).

    Examples
    --------
    >>> from pooler import bias_suite, convert, demo_sheet_path, pool, read_sheet
    >>> from pooler.planning.scenarios import make_scenarios
    >>> pooled = pool(convert(read_sheet(demo_sheet_path())))
    >>> sc = make_scenarios(pooled, bias_suite(pooled))
    >>> sc.optimistic.effect >= sc.realistic.effect >= sc.pessimistic.effect
    True
    """
    from scipy.special import ndtri
    # validation
    choices = adjuster_choices()
    if adjuster not in choices:
        raise OptionError(f"`adjuster` must be one of {', '.join(choices)}, not {adjuster!r}")
    if not 0 < safeguard_level < 1:
        raise OptionError(f"`safeguard_level` must lie in (0, 1), not {safeguard_level!r}")
    if sesoi is not None and not (sesoi > 0 and (pooled.metric == "g" or sesoi < 1)):
        raise OptionError(f"`sesoi` must be a positive effect, not {sesoi!r}")
    if not estimable(pooled.pooled) and pooled.k > 1:
        raise OptionError(f"no random-effects estimate to plan on: {pooled.pooled.reason}")
    z = float(ndtri(0.5 + safeguard_level / 2))
    metric = pooled.metric
    sesoi_m = None if sesoi is None else (math.atanh(sesoi) if metric == "z" else sesoi)
    sym = "g" if metric == "g" else "z"
    k = pooled.k

    opt_est = pooled.mu
    opt_se = pooled.pooled.se if estimable(pooled.pooled) else pooled.fixed.se
    optimistic = Scenario("optimistic", opt_est, opt_se,
                          f"random-effects estimate of {k} stud{'y' if k == 1 else 'ies'}, "
                          "as published")
    if adjuster == "default":
        return posterior_rule(pooled, optimistic, sesoi_m=sesoi_m, sesoi=sesoi,
                              safeguard_level=safeguard_level,
                              pessimistic_quantile=pessimistic_quantile, priors=priors,
                              sensitivity=sensitivity)

    adjusted = bias.adjusted()
    sm = bias.selection_3psm
    ok, why_not = selection_identified(sm, k)
    tau2 = pooled.tau2
    chosen = {m.adjuster: m for m in bias.methods if m.can_plan}.get(adjuster)
    if chosen is not None:
        if chosen.key not in adjusted:
            raise OptionError(f"`adjuster` {adjuster}: that method is not estimable here "
                              f"({_reason(bias, chosen.key)}); choose another or the default "
                              "rule", parameter="adjuster")
        est, se = adjusted[chosen.key]
        basis = f"{chosen.label} alone (chosen with --adjuster)"
        used = (chosen.key,)
        if chosen.own_tau2:
            tau2 = bias[chosen.key].tau2
    elif adjuster == "safeguard" and ok:
        est, se = sm.estimate, sm.se
        tau2 = sm.tau2
        basis = (f"selection model, {k} studies, {sm.k_nonsignificant} non-significant "
                 f"(omega = {sm.omega:.2f})")
        used = ("selection_3psm",)
    else:
        # the fallback plans on the selection-robust adjusters only (the selection model, when
        # it can be fitted at all, and PET-PEESE); trim-and-fill and WAAP-WLS barely correct
        # under selection (see the calibration in the README) and are used only when neither
        # of those can be computed; --adjuster median uses all four
        robust = {kk: vv for kk, vv in adjusted.items() if bias.method(kk).robust}
        pool_of = adjusted if adjuster == "median" or not robust else robust
        used = tuple(pool_of)
        names = ", ".join(bias.method(kk).label for kk in pool_of)
        if not pool_of:
            est, se = opt_est, opt_se
            basis = "no bias adjustment could be computed: the random-effects estimate"
        else:
            est_med = statistics.median(e for e, _ in pool_of.values())
            se = statistics.median(s for _, s in pool_of.values())
            est = est_med - z * se
            lead = (f"{why_not}: " if adjuster == "safeguard" and why_not else "")
            what = (f"{len(pool_of)} adjusted estimates" if len(pool_of) > 1
                    else "the adjusted estimate")
            basis = (f"{lead}safeguard limit ({100 * safeguard_level:g}%) of the median of "
                     f"{what} ({names}; median {sym} = {est_med:.3f})"
                     if len(pool_of) > 1 else
                     f"{lead}safeguard limit ({100 * safeguard_level:g}%) of {what} "
                     f"({names}: {sym} = {est_med:.3f})")
    if est > opt_est:
        basis += "; capped at the optimistic estimate"
        est = opt_est
    realistic = Scenario("realistic", float(est), float(se), basis, used)

    pess = est - z * se
    pbasis = (f"lower limit of a {100 * safeguard_level:g}% safeguard interval around the "
              "realistic estimate")
    if sesoi_m is not None and pess < sesoi_m:
        pess = sesoi_m
        pbasis += "; raised to the smallest effect size of interest"
    pessimistic = Scenario("pessimistic", float(pess), float(se), pbasis)

    supported = est > 0 and (sesoi_m is None or est >= sesoi_m)
    if supported:
        verdict = (f"The literature supports a positive planning effect: realistic {sym} = "
                   f"{est:.3f} against {opt_est:.3f} as published.")
    elif sesoi_m is None:
        verdict = (f"The literature does not support a positive planning effect (realistic {sym} = "
                   f"{est:.3f}). Plan on the smallest effect size of interest instead: give it "
                   "with --smallest-effect.")
    else:
        verdict = (f"The literature does not support a planning effect of at least the smallest "
                   f"effect size of interest (realistic {sym} = {est:.3f} < {sesoi_m:.3f}); the "
                   "realistic and pessimistic scenarios plan on the smallest effect size of "
                   "interest.")
        realistic = Scenario("realistic", float(sesoi_m), float(se),
                             "smallest effect size of interest (the literature supports less)")
        pessimistic = Scenario("pessimistic", float(sesoi_m), float(se),
                               "smallest effect size of interest")

    sd = math.sqrt(se ** 2 + tau2) if se is not None else float("nan")
    predictive = ((realistic.effect, sd) if math.isfinite(sd) and sd > 0
                  else NotEstimable("no SE for the realistic effect"))
    return Scenarios(metric, optimistic, realistic, pessimistic, adjuster, safeguard_level, sesoi,
                     supported, verdict, predictive)


def _reason(bias, key) -> str:
    res = bias[key]
    return res.reason if isinstance(res, NotEstimable) else "no standard error"


# ------------------------------------------------------------------ the model-average rule

def posterior_rule(pooled, optimistic, *, sesoi_m, sesoi, safeguard_level,
                   pessimistic_quantile=0.15, priors=None, sensitivity=True) -> Scenarios:
    """The default rule: realistic and pessimistic effects from the Bayesian model average
    over publication-bias models (:mod:`pooler.evidence.bma`; Bartoš et al. 2023).

    realistic = the posterior median of the mean effect given a positive effect; its interval
    the credible interval; pessimistic = the ``pessimistic_quantile`` of the same posterior,
    never below the SESOI, never above the realistic effect. When the inclusion Bayes factor
    for an effect is below 1/10, or P(effect < 0) > ½, the posterior favours no positive
    effect: the verdict says so and, with a SESOI, both scenarios plan on it.
    """
    from dataclasses import replace
    from pooler.evidence.bias import size_variances
    from pooler.evidence.bma import DEFAULT_PRIORS, model_average, posterior_scenarios, reweighted
    metric = pooled.metric
    sym = "g" if metric == "g" else "z"
    k = pooled.k
    y = np.array([u.effect for u in pooled.studies], float)
    v = np.array([u.variance for u in pooled.studies], float)
    pr = DEFAULT_PRIORS if priors is None else priors
    # PET's and PEESE's predictor: the SE a study's size alone gives (Pustejovsky & Rodgers
    # 2019), as in the frequentist regressions of the bias suite
    avg = model_average(y, v, metric, pr, size_v=size_variances(pooled.studies, metric))
    if avg.p_positive <= 0:
        raise OptionError("the model-averaged posterior puts no mass on a positive effect")
    ps = posterior_scenarios(avg, pessimistic_quantile=pessimistic_quantile, sesoi=sesoi_m)
    q16, q84 = avg.mu_quantile(0.16, True), avg.mu_quantile(0.84, True)
    se = (q84 - q16) / 2  # the spread of the posterior given μ > 0, as an SE-like number
    realistic = Scenario("realistic", ps.realistic, se, ps.basis_realistic)
    pessimistic = Scenario("pessimistic", ps.pessimistic, se, ps.basis_pessimistic)
    bf = ps.bf_effect
    bf_txt = f"{bf:.2f}" if isinstance(bf, float) else "beyond range"
    few = (f" With {k} stud{'y' if k == 1 else 'ies'} the bias models cannot be told apart: "
           "the priors carry much of this." if k <= 2 else "")
    if ps.favours_null:
        supported = False
        why = (f"the posterior favours no positive effect (inclusion Bayes factor for an "
               f"effect {bf_txt}; P(effect > 0) = {avg.p_positive:.2f})")
        if sesoi_m is None:
            verdict = (f"The literature does not support a positive planning effect: {why}. "
                       "Plan on the smallest effect size of interest instead: give it with "
                       "--smallest-effect.")
            # nothing positive to plan on: the scenarios show the unconditional posterior
            realistic = Scenario("realistic", avg.mu.median, se,
                                 "posterior median of the mean effect (no positive effect "
                                 "favoured)")
            pessimistic = Scenario("pessimistic",
                                   min(avg.mu.median, avg.mu_quantile(pessimistic_quantile)), se,
                                   f"{100 * pessimistic_quantile:g}th percentile of the "
                                   "posterior of the mean effect")
        else:
            verdict = (f"The literature does not support a positive planning effect: {why}; "
                       "the realistic and pessimistic scenarios plan on the smallest effect "
                       "size of interest.")
            realistic = Scenario("realistic", float(sesoi_m), se,
                                 "smallest effect size of interest (the posterior favours no "
                                 "effect)")
            pessimistic = Scenario("pessimistic", float(sesoi_m), se,
                                   "smallest effect size of interest")
    elif sesoi_m is not None and ps.realistic < sesoi_m:
        supported = False
        verdict = (f"The posterior puts the effect below the smallest effect size of interest "
                   f"(realistic {sym} = {ps.realistic:.3f} < {sesoi_m:.3f}; P(effect > 0) = "
                   f"{avg.p_positive:.2f}); both scenarios plan on the smallest effect size "
                   "of interest.")
        realistic = Scenario("realistic", float(sesoi_m), se,
                             "smallest effect size of interest (the posterior supports less)")
        pessimistic = Scenario("pessimistic", float(sesoi_m), se,
                               "smallest effect size of interest")
    else:
        supported = True
        iv = ps.interval
        verdict = (f"Model-averaged planning effect: realistic {sym} = {ps.realistic:.3f} "
                   f"(95% credible interval {iv.low:.3f} to {iv.high:.3f}, given a positive "
                   f"effect), P(effect > 0) = {avg.p_positive:.2f}, against {optimistic.effect:.3f} "
                   f"as published.{few}")
    own = priors_note(pr, pessimistic_quantile)
    if own:
        verdict += " " + own
    sens = None
    if sensitivity:
        # every scale of the priors in use doubled (the defaults give pooler.evidence.bma.WIDE_PRIORS),
        # by re-weighting the same fit (no second fit; pooler.evidence.bma.reweighted)
        wide = reweighted(avg, replace(
            pr, effect_sd=2 * pr.effect_sd, tau_scale=2 * pr.tau_scale,
            pet_scale=2 * pr.pet_scale, peese_scale=2 * pr.peese_scale))
        if wide.p_positive > 0:
            wps = posterior_scenarios(wide, pessimistic_quantile=pessimistic_quantile,
                                      sesoi=sesoi_m)
            sens = {"priors": "wider (every prior scale doubled)",
                    "realistic": wps.realistic, "pessimistic": wps.pessimistic,
                    "p_positive": wide.p_positive, "bf_effect": wps.bf_effect}
        else:
            sens = NotEstimable("under the wider priors no posterior mass is above 0")
    nodes, probs = avg.predictive_points()
    mean = float(np.dot(nodes, probs))
    sd = float(math.sqrt(max(np.dot(probs, (nodes - mean) ** 2), 0.0)))
    predictive = ((mean, sd) if sd > 0 else NotEstimable("the predictive distribution has no spread"))
    return Scenarios(metric, optimistic, realistic, pessimistic, "default", safeguard_level, sesoi,
                     supported, verdict, predictive, posterior=avg,
                     sensitivity=sens, predictive_table=(nodes, probs),
                     pessimistic_quantile=pessimistic_quantile)


def model_average_summary(sc: Scenarios) -> dict:
    """The posterior summary for the JSON and the report: model probabilities by component,
    inclusion Bayes factors, μ and τ, P(μ > 0), the scenarios' quantiles, the sensitivity
    line and the predictive distribution (tabulated)."""
    avg = sc.posterior
    d = avg.to_dict()
    d["sensitivity"] = sc.sensitivity
    d["pessimistic_quantile"] = sc.pessimistic_quantile
    return to_jsonable(d)


def assurance_over_table(nodes, probs, n, design="two-group", alpha=0.05,
                         alternative="two-sided", metric="d"):
    """Expected power over a tabulated predictive distribution (O'Hagan, Stevens & Campbell
    2005): Σ p_j power(θ_j, n), counting only significant results in the hypothesised
    direction; θ on the literature's metric (g, or Fisher z converted to r)."""
    from pooler.planning.power import _design, power_at, to_design_effect
    des = _design(design)
    nodes = np.asarray(nodes, float)
    probs = np.asarray(probs, float)
    n = np.asarray(n, float)
    if metric in ("r", "z"):
        nodes = np.clip(np.tanh(nodes), -1 + 1e-12, 1 - 1e-12)
        metric = "r"
    eff = to_design_effect(nodes, metric, des)
    p = power_at(eff[:, None], n.reshape(1, -1), des, alpha, alternative, upper_only=True)
    return (probs[:, None] * p).sum(axis=0).reshape(n.shape)


def predictive_effect_density(avg):
    """The model-averaged posterior predictive of a new study's true effect as a
    :class:`pooler.planning.power.EffectDensity` (piecewise linear through the cell densities).

    The posterior mass at exactly 0 (the models with neither an effect nor heterogeneity)
    cannot be a density; it is spread as a thin triangle just below 0 (between the last two
    nodes below 0), so P(effect > 0) - the assurance ceiling - stays exact and the power it
    adds is that of an effect within two grid cells below 0 (about alpha/2 at most).
    """
    from pooler.planning.power import EffectDensity
    x, f = avg.predictive_density()
    x, f = np.asarray(x, float), np.asarray(f, float)
    atom = float(avg.predictive_atom)
    if atom > 0:
        h = float(x[1] - x[0])
        f0 = float(np.interp(0.0, x, f, left=0.0, right=0.0))
        keep = np.abs(x) > 1e-9 * h
        x, f = x[keep], f[keep]
        neg, pos = x < 0, x > 0
        xn, fn = x[neg], f[neg]
        if xn.size < 2:  # make room below 0 for the triangle
            xn = np.concatenate([[-2 * h, -h][:2 - xn.size], xn])
            fn = np.concatenate([np.zeros(2 - fn.size), fn])
        # raising the last node below 0 by b adds b (0 - x_{j-1}) / 2 of mass, all below 0
        fn = fn.copy()
        fn[-1] += 2 * atom / (0.0 - xn[-2])
        x = np.concatenate([xn, [0.0], x[pos]])
        f = np.concatenate([fn, [f0], f[pos]])
    metric = "z" if avg.metric == "z" else "d"
    return EffectDensity.from_grid(x, f, metric=metric)


# ------------------------------------------------------------------ the rule's settings

def model_average_priors(**options):
    """The :class:`pooler.evidence.bma.Priors` from the model-average options by their plain names
    (``effect_prior_sd``, ``chance_of_no_bias``, ...; ``pooler.choices.MODEL_AVERAGE_OPTIONS``),
    each checked against its range; the names not given keep their defaults.

    Examples
    --------
    >>> model_average_priors(chance_of_no_bias=0.2).p_no_bias
    0.2
    """
    from dataclasses import replace
    from pooler.evidence.bma import DEFAULT_PRIORS
    from pooler.choices import MODEL_AVERAGE_OPTIONS
    spec = {o.name: o for o in MODEL_AVERAGE_OPTIONS if o.prior_field}
    changes = {}
    for name, value in options.items():
        if name not in spec:
            raise OptionError(f"unknown model-average prior {name!r}; choose from "
                              f"{', '.join(spec)}")
        o = spec[name]
        if not o.allows(value):
            raise OptionError(f"`{name}` must lie in {o.range_text()}, not {value!r}",
                              parameter=name)
        changes[o.prior_field] = float(value)
    return replace(DEFAULT_PRIORS, **changes)


def _describe_priors(pr) -> list[str]:
    return [f"effect ~ Normal(0, {pr.effect_sd:g}^2)",
            f"tau ~ inverse-gamma({pr.tau_shape:g}, {pr.tau_scale:g})",
            f"PET slope ~ half-Cauchy(0, {pr.pet_scale:g})",
            f"PEESE slope ~ half-Cauchy(0, {pr.peese_scale:g})",
            f"P(effect) = {pr.p_effect:g}", f"P(heterogeneity) = {pr.p_heterogeneity:g}",
            f"P(no bias) = {pr.p_no_bias:g}"]


def priors_note(priors, pessimistic_quantile=0.15) -> str:
    """One sentence naming the settings of the model-average rule that differ from the
    defaults (priors on the d scale), or "" when every one is the default."""
    from pooler.evidence.bma import DEFAULT_PRIORS
    from pooler.choices import MODEL_AVERAGE_DEFAULTS
    mine, base = _describe_priors(priors), _describe_priors(DEFAULT_PRIORS)
    changed = [a for a, b in zip(mine, base) if a != b]
    if abs(pessimistic_quantile - MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"]) > 1e-12:
        changed.append(f"pessimistic quantile {pessimistic_quantile:g}")
    if not changed:
        return ""
    return ("Settings changed from the defaults: " + "; ".join(changed)
            + " (priors on the d scale).")


def priors_sentence(scen) -> str:
    """The priors behind a model-average :class:`Scenarios` in words, for the methods
    paragraph: the published defaults, or the settings changed from them."""
    post = scen.posterior
    if post is None:
        return ""
    pr = post.priors if scen.metric == "g" else _back_to_d(post.priors)
    q = _pessimistic_quantile(scen)
    note = priors_note(pr, q)
    if not note:
        return ("The priors were the published defaults (Bartoš et al., 2023): "
                + ", ".join(_describe_priors(pr)[:4]) + ", half the prior probability on "
                "no publication bias.")
    return "The priors were the published defaults (Bartoš et al., 2023) except: " + \
        note.removeprefix("Settings changed from the defaults: ")


def _back_to_d(pr):
    """Undo :meth:`pooler.evidence.bma.Priors.on_metric` for Fisher z (to describe the priors on d)."""
    from dataclasses import replace
    return replace(pr, effect_sd=pr.effect_sd * 2, tau_scale=pr.tau_scale * 2,
                   peese_scale=pr.peese_scale / 2)


def _pessimistic_quantile(scen) -> float:
    from pooler.choices import MODEL_AVERAGE_DEFAULTS
    q = getattr(scen, "pessimistic_quantile", None)
    return MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"] if q is None else q
