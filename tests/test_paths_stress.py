"""Stress check of the sheet route (pooler.planning.pathstress): literatures like the user's, simulated
from known correlations, planned through pool_paths; identical on local processes and a
dask.distributed LocalCluster."""
from __future__ import annotations

import json

import pytest


def _write(path, header, rows):
    path.write_text(",".join(header) + "\n"
                    + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n")
    return path


def _moderation_sheet(tmp_path, n):
    # invented correlations; three studies per pair
    rows = []
    for pair, r in (("X-Y", 0.3), ("Z-Y", 0.2), ("XZ-Y", 0.15), ("X-Z", 0.1)):
        rows += [[f"{pair} {i}", pair, "r", r + d, n] for i, d in enumerate((-0.01, 0, 0.01))]
    return _write(tmp_path / "mod.csv", ["study", "path", "stat", "value", "n"], rows)


def test_huge_unselected_literatures_recover_the_truth(tmp_path):
    """With studies of n = 40,000 and no selection, every simulated pair pools to its true
    correlation within a few thousandths (Fisher 1921: SE of z = 1/sqrt(n - 3) = 0.005), so the
    optimistic (random-effects) interaction's f^2 is the true one within 15 %."""
    from pooler.reading.pathsheet import pool_paths
    from pooler.planning.pathstress import stress_paths
    ps = pool_paths(_moderation_sheet(tmp_path, 40_000), "moderation")
    res = stress_paths(ps, literatures=2, selection=(1.0,), seed=7)
    cell = res.cells[0]
    assert cell.literatures == 2 and cell.no_plan == 0
    assert cell.median_ratio["optimistic"]["XZ-Y"] == pytest.approx(1.0, abs=0.15)
    assert res.targets["XZ-Y"] == pytest.approx(ps.designs["realistic"].interaction_f2())


@pytest.mark.slow
def test_local_processes_and_dask_give_identical_results(tmp_path):
    distributed = pytest.importorskip("dask.distributed")
    from pooler.reading.pathsheet import pool_paths
    from pooler.planning.pathstress import stress_paths
    ps = pool_paths(_moderation_sheet(tmp_path, 150), "moderation")
    local = stress_paths(ps, literatures=3, selection=(0.3,), seed=8, workers=1)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        remote = stress_paths(ps, literatures=3, selection=(0.3,), seed=8, scheduler=client)
    assert local.to_dict() == remote.to_dict()
    assert local.cells[0].literatures == 3


def test_cli_stress_json_and_refusals(run_cli, tmp_path):
    sheet = _moderation_sheet(tmp_path, 150)
    res = run_cli("paths", sheet, "--design", "moderation", "--stress", "--literatures", 1,
                  "--workers", 1, "--json")
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    assert doc["schema"] == "pooler.paths-stress/1"
    assert [c["selection"] for c in doc["cells"]] == [1.0, 0.2]
    assert set(doc["cells"][0]["cautious"]) == {"optimistic", "realistic", "pessimistic"}
    bad = run_cli("paths", "--design", "moderation", "--stress", "--interaction", 0.1)
    assert bad.exit_code == 2 and "--stress checks the planning of a SHEET" in bad.stderr
