"""Speed of the Bayesian model average (pooler.evidence.bma.model_average): prints figures only.

    python tests/benchmarks/bench_bma.py

Targets from issue 13: the whole model average (20 models) in ≤ 0.3 s for k = 20 and ≤ 3 s
for k = 1,000 on the 2-core development machine. Also printed: k = 10,000 (the SE groups of
pooler.evidence.bma.GROUP_ABOVE_K) and the sensitivity line's re-weighting to the wider priors
(pooler.evidence.bma.reweighted), which replaced a second fit. Literatures are simulated (seeded): two-group
studies with 20-100 per group, δ = 0.3, τ = 0.1, non-significant results published with
probability 0.3.
"""
from __future__ import annotations

import math
import statistics
import time

import numpy as np


def literature(rng, k):
    ys, vs = [], []
    while len(ys) < k:
        n = rng.integers(20, 101)
        v = 2 / n
        y = rng.normal(0.3 + rng.normal(0, 0.1), math.sqrt(v))
        if y / math.sqrt(v) > 1.96 or rng.random() < 0.3:
            ys.append(y)
            vs.append(v)
    return np.array(ys), np.array(vs)


def main():
    from threadpoolctl import threadpool_limits
    from pooler.evidence.bma import WIDE_PRIORS, model_average, reweighted
    reweighted(model_average([0.3, 0.2], [0.05, 0.04]), WIDE_PRIORS)  # imports and caches
    rng = np.random.default_rng(20261202)
    print("k      runs  median s   max s   re-weighted to the wider priors: median s")
    with threadpool_limits(1):
        for k, runs in [(1, 5), (5, 5), (10, 5), (20, 7), (40, 5), (100, 3), (1000, 3),
                        (10_000, 1)]:
            times, rw = [], []
            for _ in range(runs):
                y, v = literature(rng, k)
                t = time.perf_counter()
                avg = model_average(y, v)
                times.append(time.perf_counter() - t)
                t = time.perf_counter()
                reweighted(avg, WIDE_PRIORS)
                rw.append(time.perf_counter() - t)
            print(f"{k:<6} {runs:>4}  {statistics.median(times):8.3f}  {max(times):6.3f}"
                  f"   {statistics.median(rw):8.3f}")


if __name__ == "__main__":
    main()
