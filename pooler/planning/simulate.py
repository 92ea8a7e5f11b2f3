"""Stage 7: stress-test the planning effect by simulating literatures like the user's.

For each simulated literature the real pipeline runs (conversion-free: effects and variances
directly): random-effects pooling, the bias suite, the planning scenarios; then the n each
scenario recommends at the target power, and the *true* power of that n at the true mean
effect δ (exact, from :mod:`pooler.planning.power`). This measures, for a literature shaped like the
user's, how often planning on each scenario would really reach its power.

Studies are simulated from their exact sampling distribution: t = (Z + λ) / √(χ²_df / df)
with λ from the study's true effect θ ~ Normal(δ, τ²) and its own n and design; a study is
"published" when it is significant in the expected direction (two-sided α = .05) and
otherwise with probability π.

Seeds: every (cell, chunk) task gets its own child of ``numpy.random.SeedSequence(seed)``, so
results are identical whatever the number of worker processes.
"""
from __future__ import annotations

import math
import statistics
from dataclasses import dataclass, field

import numpy as np

from pooler._results import estimable, to_jsonable
from pooler._threads import single_threaded
from pooler.choices import MODEL_AVERAGE_DEFAULTS
from pooler.errors import OptionError


def estimator_names() -> tuple[str, ...]:
    """Estimators whose bias and RMSE are reported: the random-effects estimate, every
    registered bias method that can set the planning effect (by its label, the column name of
    ``pooler.stress/1``), the median of those, and the two adjusted planning scenarios."""
    from pooler.evidence.bias import planning_methods
    return (("random effects",) + tuple(m.label for m in planning_methods())
            + ("median of adjusters", "realistic", "pessimistic"))


#: Planning rules whose recommended n is evaluated.
RULES = ("random effects", "median of adjusters", "realistic", "pessimistic")
CHUNK = 20
#: The trade-off grid of the model-average rule, evaluated from one fit per literature
#: (:meth:`pooler.evidence.bma.ModelAverage.with_model_prior`): prior probability of "no bias" ×
#: quantile of the mean effect given a positive effect (0.5 = the realistic scenario).
TRADEOFF_P_NO_BIAS = (0.5, 0.35, 0.2, 0.1)
TRADEOFF_QUANTILES = (0.1, 0.15, 0.2, 0.25, 0.33, 0.4, 0.5)


def tradeoff_points() -> tuple[tuple[float, float], ...]:
    """The (prior probability of no bias, posterior quantile) points of the trade-off grid."""
    return tuple((w, q) for w in TRADEOFF_P_NO_BIAS for q in TRADEOFF_QUANTILES)


@dataclass(frozen=True)
class Shapes:
    """The study designs and sizes a literature is drawn from (resampled with replacement)."""

    within: np.ndarray   # bool
    n1: np.ndarray       # group sizes (between) or n (within, in n1)
    n2: np.ndarray
    r: np.ndarray        # correlation between repeated measures (within)
    label: str = ""

    @classmethod
    def from_effects(cls, effects, default_r=0.5) -> "Shapes":
        """The user's own literature: each independent sample's design and n."""
        w, a, b, r = [], [], [], []
        for u in effects.units:
            if u.design == "within" and u.n_total:
                w.append(True), a.append(u.n_total), b.append(u.n_total)
                r.append(u.within_r if u.within_r is not None else default_r)
            elif u.n1 and u.n2:
                w.append(False), a.append(u.n1), b.append(u.n2), r.append(0.0)
            elif u.n_total:
                w.append(False), a.append(u.n_total / 2), b.append(u.n_total / 2), r.append(0.0)
        if not w:
            raise OptionError("no study in the sheet has a known sample size to simulate from")
        return cls(np.array(w), np.array(a, float), np.array(b, float), np.array(r, float),
                   f"the {len(w)} samples of {effects.file}")

    @classmethod
    def calibration(cls, low=10, high=60, paired_share=0.25, paired_r=0.5, size=500,
                    seed=0) -> "Shapes":
        """The calibration literatures: small studies as students find them: two-group studies
        with n per group uniform on [low, high] and a share of paired (within-subject) studies
        of n uniform on the same range with repeated-measures correlation ``paired_r``."""
        rng = np.random.default_rng(seed)
        n = rng.integers(low, high + 1, size).astype(float)
        within = rng.random(size) < paired_share
        return cls(within, n, n, np.where(within, paired_r, 0.0),
                   f"two-group studies with {low}-{high} per group and "
                   f"{100 * paired_share:g}% paired studies of {low}-{high} (r = {paired_r:g})")

    @classmethod
    def generic(cls, low=20, high=100, size=500, seed=0) -> "Shapes":
        """Two-group studies with n per group uniform on [low, high] (small literatures)."""
        rng = np.random.default_rng(seed)
        n = rng.integers(low, high + 1, size).astype(float)
        return cls(np.zeros(size, bool), n, n, np.zeros(size),
                   f"two-group studies, {low}-{high} per group")


