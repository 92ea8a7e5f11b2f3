"""Every option of `pooler plan`, exercised through the CLI (CliRunner), each checked
against the library call it stands for. The last test fails when an option is added to
`pooler plan` without a run here."""
from __future__ import annotations

import json
import math

import pytest

from pooler.planning.power import Design, n_for_assurance, n_for_power, to_design_effect

# invented results, heterogeneous on purpose, with a within-subject t without its own
# correlation (uses --within-r) and two rows sharing a sample (combined with --sample-r)
SHEET_ROWS = [
    {"study": "Alpha", "stat": "t", "value": 3.1, "n1": 30, "n2": 30},
    {"study": "Beta", "stat": "d", "value": 0.15, "n1": 25, "n2": 27},
    {"study": "Gamma", "stat": "t", "value": 2.4, "n": 40, "design": "within"},
    {"study": "Delta", "sample": "S-Delta", "stat": "d", "value": 0.2, "n1": 50, "n2": 50},
    {"study": "Delta b", "sample": "S-Delta", "stat": "d", "value": 0.55, "n1": 50, "n2": 50},
    {"study": "Epsilon", "stat": "r", "value": 0.38, "n": 90},
    {"study": "Zeta", "stat": "t", "value": 0.6, "n1": 35, "n2": 33},
    {"study": "Eta", "stat": "d", "value": 0.9, "n1": 15, "n2": 16},
    {"study": "Theta", "stat": "d", "value": 0.05, "n1": 120, "n2": 118},
]

# (arguments after `plan`, a name for the check); SHEET is filled in by the test
EFFECT_RUNS = {
    "two-group": ["--effect", "0.3", "--effect-sd", "0.1", "--design", "two-group",
                  "--allocation", "5:3", "--alpha", "0.01", "--one-sided", "--power", "0.8",
                  "--power", "0.9", "--attrition", "0.1", "--n", "200", "--json"],
    "paired": ["--effect", "0.35", "--design", "paired", "--planned-r", "0.7", "--power",
               "0.8", "--json"],
    "one-sample": ["--effect", "0.4", "--design", "one-sample", "--power", "0.9", "--json"],
    "ancova": ["--effect", "0.4", "--design", "ancova", "--covariate-r", "0.6", "--power",
               "0.8", "--json"],
    "ancova-fixed": ["--effect", "0.4", "--design", "ancova", "--covariate-r", "0.6",
                     "--fixed-covariates", "--power", "0.8", "--json"],
    "interaction": ["--effect", "0.5", "--design", "interaction-2x2", "--attenuation", "1",
                    "--power", "0.8", "--json"],
    "increment": ["--effect", "0.2", "--metric", "r", "--design", "regression-increment",
                  "--predictors-added", "2", "--predictors-total", "5", "--power", "0.8",
                  "--json"],
    "exact-r": ["--effect", "0.3", "--design", "correlation", "--exact-r", "--power", "0.8",
                "--json"],
    "csv": ["--effect", "0.3", "--power", "0.8", "--table", "csv"],
    "markdown": ["--effect", "0.3", "--power", "0.8", "--table", "markdown"],
}
ANALYSIS_OPTIONS = ["--metric", "d", "--within-r", "0.8", "--sample-r", "0.9", "--estimator",
                    "dl", "--interval", "wald", "--adjuster", "pet-peese", "--safeguard", "0.8"]
SESOI = ["--smallest-effect", "0.3"]
# the model-average rule's settings, every one away from its default
MODEL_AVERAGE = ["--effect-prior-sd", "0.6", "--heterogeneity-prior-shape", "2",
                 "--heterogeneity-prior-scale", "0.3", "--pet-prior-scale", "0.5",
                 "--peese-prior-scale", "3", "--chance-of-effect", "0.7",
                 "--chance-of-heterogeneity", "0.6", "--chance-of-no-bias", "0.3",
                 "--pessimistic-quantile", "0.2"]


