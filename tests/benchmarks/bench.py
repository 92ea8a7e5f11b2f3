"""Speed figures for pooler, each with the ratio to its reference measured in the same run.

Run:  python tests/benchmarks/bench.py            (about a minute)

Goals (checked here by eye, never by timed assertions in the test suite):
  pooler --help                      <= 0.3 s
  pooler plan --effect 0.3           <= 0.6 s
  pooler demo                        <= 1.3 x the bare import time of the libraries it loads
  1,000-cell planning grid           >= 50 x faster than a statsmodels solve_power loop,
                                        identical integers
  REML, k = 100,000                  <= 1 s   (and its ratio to statsmodels DL)
  3PSM, k = 2,000                    <= 1 s
  whole bias suite, k = 50           (reported)
"""
from __future__ import annotations

import math
import os
import platform
import subprocess
import sys
import tempfile
import time

import numpy as np

RESULTS = []


def report(name, seconds, goal="", ref=None, ref_name=""):
    ratio = f"{ref / seconds:8.1f}x vs {ref_name}" if ref else ""
    RESULTS.append((name, seconds, goal, ratio))
    print(f"{name:<44} {seconds:9.3f} s  {goal:<14} {ratio}", flush=True)


def best_of(fn, n=5):
    times = []
    for _ in range(n):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def wall(cmd, n=5):
    return best_of(lambda: subprocess.run(cmd, check=True, capture_output=True), n)


def main():
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python "
          f"{platform.python_version()}, {platform.platform()}")
    py = sys.executable
    pooler = [py, "-m", "pooler.cli"]

    # --- start-up
    report("pooler --help", wall(pooler + ["--help"]), "goal <= 0.3 s")
    report("pooler plan --effect 0.3 --design two-group",
           wall(pooler + ["plan", "--effect", "0.3", "--design", "two-group"]), "goal <= 0.6 s")

    # --- the demo against the import time of what it loads
    with tempfile.TemporaryDirectory() as d:
        t_demo = wall(pooler + ["demo", "--out", os.path.join(d, "o"), "--force"], 3)
    probe = ("import sys, runpy, tempfile, os\n"
             "from pooler.cli import main\n"
             "d = tempfile.mkdtemp()\n"
             "try:\n    main(['demo', '--out', os.path.join(d, 'o')])\nexcept SystemExit:\n    pass\n"
             "mods = sorted({m.split('.')[0] for m in sys.modules} & "
             "{'numpy', 'scipy', 'pandas', 'statsmodels', 'matplotlib', 'click', 'openpyxl'})\n"
             "subs = sorted(m for m in sys.modules if m.startswith(('scipy.', 'statsmodels.')) "
             "and m.count('.') == 1 and not m.split('.')[1].startswith('_'))\n"
             "print(','.join(mods + subs))")
    loaded = subprocess.run([py, "-c", probe], check=True, capture_output=True,
                            text=True).stdout.strip().splitlines()[-1].split(",")
    imports = "; ".join(f"import {m}" for m in loaded) + "; import matplotlib.figure"
    t_imp = wall([py, "-c", imports], 3)
    report("pooler demo (whole job, files written)", t_demo,
           f"goal <= {1.3 * t_imp:.2f} s", None)
    print(f"{'  bare import of ' + str(len(loaded)) + ' modules it loads':<44} {t_imp:9.3f} s  "
          f"ratio demo / imports = {t_demo / t_imp:.2f} (goal <= 1.3)")

    # --- the planning grid
    from statsmodels.stats.power import TTestIndPower
    from pooler.power import n_for_power
    d = np.linspace(0.15, 1.2, 10)
    pw = np.linspace(0.5, 0.95, 10)
    al = np.linspace(0.005, 0.1, 10)
    D, P, A = np.meshgrid(d, pw, al, indexing="ij")
    t_ours = best_of(lambda: n_for_power(D, P, "two-group", A), 3)
    ours = n_for_power(D, P, "two-group", A).n
    ref = TTestIndPower()
    t0 = time.perf_counter()
    theirs = np.array([math.ceil(ref.solve_power(effect_size=x, power=y, alpha=z) - 1e-6)
                       for x, y, z in zip(D.ravel(), P.ravel(), A.ravel())]).reshape(D.shape)
    t_sm = time.perf_counter() - t0
    same = int((ours == theirs).sum())
    report("1,000-cell grid (effects x powers x alphas)", t_ours, "goal >= 50x", t_sm,
           "statsmodels solve_power loop")
    print(f"{'  identical integers':<44} {same} of {ours.size}")

    # --- REML on 100,000 studies
    from statsmodels.stats.meta_analysis import combine_effects
    from pooler.pooling import random_effects
    rng = np.random.default_rng(1)
    k = 100_000
    v = rng.uniform(0.01, 0.2, k)
    y = rng.normal(0.3, 0.2, k) + rng.normal(0, np.sqrt(v))
    t_reml = best_of(lambda: random_effects(y, v, "reml", "hksj"), 3)
    t_dl = best_of(lambda: combine_effects(y, v, method_re="chi2"), 3)
    report("REML + HKSJ, k = 100,000", t_reml, "goal <= 1 s", t_dl, "statsmodels DL")

    # --- selection model and the bias suite
    from pooler.bias import bias_suite, selection_model
    from pooler.pooling import pool
    sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
    from test_bias import literature
    from test_pooling import make_effects
    y2, v2, _ = literature(2000, delta=0.2, publish_ns=0.3, seed=3)
    report("3PSM fit, k = 2,000", best_of(lambda: selection_model(y2, v2), 3), "goal <= 1 s")
    y3, v3, _ = literature(50, delta=0.2, publish_ns=0.3, seed=4)
    pooled = pool(make_effects(y3, v3))
    report("whole bias suite, k = 50", best_of(lambda: bias_suite(pooled), 3), "")


if __name__ == "__main__":
    main()
