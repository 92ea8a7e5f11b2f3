"""Stage 6 (assembly): the planning table for a set of planning effects.

:func:`make_plan` solves, for each scenario (optimistic / realistic / pessimistic, or
effects given by hand), the smallest n reaching each target power, adds the n for a
target assurance when a predictive distribution is known, and, for a fixed feasible N,
the power under each scenario and the smallest detectable effect. The power functions
themselves are in :mod:`pooler.planning.power`; like it, this module needs only numpy and
``scipy.special`` (plus ``scipy.optimize`` for a fixed N).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from pooler._results import NotEstimable, ShowsAsTable, to_jsonable
from pooler.errors import OptionError
from pooler.planning.power import (AssuranceResult, Design, EffectDensity, _design,
                                   detectable_effect, from_design_effect, n_for_assurance,
                                   n_for_power, power_at, to_design_effect)


@dataclass(frozen=True)
class PlanningEffect:
    """One scenario's planning effect on the literature's metric (d, or r).

    ``basis`` says in words where it comes from.
    """

    scenario: str
    effect: float
    basis: str = ""

    def to_dict(self) -> dict:
        return {"scenario": self.scenario, "effect": self.effect, "basis": self.basis}


@dataclass(frozen=True)
class PlanRow:
    """n for one scenario at one target power."""

    scenario: str
    effect: float
    design_effect: float
    power: float
    n_per_group: int | NotEstimable
    n_total: int | NotEstimable
    achieved_power: float | NotEstimable
    n_total_recruit: int | NotEstimable

    def to_dict(self) -> dict:
        return to_jsonable(dict(self.__dict__))


@dataclass(frozen=True)
class FixedN:
    """What a fixed feasible total N buys: power per scenario, smallest detectable effect."""

    n_total: int
    n_per_group: int
    power: tuple[tuple[str, float, float], ...]           # (scenario, effect, power)
    detectable: tuple[tuple[float, float | NotEstimable, float | NotEstimable], ...]
    # (target power, effect in design metric, effect on literature metric)
    n_total_used: int | None = None  # the total the groups really add up to

    def to_dict(self) -> dict:
        return to_jsonable({
            "n_total": self.n_total, "n_per_group": self.n_per_group,
            "n_total_used": self.n_total if self.n_total_used is None else self.n_total_used,
            "power": [{"scenario": s, "effect": e, "power": p} for s, e, p in self.power],
            "detectable": [{"power": t, "design_effect": de, "effect": e}
                           for t, de, e in self.detectable]})


@dataclass(frozen=True)
class Plan(ShowsAsTable):
    """The planning table and its context.

    Attributes
    ----------
    design : Design
    metric : {"d", "r"}
        Metric of the planning effects (the literature's).
    alpha, tails, powers, attrition
        As requested.
    scenarios : tuple of PlanningEffect
    rows : tuple of PlanRow
        One per scenario × target power, scenario-major.
    assurance : AssuranceResult, NotEstimable or None
    fixed_n : FixedN or None
    notes : tuple of str
        What the table silently depends on, in words: a conversion between the
        literature's metric and the design's, a fixed N that does not split evenly.
    """

    design: Design
    metric: str
    alpha: float
    tails: int
    powers: tuple[float, ...]
    attrition: float
    scenarios: tuple[PlanningEffect, ...]
    rows: tuple[PlanRow, ...]
    assurance: AssuranceResult | NotEstimable | None = None
    fixed_n: FixedN | None = None
    effect_label: str = "g"
    notes: tuple[str, ...] = ()
    #: the predictive distribution the assurance was integrated over (for the power figure)
    predictive: EffectDensity | None = field(default=None, repr=False, compare=False)

    @property
    def alternative(self) -> str:
        return "two-sided" if self.tails == 2 else "greater"

    def row(self, scenario: str, power: float) -> PlanRow:
        return next(r for r in self.rows if r.scenario == scenario and abs(r.power - power) < 1e-12)

    def to_frame(self):
        import pandas as pd
        return pd.DataFrame([{k: (str(v) if isinstance(v, NotEstimable) else v)
                              for k, v in r.__dict__.items()} for r in self.rows])

    def to_dict(self) -> dict:
        """The ``pooler.plan/1`` JSON document."""
        return to_jsonable({
            "schema": "pooler.plan/1", "design": self.design.name,
            "design_options": self.design.to_dict(), "metric": self.metric,
            "design_metric": self.design.effect_label, "alpha": self.alpha, "tails": self.tails,
            "powers": list(self.powers), "attrition": self.attrition,
            "scenarios": [s.to_dict() for s in self.scenarios],
            "rows": [r.to_dict() for r in self.rows],
            "assurance": self.assurance if self.assurance is not None else
            NotEstimable("no predictive distribution given"),
            "fixed_n": self.fixed_n if self.fixed_n is not None else
            NotEstimable("no fixed N given (use --n)"),
            "notes": list(self.notes),
        })

    def __repr__(self) -> str:
        return (f"Plan({self.design.name}, alpha={self.alpha:g}, tails={self.tails}, "
                f"{len(self.scenarios)} scenarios x {len(self.powers)} powers)")


def _recruit(n_total: int, attrition: float) -> int:
    """Participants to recruit so that n_total remain after ``attrition`` (a fraction)."""
    return int(math.ceil(n_total / (1 - attrition) - 1e-9))


def recruit_sizes(n: int, design, attrition: float) -> tuple[tuple[int, ...], int]:
    """Whole people to recruit in each group (cell) so that each keeps its planned size
    after losing the fraction ``attrition``, and their total.

    Each group is inflated on its own, n / (1 - attrition) rounded up, so two equal groups
    give an even total and an allocation keeps its ratio; for an ungrouped design it is
    the total.

    Examples
    --------
    >>> recruit_sizes(409, "two-group", 0.2)
    ((512, 512), 1024)
    >>> recruit_sizes(40, Design("two-group", ratio=2.0), 0.1)
    ((45, 89), 134)
    >>> recruit_sizes(100, "paired", 0.2)
    ((125,), 125)
    """
    sizes = tuple(_recruit(g, attrition) for g in unit_sizes(n, design))
    return sizes, int(sum(sizes))


def unit_sizes(n: int, design) -> tuple[int, ...]:
    """The whole groups (cells) a design has for ``n`` per unit, from the design registry:
    with an allocation ratio (n1, n2 = ceil(ratio n1)); equal units otherwise; the total
    alone for a design counted in all.

    Examples
    --------
    >>> unit_sizes(30, Design("two-group", ratio=2.0)), unit_sizes(25, "interaction-2x2")
    ((30, 60), (25, 25, 25, 25))
    """
    des = _design(design)
    n = int(n)
    if des.unit is None:
        return (n,)
    total = int(des.n_total(n))
    if "ratio" in des.spec.parameters:
        return (n, total - n)
    return (n,) * max(total // n, 1)


def make_plan(scenarios, design="two-group", *, metric="d", alpha=0.05, tails=2,
              powers=(0.8, 0.9, 0.95), attrition=0.0, predictive=None, assurance_targets=None,
              n_total=None, effect_label=None) -> Plan:
    """Solve the planning table.

    Parameters
    ----------
    scenarios : sequence of PlanningEffect
        Planning effects on the literature's metric (``metric``).
    design : str or Design
    metric : {"d", "r"}
    alpha : float
    tails : {1, 2}
        1 = one-tailed in the hypothesised direction.
    powers : sequence of float
        Target powers.
    attrition : float
        Expected fraction lost, in [0, 1): totals are inflated to n / (1 - attrition).
    predictive : (mean, sd), EffectDensity or None
        Predictive distribution of the new study's true effect, on the literature's metric
        (Fisher z for r), for assurance: a Normal(mean, sd²), or any density (e.g. one
        tabulated on a grid, :meth:`pooler.planning.power.EffectDensity.from_grid`). Assurance is
        integrated adaptively to 1e-9 (:func:`pooler.planning.power.assurance_over`).
    assurance_targets : sequence of float or None
        Target assurances (default: the target powers).
    n_total : int or None
        A fixed feasible total N: adds power per scenario and the smallest detectable effect.
    effect_label : str or None
        How the planning effects are labelled in tables (default "g", or "r").

    Examples
    --------
    >>> p = make_plan([PlanningEffect("given", 0.5)], powers=(0.8,))
    >>> p.rows[0].n_per_group, p.rows[0].n_total
    (64, 128)
    """
    # validation
    des = _design(design)
    if tails not in (1, 2):
        raise OptionError(f"`tails` must be 1 or 2, not {tails!r}")
    if not 0 < alpha < 0.5:
        raise OptionError(f"`alpha` must lie in (0, 0.5), not {alpha!r}")
    powers = tuple(float(p) for p in powers)
    if not powers or any(not 0 < p < 1 for p in powers):
        raise OptionError("every target power must lie strictly between 0 and 1")
    if not 0 <= attrition < 1:
        raise OptionError(f"`attrition` must be a fraction in [0, 1), not {attrition!r}")
    if metric not in ("d", "r"):
        raise OptionError(f"`metric` must be 'd' or 'r', not {metric!r}")
    scenarios = tuple(scenarios)
    if not scenarios:
        raise OptionError("give at least one planning effect")
    if metric == "r" and any(not -1 < s.effect < 1 for s in scenarios):
        raise OptionError("a correlation planning effect must lie strictly between -1 and 1")
    alternative = "two-sided" if tails == 2 else "greater"

    effects = np.array([s.effect for s in scenarios], float)
    deff = to_design_effect(effects, metric, des)
    grid = n_for_power(deff[:, None], np.array(powers)[None, :], des, alpha, alternative)
    rows = []
    for i, s in enumerate(scenarios):
        for j, p in enumerate(powers):
            if grid.reachable[i, j]:
                n, nt = int(grid.n[i, j]), int(grid.n_total[i, j])
                rows.append(PlanRow(s.scenario, float(effects[i]), float(deff[i]), p, n, nt,
                                    float(grid.power[i, j]),
                                    recruit_sizes(n, des, attrition)[1]))
            else:
                why = NotEstimable(grid.reason[i, j])
                rows.append(PlanRow(s.scenario, float(effects[i]), float(deff[i]), p,
                                    why, why, why, why))

    assurance, density = None, None
    if isinstance(predictive, EffectDensity):
        density = predictive
    elif predictive is not None:
        mean, sd = predictive
        if not (math.isfinite(mean) and math.isfinite(sd) and sd > 0):
            assurance = NotEstimable("the predictive distribution needs a finite mean and a "
                                     "positive SD")
        else:
            density = EffectDensity.normal(mean, sd, metric)
    if density is not None:
        assurance = n_for_assurance(density.mean, density.sd, tuple(assurance_targets or powers),
                                    des, alpha, alternative, density=density)

    notes = [] if conversion_note(metric, des) is None else [conversion_note(metric, des)]
    fixed = None
    if n_total is not None:
        fixed = _fixed_n(int(n_total), scenarios, effects, deff, des, metric, alpha, alternative,
                         powers)
        if fixed.n_total_used != fixed.n_total:
            notes.append(f"a total N of {fixed.n_total} does not split into whole groups as "
                         f"planned: the fixed-N figures are for {fixed.n_per_group} "
                         f"per {des.unit}, "
                         f"{fixed.n_total_used} in all")
    return Plan(design=des, metric=metric, alpha=alpha, tails=tails, powers=powers,
                attrition=attrition, scenarios=scenarios, rows=tuple(rows), assurance=assurance,
                fixed_n=fixed, effect_label=effect_label or ("g" if metric == "d" else "r"),
                notes=tuple(notes), predictive=density)


def design_metric(design) -> str:
    """The metric a design plans on when the user does not choose one: r for the
    correlational designs, d otherwise (the registry's ``metric``, :mod:`pooler.planning.designs`)."""
    return _design(design).metric


def conversion_note(metric: str, design) -> str | None:
    """The sentence saying how planning effects on ``metric`` reach the design's test, when
    they must be converted (a d for a correlational design, an r for a group design); None
    when no conversion is made. The conversions are those of
    :func:`pooler.planning.power.to_design_effect` (Borenstein et al. 2009, eqs. 7.5 and 7.7 with
    a = 4, i.e. two equal groups).

    Examples
    --------
    >>> conversion_note("d", "two-group") is None
    True
    >>> conversion_note("d", "correlation")[:40]
    'the planning effects are d, and the corr'
    """
    des = _design(design)
    metric = {"g": "d", "z": "r"}.get(metric, metric)
    if metric == design_metric(des):
        return None
    if metric == "d":
        return (f"the planning effects are d, and the {des.name} design tests a correlation: "
                "each d is converted to r = d / sqrt(d^2 + 4), the correlation of the outcome "
                "with membership of one of two equal groups (Borenstein et al. 2009, eq. 7.7)"
                f"{des.spec.r_note}; give --metric r to plan on a correlation directly")
    return (f"the planning effects are correlations, and the {des.name} design tests a "
            "standardised mean difference: each r is converted to d = 2 r / sqrt(1 - r^2), "
            "as if it compared two equal groups (Borenstein et al. 2009, eq. 7.5)")


def per_group(n_total: int, design: Design) -> int:
    """n per group (per cell) that a total N allows, rounding down (the registry's
    ``per_unit``, :mod:`pooler.planning.designs`)."""
    return _design(design).per_unit(n_total)


def _fixed_n(n_total, scenarios, effects, deff, des, metric, alpha, alternative, powers):
    n = per_group(n_total, des)
    if n < des.n_min:
        raise OptionError(f"--n {n_total} is too small for a {des.name} design "
                          f"(at least {des.n_min} {'per group' if des.grouped else 'in all'})")
    pw = power_at(np.where(deff > 0, deff, 0.0), n, des, alpha, alternative)
    power = tuple((s.scenario, float(e), float(p) if d > 0 else 0.0)
                  for s, e, d, p in zip(scenarios, effects, deff, np.atleast_1d(pw)))
    det = []
    used = int(des.n_total(n))
    for p in powers:
        x = float(detectable_effect(n, p, des, alpha, alternative))
        if math.isfinite(x):
            det.append((p, x, float(from_design_effect(x, metric, des))))
        else:
            why = NotEstimable("no effect in range reaches this power at this N")
            det.append((p, why, why))
    return FixedN(n_total=n_total, n_per_group=n, power=power, detectable=tuple(det),
                  n_total_used=used)
