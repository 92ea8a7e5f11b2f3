"""The trade-off grid of the model-average rule in the stress test (pooler.planning.simulate) and its
summary (pooler.planning.tradeoff): every grid point from one fit per literature, the default point
equal to the realistic and pessimistic rules, the n relative to the oracle n, and the table's
medians as defined (checked on a hand-made document)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from pooler.choices import MODEL_AVERAGE_DEFAULTS
from pooler.planning.simulate import (Cell, Shapes, evaluate_literature, simulate_literature,
                                      stress_test, tradeoff_points)
from pooler.planning.tradeoff import tradeoff_markdown, tradeoff_plot, tradeoff_table, tradeoff_text


@pytest.fixture(scope="module")
def small_run():
    cells = [Cell(6, 0.3, 0.1, 1.0), Cell(6, 0.3, 0.1, 0.1), Cell(12, 0.3, 0.0, 1.0),
             Cell(12, 0.3, 0.0, 0.1)]
    return stress_test(cells, Shapes.calibration(), reps=3, seed=11, workers=1)


W, Q = MODEL_AVERAGE_DEFAULTS["chance_of_no_bias"], MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"]


def test_default_point_is_the_realistic_and_pessimistic_rule(small_run):
    for c in small_run.cells:
        np.testing.assert_array_equal(c.tradeoff[(W, 0.5)][0], c.true_power["realistic"])
        np.testing.assert_array_equal(c.tradeoff[(W, Q)][0], c.true_power["pessimistic"])
        np.testing.assert_array_equal(c.tradeoff[(0.5, 0.5)][1], c.n_ratio["realistic"])
        assert set(c.tradeoff) == set(tradeoff_points())


def test_lower_quantiles_and_less_prior_weight_on_no_bias_ask_for_more(small_run):
    # for one literature the planning effect falls with the quantile (a quantile function)
    # and, for this direction of evidence, the n ratio rises with it
    for c in small_run.cells:
        for w in (0.5, 0.35, 0.2, 0.1):
            r = np.array([c.tradeoff[(w, q)][1] for q in (0.1, 0.2, 0.33, 0.5)])
            ok = np.all(np.isfinite(r), axis=0)
            assert np.all(np.diff(r[:, ok], axis=0) <= 1e-12)


def test_n_ratio_is_the_planned_n_over_the_oracle_n():
    from pooler.planning.power import n_for_power
    rng = np.random.default_rng(5)
    shapes = Shapes.calibration()
    y, v, idx = simulate_literature(rng, Cell(8, 0.35, 0.1, 0.5), shapes)
    est, pw, extra = evaluate_literature(y, v, idx, shapes, 0.35)
    oracle = int(n_for_power(0.35, 0.8).n)
    for rule in ("random effects", "realistic", "pessimistic"):
        if est[rule] > 0:
            assert extra["n_ratio"][rule] == pytest.approx(
                int(n_for_power(est[rule], 0.8).n) / oracle, rel=1e-12)
        else:
            assert math.isnan(extra["n_ratio"][rule])


def _doc():
    # hand-made stress document: two k, two pi, two delta; one grid point
    cells = []
    for k in (5, 10):
        for pi in (1.0, 0.2, 0.05):
            for delta in (0.1, 0.4):
                base = 0.5 + 0.01 * k + (0.2 if pi == 1 else 0) + delta / 10
                cells.append({"cell": {"k": k, "delta": delta, "tau": 0.0, "pi": pi},
                              "tradeoff": [{"p_no_bias": 0.5, "quantile": 0.5,
                                            "median_power": base, "p10_power": base - 0.1,
                                            "share_no_positive_effect":
                                                0.05 if (k, pi, delta) == (10, 0.05, 0.4)
                                                else 0.0,
                                            "median_n_ratio": 1 + delta}]})
    return {"reps": 7, "cells": cells}


def test_table_medians_as_defined():
    t = tradeoff_table(_doc())
    p = t.point(0.5, 0.5)
    assert t.ks == (5, 10) and t.reps == 7
    # strong selection: the four cells with pi <= 0.2 per k, median of base values
    assert p.protection == pytest.approx((0.5 + 0.05 + 0.025, 0.5 + 0.10 + 0.025))
    assert p.power_unselected == pytest.approx((0.75 + 0.025, 0.80 + 0.025))
    assert p.n_ratio_unselected == pytest.approx((1.25, 1.25))
    # no plan at delta >= 0.2: 6 cells with delta 0.4, one at 5 %
    assert p.no_plan_mean == pytest.approx(0.05 / 6) and p.no_plan_worst == 0.05
    with pytest.raises(Exception, match="no point"):
        t.point(0.3, 0.5)


def test_table_text_markdown_and_figure(small_run):
    t = tradeoff_table(small_run.to_dict())
    assert len(t.points) == len(tradeoff_points()) and t.ks == (6, 12)
    txt = tradeoff_text(t)
    assert txt.count("*") >= 2 and "n / oracle n" in txt
    md = tradeoff_markdown(t)
    assert md.count("**0.5**") == 1 and md.count(f"**{Q:g}**") == 1
    fig = tradeoff_plot(t)
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == 2
    assert t.to_frame().shape[0] == len(t.points) * 2
    # the default marker follows the settings a run used
    doc = small_run.to_dict()
    doc["rule_options"] = {"chance_of_no_bias": 0.2, "pessimistic_quantile": 0.1}
    assert tradeoff_table(doc).default == (0.2, 0.5, 0.1)


def test_a_document_without_the_grid_is_refused():
    from pooler.errors import OptionError
    with pytest.raises(OptionError, match="no trade-off grid"):
        tradeoff_table({"cells": [{"cell": {"k": 5}}]})


def _point(w, q, prot, free, ratio, nop=0.0):
    from pooler.planning.tradeoff import TradeOffPoint
    return TradeOffPoint(w, q, prot, free, ratio, nop, nop)


def test_choose_default_follows_its_principle():
    from pooler.planning.tradeoff import TradeOff, choose_default
    pts = (
        # realistic points: 0.5 keeps the cost limit, 0.2 protects more and keeps it too,
        # 0.1 protects most but over-asks at k = 10 (n 1.3x the oracle)
        _point(0.5, 0.5, (0.40, 0.50), (0.82, 0.86), (1.0, 1.1)),
        _point(0.2, 0.5, (0.45, 0.58), (0.85, 0.89), (1.1, 1.2)),
        _point(0.1, 0.5, (0.50, 0.62), (0.87, 0.90), (1.2, 1.3)),
        # pessimistic candidates under 0.2: 0.33 misses k = 5, 0.25 meets both
        _point(0.2, 0.33, (0.70, 0.85), (0.95, 0.97), (1.8, 1.9)),
        _point(0.2, 0.25, (0.80, 0.90), (0.98, 0.99), (2.5, 2.6)),
        _point(0.2, 0.1, (0.95, 0.97), (1.0, 1.0), (9.0, 6.0)),
        _point(0.5, 0.25, (0.70, 0.80), (0.97, 0.98), (2.0, 2.1)),
        _point(0.1, 0.25, (0.85, 0.92), (0.99, 0.99), (3.0, 3.1)),
    )
    t = TradeOff((5, 10), pts, 40, (0.5, 0.5, 0.25))
    c = choose_default(t, current=(0.5, 0.25))
    assert (c.p_no_bias, c.pessimistic_quantile) == (0.2, 0.25)
    # a no-plan rate above the limit rules a prior out
    pts2 = tuple(_point(p.p_no_bias, p.quantile, p.protection, p.power_unselected,
                        p.n_ratio_unselected, 0.05 if p.p_no_bias == 0.2 else 0.0)
                 for p in pts)
    c2 = choose_default(TradeOff((5, 10), pts2, 40, (0.5, 0.5, 0.25)), current=(0.5, 0.25))
    assert c2.p_no_bias == 0.5
    # under 0.5 no quantile reaches 0.80 at every k: the current quantile stays
    assert c2.pessimistic_quantile == 0.25 and "stays" in c2.reasons[1]


def test_choose_default_when_no_prior_keeps_the_cost_limit():
    from pooler.planning.tradeoff import TradeOff, choose_default
    pts = (_point(0.5, 0.5, (0.40, 0.50), (0.82, 0.86), (1.1, 1.29)),
           _point(0.2, 0.5, (0.45, 0.58), (0.85, 0.92), (1.2, 1.45)),
           _point(0.5, 0.15, (0.85, 0.90), (1.0, 1.0), (4.0, 4.5)),
           _point(0.5, 0.2, (0.76, 0.83), (1.0, 1.0), (3.0, 3.1)))
    c = choose_default(TradeOff((5, 10), pts, 40, (0.5, 0.5, 0.25)), current=(0.5, 0.25))
    # the prior that over-asks least, and the cheapest quantile reaching 0.80 at every k
    assert (c.p_no_bias, c.pessimistic_quantile) == (0.5, 0.15)
    assert "over-asks least" in c.reasons[0]
