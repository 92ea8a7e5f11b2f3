"""The answer first: every run's terminal summary and report open with the decision (verdict,
planning effect and whole people to recruit per scenario, what a feasible N buys), and the
methods paragraph says what was really done on each path. All literatures here are invented."""
from __future__ import annotations

import csv
import io
import math
import re

import numpy as np
import pytest

from pooler.planning.sample_size import PlanningEffect, make_plan, recruit_sizes
from pooler.planning.power import Design


def _between(values, sizes):
    return [{"study": f"Invented {i + 1}", "stat": "d", "value": v, "n1": n, "n2": n,
             "year": 2000 + i} for i, (v, n) in enumerate(zip(values, sizes))]


SIZES = [20, 35, 50, 28, 80, 44, 120, 60, 25, 90]
LITERATURES = {
    # a clear positive literature: the plan is supported
    "supported": (_between([0.35, 0.42, 0.38, 0.30, 0.45, 0.40, 0.41, 0.36, 0.33, 0.44], SIZES),
                  ("--design", "two-group")),
    # effects around zero: no positive planning effect
    "refusal": (_between([-0.20, 0.05, -0.12, 0.10, -0.05, 0.02, -0.08, 0.04, -0.25, 0.01],
                         SIZES), ("--design", "two-group")),
    # the same, with a smallest effect of interest given by the user
    "user_smallest": (_between([-0.20, 0.05, -0.12, 0.10, -0.05, 0.02, -0.08, 0.04, -0.25,
                                0.01], SIZES), ("--design", "two-group", "--smallest-effect", "0.3")),
    # the same supported literature under the earlier frequentist safeguard rule
    "supported_safeguard": (_between([0.35, 0.42, 0.38, 0.30, 0.45, 0.40, 0.41, 0.36, 0.33,
                                      0.44], SIZES),
                            ("--design", "two-group", "--adjuster", "safeguard")),
    "refusal_safeguard": (_between([-0.20, 0.05, -0.12, 0.10, -0.05, 0.02, -0.08, 0.04, -0.25,
                                    0.01], SIZES),
                          ("--design", "two-group", "--adjuster", "safeguard")),
    "k2": (_between([0.40, 0.30], [40, 60]), ("--design", "two-group")),
    # every study 20 per group: PET and PEESE are left out of the model average
    "equal_sizes": (_between([0.71, 0.34, 0.80, 0.12, 0.56, 0.90, 0.43, 0.65], [20] * 8),
                    ("--design", "two-group")),
    "correlational": ([{"study": f"Invented {i + 1}", "stat": "r", "value": v, "n": n,
                        "year": 2000 + i}
                       for i, (v, n) in enumerate(zip(
                           [0.18, 0.22, 0.15, 0.20, 0.25, 0.17, 0.21, 0.19],
                           [60, 120, 45, 300, 90, 150, 70, 200]))],
                      ("--design", "correlation")),
    "paired": ([{"study": f"Invented {i + 1}", "stat": "t", "value": v, "n": n,
                 "design": "within", "year": 2000 + i}
                for i, (v, n) in enumerate(zip([3.1, 2.4, 2.9, 1.8, 2.2, 3.5, 1.5],
                                               [24, 30, 40, 22, 36, 50, 28]))],
               ("--design", "paired")),
}


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    """Each literature run once through the CLI: (stdout, report.md, results.json)."""
    import json

    from click.testing import CliRunner

    from pooler.cli import main
    out = {}
    for name, (rows, opts) in LITERATURES.items():
        folder = tmp_path_factory.mktemp(name)
        keys = list(dict.fromkeys(k for r in rows for k in r))
        with open(folder / "sheet.csv", "w", newline="", encoding="utf-8") as fh:
            w = csv.DictWriter(fh, keys)
            w.writeheader()
            w.writerows(rows)
        res = CliRunner().invoke(main, ["run", str(folder / "sheet.csv"), *opts, "--out",
                                        str(folder / "out"), "--attrition", "0.1"],
                                 catch_exceptions=False)
        assert res.exit_code == 0, (name, res.output)
        out[name] = (res.stdout, (folder / "out" / "report.md").read_text(encoding="utf-8"),
                     json.loads((folder / "out" / "results.json").read_text()))
    return out


