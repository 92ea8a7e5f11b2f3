"""Speed figures for pooler (issue 17), each with its goal and the ratio measured in this run.

Run:  python tests/benchmarks/bench.py            (about six minutes; add --quick to skip
                                                   the model-average and mediation scripts)

Whole-process timings are medians of repeated runs, interleaved with their reference so that
a change in the machine's load hits both; the load average is printed. Goals (checked here by
eye, never by timed assertions in the test suite):
  pooler --help                                     <= 0.3 s
  pooler plan --effect 0.3                          <= 0.6 s
  pooler demo / python -c "import numpy, scipy.special, matplotlib.pyplot"   <= 1.6 x
  pooler run, k = 1,000 / k = 10 (invented sheets)  <= 2 x; report.html under a few MB
  pooler pool, k = 10,000 / k = 10                  <= 2 x
  results.json size at k = 10,000                   (reported; was 14 MB)
  1,000-cell planning grid                          >= 50 x faster than a statsmodels
                                                       solve_power loop, identical integers
  REML, k = 100,000                                 <= 1 s   (and its ratio to statsmodels DL)
  3PSM, k = 2,000                                   <= 1 s
  whole bias suite, k = 50                          (reported)
  Bayesian model average, k = 20 / k = 1,000        <= 0.3 s / <= 3 s (bench_bma.py)
  mediation simulation goals                        (bench_mediation.py)
BLAS runs on one thread inside pooler's own numerical work (pooler/_threads.py), as a user
gets it; this script limits the threads the same way before numpy loads.
"""
from __future__ import annotations

import csv
import math
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, ROOT)
os.environ["PYTHONPATH"] = ROOT + os.pathsep + os.environ.get("PYTHONPATH", "")
# a user's `pip install .` compiles pooler's bytecode; with PYTHONDONTWRITEBYTECODE set (as on
# some CI machines) every run would compile pooler's modules again, which the floor's
# libraries never do (their bytecode came with the install)
os.environ.pop("PYTHONDONTWRITEBYTECODE", None)

from pooler._threads import limit_before_numpy  # noqa: E402

limit_before_numpy()

import numpy as np  # noqa: E402

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


def _once(cmd):
    t = time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True)
    return time.perf_counter() - t


def paired(cmd_a, cmd_b, n=5):
    """Median wall times of two commands run alternately (a, b, a, b, ...), after one
    warm-up run of each: a burst of load from other jobs falls on both."""
    _once(cmd_a)
    _once(cmd_b)
    ta, tb = [], []
    for _ in range(n):
        ta.append(_once(cmd_a))
        tb.append(_once(cmd_b))
    return statistics.median(ta), statistics.median(tb)


def ratio_line(name, t_a, t_b, goal):
    r = t_a / t_b
    verdict = "meets" if r <= goal else f"misses by {r / goal - 1:.0%}"
    RESULTS.append((name, t_a, f"goal <= {goal:g} x", f"{r:.2f} x"))
    print(f"{name:<44} {t_a:9.3f} s  / {t_b:.3f} s = {r:.2f} x  (goal <= {goal:g} x: "
          f"{verdict})", flush=True)


def write_sheet(path, k, seed=7):
    """An invented literature of k two-group studies (d with group sizes and a year)."""
    rng = np.random.default_rng(seed)
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["study", "stat", "value", "n1", "n2", "year"])
        for i in range(k):
            n1, n2 = (int(x) for x in rng.integers(10, 200, 2))
            d = rng.normal(0.3, 0.2) + rng.normal(0, np.sqrt(1 / n1 + 1 / n2))
            w.writerow([f"Invented {i}", "d", round(float(d), 4), n1, n2, 1990 + i % 30])


def stage_times(sheet):
    """Where `pooler pool` spends its time at this k: each stage once, in this process."""
    from pooler.evidence.audit import audit_literature
    from pooler.evidence.bias import bias_suite
    from pooler.evidence.effects import convert
    from pooler.evidence.pooling import pool
    from pooler.planning.scenarios import make_scenarios
    from pooler.reading.sheet import read_sheet
    parts = []

    def timed(name, fn, *args):
        t = time.perf_counter()
        out = fn(*args)
        parts.append(f"{name} {time.perf_counter() - t:.2f} s")
        return out
    sh = timed("read", read_sheet, sheet)
    eff = timed("convert", convert, sh)
    pooled = timed("pool", pool, eff)
    bias = timed("bias suite", bias_suite, pooled)
    scen = timed("model average and scenarios", make_scenarios, pooled, bias)
    timed("audit", audit_literature, pooled, scen.realistic.effect)
    print(f"{'  stages at k = 10,000 (in process)':<44} {'; '.join(parts)}", flush=True)


