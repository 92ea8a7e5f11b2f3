"""The vectorised leave-one-out and cumulative tables against one fit per row.

pooler.evidence.pooling fits every leave-one-out subset (and every cumulative prefix) in one
vectorised pass (sums before and after each study; a power series in τ² around a grid
point for the polish). Each row must equal what ``random_effects`` gives on that row's
studies, for every τ² estimator (REML and ML: Viechtbauer 2005, eqs. 6 and 8; Paule &
Mandel 1982; DerSimonian & Laird 1986) and both intervals (Hartung & Knapp 2001 / Sidik &
Jonkman 2002; Wald), within 1e-10.
"""
from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from pooler.evidence.effects import Effects, Unit
from pooler.evidence.pooling import ESTIMATORS, INTERVALS, _row, pool


def _effects(y, v, years):
    units = tuple(Unit(label=f"S{i}", effect=float(a), variance=float(b), n_total=100.0,
                       n1=50.0, n2=50.0, design="between", rows=(i + 2,), year=years[i],
                       subgroup=None)
                  for i, (a, b) in enumerate(zip(y, v)))
    return Effects(metric="g", rows=(), units=units, assumptions=(), warnings=(),
                   file="test", sha256="", within_r=0.5, sample_r=0.5)


def _literatures(n, seed):
    rng = np.random.default_rng(seed)
    for i in range(n):
        k = int(rng.integers(3, 45))
        n1 = rng.integers(5, 300, k).astype(float)
        n2 = rng.integers(5, 300, k).astype(float)
        if i % 3 == 0:                 # one very large study among small ones
            j = int(rng.integers(k))
            n1[j] = n2[j] = 20000.0
        tau = rng.choice([0.0, 0.1, 0.3, 0.8])
        d = rng.normal(rng.normal(0.3, tau, k), np.sqrt(1 / n1 + 1 / n2))
        v = 1 / n1 + 1 / n2 + d ** 2 / (2 * (n1 + n2))
        years = [int(x) for x in rng.integers(1990, 2025, k)]   # ties on purpose
        yield d, v, years


def _fields(r):
    # a one-study row has neither τ² nor I² (NotEstimable, falsy): -1 stands for it
    return [r.k, r.estimate, r.ci_low, r.ci_high, r.tau2 if r.tau2 or r.tau2 == 0 else -1.0,
            float(r.i2) if r.i2 else -1.0]


@pytest.mark.parametrize("estimator", ESTIMATORS)
@pytest.mark.parametrize("interval", INTERVALS)
def test_influence_tables_equal_one_fit_per_row(estimator, interval):
    for y, v, years in _literatures(12, seed=10 * ESTIMATORS.index(estimator)
                                          + INTERVALS.index(interval)):
        k = len(y)
        res = pool(_effects(y, v, years), estimator, interval)
        idx = np.arange(k)
        for i, row in enumerate(res.leave_one_out):
            ref = _row("", y[idx != i], v[idx != i], estimator, interval, 0.95)
            assert_allclose(_fields(row), _fields(ref), rtol=1e-10, atol=1e-10)
        order = np.argsort(np.array(years, float), kind="stable")
        for j, row in enumerate(res.cumulative):
            ref = _row("", y[order[:j + 1]], v[order[:j + 1]], estimator, interval, 0.95)
            assert_allclose(_fields(row), _fields(ref), rtol=1e-10, atol=1e-10)
        assert res.leave_one_out[0].label == "without S0"
