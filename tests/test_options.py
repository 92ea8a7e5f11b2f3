"""Options as data: pooler/choices.py holds the canonical choices and defaults; the library's
defaults, the CLI's options and the registries must agree with it; option errors carry their
parameter and the CLI names its own flag instead."""
from __future__ import annotations

import inspect

import click
import pytest

from pooler import choices
from pooler.errors import OptionError


def _defaults(fn):
    return {n: p.default for n, p in inspect.signature(fn).parameters.items()
            if p.default is not inspect.Parameter.empty}


def test_library_defaults_are_the_canonical_ones():
    from pooler.evidence.effects import convert
    from pooler.pipeline import analyse
    from pooler.planning.sample_size import make_plan
    from pooler.evidence.pooling import pool
    from pooler.planning.scenarios import make_scenarios
    d = choices.ANALYSIS_DEFAULTS
    got = _defaults(analyse)
    assert {k: got[k] for k in d} == dict(d)
    assert {k: v for k, v in _defaults(convert).items()} == {
        "metric": d["metric"], "within_r": d["within_r"], "sample_r": d["sample_r"]}
    assert _defaults(pool)["estimator"] == d["estimator"]
    assert _defaults(pool)["interval"] == d["interval"]
    sc = _defaults(make_scenarios)
    assert {k: sc[k] for k in ("adjuster", "safeguard_level", "sesoi")} == {
        k: d[k] for k in ("adjuster", "safeguard_level", "sesoi")}
    assert tuple(_defaults(make_plan)["powers"]) == choices.POWERS


def test_choice_lists_are_the_library_ones():
    from pooler.evidence import bias
    from pooler.evidence import pooling
    assert pooling.ESTIMATORS == choices.ESTIMATORS
    assert pooling.INTERVALS == choices.INTERVALS
    assert bias.adjuster_choices() == choices.ADJUSTERS


@pytest.mark.parametrize("command", ["convert", "pool", "plan", "run"])
def test_cli_options_read_the_canonical_choices_and_defaults(command):
    from pooler.cli import main
    params = {p.name: p for p in main.commands[command].params if isinstance(p, click.Option)}
    lists = {"metric": choices.METRICS, "estimator": choices.ESTIMATORS,
             "interval": choices.INTERVALS, "adjuster": choices.ADJUSTERS}
    for name, default in choices.ANALYSIS_DEFAULTS.items():
        if name not in params:
            continue
        if name == "metric":
            # no fixed default: d for convert/pool/stress, the design's own metric for
            # plan/run/demo (the CLI resolves None; see cli._planning_metric)
            assert params[name].default is None
        else:
            assert params[name].default == default, name
        if name in lists:
            assert tuple(params[name].type.choices) == lists[name], name


def test_option_error_carries_its_parameter():
    e = OptionError("`safeguard_level` must lie in (0, 1), not 1.5")
    assert e.parameter == "safeguard_level" and str(e) == e.message
    assert e.naming({"safeguard_level": "--safeguard"}) == "--safeguard must lie in (0, 1), not 1.5"
    assert OptionError("give at least one planning effect").parameter is None
    assert OptionError("`adjuster` 3psm: not here", parameter="adjuster").parameter == "adjuster"


@pytest.mark.parametrize("args, flag, internal", [
    # checked as the options are parsed (click names the flag as typed)
    (["pool", "{demo}", "--safeguard", "1.5"], "'--safeguard': 1.5 is outside (0, 1)",
     "safeguard_level"),
    (["convert", "{demo}", "--within-r", "1.5"], "'--within-r': 1.5 is outside (-1, 1)",
     "within_r"),
    (["pool", "{demo}", "--smallest-effect", "-1"], "'--smallest-effect': -1 is not allowed",
     "`sesoi`"),
])
def test_cli_errors_name_the_flag_not_the_parameter(run_cli, demo_path, args, flag, internal):
    res = run_cli(*[a.format(demo=demo_path) for a in args])
    assert res.exit_code == 2
    assert flag in res.stderr and internal not in res.stderr, res.stderr


def test_analysis_options_are_one_frozen_value_with_analyse_keywords():
    from dataclasses import FrozenInstanceError

    from pooler.choices import AnalysisOptions
    from pooler.pipeline import analyse
    o = AnalysisOptions()
    with pytest.raises(FrozenInstanceError):
        o.metric = "r"
    kw = [k for k in inspect.signature(analyse).parameters if k not in ("sheet_path", "progress")]
    assert list(o.to_dict()) == kw
    assert o.replace(sesoi=0.2).sesoi == 0.2 and o.sesoi is None



def test_run_serialises_the_options_it_was_given(write_sheet):
    from pooler.choices import AnalysisOptions
    from pooler.pipeline import run
    rows = [{"study": f"Invented {i}", "stat": "d", "value": y, "n1": 40, "n2": 40}
            for i, y in enumerate([0.52, 0.31, 0.44, 0.12, 0.65, 0.28])]
    opts = AnalysisOptions(sesoi=0.1, adjuster="median")
    res = run(write_sheet(rows), design="two-group", analysis_options=opts,
              plan_options={"powers": (0.8,)})
    got = res.to_dict()["options"]
    assert {k: got[k] for k in opts.to_dict()} == opts.to_dict()
    assert res.analysis.scenarios.rule == "median" and res.analysis.scenarios.sesoi == 0.1

