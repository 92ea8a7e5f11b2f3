"""`pooler paths`: simulated power for mediation and moderation from the command line."""
from __future__ import annotations

import json
import subprocess
import sys

import pytest


def test_help_has_an_example(run_cli):
    res = run_cli("paths", "--help")
    assert res.exit_code == 0
    assert "Example:" in res.output and "--design" in res.output


def test_cli_import_does_not_load_numpy():
    code = "import sys, pooler.cli; print('numpy' in sys.modules, 'scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    assert out == ["False", "False"]


def test_power_at_fixed_n(run_cli, tmp_path):
    out = tmp_path / "at_n"
    res = run_cli("paths", "--design", "simple-mediation", "--a", 0.3, "--b", 0.3,
                  "--test", "sobel", "--n", 100, "--reps", 500, "--workers", 1, "--out", out)
    assert res.exit_code == 0, res.output
    assert "X-M-Y" in res.output and "n = 100" in res.output
    assert "low-powered" in res.output
    # --out writes the report of the power at n too (no figures: there is no curve)
    assert sorted(p.name for p in out.iterdir() if not p.name.startswith(".")) == [
        "report.html", "report.md", "results.json"]
    assert json.loads((out / "results.json").read_text())["schema"] == "pooler.paths-power/1"
    assert "| X-M-Y | " in (out / "report.md").read_text()


def test_search_json_and_files(run_cli, tmp_path):
    out = tmp_path / "plan"
    res = run_cli("paths", "--design", "parallel-mediation", "--a", 0.5, "--a", 0.4,
                  "--b", 0.5, "--b", 0.4, "--test", "joint", "--power", 0.8, "--reps", 200,
                  "--workers", 1, "--json", "--out", out)
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    assert doc["schema"] == "pooler.paths/1"
    sols = doc["scenarios"][0]["solutions"]
    assert [s["target"] for s in sols] == ["X-M1-Y", "X-M2-Y", "all indirect"]
    assert all(isinstance(s["n"], int) and s["n_interval"]["low"] <= s["n"] for s in sols)
    assert sorted(p.name for p in out.iterdir() if not p.name.startswith(".")) == [
        "power_curve.png", "report.html", "report.md", "results.json"]
    assert "## Methods" in (out / "report.md").read_text()
    assert json.loads((out / "results.json").read_text()) == doc   # one document


def test_moderation_table(run_cli):
    res = run_cli("paths", "--design", "moderation", "--x-effect", 0.3, "--interaction", 0.3,
                  "--binary-moderator", "--power", 0.8, "--reps", 200, "--workers", 1)
    assert res.exit_code == 0, res.output
    assert "XZ-Y" in res.output and "binary moderator" in res.output


@pytest.mark.parametrize("args, fragment", [
    (["--design", "moderation", "--a", "0.3", "--x-effect", "0.2", "--interaction", "0.1"],
     "--a does not apply to moderation"),
    (["--design", "moderation", "--slope-high", "0.3"], "both --slope-high and --slope-low"),
    (["--design", "serial-mediation", "--a", "0.3", "--b", "0.3", "--b", "0.3"], "--m1-m2"),
    (["--design", "simple-mediation", "--a", "0.3"], "needs the path M-Y"),
    (["--design", "simple-mediation", "--a", "0.3", "--a", "0.2", "--b", "0.3"],
     "one --a and one --b"),
    (["--design", "parallel-mediation", "--a", "0.3", "--a", "0.2", "--b", "0.3"],
     "as many --a as --b"),
    (["--design", "simple-mediation", "--a", "0.3", "--b", "0.3", "--interaction", "0.1"],
     "moderation only"),
    (["--design", "simple-mediation", "--a", "0.9", "--b", "0.9", "--direct", "0.5"],
     "impossible paths"),
])
def test_mistakes_are_one_line_errors(run_cli, args, fragment):
    res = run_cli("paths", *args)
    assert res.exit_code == 2
    assert fragment in res.stderr


