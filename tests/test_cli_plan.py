"""`pooler plan --effect ...`: output, JSON contract, and the quick-start promise."""
from __future__ import annotations

import json
import subprocess
import sys


def test_plan_prints_table(run_cli):
    res = run_cli("plan", "--effect", "0.3", "--design", "two-group")
    assert res.exit_code == 0
    line = next(ln for ln in res.stdout.splitlines() if ln.startswith("given"))
    assert "176" in line and "352" in line


def test_plan_json_contract(run_cli):
    res = run_cli("plan", "--effect", "0.35", "--design", "paired", "--n", "120",
                  "--effect-sd", "0.12", "--attrition", "0.1", "--json")
    assert res.exit_code == 0
    doc = json.loads(res.stdout)
    assert doc["schema"] == "pooler.plan/1" and doc["design"] == "paired"
    assert doc["alpha"] == 0.05 and doc["tails"] == 2
    assert len(doc["rows"]) == 3
    assert doc["fixed_n"]["n_total"] == 120
    assert doc["assurance"]["rows"][0]["target"] == 0.8


def test_plan_correlation_defaults_to_r(run_cli):
    res = run_cli("plan", "--effect", "0.3", "--design", "correlation", "--power", "0.8",
                  "--json")
    doc = json.loads(res.stdout)
    assert doc["metric"] == "r" and doc["rows"][0]["n_total"] == 85


def test_plan_unreachable_is_said(run_cli):
    res = run_cli("plan", "--effect", "-0.2")
    assert res.exit_code == 0 and "cannot be reached" in res.stdout


def test_plan_bad_option_exit_2(run_cli):
    res = run_cli("plan", "--effect", "0.3", "--attrition", "1.5")
    assert res.exit_code == 2 and "attrition" in res.stderr
    res = run_cli("plan", "--effect", "1.5", "--design", "correlation")
    assert res.exit_code == 2 and "correlation" in res.stderr


def test_quick_plan_imports_no_heavy_library():
    code = ("import sys; from pooler.cli import main\n"
            "try:\n    main(['plan', '--effect', '0.3'])\nexcept SystemExit:\n    pass\n"
            "heavy = [m for m in ('pandas', 'statsmodels', 'matplotlib', 'scipy.stats') "
            "if m in sys.modules]\nprint('HEAVY', heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "HEAVY []" in out.stdout, out.stdout


def test_help_imports_no_numpy():
    code = ("import sys; from pooler.cli import main\n"
            "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
            "print('NUMPY', 'numpy' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "NUMPY False" in out.stdout


def test_plan_table_writers(run_cli):
    import csv
    import io
    res = run_cli("plan", "--effect", "0.3", "--table", "csv")
    rows = list(csv.DictReader(io.StringIO(res.stdout)))
    assert len(rows) == 3 and rows[0]["n_per_group"] == "176" and rows[0]["n_total"] == "352"
    md = run_cli("plan", "--effect", "0.3", "--table", "markdown").stdout
    lines = md.strip().splitlines()
    assert lines[0].startswith("| scenario |") and lines[1].startswith("|---|")
    assert "| given | 0.300 | 0.300 | 176 | 352 |" in lines[2]


def test_cli_design_list_is_the_power_modules():
    from pooler.cli import _DESIGNS
    from pooler.planning.power import DESIGNS
    assert _DESIGNS == DESIGNS
