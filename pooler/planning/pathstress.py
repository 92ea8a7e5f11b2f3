"""Stress check of planning from a path sheet: literatures like the user's, simulated from
known true correlations, go through the same sheet route (:func:`pooler.reading.pathsheet.pool_paths`:
each pair pooled, the model average's scenarios, one design per scenario), and each
scenario's planned effect is compared with the true one.

The truth is the user's own realistic correlations (one per pair) with each pair's estimated
between-study SD; each simulated pair keeps the user's number of studies and their sampling
variances. A study's Fisher z is drawn as z = atanh(rho) + u + e, u ~ N(0, tau^2),
e ~ N(0, v) (Fisher 1921: var z = 1/(n - 3)); it is "published" when it is significant in the
direction of the true correlation (two-sided alpha = .05) and otherwise with probability
``selection`` (1 = no selection). The planned effect of a scenario is each indirect effect
(the product of its paths) of a mediation, or the interaction's f^2 of a moderation; the plan
is *cautious* for a target when that effect is no larger in size than the true design's, so
its n is at least what the truth needs (for the interaction exactly, since its test's power
rises with f^2; for an indirect effect approximately, through the product of its paths).

Work units (a chunk of literatures at one selection level) are seeded from
``numpy.random.SeedSequence(seed, spawn_key=(level, chunk))`` and run on local processes or
a dask.distributed cluster by :class:`pooler.planning.parallel.ParallelRunner`, so results are
identical whatever runs them.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from pooler._results import to_jsonable
from pooler.errors import InputError, OptionError

#: Literatures per work unit.
CHUNK = 4
SCENARIOS = ("optimistic", "realistic", "pessimistic")


@dataclass(frozen=True)
class _Spec:
    """What a work unit needs (picklable): the truth and the analysis options."""

    design_name: str
    pairs: tuple      # (path label, true r, tau on z, variances of the user's studies)
    given: dict
    targets: dict     # target -> true planned effect
    options: dict


def _targets(design) -> dict:
    """Target -> the planned effect size that drives its n."""
    if not design.has_indirect:
        return {"XZ-Y": design.interaction_f2()}
    truth = design.true_values()
    return {k: abs(truth[k]) for k in design.indirect}


def _simulate_rows(rng, spec: _Spec, selection: float) -> list:
    from scipy import special as sp
    crit = sp.ndtri(0.975)
    rows = []
    for path, rho, tau, variances in spec.pairs:
        mu, sign = math.atanh(rho), (1.0 if rho >= 0 else -1.0)
        for v in variances:
            while True:
                z = mu + tau * rng.standard_normal() + math.sqrt(v) * rng.standard_normal()
                if sign * z / math.sqrt(v) > crit or rng.random() < selection:
                    break
            rows.append({"study": f"s{len(rows) + 1}", "path": path, "stat": "r",
                         "value": round(math.tanh(z), 4), "n": int(round(1 / v + 3))})
    return rows


def _stress_chunk(args) -> list:
    """One work unit: ``count`` literatures; per literature and scenario the planned effect
    of every target, or None when the sheet route gives no plan (the reason kept)."""
    import pandas as pd
    from pooler._threads import one_blas_thread
    from pooler.reading.pathsheet import pool_paths
    spec, selection, count, key = args
    rng = np.random.default_rng(np.random.SeedSequence(key[0], spawn_key=key[1:]))
    out = []
    with one_blas_thread():
        for _ in range(count):
            frame = pd.DataFrame(_simulate_rows(rng, spec, selection))
            try:
                ps = pool_paths(frame, spec.design_name, dict(spec.given), **spec.options)
            except (InputError, OptionError) as exc:
                out.append({"no_plan": str(exc).split(": ", 1)[-1][:200]})
                continue
            out.append({s: _targets(d) for s, d in ps.designs.items()})
    return out


@dataclass(frozen=True)
class StressCell:
    """One selection level: per scenario and target, the share of literatures whose plan was
    cautious, the median planned / true effect, and the share with no plan."""

    selection: float
    literatures: int
    no_plan: int
    cautious: dict        # scenario -> target -> share
    median_ratio: dict    # scenario -> target -> median planned / true
    reasons: tuple = ()

    def to_dict(self) -> dict:
        return {"selection": self.selection, "literatures": self.literatures,
                "no_plan": self.no_plan, "cautious": self.cautious,
                "median_ratio": self.median_ratio, "no_plan_reasons": list(self.reasons)}


@dataclass(frozen=True)
class PathStressResult:
    """The stress check of a path sheet (:func:`stress_paths`)."""

    design_name: str
    file: str
    truth: object
    targets: dict
    cells: tuple
    seed: int

    def to_dict(self) -> dict:
        return to_jsonable({"schema": "pooler.paths-stress/1", "design": self.design_name,
                            "file": self.file, "truth": self.truth.describe(),
                            "true_targets": self.targets, "seed": self.seed,
                            "cells": [c.to_dict() for c in self.cells]})

    def to_frame(self):
        import pandas as pd
        rows = []
        for c in self.cells:
            for s in SCENARIOS:
                for t in self.targets:
                    rows.append({"selection": c.selection, "scenario": s, "target": t,
                                 "cautious": c.cautious[s][t],
                                 "median_ratio": c.median_ratio[s][t],
                                 "no_plan": c.no_plan / c.literatures})
        return pd.DataFrame(rows)

    def text(self) -> str:
        """What the terminal shows (:func:`pooler.output.pathsreport.stress_check_blocks`)."""
        from pooler.output.blocks import to_text
        from pooler.output.pathsreport import stress_check_blocks
        return to_text(stress_check_blocks(self)) + "\n"


def stress_paths(ps, *, literatures: int = 40, selection=(1.0, 0.2), seed: int = 2026,
                 workers: int = 1, scheduler=None, progress=None) -> PathStressResult:
    """Simulate ``literatures`` path literatures like ``ps``'s at each ``selection`` level
    (the chance a non-significant study is published) and plan each through the sheet route.

    Parameters
    ----------
    ps : pooler.reading.pathsheet.PathSheet
        The user's pooled paths: its realistic correlations are the truth, its studies' sizes
        and each pair's between-study SD the shape of the simulated literatures.
    literatures : int
    selection : sequence of float in (0, 1]
    seed, workers, scheduler, progress
        As for :func:`pooler.planning.simdesign.simulate_power` (local processes, or a dask
        scheduler address / Client).

    Returns
    -------
    PathStressResult
    """
    from pooler.planning.parallel import ParallelRunner
    # validation
    if not isinstance(literatures, int) or literatures < 1:
        raise OptionError(f"`literatures` must be a positive whole number, not {literatures!r}")
    selection = tuple(float(p) for p in selection)
    if not selection or any(not 0 < p <= 1 for p in selection):
        raise OptionError("`selection` holds publication probabilities in (0, 1]")
    pairs, given = [], {}
    for p in ps.paths:
        if p.source != "sheet":
            given[p.path] = p.values["realistic"]
            continue
        het = p.analysis.pooled.heterogeneity
        tau = math.sqrt(max(getattr(het, "tau2", 0.0) or 0.0, 0.0))
        pairs.append((p.path, p.values["realistic"], tau,
                      tuple(u.variance for u in p.analysis.pooled.studies)))
    truth = ps.designs["realistic"]
    options = {"binary_moderator": bool(getattr(truth, "binary_moderator", False))}
    spec = _Spec(ps.design_name, tuple(pairs), given, _targets(truth), options)
    tasks = []
    for i, sel in enumerate(selection):
        for j in range(math.ceil(literatures / CHUNK)):
            tasks.append((spec, sel, min(CHUNK, literatures - j * CHUNK), (seed, i, j)))
    with ParallelRunner(workers, scheduler) as runner:
        results = runner.map(_stress_chunk, tasks, progress)
    cells = []
    per_level = math.ceil(literatures / CHUNK)
    for i, sel in enumerate(selection):
        lits = [lit for chunk in results[i * per_level:(i + 1) * per_level] for lit in chunk]
        plans = [lit for lit in lits if "no_plan" not in lit]
        reasons = tuple(sorted({lit["no_plan"] for lit in lits if "no_plan" in lit}))
        cautious, ratio = {}, {}
        for s in SCENARIOS:
            cautious[s], ratio[s] = {}, {}
            for t, true in spec.targets.items():
                got = np.array([lit[s][t] for lit in plans])
                cautious[s][t] = float(np.mean(got <= true * (1 + 1e-9))) if got.size else 0.0
                ratio[s][t] = float(np.median(got / true)) if got.size and true > 0 else 0.0
        cells.append(StressCell(sel, len(lits), len(lits) - len(plans), cautious, ratio,
                                reasons))
    return PathStressResult(ps.design_name, ps.file, truth, spec.targets, tuple(cells), seed)
