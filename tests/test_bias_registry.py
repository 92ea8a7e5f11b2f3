"""The registry of bias methods: stable keys, and one registration reaching every consumer.

A toy method (half the common-effect estimate, with half its SE: invented for this test, not
a published method) is registered for one test and removed afterwards; it must appear in the
bias table, the JSON, the adjuster choices, the scenarios, the methods sentence, the estimate
ladder and the stress test's estimators without any other file changing.
"""
from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass

import numpy as np
import pytest
from numpy.testing import assert_allclose

from pooler.evidence import bias as bias_mod
from pooler._results import Interval, NotEstimable, to_jsonable
from pooler.evidence.bias import (BiasMethod, bias_suite, methods, planning_methods, register,
                                  unregister)
from pooler.evidence.pooling import pool
from pooler.planning.scenarios import make_scenarios

from test_pooling import make_effects

Y = np.array([0.52, 0.31, 0.44, 0.12, 0.65, 0.28, 0.05, 0.39])
V = np.array([0.040, 0.025, 0.050, 0.010, 0.080, 0.030, 0.012, 0.045])


@dataclass(frozen=True)
class ToyResult:
    """A richer result than an estimate: extra fields beside ``estimate`` and ``se``."""

    estimate: float
    se: float
    ci: Interval
    weight_sum: float

    def to_dict(self) -> dict:
        return to_jsonable({"estimate": self.estimate, "se": self.se, "ci_low": self.ci.low,
                            "ci_high": self.ci.high, "weight_sum": self.weight_sum})


def _toy(d):
    if len(d.y) < 3:
        return NotEstimable("the toy needs at least 3 studies")
    w = 1 / d.v
    est = 0.5 * float(np.dot(w, d.y) / w.sum())
    se = 0.5 * math.sqrt(1 / w.sum())
    return ToyResult(est, se, Interval(est - 1.96 * se, est + 1.96 * se, 0.95), float(w.sum()))


TOY = BiasMethod("toy_half", "toy half", _toy, "Nobody, 2026", adjuster="toy-half",
                 table_label="toy half (test only)", note=lambda r: f"weights {r.weight_sum:.0f}",
                 phrase="a toy halving", plan_order=99)


@pytest.fixture
def toy():
    register(TOY)
    try:
        yield TOY
    finally:
        unregister(TOY.key)


def test_keys_are_stable_identifiers_and_never_labels():
    ms = methods()
    keys = [m.key for m in ms]
    assert keys == ["egger", "pet", "peese", "pet_peese", "trim_and_fill", "trim_and_fill_r0",
                    "selection_3psm", "waap_wls", "selection_ratio"]
    for m in ms:
        assert re.fullmatch(r"[a-z0-9_]+", m.key), m.key
        assert m.key != m.label and m.key != m.table_label
    assert [m.key for m in planning_methods()] == ["selection_3psm", "pet_peese",
                                                  "trim_and_fill", "waap_wls"]
    assert {m.key for m in ms if m.robust} == {"selection_3psm", "pet_peese"}


def test_cli_choice_list_is_the_registry():
    # pooler/choices.py keeps --adjuster's list free of numpy (for `pooler --help`)
    from pooler.choices import ADJUSTERS
    assert ADJUSTERS == bias_mod.adjuster_choices()


def test_registering_twice_or_reusing_an_adjuster_name_is_refused(toy):
    with pytest.raises(ValueError, match="already registered"):
        register(TOY)
    with pytest.raises(ValueError, match="already taken"):
        register(BiasMethod("other", "other", _toy, "", adjuster="3psm"))
    with pytest.raises(ValueError, match="already taken"):
        register(BiasMethod("other", "other", _toy, "", adjuster="median"))


def test_a_registered_method_flows_everywhere(toy):
    import pooler.planning.scenarios as scen_mod
    from pooler.output.plots import ladder_rows
    from pooler.planning.simulate import estimator_names
    pooled = pool(make_effects(Y, V))
    b = bias_suite(pooled)
    w = 1 / V
    expect = 0.5 * np.dot(w, Y) / w.sum()      # the toy's definition, by hand
    assert_allclose(b.toy_half.estimate, expect, rtol=1e-12)
    assert b["toy_half"] is b.toy_half
    # bias table and frame
    row = [r for r in b.table() if r[0] == "toy half (test only)"]
    assert row and row[0][1] == b.toy_half.estimate and row[0][3] == f"weights {w.sum():.0f}"
    assert "toy half (test only)" in list(b.to_frame()["method"])
    # JSON: after the built-in keys, none of which moved
    doc = b.to_dict()
    assert list(doc)[-1] == "toy_half" and doc["toy_half"]["weight_sum"] == w.sum()
    json.dumps(doc, allow_nan=False)
    # adjusted estimates, adjuster choices and the scenarios
    assert b.adjusted()["toy_half"] == (b.toy_half.estimate, b.toy_half.se)
    assert bias_mod.adjuster_choices()[-1] == "toy-half"
    assert "toy-half" in scen_mod.ADJUSTERS
    sc = make_scenarios(pooled, b, adjuster="toy-half")
    assert sc.realistic.effect == min(expect, pooled.mu)
    assert sc.realistic.basis.startswith("toy half alone") and sc.realistic.methods == ("toy_half",)
    med = make_scenarios(pooled, b, adjuster="median")
    assert "toy half" in med.realistic.basis and "toy_half" in med.realistic.methods
    # methods sentence, ladder, stress-test estimators
    assert b.cited()[-1] == "a toy halving (Nobody, 2026)"
    assert ("toy half", b.toy_half.estimate) in [(r[0], r[1]) for r in ladder_rows(pooled, b, None)]
    assert estimator_names().index("toy half") == estimator_names().index("median of adjusters") - 1


def test_a_registered_method_reaches_the_cli_json(toy, run_cli, write_sheet):
    rows = [{"study": f"Invented {i}", "stat": "d", "value": y, "n1": 40, "n2": 40}
            for i, y in enumerate(Y)]
    res = run_cli("pool", write_sheet(rows), "--json")
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    assert "toy_half" in doc["bias"] and "excess_significance" in doc["bias"]


def test_not_estimable_method_chosen_alone_says_why(toy):
    from pooler.errors import OptionError
    pooled = pool(make_effects(Y[:2], V[:2]))
    b = bias_suite(pooled)
    assert isinstance(b.toy_half, NotEstimable) and "toy_half" not in b.adjusted()
    with pytest.raises(OptionError, match="the toy needs at least 3 studies"):
        make_scenarios(pooled, b, adjuster="toy-half")


def test_registry_is_back_to_the_built_ins_after_the_toy():
    assert "toy_half" not in [m.key for m in methods()]
    assert "toy-half" not in bias_mod.adjuster_choices()



def test_a_registered_method_is_a_stress_test_column(toy):
    from pooler.output.report import stress_text
    from pooler.planning.simulate import RULES, Cell, Shapes, stress_test
    res = stress_test([Cell(8, 0.3, 0.0, 1.0)], Shapes.generic(), reps=2, seed=3, workers=1)
    assert res.rules == RULES and "toy half" in res.estimators
    assert "toy half" in res.to_dict()["cells"][0]["estimators"]
    assert "toy half" in stress_text(res)
