"""The stress-test stage: simulated literatures through the real pipeline.

Checks: the random-effects estimate is unbiased without selection (standard result) and its
n then reaches about 80 % median true power; under strong selection it is biased upward
(Carter, Schönbrodt, Gervais & Hilgard 2019); seeded runs are exactly reproducible,
whatever the number of worker processes.
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from pooler.planning.simulate import Cell, Shapes, simulate_literature, stress_test


def test_simulated_studies_follow_their_sampling_distribution():
    # no selection, tau = 0: g is (nearly) unbiased for delta and its variance matches the
    # large-sample formula on average (Borenstein et al. 2009 eqs. 4.20, 4.24)
    rng = np.random.default_rng(5)
    sh = Shapes.generic(40, 40)
    y, v, _ = simulate_literature(rng, Cell(4000, 0.4, 0.0, 1.0), sh)
    assert abs(y.mean() - 0.4) < 3 * y.std() / np.sqrt(len(y)) + 0.005
    assert abs(y.var() / v.mean() - 1) < 0.08


@pytest.mark.slow
def test_no_selection_random_effects_unbiased_and_near_80_percent():
    res = stress_test([Cell(20, 0.4, 0.0, 1.0)], Shapes.generic(), reps=60, seed=11,
                      workers=2)
    c = res.cells[0]
    re = c.estimates["random effects"]
    assert abs(re.mean() - 0.4) < 3 * re.std() / np.sqrt(len(re))
    med = float(np.nanmedian(c.true_power["random effects"]))
    assert 0.70 <= med <= 0.90


@pytest.mark.slow
def test_strong_selection_inflates_the_naive_estimate():
    res = stress_test([Cell(20, 0.2, 0.1, 0.05)], Shapes.generic(), reps=20, seed=12,
                      workers=2)
    c = res.cells[0]
    assert c.estimates["random effects"].mean() > 0.2 + 0.1
    # and planning on it gives far less than the promised 80 % power
    assert float(np.nanmedian(c.true_power["random effects"])) < 0.6


@pytest.mark.slow
def test_seeded_runs_are_reproducible_across_worker_counts():
    cells = [Cell(10, 0.3, 0.1, 0.2), Cell(10, 0.2, 0.0, 1.0)]
    a = stress_test(cells, Shapes.generic(), reps=3, seed=7, workers=1)
    b = stress_test(cells, Shapes.generic(), reps=3, seed=7, workers=2)
    assert json.dumps(a.to_dict()) == json.dumps(b.to_dict())
    c = stress_test(cells, Shapes.generic(), reps=3, seed=8, workers=1)
    assert json.dumps(a.to_dict()) != json.dumps(c.to_dict())


def test_the_stress_test_runs_on_a_dask_cluster_with_the_same_results():
    """pooler stress --scheduler: the same seeded chunks on a dask.distributed LocalCluster
    give byte-identical results to this process."""
    distributed = pytest.importorskip("dask.distributed")
    cells = [Cell(5, 0.3, 0.1, 0.2)]
    local = stress_test(cells, Shapes.generic(), reps=2, seed=7, workers=1)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        remote = stress_test(cells, Shapes.generic(), reps=2, seed=7, scheduler=client)
    assert json.dumps(local.to_dict()) == json.dumps(remote.to_dict())


@pytest.mark.slow
def test_stress_command_on_demo(run_cli, demo_path, tmp_path):
    out = tmp_path / "s"
    res = run_cli("stress", demo_path, "--reps", "2", "--workers", "1", "--out", out)
    assert res.exit_code == 0, res.output
    assert "True power reached" in res.stdout and "Bias / RMSE" in res.stdout
    doc = json.loads((out / "stress.json").read_text())
    assert doc["schema"] == "pooler.stress/1" and len(doc["cells"]) == 9
    assert (out / "stress.png").stat().st_size > 1000
    assert run_cli("stress").exit_code == 2


def test_calibration_grid_and_shapes_cover_small_literatures():
    # issue: the calibration must include k = 5, paired studies and small samples
    from pooler.planning.simulate import Cell, Shapes, calibration_grid, simulate_literature
    cells = calibration_grid()
    assert len(cells) == 108 and {c.k for c in cells} == {5, 10, 20, 40}
    sh = Shapes.calibration()
    assert 0.15 < sh.within.mean() < 0.35
    assert sh.n1.min() >= 10 and sh.n1.max() <= 60
    assert set(sh.r[sh.within]) == {0.5} and set(sh.r[~sh.within]) == {0.0}
    y, v, idx = simulate_literature(np.random.default_rng(3), Cell(5, 0.3, 0.0, 1.0), sh)
    assert len(y) == 5 and np.all(v > 0)


@pytest.mark.slow
def test_stress_figure_shows_the_share_without_a_plan():
    from pooler.output.plots import stress_plot
    from pooler.planning.simulate import Cell, Shapes, stress_test
    res = stress_test([Cell(5, 0.05, 0.0, 0.05)], Shapes.generic(), reps=20, seed=5, workers=1)
    fig = stress_plot(res)
    texts = [t.get_text() for t in fig.axes[0].texts]
    shares = {r: 1 - np.isfinite(res.cells[0].true_power[r]).mean() for r in res.rules}
    expected = {r for r, s in shares.items() if s >= 0.05}
    assert expected  # the cell is chosen so that some rule has no plan in some literatures
    assert len([t for t in texts if t.endswith("% no plan")]) == len(expected)


def test_stress_explains_its_grid_also_when_the_realistic_effect_is_not_positive(demo_path):
    from pooler.pipeline import analyse
    from pooler.planning.simulate import grid_around, grid_note
    a = analyse(demo_path)
    r = a.scenarios.realistic.effect
    assert f"{r:.3f}" in grid_note(a) and r > 0
    assert sorted({c.delta for c in grid_around(a)}) == sorted(
        round(s * r, 3) for s in (0.5, 1.0, 1.5))
    # the same analysis with a non-positive realistic effect: the grid and its explanation
    import dataclasses
    neg = dataclasses.replace(a.scenarios.realistic, effect=-0.05)
    a2 = dataclasses.replace(a, scenarios=dataclasses.replace(a.scenarios, realistic=neg))
    assert sorted({c.delta for c in grid_around(a2)}) == [0.1, 0.2, 0.3]
    assert "not positive" in grid_note(a2) and "0.1, 0.2 and 0.3" in grid_note(a2)