def test_paths_file_gives_one_plan_per_scenario(run_cli, tmp_path):
    # invented scenario values for a simple mediation; the direct path comes from the option
    f = tmp_path / "paths.csv"
    f.write_text("Scenario,Path,Value\nhigh,X-M,0.5\nhigh,M-Y,0.5\n"
                 "low,X-M,0.4\nlow,M-Y,0.4\n", encoding="utf-8")
    res = run_cli("paths", "--design", "simple-mediation", "--paths-file", f, "--direct", 0.1,
                  "--test", "joint", "--power", 0.8, "--reps", 200, "--workers", 1, "--json")
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    labels = [s["scenario"] for s in doc["scenarios"]]
    assert labels == ["high", "low"]
    n_high, n_low = (s["solutions"][0]["n"] for s in doc["scenarios"])
    assert n_high < n_low
    assert "direct = 0.1" in doc["scenarios"][0]["description"]


@pytest.mark.parametrize("text, fragment", [
    ("scenario,path\nhigh,X-M\n", "'value' is missing"),
    ("scenario,path,value\nhigh,X-M,abc\n", "row 2, column 'value': 'abc' is not a number"),
    ("scenario,path,value\nhigh,X-M,0.3\nhigh,X-M,0.2\n", "row 3, column 'path'"),
    ("scenario,path,value\nhigh,X-M,0.3\nhigh,M-Y,0.3\nhigh,X-Q,0.1\n", "has no path X-Q"),
    ("scenario,path,value\nhigh,X-M,0.3\nhigh,M-Y,0.3\nhigh,X-Y,0.1\n",
     "X-Y is given both"),
])
def test_bad_paths_files(run_cli, tmp_path, text, fragment):
    f = tmp_path / "paths.csv"
    f.write_text(text, encoding="utf-8")
    res = run_cli("paths", "--design", "simple-mediation", "--paths-file", f, "--direct", 0.1,
                  "--n", 50)
    assert res.exit_code == 2
    assert fragment in res.stderr


def test_paths_from_correlations_file(run_cli, tmp_path):
    # invented pooled correlations; b = (r_MY - r_XM r_XY) / (1 - r_XM^2) (path analysis)
    f = tmp_path / "r.csv"
    f.write_text("scenario,path,value\nonly,X-M,0.3\nonly,M-Y,0.3\nonly,X-Y,0.15\n",
                 encoding="utf-8")
    res = run_cli("paths", "--design", "simple-mediation", "--paths-file", f,
                  "--correlations", "--test", "joint", "--n", 100, "--reps", 250,
                  "--workers", 1)
    assert res.exit_code == 0, res.output
    assert f"b = {(0.3 - 0.3 * 0.15) / (1 - 0.09):.3g}" in res.output
    bad = run_cli("paths", "--design", "simple-mediation", "--paths-file", f,
                  "--correlations", "--a", 0.3, "--n", 100)
    assert bad.exit_code == 2 and "drop --a" in bad.stderr


def test_power_table_shows_coverage_only_for_interval_tests(run_cli):
    """Coverage of the true value exists for tests by an interval (Monte Carlo CI); with the
    joint-significance test no row has one, so the column is left out instead of empty."""
    args = ("paths", "--design", "simple-mediation", "--a", "0.3", "--b", "0.3", "--n", "150",
            "--reps", "500")
    assert "coverage of true value" not in run_cli(*args, "--test", "joint").stdout
    assert "coverage of true value" in run_cli(*args, "--test", "monte-carlo").stdout


def test_a_confirmation_below_its_goal_is_explained():
    """The n comes from a probit fit of power over many n; the fresh confirmation at n can
    fall below the goal by Monte Carlo noise. Within 2 MC SE the table says it is noise,
    beyond that it asks for more replications."""
    from types import SimpleNamespace as S
    from pooler.output.pathsreport import _short_of_goal

    def sol(goal, power, se):
        return S(n=100, goal=goal, confirmed=S(power=power, mc_se=se))
    assert _short_of_goal([sol(0.8, 0.81, 0.01)]) == ""
    assert "simulation noise" in _short_of_goal([sol(0.95, 0.944, 0.005)])
    assert "more --reps before relying" in _short_of_goal([sol(0.8, 0.76, 0.01)])
