"""Speed figures for simulated mediation and moderation power (pooler.planning.simdesign).

Run:  python tests/benchmarks/bench_mediation.py          (about a minute)

Goals (checked here by eye, never by timed assertions in the test suite):
  simple mediation, joint significance, 5,000 replications at one n     <= 1 s
  full n search, parallel mediation with 2 mediators, three scenarios   <= 30 s on 2 cores
Also printed: the same search with the Monte Carlo CI, one Monte Carlo CI and one bootstrap
power estimate, and the machine's load (figures on a busy machine are slower).
"""
from __future__ import annotations

import os
import platform
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", ".."))

from pooler._threads import limit_before_numpy  # noqa: E402

limit_before_numpy()

from pooler.planning.simdesign import (ParallelMediation, SimpleMediation,  # noqa: E402
                                       plan_paths, simulate_power)


def timed(label, fn, goal=""):
    t = time.perf_counter()
    out = fn()
    s = time.perf_counter() - t
    print(f"{label:<62} {s:8.2f} s  {goal}", flush=True)
    return out


def scenarios():
    # invented optimistic / realistic / pessimistic paths for a two-mediator model
    return {"optimistic": ParallelMediation((0.4, 0.32), (0.4, 0.32), 0.1),
            "realistic": ParallelMediation((0.3, 0.24), (0.3, 0.24), 0.1),
            "pessimistic": ParallelMediation((0.2, 0.16), (0.25, 0.2), 0.1)}


def main():
    print(f"python {platform.python_version()}, {os.cpu_count()} cores, "
          f"load average {os.getloadavg()[0]:.1f}")
    d = SimpleMediation(0.3, 0.3)
    simulate_power(d, 200, test="joint", reps=500, seed=1)  # warm-up (imports)
    for w in (1, 2):
        r = timed(f"simple mediation, joint, 5,000 reps at n = 200, {w} worker(s)",
                  lambda: simulate_power(d, 200, test="joint", reps=5000, seed=1, workers=w),
                  "goal <= 1 s")
    print(f"    power {r['X-M-Y'].power:.3f} (MC SE {r['X-M-Y'].mc_se:.3f})")
    timed("simple mediation, Monte Carlo CI (1,000 draws), 5,000 reps, 2 workers",
          lambda: simulate_power(d, 200, test="monte-carlo", reps=5000, seed=1, workers=2))
    timed("simple mediation, bootstrap (1,000 resamples), 400 reps, 2 workers",
          lambda: simulate_power(d, 200, test="bootstrap", reps=400, seed=1, workers=2))
    for test in ("joint", "monte-carlo"):
        res = timed(f"n search, parallel mediation (2 M), 3 scenarios, {test}, 2 workers",
                    lambda: plan_paths(scenarios(), test=test, workers=2, seed=2026),
                    "goal <= 30 s" if test == "joint" else "")
        for r in res:
            s = [x for x in r.solutions if x.goal == 0.8]
            print("    " + r.label + ": " + ", ".join(
                f"{x.target} n={x.n} ({x.interval.low:.0f}-{x.interval.high:.0f})"
                for x in s))


if __name__ == "__main__":
    main()
