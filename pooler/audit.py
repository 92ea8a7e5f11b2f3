"""The literature audit: how much power the prior studies had, and whether they report more
significant results than that power can explain.

Both are computed at one assumed true effect (the pipeline uses the realistic planning
effect) from the studies a :class:`pooler.pooling.PooledResult` carries: the stage after the
scenarios, ``audit_literature(pooled, scenarios.realistic.effect) -> Audit``.

References
----------
.. [IT07] Ioannidis, J. P. A., & Trikalinos, T. A. (2007). An exploratory test for an excess
   of significant findings. *Clinical Trials*, 4(3), 245-253.
"""
from __future__ import annotations

import math
import statistics
from dataclasses import dataclass

import numpy as np

from ._results import NotEstimable, to_jsonable
from .bias import Z975


@dataclass(frozen=True)
class StudyPower:
    label: str
    power: float
    how: str


@dataclass(frozen=True)
class LiteratureAudit:
    """Each prior study's power to detect the realistic effect with its own n and design."""

    effect: float
    rows: tuple[StudyPower, ...]
    median: float
    share_80: float

    def to_dict(self) -> dict:
        return to_jsonable({"effect": self.effect, "median_power": self.median,
                            "share_adequate": self.share_80,
                            "rows": [{"label": r.label, "power": r.power, "how": r.how}
                                     for r in self.rows]})


@dataclass(frozen=True)
class ExcessSignificance:
    """Ioannidis & Trikalinos (2007): observed vs expected significant studies."""

    observed: int
    expected: float
    k: int
    chi2: float
    p: float

    def to_dict(self) -> dict:
        return to_jsonable({"observed": self.observed, "expected": self.expected, "k": self.k,
                            "chi2": self.chi2, "p": self.p})


def unit_powers(units, effect, metric, alpha=0.05):
    """Power of each unit's own study to detect ``effect`` (two-sided ``alpha``), exact for its
    design where n is known, otherwise from its SE by the normal approximation."""
    from scipy.special import ndtr, ndtri
    from .power import Design, power_at, to_design_effect
    out = []
    zc = float(ndtri(1 - alpha / 2))
    for u in units:
        if metric == "z" and u.n_total and u.n_total > 3:
            r = max(-1 + 1e-12, min(1 - 1e-12, math.tanh(effect)))
            p = float(power_at(r, u.n_total, "correlation", alpha))
            how = f"correlation, n = {u.n_total:g}"
        elif metric == "g" and u.design == "between" and u.n1 and u.n2:
            p = float(power_at(effect, u.n1, Design("two-group", ratio=u.n2 / u.n1), alpha))
            how = f"two groups, {u.n1:g} + {u.n2:g}"
        elif metric == "g" and u.design == "between" and u.n_total and u.n_total > 3:
            p = float(power_at(effect, u.n_total / 2, "two-group", alpha))
            how = f"two groups, {u.n_total:g} in all"
        elif metric == "g" and u.design == "within" and u.n_total and u.within_r is not None:
            des = Design("paired", planned_r=u.within_r)
            p = float(power_at(to_design_effect(effect, "d", des), u.n_total, des, alpha))
            how = f"paired, n = {u.n_total:g}, r = {u.within_r:g}"
        else:
            lam = effect / u.se
            p = float(ndtr(lam - zc) + ndtr(-lam - zc))
            how = "from its SE (normal approximation)"
        out.append(StudyPower(u.label, p, how))
    return out


def literature_audit(units, effect, metric) -> LiteratureAudit:
    rows = unit_powers(units, effect, metric)
    pw = [r.power for r in rows]
    return LiteratureAudit(effect, tuple(rows), float(statistics.median(pw)),
                           float(np.mean(np.array(pw) >= 0.8)))


def excess_significance(units, powers) -> ExcessSignificance | NotEstimable:
    """χ² = (O - E)²/E + (O - E)²/(k - E) on 1 df (Ioannidis & Trikalinos 2007), with O the
    studies significant at two-sided .05 and E the sum of their powers."""
    from scipy import stats
    k = len(units)
    if k < 2:
        return NotEstimable("needs at least 2 studies")
    o = int(sum(abs(u.effect / u.se) > Z975 for u in units))
    e = float(sum(powers))
    if not 0 < e < k:
        return NotEstimable("the expected number of significant studies is 0 or k")
    chi2 = (o - e) ** 2 / e + (o - e) ** 2 / (k - e)
    return ExcessSignificance(o, e, k, float(chi2), float(stats.chi2.sf(chi2, 1)))


@dataclass(frozen=True)
class Audit:
    """The audit stage: the studies' power and the excess-significance test at ``effect``."""

    effect: float
    literature: LiteratureAudit | NotEstimable
    excess_significance: ExcessSignificance | NotEstimable

    def to_dict(self) -> dict:
        return to_jsonable({"effect": self.effect, "literature": self.literature,
                            "excess_significance": self.excess_significance})


def audit_literature(pooled, effect) -> Audit:
    """Audit the studies of ``pooled`` (a :class:`pooler.pooling.PooledResult`) at the true
    effect ``effect`` on its metric: each study's power, then the excess-significance test
    (Ioannidis & Trikalinos 2007) with those powers."""
    if not effect > 0:
        sym = "g" if pooled.metric == "g" else "z"
        why = NotEstimable(f"not computed: the realistic effect ({sym} = {effect:.3f}) is not "
                           "positive, and a study's power to find an effect that is not there "
                           "is only its false-positive rate")
        return Audit(effect, why, why)
    lit = literature_audit(pooled.studies, effect, pooled.metric)
    return Audit(effect, lit, excess_significance(pooled.studies, [r.power for r in lit.rows]))
