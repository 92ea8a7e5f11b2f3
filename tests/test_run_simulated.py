"""`pooler run SHEET --design <simulated design>` is the same job as `pooler paths SHEET`
(one implementation, pooler.pathsjob.paths_job): same documents, same files, its own
refusals of options that do not apply."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
GARDEN = ROOT / "demo_literature" / "garden_paths.csv"
PRACTICE = ROOT / "demo_literature" / "practice_feedback_moderation.csv"


def _write(path, header, rows):
    path.write_text(",".join(header) + "\n"
                    + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n")
    return path


def test_simulated_designs_are_in_the_registry_and_in_run_help(run_cli):
    from pooler.planning import designs
    from pooler.planning.design_choices import SIMULATED_DESIGNS
    assert SIMULATED_DESIGNS == tuple(s.name for s in designs.simulated())
    assert designs.get_simulated("moderation").factory.__name__ == "Moderation"
    with pytest.raises(Exception, match="must be one of simple-mediation"):
        designs.get_simulated("two-group")
    res = run_cli("run", "--help")
    assert res.exit_code == 0
    for name in SIMULATED_DESIGNS:
        assert name in res.output
    assert "pooler run demo_literature/garden_paths.csv --design parallel-mediation" in \
        res.output
    # plan and demo keep the planned designs only
    from pooler.cli import main
    plan_design = next(p for p in main.commands["plan"].params if p.name == "design")
    assert not set(SIMULATED_DESIGNS) & set(plan_design.type.choices)


@pytest.mark.slow
def test_run_at_a_fixed_n_is_the_paths_document(run_cli, tmp_path):
    args = ["--design", "parallel-mediation", "--test", "joint", "--reps", "200", "--n", "250",
            "--json", "--workers", "1"]
    via_paths = run_cli("paths", GARDEN, *args)
    via_run = run_cli("run", GARDEN, *args, "--out", tmp_path / "o")
    assert via_paths.exit_code == 0 and via_run.exit_code == 0, via_run.output
    a, b = json.loads(via_paths.output), json.loads(via_run.output)
    assert a == b and a["schema"] == "pooler.paths-power/1"
    # run always writes its --out: the document and the tables
    assert json.loads((tmp_path / "o" / "results.json").read_text()) == b
    assert "n = 250" in (tmp_path / "o" / "report.md").read_text()


@pytest.mark.slow
def test_run_search_on_a_moderation_sheet_is_the_paths_search(run_cli, tmp_path):
    args = ["--design", "moderation", "--power", "0.8", "--reps", "200", "--workers", "1",
            "--json"]
    via_paths = run_cli("paths", PRACTICE, *args, "--out", tmp_path / "p")
    via_run = run_cli("run", PRACTICE, *args, "--out", tmp_path / "r")
    assert via_paths.exit_code == 0 and via_run.exit_code == 0, via_run.output
    a, b = json.loads(via_paths.output), json.loads(via_run.output)
    assert a == b and a["schema"] == "pooler.paths/1"
    assert [s["solutions"][0]["target"] for s in b["scenarios"]] == ["XZ-Y"] * 3
    files = sorted(p.name for p in (tmp_path / "r").iterdir() if not p.name.startswith("."))
    assert files == sorted(p.name for p in (tmp_path / "p").iterdir()
                           if not p.name.startswith("."))
    assert "path_diagram.png" in files and "power_curve_realistic.png" in files


@pytest.mark.slow
def test_run_text_shows_the_paths_and_the_planning_table(run_cli, tmp_path):
    res = run_cli("run", GARDEN, "--design", "parallel-mediation", "--test", "joint",
                  "--reps", "200", "--power", "0.8", "--workers", "1", "--out", tmp_path / "g")
    assert res.exit_code == 0, res.output
    assert "Paths of parallel-mediation pooled from" in res.output
    assert "realistic: parallel mediation" in res.output and "95% MC interval of n" in res.output
    assert f"Written to {tmp_path / 'g'}/" in res.output


def test_run_passes_the_analysis_options_to_each_path(run_cli, tmp_path):
    """--estimator reaches every path's pooling (the JSON records it per path)."""
    res = run_cli("run", PRACTICE, "--design", "moderation", "--estimator", "dl", "--n", "200",
                  "--reps", "200", "--workers", "1", "--json", "--out", tmp_path / "o")
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    pools = [p["pool"] for p in doc["paths"]["paths"] if p["source"] == "sheet"]
    assert pools and all(p["estimator"] == "dl" for p in pools)


@pytest.mark.parametrize("sheet, args, fragment", [
    (GARDEN, ["--design", "parallel-mediation", "--allocation", "1:2"],
     "--allocation: not used by the simulated design parallel-mediation"),
    (GARDEN, ["--design", "parallel-mediation", "--one-sided", "--attrition", "0.1"],
     "--one-sided, --attrition: not used"),
    (GARDEN, ["--design", "parallel-mediation", "--metric", "d"], "--metric d"),
    (GARDEN, ["--design", "parallel-mediation", "--xz-r", "0.2"], "moderation only"),
    (GARDEN, ["--design", "parallel-mediation", "--pair", "X-Q=0.1"],
     "--pair X-Q=0.1 names Q, which is not a variable of parallel-mediation"),
    (PRACTICE, ["--design", "moderation", "--pair", "X-XZ=0.1"],
     "X-XZ is not a pair moderation takes"),
    (ROOT / "demo_literature" / "break_and_proofreading.csv", ["--test", "joint"],
     "--test: for the simulated designs only"),
    (ROOT / "demo_literature" / "break_and_proofreading.csv",
     ["--design", "simple-mediation"], "needs a 'path' column"),
])
def test_run_refuses_what_does_not_apply(run_cli, tmp_path, sheet, args, fragment):
    out = tmp_path / "o"
    res = run_cli("run", sheet, *args, "--out", out)
    assert res.exit_code == 2, res.output
    assert fragment in res.stderr
    assert not out.exists()


def test_run_names_pair_for_a_pair_without_rows(run_cli, tmp_path):
    s = _write(tmp_path / "s.csv", ["study", "path", "stat", "value", "n"],
               [["A", "X-M", "r", 0.3, 200], ["B", "M-Y", "r", 0.3, 150]])
    res = run_cli("run", s, "--design", "simple-mediation", "--out", tmp_path / "o")
    assert res.exit_code == 2
    assert "the path X-Y has no rows to pool" in res.stderr
    assert "--pair X-Y=R" in res.stderr and "--direct" not in res.stderr
    ok = run_cli("run", s, "--design", "simple-mediation", "--pair", "X-Y=0.1", "--test",
                 "joint", "--n", "150", "--reps", "200", "--workers", "1",
                 "--out", tmp_path / "o")
    assert ok.exit_code == 0, ok.output
    assert "--pair X-Y=0.1" in ok.output and ok.output.count("n = 150") == 3
