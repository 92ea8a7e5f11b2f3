"""The model-average rule's settings as options (pooler/choices.py MODEL_AVERAGE_OPTIONS):
accepted by run, pool, plan SHEET, demo and stress, checked against their ranges with an
error naming the flag, serialised in results.json and named in the verdict and the methods
paragraph. (`plan` is covered option by option in tests/test_plan_every_option.py.)"""
from __future__ import annotations

import json

import click
import pytest

from pooler.choices import MODEL_AVERAGE_DEFAULTS, MODEL_AVERAGE_OPTIONS

# invented literature: ten two-group results, small studies with larger effects
ROWS = [{"study": f"Invented {i}", "stat": "d", "value": y, "n1": n, "n2": n}
        for i, (y, n) in enumerate([(0.62, 15), (0.48, 20), (0.55, 18), (0.31, 35), (0.12, 60),
                                    (0.40, 25), (0.22, 45), (0.05, 80), (0.71, 12),
                                    (0.18, 50)])]
BAD = {"effect_prior_sd": "0", "heterogeneity_prior_shape": "-1",
       "heterogeneity_prior_scale": "0", "pet_prior_scale": "-0.5", "peese_prior_scale": "inf",
       "chance_of_effect": "0", "chance_of_heterogeneity": "1.2", "chance_of_no_bias": "-0.1",
       "pessimistic_quantile": "0.6"}


def test_every_option_has_a_bad_value_here():
    assert set(BAD) == {o.name for o in MODEL_AVERAGE_OPTIONS}


@pytest.mark.parametrize("command", ["run", "pool", "plan", "demo", "stress"])
def test_every_command_that_averages_offers_every_option(command):
    from pooler.cli import main
    params = {p.name: p for p in main.commands[command].params if isinstance(p, click.Option)}
    for o in MODEL_AVERAGE_OPTIONS:
        assert o.name in params and params[o.name].opts == [o.flag], (command, o.name)
        assert params[o.name].default == o.default
        assert o.help in (params[o.name].help or "")


@pytest.mark.parametrize("name", sorted(BAD))
def test_a_bad_value_is_an_error_naming_the_flag(run_cli, demo_path, name):
    flag = "--" + name.replace("_", "-")
    res = run_cli("pool", demo_path, flag, BAD[name])
    assert res.exit_code == 2
    assert flag in res.stderr and ("outside" in res.stderr or "not a number" in res.stderr)


def test_the_library_checks_the_same_ranges():
    from pooler.errors import OptionError
    from pooler.planning.scenarios import model_average_priors
    for name, value in BAD.items():
        if name == "pessimistic_quantile":
            continue
        with pytest.raises(OptionError, match=name):
            model_average_priors(**{name: float(value)})
    with pytest.raises(OptionError, match="unknown"):
        model_average_priors(prior_of_everything=1.0)
    pr = model_average_priors(chance_of_no_bias=0.2, heterogeneity_prior_scale=0.3)
    assert (pr.p_no_bias, pr.tau_scale, pr.effect_sd) == (0.2, 0.3, 1.0)


def test_pool_reports_the_priors_it_used(run_cli, write_sheet):
    sheet = write_sheet(ROWS)
    doc = json.loads(run_cli("pool", sheet, "--json", "--chance-of-no-bias", "0.2",
                             "--effect-prior-sd", "0.5").stdout)
    pri = doc["model_average"]["priors"]
    assert pri["p_no_bias"] == 0.2 and pri["effect"] == "normal(0, 0.5)"
    assert (doc["model_average"]["pessimistic_quantile"]
            == MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"])
    # the terminal wraps paragraphs at 100 columns: read it with whitespace normalised
    text = " ".join(run_cli("pool", sheet, "--chance-of-no-bias", "0.2").stdout.split())
    assert "Settings changed from the defaults: P(no bias) = 0.2" in text
    # the defaults name nothing as changed
    assert "Settings changed" not in run_cli("pool", sheet).stdout


def test_more_weight_on_bias_plans_more_cautiously(run_cli, write_sheet):
    sheet = write_sheet(ROWS)

    def realistic(*args):
        doc = json.loads(run_cli("pool", sheet, "--json", *args).stdout)
        return doc["scenarios"]["realistic"]["effect"], doc["scenarios"]["pessimistic"]["effect"]
    r_def, p_def = realistic()
    r_low, p_low = realistic("--chance-of-no-bias", "0.1")
    assert r_low < r_def and p_low < p_def
    r_q, p_q = realistic("--pessimistic-quantile", "0.1")
    assert r_q == pytest.approx(r_def, abs=1e-12) and p_q < p_def


def test_run_writes_the_options_and_the_methods_name_them(run_cli, write_sheet, tmp_path):
    out = tmp_path / "out"
    res = run_cli("run", write_sheet(ROWS), "--out", out, "--pet-prior-scale", "2",
                  "--pessimistic-quantile", "0.33", "--power", "0.8")
    assert res.exit_code == 0, res.stderr
    opts = json.loads((out / "results.json").read_text())["options"]
    want = {**MODEL_AVERAGE_DEFAULTS, "pet_prior_scale": 2.0, "pessimistic_quantile": 0.33}
    assert {k: opts[k] for k in want} == want
    report = (out / "report.md").read_text()
    assert ("The priors were the published defaults (Bartoš et al., 2023) except: PET slope ~ "
            "half-Cauchy(0, 2); pessimistic quantile 0.33") in report
    assert "33th percentile" in report or "33rd percentile" in report


def test_demo_takes_the_options(run_cli, tmp_path):
    res = run_cli("demo", "--out", tmp_path / "d", "--chance-of-heterogeneity", "0.8",
                  "--power", "0.8")
    assert res.exit_code == 0, res.stderr
    assert "P(heterogeneity) = 0.8" in (tmp_path / "d" / "report.md").read_text()
    assert "pooler demo --chance-of-heterogeneity 0.8" in (tmp_path / "d" / "report.md").read_text()


def test_stress_runs_the_rule_with_the_options(run_cli, demo_path, monkeypatch):
    from pooler.planning import simulate
    real = simulate.grid_around
    monkeypatch.setattr(simulate, "grid_around", lambda a: real(a)[:1])
    res = run_cli("stress", demo_path, "--reps", "2", "--workers", "1", "--json",
                  "--chance-of-no-bias", "0.2", "--pessimistic-quantile", "0.1")
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    assert doc["rule_options"]["chance_of_no_bias"] == 0.2
    cell = doc["cells"][0]
    by_point = {(t["p_no_bias"], t["quantile"]): t for t in cell["tradeoff"]}
    # the rule under test is the grid point it names (one fit, re-weighted or not)
    assert cell["rules"]["realistic"]["median_power"] == by_point[(0.2, 0.5)]["median_power"]
    assert cell["rules"]["pessimistic"]["median_power"] == by_point[(0.2, 0.1)]["median_power"]


def test_library_defaults_of_the_rule_are_the_canonical_ones():
    import inspect
    from pooler.evidence.bma import DEFAULT_PRIORS, posterior_scenarios
    from pooler.pipeline import analyse
    from pooler.planning.scenarios import make_scenarios, model_average_priors, posterior_rule
    q = MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"]
    for fn in (analyse, make_scenarios, posterior_rule, posterior_scenarios):
        assert inspect.signature(fn).parameters["pessimistic_quantile"].default == q, fn
    assert model_average_priors() == DEFAULT_PRIORS
