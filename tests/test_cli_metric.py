"""--metric against the planned design: a d planned on a correlational design (or an r on a
group design) is converted with the stated factor, and the output says so; through the CLI
for `plan --effect`, `plan SHEET` and `run`.

Sources: Borenstein, Hedges, Higgins & Rothstein (2009) eqs. 7.5 and 7.7 (d <-> r with
a = 4, two equal groups); the Fisher z sample size n = ((z_{1-a/2} + z_{power}) / atanh r)^2 + 3
(Fisher 1921; Cohen 1988, ch. 3, normal approximation).
"""
from __future__ import annotations

import json
import math

import pytest
from scipy import stats

ROWS = [  # invented two-group results
    {"study": "P1", "stat": "t", "value": "2.4", "n1": "30", "n2": "32"},
    {"study": "P2", "stat": "d", "value": "0.35", "n1": "45", "n2": "44"},
    {"study": "P3", "stat": "t", "value": "1.1", "n1": "25", "n2": "25"},
    {"study": "P4", "stat": "means", "mean1": "10.4", "sd1": "2.0", "mean2": "9.8",
     "sd2": "2.2", "n1": "60", "n2": "58"},
    {"study": "P5", "stat": "t", "value": "2.9", "n1": "40", "n2": "41"},
]
NOTE = "converted to r = d / sqrt(d^2 + 4)"


def _fisher_n(r, power=0.8, alpha=0.05):
    z = stats.norm.ppf(1 - alpha / 2) + stats.norm.ppf(power)
    return (z / math.atanh(r)) ** 2 + 3


def test_plan_effect_d_on_correlation_is_converted_and_said(run_cli):
    # issue: `--effect 0.5 --metric d --design correlation` was planned as r = .5, n = 30
    res = run_cli("plan", "--effect", "0.5", "--metric", "d", "--design", "correlation",
                  "--power", "0.8", "--json")
    assert res.exit_code == 0
    doc = json.loads(res.stdout)
    r = 0.5 / math.sqrt(0.25 + 4)                     # [B] eq. 7.7, a = 4: 0.242536
    row = doc["rows"][0]
    assert doc["metric"] == "d" and row["effect"] == 0.5
    assert row["design_effect"] == pytest.approx(r, rel=1e-12)
    # the Fisher z normal approximation gives 131.2; pooler's two-sided search agrees
    assert row["n_total"] == math.ceil(_fisher_n(r)) == 132
    assert any(NOTE in n for n in doc["notes"])
    # the text output says it too
    txt = run_cli("plan", "--effect", "0.5", "--metric", "d", "--design", "correlation",
                  "--power", "0.8")
    assert "note:" in txt.stdout and NOTE in txt.stdout.replace("\n", " ")
    # and it is the same plan as giving the converted r directly, which needs no note
    direct = json.loads(run_cli("plan", "--effect", repr(r), "--metric", "r", "--design",
                                "correlation", "--power", "0.8", "--json").stdout)
    assert direct["rows"][0]["n_total"] == 132 and direct["notes"] == []


def test_plan_effect_d_on_regression_increment(run_cli):
    # d -> r ([B] eq. 7.7, a = 4) -> f^2 = r^2 / (1 - r^2) = d^2 / 4
    res = run_cli("plan", "--effect", "0.5", "--metric", "d", "--design",
                  "regression-increment", "--power", "0.8", "--json")
    doc = json.loads(res.stdout)
    assert doc["rows"][0]["design_effect"] == pytest.approx(0.25 / 4, rel=1e-12)
    assert any(NOTE in n and "f^2" in n for n in doc["notes"])
    r = 0.5 / math.sqrt(4.25)
    direct = json.loads(run_cli("plan", "--effect", repr(r), "--design", "regression-increment",
                                "--power", "0.8", "--json").stdout)
    assert direct["rows"][0]["n_total"] == doc["rows"][0]["n_total"]


def test_no_metric_keeps_each_design_on_its_own_metric(run_cli):
    doc = json.loads(run_cli("plan", "--effect", "0.3", "--design", "correlation", "--power",
                             "0.8", "--json").stdout)
    assert doc["metric"] == "r" and doc["notes"] == [] and doc["rows"][0]["n_total"] == 85
    doc = json.loads(run_cli("plan", "--effect", "0.3", "--power", "0.8", "--json").stdout)
    assert doc["metric"] == "d" and doc["notes"] == []


def test_r_on_a_group_design_is_converted_and_said(run_cli):
    # [B] eq. 7.5 with a = 4: d = 2r / sqrt(1 - r^2)
    doc = json.loads(run_cli("plan", "--effect", "0.3", "--metric", "r", "--power", "0.8",
                             "--json").stdout)
    assert doc["rows"][0]["design_effect"] == pytest.approx(0.6 / math.sqrt(0.91), rel=1e-12)
    assert any("d = 2 r / sqrt(1 - r^2)" in n for n in doc["notes"])


def test_plan_sheet_with_metric_d_on_correlation(write_sheet, run_cli):
    path = write_sheet(ROWS)
    res = run_cli("plan", path, "--metric", "d", "--design", "correlation", "--power", "0.8",
                  "--json")
    assert res.exit_code == 0
    doc = json.loads(res.stdout)
    assert doc["metric"] == "d" and any(NOTE in n for n in doc["notes"])
    for row in doc["rows"]:
        g = row["effect"]
        assert row["design_effect"] == pytest.approx(g / math.sqrt(g * g + 4), rel=1e-12)
    # without --metric the same sheet is pooled on r and planned without a conversion
    doc_r = json.loads(run_cli("plan", path, "--design", "correlation", "--power", "0.8",
                               "--json").stdout)
    assert doc_r["metric"] == "r" and doc_r["notes"] == []
    txt = run_cli("plan", path, "--metric", "d", "--design", "correlation", "--power", "0.8")
    assert NOTE in txt.stdout


def test_run_with_metric_d_on_correlation(tmp_path, write_sheet, run_cli):
    path = write_sheet(ROWS)
    out = tmp_path / "out"
    res = run_cli("run", path, "--metric", "d", "--design", "correlation", "--power", "0.8",
                  "--out", out, "--json")
    assert res.exit_code == 0
    doc = json.loads(res.stdout)
    plan = doc["plan"]
    assert plan["metric"] == "d" and any(NOTE in n for n in plan["notes"])
    g = plan["rows"][0]["effect"]
    assert plan["rows"][0]["design_effect"] == pytest.approx(g / math.sqrt(g * g + 4))
    saved = json.loads((out / "results.json").read_text())
    assert saved["plan"]["notes"] == plan["notes"]
    assert NOTE in (out / "report.md").read_text().replace("\\", "")
