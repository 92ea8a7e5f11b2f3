"""Numerical edge cases through the whole job, figures and report included: every number is
finite or an explicit "not estimable", and nothing crashes."""
from __future__ import annotations

import json

import pytest

from pooler.output.outputs import render
from pooler.pipeline import run
from pooler.planning.power import Design

T = {"stat": "t", "n1": 30, "n2": 30}
CASES = {
    "k = 1": [{"study": "A", **T, "value": 2.2}],
    "k = 2": [{"study": "A", **T, "value": 2.2}, {"study": "B", **T, "value": 0.4}],
    "tau^2 = 0": [{"study": s, **T, "value": v} for s, v in
                  zip("ABCDE", [1.50, 1.52, 1.49, 1.51, 1.50])],
    "identical effects": [{"study": s, **T, "value": 2.0} for s in "ABCD"],
    "n = 4": [{"study": "A", "stat": "t", "value": 2.0, "n1": 2, "n2": 2},
              {"study": "B", "stat": "t", "value": 1.0, "n1": 2, "n2": 2},
              {"study": "C", "stat": "t", "value": 3.0, "n1": 2, "n2": 2}],
    "n = 10^7": [{"study": "A", "stat": "t", "value": 9.0, "n1": 5_000_000, "n2": 5_000_000},
                 {"study": "B", **T, "value": 2.0}, {"study": "C", **T, "value": 1.0}],
    "|r| = 0.999999": [{"study": "A", "stat": "r", "value": 0.999999, "n": 50},
                       {"study": "B", "stat": "r", "value": 0.3, "n": 80},
                       {"study": "C", "stat": "r", "value": -0.999999, "n": 60}],
    "huge and tiny variances": [{"study": "A", "stat": "d", "value": 0.3, "n1": 2, "n2": 2},
                                {"study": "B", "stat": "d", "value": 0.2, "n1": 3_000_000,
                                 "n2": 3_000_000},
                                {"study": "C", "stat": "d", "value": 0.5, "n1": 40, "n2": 40}],
    "opposite signs": [{"study": s, **T, "value": v} for s, v in
                       zip("ABCDEF", [3.0, -3.0, 2.5, -2.5, 0.5, -0.5])],
    "all negative": [{"study": s, **T, "value": v} for s, v in zip("ABCD", [-2, -1.5, -2.2, -0.8])],
}


@pytest.mark.parametrize("name", list(CASES))
@pytest.mark.parametrize("metric", ["d", "r"])
def test_edge_case_whole_job(name, metric, write_sheet):
    path = write_sheet(CASES[name])
    res = run(path, design=Design("two-group"), analysis_options={"metric": metric},
              plan_options={"n_total": 100})
    doc = json.loads(json.dumps(res.to_dict(), allow_nan=False))
    assert doc["inputs"]["rows_used"] + doc["inputs"]["rows_excluded"] == len(CASES[name])
    files = render(res, "svg")
    assert all(len(v) > 0 for v in files.values())


def test_k1_says_no_pooling(write_sheet):
    res = run(write_sheet(CASES["k = 1"]), design=Design("two-group"), analysis_options={},
              plan_options={})
    p = res.analysis.pooled
    assert not p.pooled and "one study" in str(p.pooled)
    sc = res.analysis.scenarios
    # one study: the model average plans below the face value and warns (issue 13)
    assert "averaged over 20 publication-bias models" in sc.realistic.basis
    assert sc.realistic.effect < p.mu
    assert "cannot be told apart" in sc.verdict
    old = run(write_sheet(CASES["k = 1"]), design=Design("two-group"),
              analysis_options={"adjuster": "safeguard"}, plan_options={})
    assert "no bias adjustment could be computed" in old.analysis.scenarios.realistic.basis


def test_opposite_signs_verdict(write_sheet):
    res = run(write_sheet(CASES["all negative"]), design=Design("two-group"),
              analysis_options={}, plan_options={})
    sc = res.analysis.scenarios
    assert not sc.supported and "does not support" in sc.verdict
    assert all(not isinstance(r.n_total, int) for r in res.plan.rows
               if r.scenario != "optimistic" or r.effect <= 0)