def _methods(md: str) -> str:
    return md.split("## Methods paragraph", 1)[1].split("\n## ", 1)[0]


@pytest.mark.parametrize("name", list(LITERATURES))
@pytest.mark.slow
def test_every_path_opens_with_the_decision(rendered, name):
    stdout, md, doc = rendered[name]
    assert stdout.lstrip().startswith("The decision")
    headings = re.findall(r"^## (.+)$", md, flags=re.M)
    assert headings[0] == "The decision"
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    verdict = decision.strip().splitlines()[0]
    assert verdict.startswith("**") and verdict.endswith("**")
    assert verdict.count(". ") == 0          # one sentence
    assert "If that is not feasible" in decision
    for s in ("optimistic", "realistic", "pessimistic"):
        assert f"| {s} |" in decision
    # the decision's realistic row is the plan's, after attrition
    real = next(r for r in doc["plan"]["rows"] if r["scenario"] == "realistic")
    if isinstance(real["n_total"], int):
        assert f"{real['n_total_recruit']:,}" in decision
        assert f"{real['n_total_recruit']:,}" in stdout.split("How it was reached")[0]


@pytest.mark.slow
def test_realistic_from_the_posterior(rendered):
    # the default rule: the methods paragraph names the model average and its posterior
    # summary, and keeps the frequentist table as sensitivity analyses
    _, md, doc = rendered["supported"]
    m = _methods(md)
    real = next(r for r in doc["plan"]["rows"] if r["scenario"] == "realistic")
    assert "Bayesian model average over" in m and "Bartoš et al., 2023" in m
    assert f"posterior median of the mean effect given a positive effect, g = {real['effect']:.2f}" in m
    assert "95% credible interval" in m and "P(effect > 0) = " in m
    assert "sensitivity analyses" in m and "Perugini" not in m and "safeguard" not in m
    assert f"{real['n_per_group']:,} per group ({real['n_total']:,} in total)" in m
    scen = md.split("## Planning scenarios", 1)[1].split("\n## ", 1)[0]
    assert "Posterior of the model average" in scen and "Inclusion Bayes factors" in scen
    assert "safeguard interval" not in scen
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert decision.lstrip().startswith(f"**Recruit {real['n_total_recruit']:,} participants")
    assert "model-averaged estimate" in decision and "P(effect &gt; 0)" in decision


@pytest.mark.slow
def test_methods_paragraph_names_the_regression_models_predictor(rendered):
    # PET and PEESE regress on the size-based SE (Pustejovsky & Rodgers 2019); with every
    # study the same size they are left out, and the paragraph and the model list say so
    m = _methods(rendered["supported"][1])
    assert "over 20 publication-bias models" in m and "(Pustejovsky & Rodgers, 2019)" in m
    _, md, doc = rendered["equal_sizes"]
    m = _methods(md)
    assert "over 12 publication-bias models" in m
    assert "PET and PEESE were left out because every study had the same size" in m
    biases = {x["bias"] for x in doc["pool"]["model_average"]["models"]}
    assert biases == {"no bias", "one-step selection", "two-step selection"}
    assert any("same size" in w for w in doc["pool"]["model_average"]["warnings"])


@pytest.mark.slow
def test_supported_plan_methods_paragraph_safeguard_rule(rendered):
    _, md, doc = rendered["supported_safeguard"]
    m = _methods(md)
    real = next(r for r in doc["plan"]["rows"] if r["scenario"] == "realistic")
    assert "We planned on a realistic effect" in m and "(Perugini et al., 2014)" in m
    assert "model average" not in m
    assert f"{real['n_per_group']:,} per group ({real['n_total']:,} in total)" in m
    assert f"we will recruit {real['n_total_recruit']:,}" in m
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert decision.lstrip().startswith(f"**Recruit {real['n_total_recruit']:,} participants")