def _doc(run_cli, key):
    res = run_cli("plan", *EFFECT_RUNS[key])
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def test_two_group_options(run_cli):
    doc = _doc(run_cli, "two-group")
    des = Design("two-group", ratio=0.6)
    assert doc["alpha"] == 0.01 and doc["tails"] == 1 and doc["powers"] == [0.8, 0.9]
    assert doc["design_options"]["ratio"] == 0.6
    for row in doc["rows"]:
        ref = n_for_power(0.3, row["power"], des, 0.01, "greater")
        assert row["n_per_group"] == int(ref.n) and row["n_total"] == int(ref.n_total)
        n2 = row["n_total"] - row["n_per_group"]   # each group inflated on its own
        assert row["n_total_recruit"] == (math.ceil(row["n_per_group"] / 0.9 - 1e-9)
                                          + math.ceil(n2 / 0.9 - 1e-9))
    assert doc["fixed_n"]["n_total"] == 200 and doc["fixed_n"]["n_per_group"] == 125
    asr = n_for_assurance(0.3, 0.1, (0.8, 0.9), des, 0.01, "greater")
    assert [r["n_per_group"] for r in doc["assurance"]["rows"]] == list(asr.n)


@pytest.mark.parametrize("key, design, effect", [
    ("paired", Design("paired", planned_r=0.7), 0.35),
    ("one-sample", Design("one-sample"), 0.4),
    ("ancova", Design("ancova", covariate_r=0.6), 0.4),
    ("ancova-fixed", Design("ancova", covariate_r=0.6, fixed_covariates=True), 0.4),
    ("interaction", Design("interaction-2x2", attenuation=1.0), 0.5),
])
def test_design_options_reach_the_design(run_cli, key, design, effect):
    doc = _doc(run_cli, key)
    assert doc["design"] == design.name
    row = doc["rows"][0]
    ref = n_for_power(to_design_effect(effect, "d", design), row["power"], design)
    assert row["n_per_group"] == int(ref.n) and row["n_total"] == int(ref.n_total)


def test_regression_increment_options(run_cli):
    doc = _doc(run_cli, "increment")
    des = Design("regression-increment", predictors_added=2, predictors_total=5)
    assert doc["design_options"]["predictors_added"] == 2
    assert doc["design_options"]["predictors_total"] == 5
    ref = n_for_power(to_design_effect(0.2, "r", des), 0.8, des)
    assert doc["rows"][0]["n_total"] == int(ref.n)


def test_exact_r_runs_through_the_cli(run_cli):
    # used to end in a TypeError (alpha reached the exact-r power as an array)
    doc = _doc(run_cli, "exact-r")
    assert doc["design_options"]["exact_r"] is True
    des = Design("correlation", exact_r=True)
    n = doc["rows"][0]["n_total"]
    assert n == int(n_for_power(0.3, 0.8, des).n)
    # the exact test and Fisher's z (85, Cohen 1992 Table 2) differ by a participant or two
    assert abs(n - 85) <= 2
    res = run_cli("plan", "--effect", "0.3", "--design", "correlation", "--exact-r", "--n",
                  "100", "--power", "0.8")
    assert res.exit_code == 0 and "exact distribution of r" in res.stdout


def test_table_formats(run_cli):
    csv_out = run_cli("plan", *EFFECT_RUNS["csv"]).stdout
    assert csv_out.splitlines()[1].split(",")[:1] == ["given"] and ",176,352," in csv_out
    md = run_cli("plan", *EFFECT_RUNS["markdown"]).stdout
    assert md.startswith("| scenario |") and "| 176 | 352 |" in md