def main():
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python "
          f"{platform.python_version()}, {platform.platform()}; load average "
          f"{os.getloadavg()}")
    py = sys.executable
    pooler = [py, "-m", "pooler.cli"]

    # --- start-up
    report("pooler --help", wall(pooler + ["--help"]), "goal <= 0.3 s")
    report("pooler plan --effect 0.3 --design two-group",
           wall(pooler + ["plan", "--effect", "0.3", "--design", "two-group"]), "goal <= 0.6 s")

    # --- the demo against the floor of any job that draws
    floor = [py, "-c", "import numpy, scipy.special, matplotlib.pyplot"]
    with tempfile.TemporaryDirectory() as d:
        t_demo, t_floor = paired(pooler + ["demo", "--out", os.path.join(d, "o"), "--force"],
                                 floor)
    ratio_line("pooler demo / import numpy, scipy.special, mpl.pyplot", t_demo, t_floor, 1.6)
    probe = ("import sys, os, tempfile\n"
             "from pooler.cli import main\n"
             "d = tempfile.mkdtemp()\n"
             "try:\n    main(['demo', '--out', os.path.join(d, 'o')])\nexcept SystemExit:\n    pass\n"
             "print(','.join(sorted(m for m in ('scipy.stats', 'statsmodels', 'pandas') "
             "if m in sys.modules)) or 'none')")
    heavy = subprocess.run([py, "-c", probe], check=True, capture_output=True,
                           text=True).stdout.strip().splitlines()[-1]
    print(f"{'  loaded by the demo of scipy.stats, statsmodels, pandas':<44} {heavy}")

    # --- the whole job and pooling as k grows (invented sheets)
    with tempfile.TemporaryDirectory() as d:
        sheets = {}
        for k in (10, 1000, 10_000):
            sheets[k] = os.path.join(d, f"invented_k{k}.csv")
            write_sheet(sheets[k], k)
        out = {k: os.path.join(d, f"out{k}") for k in (10, 1000)}
        t1000, t10 = paired(pooler + ["run", sheets[1000], "--out", out[1000], "--force"],
                            pooler + ["run", sheets[10], "--out", out[10], "--force"], 3)
        ratio_line("pooler run, k = 1,000 / k = 10", t1000, t10, 2.0)
        for name in ("report.html", "results.json", "forest.png"):
            print(f"{'  ' + name + ' at k = 1,000':<44} "
                  f"{os.path.getsize(os.path.join(out[1000], name)) / 1e6:9.2f} MB")
        p10k, p10 = paired(pooler + ["pool", sheets[10_000]], pooler + ["pool", sheets[10]], 3)
        ratio_line("pooler pool, k = 10,000 / k = 10", p10k, p10, 2.0)
        stage_times(sheets[10_000])
        o10k = os.path.join(d, "out10k")
        t = _once(pooler + ["run", sheets[10_000], "--out", o10k, "--force"])
        print(f"{'pooler run, k = 10,000 (reported)':<44} {t:9.3f} s; results.json "
              f"{os.path.getsize(os.path.join(o10k, 'results.json')) / 1e6:.1f} MB, "
              f"report.html {os.path.getsize(os.path.join(o10k, 'report.html')) / 1e6:.1f} MB")

    # --- the planning grid
    from statsmodels.stats.power import TTestIndPower
    from pooler.planning.power import n_for_power
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
    from pooler.evidence.pooling import random_effects
    rng = np.random.default_rng(1)
    k = 100_000
    v = rng.uniform(0.01, 0.2, k)
    y = rng.normal(0.3, 0.2, k) + rng.normal(0, np.sqrt(v))
    t_reml = best_of(lambda: random_effects(y, v, "reml", "hksj"), 3)
    t_dl = best_of(lambda: combine_effects(y, v, method_re="chi2"), 3)
    report("REML + HKSJ, k = 100,000", t_reml, "goal <= 1 s", t_dl, "statsmodels DL")

    # --- selection model and the bias suite
    from pooler.evidence.bias import bias_suite, selection_model
    from pooler.evidence.pooling import pool
    sys.path.insert(0, os.path.join(HERE, ".."))
    from test_bias import literature
    from test_pooling import make_effects
    y2, v2, _ = literature(2000, delta=0.2, publish_ns=0.3, seed=3)
    report("3PSM fit, k = 2,000", best_of(lambda: selection_model(y2, v2), 3), "goal <= 1 s")
    y3, v3, _ = literature(50, delta=0.2, publish_ns=0.3, seed=4)
    pooled = pool(make_effects(y3, v3))
    report("whole bias suite, k = 50", best_of(lambda: bias_suite(pooled), 3), "")

    # --- the model average and the mediation simulations: their own scripts
    if "--quick" not in sys.argv:
        for script in ("bench_bma.py", "bench_mediation.py"):
            path = os.path.join(HERE, script)
            if os.path.exists(path):
                print(f"\n$ python tests/benchmarks/{script}", flush=True)
                subprocess.run([py, path], check=False,
                               env=dict(os.environ, PYTHONPATH=ROOT + os.pathsep
                                        + os.environ.get("PYTHONPATH", "")))
    print(f"\nload average at the end: {os.getloadavg()}")


if __name__ == "__main__":
    main()
