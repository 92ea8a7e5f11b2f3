"""How `pooler pool` and the pooling stage grow with the number of studies.

Run:  python tests/benchmarks/pool_scaling.py        (about a minute)

Prints, each measured in this run (medians of 3; invented literatures, seeded):
  pooler pool at k = 10,000 / at k = 10        goal <= 2 x (whole process, wall and CPU)
  pooling stage alone at k = 10,000 / k = 10   (pooler.evidence.pooling.pool, with both tables)
  leave-one-out at k = 1,000: one vectorised pass vs one fit per row, same numbers
No timed assertions: figures only.
"""
from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench import write_sheet  # noqa: E402  (the same invented literature as bench.py)


def run_cli(path):
    env = dict(os.environ, PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    t0, c0 = time.perf_counter(), os.times()
    subprocess.run([sys.executable, "-m", "pooler.cli", "pool", path], env=env, check=True,
                   stdout=subprocess.DEVNULL)
    c1 = os.times()
    return time.perf_counter() - t0, (c1.children_user + c1.children_system
                                      - c0.children_user - c0.children_system)


def main():
    sys.path.insert(0, ROOT)
    from pooler import convert, read_sheet
    from pooler.evidence.pooling import _row, pool

    with tempfile.TemporaryDirectory() as tmp:
        paths = {}
        for k in (10, 10_000):
            paths[k] = os.path.join(tmp, f"k{k}.csv")
            write_sheet(paths[k], k)
        wall, cpu = {}, {}
        for k in (10, 10_000):
            runs = [run_cli(paths[k]) for _ in range(3)]
            wall[k] = statistics.median(r[0] for r in runs)
            cpu[k] = statistics.median(r[1] for r in runs)
            print(f"pooler pool, k = {k:>6,}: {wall[k]:.2f} s wall, {cpu[k]:.2f} s CPU")
        print(f"  ratio k = 10,000 / k = 10: {wall[10_000] / wall[10]:.2f} x wall, "
              f"{cpu[10_000] / cpu[10]:.2f} x CPU (goal <= 2 x)")

        stage = {}
        for k in (10, 10_000):
            eff = convert(read_sheet(paths[k]))
            pool(eff)                                   # imports and caches out of the way
            times = []
            for _ in range(3):
                t0 = time.perf_counter()
                pool(eff)
                times.append(time.perf_counter() - t0)
            stage[k] = statistics.median(times)
            print(f"pooling stage, k = {k:>6,}: {stage[k] * 1e3:.1f} ms")
        print(f"  ratio: {stage[10_000] / stage[10]:.1f} x")

        write_sheet(os.path.join(tmp, "k1000.csv"), 1000)
        eff = convert(read_sheet(os.path.join(tmp, "k1000.csv")))
        y = np.array([u.effect for u in eff.units])
        v = np.array([u.variance for u in eff.units])
        t0 = time.perf_counter()
        res = pool(eff)
        t1 = time.perf_counter()
        idx = np.arange(len(y))
        loop = [_row("", y[idx != i], v[idx != i], "reml", "hksj", 0.95) for i in range(len(y))]
        t2 = time.perf_counter()
        diff = max(abs(a.estimate - b.estimate) + abs(a.tau2 - b.tau2)
                   for a, b in zip(res.leave_one_out, loop))
        print(f"leave-one-out, k = 1,000: whole pool() {t1 - t0:.2f} s; one fit per row "
              f"{t2 - t1:.2f} s; largest difference {diff:.1e}")


if __name__ == "__main__":
    main()