def test_analysis_options_reach_the_analysis(run_cli, write_sheet):
    from pooler.pipeline import analyse
    sheet = write_sheet(SHEET_ROWS, columns=["study", "sample", "stat", "value", "n1", "n2",
                                             "n", "design"])
    res = run_cli("plan", sheet, *ANALYSIS_OPTIONS, "--power", "0.8", "--json")
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    ref = analyse(sheet, metric="d", within_r=0.8, sample_r=0.9, estimator="dl",
                  interval="wald", adjuster="pet-peese", safeguard_level=0.8)
    want = {p.scenario: p.effect for p in ref.scenarios.planning_effects()}
    got = {s["scenario"]: s["effect"] for s in doc["scenarios"]}
    assert got == pytest.approx(want, abs=1e-12)
    bases = " ".join(s["basis"] for s in doc["scenarios"])
    assert "80% safeguard" in bases and "PET-PEESE" in bases
    # default analysis options + the smallest effect size of interest: the default
    # random-effects estimate differs from the one above (the options reach the pooling),
    # and the scenarios below 0.3 are floored there
    floored = json.loads(run_cli("plan", sheet, *SESOI, "--power", "0.8", "--json").stdout)
    assert floored["scenarios"][0]["effect"] != pytest.approx(got["optimistic"], abs=1e-6)
    assert all(s["effect"] >= 0.3 - 1e-12 for s in floored["scenarios"])
    assert sum("smallest effect size of interest" in s["basis"]
               for s in floored["scenarios"]) >= 1
    # an r-metric analysis plans on r
    doc_r = json.loads(run_cli("plan", sheet, "--metric", "r", "--power", "0.8",
                               "--json").stdout)
    assert doc_r["metric"] == "r"


def test_model_average_options_reach_the_posterior(run_cli, write_sheet):
    # reference: the model average computed directly with the same priors (pooler.evidence.bma),
    # on the studies the analysis pooled
    import numpy as np
    from pooler.evidence.bma import Priors, model_average
    from pooler.pipeline import analyse
    sheet = write_sheet(SHEET_ROWS, columns=["study", "sample", "stat", "value", "n1", "n2",
                                             "n", "design"])
    res = run_cli("plan", sheet, *MODEL_AVERAGE, "--power", "0.8", "--json")
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    pooled = analyse(sheet, adjuster="safeguard").pooled
    y = np.array([u.effect for u in pooled.studies])
    v = np.array([u.variance for u in pooled.studies])
    pr = Priors(effect_sd=0.6, tau_shape=2.0, tau_scale=0.3, pet_scale=0.5, peese_scale=3.0,
                p_effect=0.7, p_heterogeneity=0.6, p_no_bias=0.3)
    from pooler.evidence.bias import size_variances   # PET/PEESE's predictor (Pustejovsky & Rodgers 2019)
    ref = model_average(y, v, "g", pr, size_v=size_variances(pooled.studies, "g"))
    got = {s["scenario"]: s["effect"] for s in doc["scenarios"]}
    assert got["realistic"] == pytest.approx(ref.mu_quantile(0.5, positive=True), abs=1e-9)
    assert got["pessimistic"] == pytest.approx(ref.mu_quantile(0.2, positive=True), abs=1e-9)
    assert "20th percentile" in " ".join(s["basis"] for s in doc["scenarios"])


def test_every_plan_option_is_exercised():
    from pooler.cli import plan
    used = {a for args in EFFECT_RUNS.values() for a in args if a.startswith("--")}
    used |= {a for a in ANALYSIS_OPTIONS + SESOI + MODEL_AVERAGE if a.startswith("--")}
    used |= {"SHEET"}
    every = {("SHEET" if p.name == "sheet" else p.opts[0]) for p in plan.params
             if p.name != "help"}
    assert every - used == set(), f"options of `pooler plan` no test runs: {every - used}"
    # every design, and every table format, is run at least once
    designs = {args[args.index("--design") + 1] for args in EFFECT_RUNS.values()
               if "--design" in args}
    assert designs == set(plan.params[[p.name for p in plan.params].index("design")].type.choices)