@dataclass(frozen=True)
class Cell:
    """One condition of the simulation grid."""

    k: int
    delta: float
    tau: float
    pi: float

    def describe(self) -> str:
        return f"k={self.k} δ={self.delta:g} τ={self.tau:g} π={self.pi:g}"


def simulate_literature(rng, cell: Cell, shapes: Shapes):
    """One published literature of ``cell.k`` studies: (g, variance, shape index) arrays."""
    from scipy.special import stdtrit
    from pooler.evidence.effects import hedges_j
    ys, vs, idx = [], [], []
    need = cell.k
    for _ in range(10_000):
        m = max(4 * need, 16)
        i = rng.integers(0, len(shapes.n1), m)
        within = shapes.within[i]
        n1, n2, r = shapes.n1[i], shapes.n2[i], shapes.r[i]
        theta = cell.delta + cell.tau * rng.standard_normal(m)
        df = np.where(within, n1 - 1, n1 + n2 - 2)
        lam = np.where(within, theta / np.sqrt(2 * (1 - r)) * np.sqrt(n1),
                       theta * np.sqrt(n1 * n2 / (n1 + n2)))
        t = (rng.standard_normal(m) + lam) / np.sqrt(rng.chisquare(df) / df)
        sig = t > stdtrit(df, 0.975)
        keep = sig | (rng.random(m) < cell.pi)
        d = np.where(within, t / np.sqrt(n1) * np.sqrt(2 * (1 - r)), t * np.sqrt(1 / n1 + 1 / n2))
        j = hedges_j(df)
        vd = np.where(within, (1 / n1 + d * d / (2 * n1)) * 2 * (1 - r),    # Borenstein 4.28
                      (n1 + n2) / (n1 * n2) + d * d / (2 * (n1 + n2)))       # Borenstein 4.20
        sel = np.flatnonzero(keep)[:need]
        ys.append(j[sel] * d[sel])
        vs.append(j[sel] ** 2 * vd[sel])
        idx.append(i[sel])
        need -= len(sel)
        if need == 0:
            return np.concatenate(ys), np.concatenate(vs), np.concatenate(idx)
    raise RuntimeError("selection so strong that no literature could be completed")


def _studies_for(y, v, idx, shapes):
    """The simulated literature as the studies a pooled result carries (their n and design)."""
    from pooler.evidence.effects import Unit
    return tuple(Unit(label=f"sim{j}", effect=float(a), variance=float(b),
                      n_total=float(shapes.n1[i] if shapes.within[i]
                                    else shapes.n1[i] + shapes.n2[i]),
                      n1=None if shapes.within[i] else float(shapes.n1[i]),
                      n2=None if shapes.within[i] else float(shapes.n2[i]),
                      design="within" if shapes.within[i] else "between", rows=(j + 2,),
                      within_r=float(shapes.r[i]) if shapes.within[i] else None)
                 for j, (a, b, i) in enumerate(zip(y, v, idx)))


