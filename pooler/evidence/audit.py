"""The literature audit: how much power the prior studies had, and whether they report more
significant results than that power can explain.

Both are computed at one assumed true effect (the pipeline uses the realistic planning
effect) from the studies a :class:`pooler.evidence.pooling.PooledResult` carries: the stage after the
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

from pooler._results import NotEstimable, to_jsonable
from pooler.evidence.bias import Z975


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
    design where n is known, otherwise from its SE by the normal approximation.

    The units are grouped by how their power is computed and each group is done in one
    vectorised call, so the audit costs about the same at k = 10 and k = 10,000."""
    from scipy.special import ndtr, ndtri
    from pooler.planning.power import Design, _t_power, power_at, to_design_effect
    zc = float(ndtri(1 - alpha / 2))
    units = list(units)
    kinds, hows = [], []
    for u in units:
        if metric == "z" and u.n_total and u.n_total > 3:
            kinds.append(("r",))
            hows.append(f"correlation, n = {u.n_total:g}")
        elif metric == "g" and u.design == "between" and u.n1 and u.n2:
            kinds.append(("two",))
            hows.append(f"two groups, {u.n1:g} + {u.n2:g}")
        elif metric == "g" and u.design == "between" and u.n_total and u.n_total > 3:
            kinds.append(("half",))
            hows.append(f"{u.n_total:g} in all, as two equal groups")
        elif metric == "g" and u.design == "within" and u.n_total and u.within_r is not None:
            kinds.append(("paired", u.within_r))
            hows.append(f"paired, n = {u.n_total:g}, r = {u.within_r:g}")
        else:
            kinds.append(("se",))
            hows.append("from its SE (normal approximation)")
    power = np.empty(len(units))
    for kind in dict.fromkeys(kinds):
        idx = [i for i, kd in enumerate(kinds) if kd == kind]
        sub = [units[i] for i in idx]
        if kind[0] == "r":
            r = max(-1 + 1e-12, min(1 - 1e-12, math.tanh(effect)))
            p = power_at(r, np.array([u.n_total for u in sub], float), "correlation", alpha)
        elif kind[0] == "two":
            # power_at(effect, n1, Design("two-group", ratio=n2 / n1)) for every unit at once:
            # second group ⌈ratio n1⌉ (Design.n2's rounding), t with df = n1 + n2 - 2 and
            # λ = d √(n1 n2 / (n1 + n2)) (Cohen 1988, ch. 2)
            n1 = np.array([u.n1 for u in sub], float)
            n2 = np.ceil(np.array([u.n2 for u in sub], float) / n1 * n1 - 1e-9)
            p = _t_power(effect * np.sqrt(n1 * n2 / (n1 + n2)), n1 + n2 - 2,
                         np.asarray(alpha, float), "two-sided")
        elif kind[0] == "half":
            p = power_at(effect, np.array([u.n_total for u in sub], float) / 2, "two-group",
                         alpha)
        elif kind[0] == "paired":
            des = Design("paired", planned_r=kind[1])
            p = power_at(to_design_effect(effect, "d", des),
                         np.array([u.n_total for u in sub], float), des, alpha)
        else:
            lam = effect / np.array([u.se for u in sub], float)
            p = ndtr(lam - zc) + ndtr(-lam - zc)
        power[idx] = np.asarray(p, float).reshape(-1)
    return [StudyPower(u.label, float(pw), how) for u, pw, how in zip(units, power, hows)]


def literature_audit(units, effect, metric) -> LiteratureAudit:
    rows = unit_powers(units, effect, metric)
    pw = [r.power for r in rows]
    return LiteratureAudit(effect, tuple(rows), float(statistics.median(pw)),
                           float(np.mean(np.array(pw) >= 0.8)))


def excess_significance(units, powers) -> ExcessSignificance | NotEstimable:
    """χ² = (O - E)²/E + (O - E)²/(k - E) on 1 df (Ioannidis & Trikalinos 2007), with O the
    studies significant at two-sided .05 and E the sum of their powers."""
    from scipy.special import chdtrc
    k = len(units)
    if k < 2:
        return NotEstimable("needs at least 2 studies")
    o = int(sum(abs(u.effect / u.se) > Z975 for u in units))
    e = float(sum(powers))
    if not 0 < e < k:
        return NotEstimable("the expected number of significant studies is 0 or k")
    chi2 = (o - e) ** 2 / e + (o - e) ** 2 / (k - e)
    return ExcessSignificance(o, e, k, float(chi2), float(chdtrc(1, chi2)))


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
    """Audit the studies of ``pooled`` (a :class:`pooler.evidence.pooling.PooledResult`) at the true
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