@pytest.mark.parametrize("name", ["refusal", "refusal_safeguard"])
@pytest.mark.slow
def test_refusal_plans_nothing(rendered, name):
    stdout, md, doc = rendered[name]
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert "does not support a positive effect" in decision and "--smallest-effect" in decision
    assert "Recruit" not in decision.split("\n\n")[0]
    m = _methods(md)
    assert "cannot justify a sample size" in m and "Lakens, Scheel & Isager, 2018" in m
    assert "We planned on" not in m and "Perugini" not in m
    assert "assurance" not in m and "Under the pessimistic effect" not in m
    assert ("posterior favoured no positive effect" in m) == (name == "refusal")


@pytest.mark.slow
def test_refusal_says_why_and_computes_nothing_on_a_non_positive_effect(rendered):
    stdout, md, doc = rendered["refusal_safeguard"]
    assert doc["pool"]["scenarios"]["realistic"]["effect"] <= 0
    # the literature audit and the excess-significance test are not computed, and say why
    assert "Literature audit: not computed: the realistic effect" in md
    assert "Excess significance (Ioannidis & Trikalinos 2007): not computed" in md
    assert "median power" not in md and "Literature audit: not computed" in stdout


@pytest.mark.slow
def test_user_given_smallest_effect_is_not_dressed_up(rendered):
    _, md, doc = rendered["user_smallest"]
    m = _methods(md)
    assert "smallest effect, g = 0.30" in m and "Lakens, Scheel & Isager, 2018" in m
    assert "Perugini" not in m           # the safeguard interval was not used
    assert "assurance" not in m          # no distribution around a number the user typed
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert "smallest effect of interest (g = 0.30)" in decision
    assert "smallest effect size of interest: 0.3" in md   # the settings, in words


@pytest.mark.slow
def test_k2_plural_and_decision(rendered):
    stdout, md, _ = rendered["k2"]
    assert "k = 2 independent samples (2 rows used" in stdout
    assert "meta-analysed 2 independent samples (2 reported results" in _methods(md)
    # with two studies the model average rests on its priors, and both texts say so
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert "With only 2 studies the publication-bias models cannot be told apart" in decision
    assert "With only 2 studies the bias models cannot be told apart" in _methods(md)
    assert "With only 2 studies" in stdout.split("How it was reached")[0]


@pytest.mark.slow
def test_correlational_decision_counts_people_in_total(rendered):
    _, md, doc = rendered["correlational"]
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert "planning r" in decision and "per group" not in decision
    real = next(r for r in doc["plan"]["rows"] if r["scenario"] == "realistic")
    assert real["n_total_recruit"] == math.ceil(real["n_total"] / 0.9 - 1e-9)
    assert f"N = {real['n_total']:,}" in _methods(md)
    assert "Fisher's z-transformed correlations" in _methods(md)


@pytest.mark.slow
def test_paired_literature_methods(rendered):
    _, md, doc = rendered["paired"]
    m = _methods(md)
    assert "Morris & DeShon, 2002" in m and "paired" in m
    decision = md.split("## The decision", 1)[1].split("\n## ", 1)[0]
    assert "N analysed" in decision and "per group" not in decision


@pytest.mark.parametrize("name", list(LITERATURES))
@pytest.mark.slow
def test_no_python_values_and_consistent_numbers(rendered, name):
    stdout, md, _ = rendered[name]
    for text in (stdout, md):
        assert not re.search(r"\bp = [01]\.\d", text), "p is printed as .003 / < .001"
        assert "None" not in text and "False" not in text and "design.exact_r" not in text
        assert not re.search(r"\b1 (studies|rows|independent samples)\b", text)
    assert "I^2 | " in md and re.search(r"\| I\^2 \| \d+\.\d%", md)   # a percentage


# ------------------------------------------------------------------ whole groups

def test_recruitment_is_whole_people_per_group():
    # equal groups: an even total; an allocation keeps each group whole and at its ratio
    for n in range(2, 400, 7):
        for a in (0.05, 0.1, 0.2, 0.33):
            (g1, g2), total = recruit_sizes(n, "two-group", a)
            assert g1 == g2 and total % 2 == 0 and g1 * (1 - a) >= n - 1e-9
            (h1, h2), t2 = recruit_sizes(n, Design("two-group", ratio=2.0), a)
            assert h1 * (1 - a) >= n - 1e-9 and h2 * (1 - a) >= 2 * n - 1e-9 and t2 == h1 + h2