def evaluate_literature(y, v, idx, shapes, delta, *, design="two-group", power=0.8,
                        alpha=0.05, rule_options=None) -> tuple[dict, dict, dict]:
    """Run the pipeline on one literature: (estimates by estimator, true power by rule,
    extras).

    A rule whose planning effect is ≤ 0 recommends no study; its true power is NaN and is
    counted as "no positive planning effect". ``extras`` holds ``n_ratio`` (rule -> the n it
    recommends over the n that the true δ needs: the oracle n) and ``tradeoff`` ((p_no_bias,
    quantile) -> (true power, n ratio)) for the points of :func:`tradeoff_points`, all from
    the one model-average fit of the default rule re-weighted without a refit.
    ``rule_options`` holds the model-average settings by their option names
    (``pooler.choices.MODEL_AVERAGE_OPTIONS``; default: the defaults).
    """
    from pooler.evidence.bias import bias_suite
    from pooler.evidence.bias import planning_methods
    from pooler.evidence.bma import posterior_scenarios
    from pooler.evidence.pooling import pool_studies
    from pooler.planning.power import n_for_power, power_at
    from pooler.planning.scenarios import make_scenarios, model_average_priors
    opts = dict(rule_options or {})
    quantile = opts.pop("pessimistic_quantile", MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"])
    pooled = pool_studies(_studies_for(y, v, idx, shapes), "g", influence=False, file="simulated")
    bias = bias_suite(pooled)
    sc = make_scenarios(pooled, bias, sensitivity=False, priors=model_average_priors(**opts),
                        pessimistic_quantile=quantile)
    adj = bias.adjusted()
    est = {"random effects": pooled.mu}
    for m in planning_methods():
        est[m.label] = adj.get(m.key, (math.nan,))[0]
    est.update({"median of adjusters": statistics.median(e for e, _ in adj.values()) if adj
                else pooled.mu,
                "realistic": sc.realistic.effect, "pessimistic": sc.pessimistic.effect})
    points = tradeoff_points()
    grid_eff = dict.fromkeys(points, math.nan)
    avg = sc.posterior
    if avg is not None:
        for w in TRADEOFF_P_NO_BIAS:
            a_w = avg if w == avg.priors.p_no_bias else avg.with_model_prior(p_no_bias=w)
            if a_w.p_positive <= 0 or posterior_scenarios(a_w).favours_null:
                continue   # the rule makes no positive plan here
            for q in TRADEOFF_QUANTILES:
                grid_eff[(w, q)] = a_w.mu_quantile(q, positive=True)
    plan_eff = np.array([est[r] for r in RULES] + [grid_eff[p] for p in points] + [delta])
    ok = np.isfinite(plan_eff) & (plan_eff > 0)
    res = n_for_power(np.where(ok, plan_eff, 0.0), power, design, alpha)
    true = np.where(res.reachable, power_at(delta, np.maximum(res.n, 2), design, alpha), np.nan)
    oracle = float(res.n[-1]) if res.reachable[-1] else math.nan
    ratio = np.where(res.reachable, res.n / oracle, np.nan)
    nr = len(RULES)
    extras = {"n_ratio": dict(zip(RULES, (float(x) for x in ratio[:nr]))),
              "tradeoff": {p: (float(true[nr + i]), float(ratio[nr + i]))
                           for i, p in enumerate(points)}}
    return est, dict(zip(RULES, (float(x) for x in true[:nr]))), extras


@single_threaded
def _run_chunk(args):
    cell, shapes, reps, seed_seq, design, power, rule_options = args
    rng = np.random.default_rng(seed_seq)
    ests = {e: [] for e in estimator_names()}
    pows = {r: [] for r in RULES}
    ratios = {r: [] for r in RULES}
    grid = {p: [] for p in tradeoff_points()}
    for _ in range(reps):
        y, v, idx = simulate_literature(rng, cell, shapes)
        est, pw, extra = evaluate_literature(y, v, idx, shapes, cell.delta, design=design,
                                             power=power, rule_options=rule_options)
        for kname in ests:
            ests[kname].append(est[kname])
        for r in RULES:
            pows[r].append(pw[r])
            ratios[r].append(extra["n_ratio"][r])
        for p in grid:
            grid[p].append(extra["tradeoff"][p])
    return ests, pows, ratios, grid


def _power_summary(power, ratio=None) -> dict:
    """Median and 10th percentile of the true power over the literatures that got a plan, the
    share that got none, and (when given) the median n relative to the oracle n."""
    ok = power[np.isfinite(power)]
    out = {"median_power": float(np.median(ok)) if ok.size else None,
           "p10_power": float(np.quantile(ok, 0.1)) if ok.size else None,
           "share_no_positive_effect": float(np.mean(~np.isfinite(power)))}
    if ratio is not None:
        r = ratio[np.isfinite(ratio)]
        out["median_n_ratio"] = float(np.median(r)) if r.size else None
    return out


@dataclass(frozen=True)
class CellResult:
    """Every replication of one cell: estimates and the true power each rule's n reached."""

    cell: Cell
    estimates: dict = field(repr=False)   # estimator -> array
    true_power: dict = field(repr=False)  # rule -> array (NaN: no positive planning effect)
    #: rule -> array of the recommended n over the oracle n (the n the true δ needs)
    n_ratio: dict = field(default_factory=dict, repr=False)
    #: (p_no_bias, quantile) -> (true power array, n ratio array): the trade-off grid
    tradeoff: dict = field(default_factory=dict, repr=False)

    @property
    def reps(self) -> int:
        return len(next(iter(self.true_power.values())))

    def summary(self) -> dict:
        out = {"cell": self.cell.__dict__, "reps": self.reps, "rules": {}, "estimators": {}}
        for r, a in self.true_power.items():
            out["rules"][r] = _power_summary(a, self.n_ratio.get(r))
        if self.tradeoff:
            out["tradeoff"] = [{"p_no_bias": w, "quantile": q, **_power_summary(*arrs)}
                               for (w, q), arrs in self.tradeoff.items()]
        for e, a in self.estimates.items():
            ok = a[np.isfinite(a)]
            out["estimators"][e] = {
                "bias": float(np.mean(ok) - self.cell.delta) if ok.size else None,
                "rmse": float(np.sqrt(np.mean((ok - self.cell.delta) ** 2))) if ok.size else None,
                "share_not_estimable": float(np.mean(~np.isfinite(a)))}
        return out


@dataclass(frozen=True)
class StressResult:
    """A whole stress test: one CellResult per grid cell."""

    cells: tuple[CellResult, ...]
    reps: int
    seed: int
    shapes: str
    design: str
    power: float
    #: the model-average settings the default rule ran with (option names; every one, so
    #: that a saved run still says what it ran after the defaults change)
    rule_options: dict = field(default_factory=dict)

    @property
    def rules(self) -> tuple[str, ...]:
        """The planning rules evaluated, in order."""
        return tuple(self.cells[0].true_power) if self.cells else RULES

    @property
    def estimators(self) -> tuple[str, ...]:
        """The estimators whose bias and RMSE were measured, in order."""
        return tuple(self.cells[0].estimates) if self.cells else ()

    def to_dict(self) -> dict:
        return to_jsonable({"schema": "pooler.stress/1", "reps": self.reps, "seed": self.seed,
                            "shapes": self.shapes, "design": self.design, "power": self.power,
                            "rule_options": dict(self.rule_options),
                            "tradeoff_grid": {"p_no_bias": list(TRADEOFF_P_NO_BIAS),
                                              "quantiles": list(TRADEOFF_QUANTILES)},
                            "cells": [c.summary() for c in self.cells]})

    def to_frame(self):
        import pandas as pd
        rows = []
        for c in self.cells:
            s = c.summary()
            for r, v in s["rules"].items():
                rows.append({**c.cell.__dict__, "rule": r, **v})
        return pd.DataFrame(rows)


def stress_test(cells, shapes: Shapes, *, reps=100, seed=2026, workers=2, design="two-group",
                power=0.8, progress=None, rule_options=None, scheduler=None) -> StressResult:
    """Simulate ``reps`` literatures in every cell and evaluate each planning rule.

    Parameters
    ----------
    cells : sequence of Cell
    shapes : Shapes
        Study designs and sizes to draw from (:meth:`Shapes.from_effects` or
        :meth:`Shapes.generic`).
    reps : int
        Literatures per cell.
    seed : int
    workers : int
        Processes (1 = in this process). Results do not depend on it.
    progress : callable(done, total) or None
    scheduler : str or dask.distributed.Client, optional
        Run the chunks on a dask.distributed cluster instead of local processes (the same
        seeds give the same results; :class:`pooler.planning.parallel.ParallelRunner`).
    rule_options : dict, optional
        Settings of the model-average rule by their option names (``effect_prior_sd``, ...,
        ``pessimistic_quantile``; ``pooler.choices.MODEL_AVERAGE_OPTIONS``).
    """
    # validation
    if reps < 1:
        raise OptionError(f"`reps` must be at least 1, not {reps!r}")
    if workers < 1:
        raise OptionError(f"`workers` must be at least 1, not {workers!r}")
    rule_options = dict(rule_options or {})
    from pooler.planning.scenarios import model_average_priors
    model_average_priors(**{k: v for k, v in rule_options.items()
                            if k != "pessimistic_quantile"})   # checks names and ranges
    q = rule_options.get("pessimistic_quantile", MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"])
    if not (isinstance(q, (int, float)) and 0 < q <= 0.5):
        raise OptionError(f"`pessimistic_quantile` must lie in (0, 0.5], not {q!r}")
    cells = tuple(cells)
    for c in cells:
        if c.k < 2 or not 0 < c.pi <= 1 or c.tau < 0:
            raise OptionError(f"bad simulation cell {c.describe()}")
    root = np.random.SeedSequence(seed)
    cell_seqs = root.spawn(len(cells))
    n_chunks = math.ceil(reps / CHUNK)
    tasks = []  # ((cell index, chunk index), arguments)
    for ci, (cell, cs) in enumerate(zip(cells, cell_seqs)):
        for j, ss in enumerate(cs.spawn(n_chunks)):
            size = min(CHUNK, reps - j * CHUNK)
            tasks.append(((ci, j), (cell, shapes, size, ss, design, power, rule_options)))
    results: dict[int, list] = {i: [None] * n_chunks for i in range(len(cells))}
    if progress:  # show the bar from the start, before the first chunk is done
        progress(0, len(tasks))
    from pooler.planning.parallel import ParallelRunner
    with ParallelRunner(workers, scheduler) as runner:
        values = runner.map(_run_chunk, [args for _, args in tasks], progress=progress)
    for (key, _), value in zip(tasks, values):
        results[key[0]][key[1]] = value
    out = []
    for ci, cell in enumerate(cells):
        ests = {e: np.concatenate([np.array(ch[0][e], float) for ch in results[ci]])
                for e in results[ci][0][0]}
        pows = {r: np.concatenate([np.array(ch[1][r], float) for ch in results[ci]])
                for r in RULES}
        ratios = {r: np.concatenate([np.array(ch[2][r], float) for ch in results[ci]])
                  for r in RULES}
        grid = {p: tuple(np.concatenate([np.array(ch[3][p], float).reshape(-1, 2)[:, j]
                                         for ch in results[ci]]) for j in (0, 1))
                for p in tradeoff_points()}
        out.append(CellResult(cell, ests, pows, ratios, grid))
    return StressResult(tuple(out), reps, seed, shapes.label, str(design), power,
                        {**MODEL_AVERAGE_DEFAULTS, **rule_options})


def grid_around(analysis, scale=(0.5, 1.0, 1.5), pis=(1.0, 0.2, 0.05)) -> list[Cell]:
    """A small grid around the user's realistic estimate: δ = scale × realistic (or 0.1,
    0.2, 0.3 when the realistic effect is not positive), τ from the realistic basis, π from
    no selection to strong selection, k = the user's number of samples."""
    sc, bias, pooled = analysis.scenarios, analysis.bias, analysis.pooled
    if analysis.pooled.metric != "g":
        raise OptionError("`metric` must be 'd' for the stress test: it simulates standardised "
                          "mean differences", parameter="metric")
    r = sc.realistic.effect
    deltas = [round(s * r, 3) for s in scale] if r > 0 else [0.1, 0.2, 0.3]
    # τ² of the method the realistic effect was computed from, when it has its own
    own = [bias[key] for key in sc.realistic.methods
           if bias.method(key).own_tau2 and estimable(bias[key])]
    tau2 = own[0].tau2 if own else pooled.tau2
    tau = round(math.sqrt(max(tau2, 0.0)), 3)
    return [Cell(max(pooled.k, 2), d, tau, p) for d in deltas for p in pis]


def grid_note(analysis, scale=(0.5, 1.0, 1.5)) -> str:
    """One sentence saying how :func:`grid_around` chose the true effects it simulates."""
    r = analysis.scenarios.realistic.effect
    if r > 0:
        return (f"The grid simulates true mean effects of {', '.join(f'{s:g}' for s in scale)}"
                f" times your realistic g = {r:.3f}, with {analysis.pooled.k} studies each, "
                "from no selection (pi = 1) to strong selection (pi = 0.05).")
    return (f"Your realistic effect is not positive (g = {r:.3f}), so there is no effect to "
            "scale the grid around: it simulates true mean effects of 0.1, 0.2 and 0.3 "
            "instead, to show how each planning rule would fare if a small effect were real.")


def calibration_grid() -> list[Cell]:
    """The general calibration grid of the README (108 cells)."""
    return [Cell(k, d, t, p) for k in (5, 10, 20, 40) for d in (0.1, 0.2, 0.4)
            for t in (0.0, 0.1, 0.2) for p in (1.0, 0.2, 0.05)]
