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


def test_pool_text_summarises_long_tables_and_audit_powers_are_vectorised(tmp_path):
    # above report.TEXT_MAX_ROWS studies the text tables print TEXT_SHOWN_ROWS chosen rows
    # (largest weights; the omissions that move the estimate most; evenly spaced steps and
    # power ranks) and say so; the audit's powers equal one power_at call per study
    import numpy as np

    from pooler import convert, read_sheet
    from pooler.evidence.audit import unit_powers
    from pooler.pipeline import analyse
    from pooler.planning.power import Design, power_at
    from pooler.output.report import TEXT_MAX_ROWS, TEXT_SHOWN_ROWS, pooled_text, scenarios_text
    rng = np.random.default_rng(3)
    k = TEXT_MAX_ROWS + 50
    lines = ["study,stat,value,n1,n2,year"]
    for i in range(k):
        n1, n2 = rng.integers(10, 120, 2)
        lines.append(f"S{i},d,{rng.normal(0.3, 0.3):.4f},{n1},{n2},{1990 + i % 20}")
    path = tmp_path / "invented.csv"
    path.write_text("\n".join(lines) + "\n")
    a = analyse(path)
    text = pooled_text(a.pooled, a.effects)
    assert f"the {TEXT_SHOWN_ROWS} of {k:,} with the largest weight" in text
    assert f"the {TEXT_SHOWN_ROWS} of {k:,} omissions that move the estimate most" in text
    loo = a.pooled.leave_one_out
    moved = max(loo, key=lambda r: abs(r.estimate - a.pooled.pooled.estimate))
    assert f"{moved.label} " in text
    assert f"of {k:,} studies at evenly spaced ranks of power" in scenarios_text(a.scenarios,
                                                                               a.audit)
    units = convert(read_sheet(path)).units
    rows = unit_powers(units, 0.25, "g")
    one_by_one = [float(power_at(0.25, u.n1, Design("two-group", ratio=u.n2 / u.n1)))
                  for u in units]
    assert [r.power for r in rows] == one_by_one
