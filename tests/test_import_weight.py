"""The whole job (`pooler demo`, `pooler run`) loads neither scipy.stats nor statsmodels
(nor pandas): t, F, chi-square and normal quantiles and tails come from scipy.special, the
two-column least-squares fits of the bias suite are in closed form, and the selection
model's Hessian is a finite-difference formula of pooler's own. Those libraries cost more
to import than the whole analysis (scipy.stats about 1 s on a 2-core machine)."""
import os
import subprocess
import sys

import pytest

PROBE = """
import os, sys, tempfile
from pooler.cli import main
out = os.path.join(tempfile.mkdtemp(), "o")
args = sys.argv[1:] + ["--out", out]
try:
    main(args)
except SystemExit as e:
    assert not e.code, e.code
assert os.path.exists(os.path.join(out, "results.json"))
heavy = sorted(m for m in sys.modules
               if m in ("pandas", "statsmodels", "patsy") or m.startswith("scipy.stats"))
print("HEAVY=" + ",".join(heavy))
"""


@pytest.mark.parametrize("args", [["demo"], ["run", "DEMO"]])
def test_whole_job_loads_no_scipy_stats_statsmodels_or_pandas(args, demo_path):
    args = [str(demo_path) if a == "DEMO" else a for a in args]
    env = dict(os.environ, MPLBACKEND="Agg")
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    r = subprocess.run([sys.executable, "-c", PROBE, *args], capture_output=True, text=True,
                       env=env, timeout=300)
    assert r.returncode == 0, r.stderr[-2000:]
    line = [x for x in r.stdout.splitlines() if x.startswith("HEAVY=")][-1]
    assert line == "HEAVY=", line
