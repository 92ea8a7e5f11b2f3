"""Stage 5: from the pooled estimate and the bias suite to three planning effects.

The default rule (DEVELOPERS.md, "The planning-effect rule"):

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

from ._results import NotEstimable, estimable, to_jsonable
from .bias import adjuster_choices, planning_methods
from .errors import OptionError
from .planning import PlanningEffect

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
class Scenarios:
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

    def realistic_interval(self, level: float | None = None):
        """Interval around the realistic effect (default: the safeguard level, whose lower
        limit is the pessimistic scenario before any SESOI floor), or NotEstimable."""
        from scipy.special import ndtri
        from ._results import Interval
        se = self.realistic.se
        if se is None or not math.isfinite(se) or se <= 0:
            return NotEstimable("the realistic effect has no standard error")
        level = self.safeguard_level if level is None else level
        z = float(ndtri(0.5 + level / 2))
        return Interval(self.realistic.effect - z * se, self.realistic.effect + z * se, level)

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
        return to_jsonable({"optimistic": self.optimistic, "realistic": self.realistic,
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
                   sesoi=None) -> Scenarios:
    """Derive the optimistic / realistic / pessimistic planning effects.

    Parameters
    ----------
    pooled : PooledResult
        With its studies (for the literature audit at the realistic effect).
    bias : BiasResult
    adjuster : {"default", "median", "3psm", "pet-peese", "trim-and-fill", "waap-wls"}
        ``default`` is the rule above; ``median`` always uses the safeguard limit of the
        median of all the adjusted estimates; a method's ``adjuster`` name (see
        :func:`pooler.bias.adjuster_choices`) plans on that adjuster alone.
    safeguard_level : float
        Two-sided level of the safeguard interval (Perugini et al. 2014 use 0.60).
    sesoi : float or None
        Smallest effect size of interest on the planning metric (d, or r).

    Examples
    --------
    >>> from pooler import bias_suite, convert, demo_sheet_path, pool, read_sheet
    >>> from pooler.scenarios import make_scenarios
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
    elif adjuster == "default" and ok:
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
            lead = (f"{why_not}: " if adjuster == "default" and why_not else "")
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
                   "with --sesoi.")
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
