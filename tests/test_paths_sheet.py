"""Path literatures feeding the simulated mediation plans (``pooler paths SHEET``).

Sources named beside each check.
"""
from __future__ import annotations

import math

import numpy as np
import pytest


def _write(path, header, rows):
    path.write_text(",".join(header) + "\n"
                    + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n")
    return path


# ------------------------------------------------------------------ conversions

def test_coefficient_t_gives_the_partial_correlation_from_residuals():
    """r_p = t / sqrt(t^2 + df) (Aloe & Becker 2012; Aloe 2014) equals the correlation of the
    residuals of Y and of X1 after regressing each on the other predictors (the definition
    of the partial correlation), t and df from statsmodels OLS on simulated data."""
    import statsmodels.api as sm
    from pooler.evidence.effects import partial_r_from_t
    rng = np.random.default_rng(15)
    for n, q in ((40, 1), (120, 2), (500, 3)):
        z = rng.standard_normal((n, q))
        x = z @ rng.uniform(-0.5, 0.5, q) + rng.standard_normal(n)
        y = 0.3 * x + z @ rng.uniform(-0.5, 0.5, q) + rng.standard_normal(n)
        fit = sm.OLS(y, sm.add_constant(np.column_stack([x, z]))).fit()
        rp = partial_r_from_t(fit.tvalues[1], fit.df_resid)
        zc = sm.add_constant(z)
        ex = sm.OLS(x, zc).fit().resid
        ey = sm.OLS(y, zc).fit().resid
        assert rp == pytest.approx(np.corrcoef(ex, ey)[0, 1], abs=1e-10)
        assert fit.df_resid == n - q - 2


def test_partial_correlation_variance_and_one_predictor_rows(tmp_path):
    """Fisher z of a partial correlation with q controls has variance 1/(n - q - 3) (Fisher
    1924), which is 1/(df - 1) with df = n - q - 2; a coefficient of the only predictor is
    the zero-order correlation, so coef_t with one predictor and r agree (same n)."""
    from pooler.evidence.effects import convert
    from pooler.reading.sheet import read_sheet
    t = 0.25 * math.sqrt(98) / math.sqrt(1 - 0.25 ** 2)  # the t of r = .25 with n = 100
    s = _write(tmp_path / "s.csv", ["study", "stat", "value", "n", "df", "predictors"],
               [["A", "coef_t", t, "", 98, 1], ["B", "r", 0.25, 100, "", ""],
                ["C", "partial_r", 0.3, 100, "", 3], ["D", "std_coef", 0.25, 100, "", 1]])
    eff = convert(read_sheet(s), "r")
    a, b, c, d = eff.rows
    assert a.effect == pytest.approx(b.effect, abs=1e-12)
    assert a.variance == pytest.approx(1 / 97, abs=1e-12) == b.variance
    assert c.effect == pytest.approx(math.atanh(0.3))
    assert c.variance == pytest.approx(1 / (100 - 2 - 3))  # q = 2 controls
    assert d.effect == pytest.approx(b.effect) and d.variance == pytest.approx(b.variance)
    assert any("zero-order" in n for n in a.notes)
    assert any("ASSUMED" in n for n in c.notes)


def test_standardized_coefficient_with_other_predictors_is_refused(tmp_path):
    from pooler.evidence.effects import convert
    from pooler.errors import InputError
    from pooler.reading.sheet import read_sheet
    s = _write(tmp_path / "s.csv", ["study", "stat", "value", "n", "predictors"],
               [["A", "std_coef", 0.3, 100, 3]])
    with pytest.raises(InputError, match="not the correlation of the pair") as e:
        convert(read_sheet(s), "r")
    assert e.value.row == 2 and e.value.column == "stat"
    s = _write(tmp_path / "t.csv", ["study", "stat", "value", "n"], [["A", "std_coef", 0.3, 100]])
    with pytest.raises(InputError, match="predictors") as e:
        convert(read_sheet(s), "r")
    assert e.value.column == "predictors"


# ------------------------------------------------------------------ pooling each path

DEMO = "demo_literature/garden_paths.csv"


def _demo_path():
    from pathlib import Path
    return Path(__file__).resolve().parent.parent / DEMO


@pytest.mark.slow
def test_each_path_is_the_ordinary_pool_of_its_rows_alone(tmp_path):
    """A path's pooled and scenario values equal `pooler.pipeline.analyse` (convert, pool,
    bias suite, scenarios on the r metric) run on a sheet holding only that path's rows."""
    import csv
    from pooler.reading.pathsheet import pool_paths
    from pooler.pipeline import analyse
    ps = pool_paths(_demo_path(), "parallel-mediation")
    with open(_demo_path(), newline="") as fh:
        rows = list(csv.DictReader(fh))
    for pair in ("X-M1", "M2-Y", "M1-M2"):
        mine = [r for r in rows if r["path"] == pair]
        one = tmp_path / f"{pair}.csv"
        with open(one, "w", newline="") as fh:
            cols = [c for c in mine[0] if c != "path"]
            w = csv.DictWriter(fh, fieldnames=cols, extrasaction="ignore")
            w.writeheader()
            w.writerows(mine)
        a = analyse(one, metric="r")
        p = ps[pair]
        assert p.k == a.pooled.k == len([r for r in mine if not r["exclude"]])
        assert p.pooled == pytest.approx(math.tanh(a.pooled.pooled.estimate), abs=1e-12)
        expect = {e.scenario: e.effect for e in a.scenarios.planning_effects()}
        for s in ("optimistic", "realistic", "pessimistic"):
            assert p.values[s] == pytest.approx(expect[s], abs=1e-12)


def test_scenario_designs_are_the_paths_of_the_scenario_matrix():
    """Each scenario's design is design_from_correlations of that scenario's values
    (Viswesvaran & Ones 1995); a = r(X, Mi) for parallel mediators, and the b paths are
    R_PP^-1 r_PY, checked here by numpy least squares on the matrix."""
    from pooler.reading.pathsheet import pool_paths
    ps = pool_paths(_demo_path(), "parallel-mediation")
    for s, d in ps.designs.items():
        mat = np.array(ps.matrices[s])
        coef = np.linalg.solve(mat[:3, :3], mat[:3, 3])  # Y on X, M1, M2
        assert d.a == pytest.approx(tuple(mat[0, 1:3]))
        assert d.b == pytest.approx(tuple(coef[1:])) and d.direct == pytest.approx(coef[0])
        assert np.linalg.eigvalsh(mat).min() > 0


def test_paths_without_literature_come_from_options(tmp_path):
    from pooler.reading.pathsheet import pool_paths
    s = _write(tmp_path / "s.csv", ["study", "path", "stat", "value", "n"],
               [["A", "X-M", "r", 0.3, 200], ["B", "X-M", "r", 0.25, 150],
                ["C", "M-Y", "r", 0.35, 180]])
    ps = pool_paths(s, "simple-mediation", {"X-Y": 0.1}, option_names={"X-Y": "--direct"})
    assert ps["X-Y"].source == "option"
    assert all(v == 0.1 for v in ps["X-Y"].values.values())
    assert ps["X-M"].k == 2 and ps["M-Y"].k == 1


def test_not_positive_definite_names_the_pairs_and_exits_2(tmp_path):
    from click.testing import CliRunner
    from pooler.cli import main
    s = _write(tmp_path / "s.csv", ["study", "path", "stat", "value", "n"],
               [["A", "X-M", "r", 0.9, 800], ["B", "X-M", "r", 0.9, 900],
                ["C", "M-Y", "r", 0.9, 850]])
    res = CliRunner().invoke(main, ["paths", str(s), "--design", "simple-mediation",
                                    "--direct", "-0.5"])
    assert res.exit_code == 2
    assert "cannot occur together" in res.output and "not positive definite" in res.output
    for pair in ("X-M = 0.900", "X-Y = -0.500", "M-Y = 0.900"):
        assert pair in res.output
    assert "s.csv" in res.output


# ------------------------------------------------------------------ the command

@pytest.mark.slow
def test_cli_on_the_demo_sheet_plans_three_scenarios_and_writes_files(tmp_path):
    import json
    from click.testing import CliRunner
    from pooler.cli import main
    out = tmp_path / "garden"
    res = CliRunner().invoke(main, ["paths", str(_demo_path()), "--design",
                                    "parallel-mediation", "--test", "joint", "--reps", "200",
                                    "--power", "0.8", "--out", str(out)])
    assert res.exit_code == 0, res.output
    for pair in ("X-M1", "X-M2", "M1-M2", "M1-Y", "M2-Y", "X-Y"):
        assert pair in res.output
    for s in ("optimistic", "realistic", "pessimistic"):
        assert f"{s}: parallel mediation" in res.output
    assert "95% MC interval of n" in res.output
    names = {p.name for p in out.iterdir()}
    assert {"results.json", "report.md", "path_diagram.png", "power_curve_optimistic.png",
            "power_curve_realistic.png", "power_curve_pessimistic.png"} <= names
    doc = json.loads((out / "results.json").read_text())
    assert [s["scenario"] for s in doc["scenarios"]] == ["optimistic", "realistic",
                                                           "pessimistic"]
    assert {p["path"] for p in doc["paths"]["paths"]} == {"X-M1", "X-M2", "X-Y", "M1-M2",
                                                          "M1-Y", "M2-Y"}
    report = (out / "report.md").read_text()
    assert "Aloe & Becker" in report and "Viswesvaran & Ones" in report
    assert "## Methods" in report and "path_diagram.png" in report


@pytest.mark.slow
def test_cli_fixed_n_with_a_sheet_gives_power_per_scenario():
    from click.testing import CliRunner
    from pooler.cli import main
    res = CliRunner().invoke(main, ["paths", str(_demo_path()), "--design",
                                    "parallel-mediation", "--test", "joint", "--reps", "200",
                                    "--n", "300"])
    assert res.exit_code == 0, res.output
    assert res.output.count("n = 300") == 3


@pytest.mark.parametrize("rows, args, fragment, row, column", [
    ([["A", "X-Q", "r", 0.3, 100]], [], "names Q, which is not a variable", 2, "path"),
    ([["A", "X", "r", 0.3, 100]], [], "is not a pair of two variables", 2, "path"),
    ([["A", "", "r", 0.3, 100]], [], "'path' is empty", 2, "path"),
    ([["A", "X-M", "r", 0.3, 100], ["B", "M-Y", "r", 0.3, 100]], [],
     "the path X-Y has no rows to pool; add rows for it or give its correlation with "
     "--direct or --pair X-Y=R",
     None, "path"),
    ([["A", "X-M", "r", 0.3, 100], ["B", "M-Y", "r", 0.3, 100], ["C", "X-Y", "r", 0.1, 90]],
     ["--a", "0.2"], "the path X-M has rows in the sheet (rows 2) and is also given as --a",
     None, "path"),
])
def test_bad_path_sheets_say_where(tmp_path, rows, args, fragment, row, column):
    from click.testing import CliRunner
    from pooler.cli import main
    s = _write(tmp_path / "paths.csv", ["study", "path", "stat", "value", "n"], rows)
    res = CliRunner().invoke(main, ["paths", str(s), "--design", "simple-mediation", *args])
    assert res.exit_code == 2, res.output
    assert fragment in res.output
    assert "paths.csv" in res.output
    if row is not None:
        assert f"row {row}" in res.output
    assert f"column '{column}'" in res.output


def test_sheet_mistakes_in_options_exit_2(tmp_path):
    from click.testing import CliRunner
    from pooler.cli import main
    s = _write(tmp_path / "p.csv", ["study", "stat", "value", "n"], [["A", "r", 0.3, 100]])
    run = CliRunner().invoke
    res = run(main, ["paths", str(s), "--design", "simple-mediation"])
    assert res.exit_code == 2 and "needs a 'path' column" in res.output and "row 1" in res.output
    res = run(main, ["paths", str(s), "--design", "moderation", "--interaction", "0.1"])
    assert res.exit_code == 2 and "--interaction: with a SHEET" in res.output
    res = run(main, ["paths", str(s), "--design", "parallel-mediation", "--mediator-r", "0.2"])
    assert res.exit_code == 2 and "--mediator-r does not apply" in res.output


def test_serial_sheet_with_pairs_given_by_pair(tmp_path):
    """Pairs may be written in either order and with an arrow; --pair fills any pair."""
    from click.testing import CliRunner
    from pooler.cli import main
    s = _write(tmp_path / "serial.csv", ["study", "path", "stat", "value", "n", "df", "predictors"],
               [["A", "X-M1", "r", 0.35, 200, "", ""], ["B", "M1->X", "coef_t", 4.1, "", 150, 1],
                ["C", "M1-M2", "r", 0.4, 180, "", ""], ["D", "M2-Y", "coef_t", 3.2, "", 170, 3],
                ["E", "Y-M2", "r", 0.3, 120, "", ""]])
    res = CliRunner().invoke(main, ["paths", str(s), "--design", "serial-mediation",
                                    "--pair", "X-M2=0.1", "--pair", "M1-Y=0.2", "--direct", "0.1",
                                    "--test", "joint", "--reps", "200", "--n", "200"])
    assert res.exit_code == 0, res.output
    assert "--pair X-M2=0.1" in res.output and "rows 2, 3" in res.output
    assert res.output.count("n = 200") == 3
    bad = CliRunner().invoke(main, ["paths", str(s), "--design", "serial-mediation",
                                    "--pair", "X-M2:0.1"])
    assert bad.exit_code == 2 and "e.g. --pair X-M2=0.2" in bad.output


def test_conversion_warnings_of_each_path_are_shown(tmp_path):
    from click.testing import CliRunner
    from pooler.cli import main
    s = _write(tmp_path / "dup.csv", ["study", "path", "stat", "value", "n"],
               [["A", "X-M", "r", 0.3, 100], ["A", "X-M", "r", 0.3, 100],
                ["B", "M-Y", "r", 0.3, 100], ["C", "X-Y", "r", 0.2, 100]])
    res = CliRunner().invoke(main, ["paths", str(s), "--design", "simple-mediation",
                                    "--test", "joint", "--reps", "100", "--n", "100"])
    assert res.exit_code == 0, res.output
    assert "row 3 repeats row 2" in res.output