def test_an_allocation_is_described_as_two_groups(run_cli, write_sheet, tmp_path):
    rows = LITERATURES["supported"][0]
    res = run_cli("run", write_sheet(rows), "--design", "two-group", "--allocation", "1:2",
                  "--n", "90", "--out", tmp_path / "o")
    assert res.exit_code == 0, res.output
    # 90 in all at 1:2 is 30 + 60, never "(30 per group)"
    assert "30 in group 1 and 60 in group 2" in res.stdout
    assert "(30 per group)" not in res.stdout
    md = (tmp_path / "o" / "report.md").read_text()
    assert "30 in group 1 and 60 in group 2" in md.split("\n## ", 2)[1]


def test_planning_csv_keeps_numbers_numeric():
    from pooler.output.report import plan_csv
    p = make_plan([PlanningEffect("realistic", 0.3), PlanningEffect("pessimistic", 1e-5)],
                  powers=(0.8,))
    rows = list(csv.DictReader(io.StringIO(plan_csv(p))))
    assert rows[0]["not_reached_because"] == "" and int(rows[0]["n_total"]) == 352
    assert rows[1]["n_total"] == "" and rows[1]["not_reached_because"] != ""
    for r in rows:
        for col in ("n_per_group", "n_total", "achieved_power", "n_total_recruit"):
            if r[col]:
                float(r[col])


# ------------------------------------------------------------------ the power figure

@pytest.mark.parametrize("design", [Design("two-group", ratio=2.0), Design("two-group"),
                                    Design("ancova", ratio=1.5), Design("interaction-2x2"),
                                    Design("paired")])
def test_power_figure_rises_smoothly_and_marks_the_realistic_n(design):
    from pooler.output.plots import power_curves
    p = make_plan([PlanningEffect("optimistic", 0.9), PlanningEffect("realistic", 0.6),
                   PlanningEffect("pessimistic", 0.4)], design, powers=(0.8, 0.9))
    ax = power_curves(p).axes[0]
    curves = [ln for ln in ax.lines if len(ln.get_xdata()) > 10]
    assert len(curves) == 3
    for ln in curves:
        x, y = np.asarray(ln.get_xdata()), np.asarray(ln.get_ydata())
        assert np.all(np.diff(x) > 0) and np.all(np.diff(y) >= -1e-12)   # no zigzag
        # every plotted total is one the design can have (whole groups)
        assert set(x.astype(int)) <= set(design.n_total(np.arange(1, int(x.max()) + 1)))
    real = p.row("realistic", 0.8)
    marks = [ln for ln in ax.lines if len(ln.get_xdata()) == 1]
    assert [float(m.get_xdata()[0]) for m in marks] == [real.n_total]
    assert any(f"realistic: N = {real.n_total:,}" in t.get_text() for t in ax.texts)


def test_a_literature_leaning_to_no_effect_says_so_before_the_n(run_cli):
    """Twelve just-significant invented studies (new-user trial, inflated.csv): the inclusion
    Bayes factor for an effect lies between the refusal threshold (1/10) and 1, so the plan
    is given, but the verdict first says the data favour no effect and what the n tests."""
    import json
    from pathlib import Path
    sheet = Path(__file__).parent / "data" / "newuser" / "inflated.csv"
    res = run_cli("pool", sheet, "--json")
    post = json.loads(res.stdout)["scenarios"]
    out = run_cli("run", sheet, "--design", "two-group").stdout
    verdict = out.split("The decision", 1)[1].split("Numbers for", 1)[0]
    assert "leans towards no effect (Bayes factor" in verdict
    assert "tests whether it exists at all" in verdict and "--smallest-effect" in verdict
    assert "Recruit" not in verdict.split("leans")[0]
    assert post["realistic"]["effect"] > 0
