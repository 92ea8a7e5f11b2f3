"""Moderation planned from a path sheet (rows for X-Y, Z-Y, X-Z and the interaction XZ-Y, or
simple slopes within two groups). Sources named beside each check."""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import special as sp

from pooler.planning.simdesign import (Moderation, moderation_from_correlations,
                                       moderation_from_group_correlations, simulate_power)

DEMO = Path(__file__).resolve().parent.parent / "demo_literature" / \
    "practice_feedback_moderation.csv"


def _write(path, header, rows):
    path.write_text(",".join(header) + "\n"
                    + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n")
    return path


def f_power(f2, n, u, predictors, alpha=0.05):
    """Power of the F test of u added predictors, lambda = f^2 N (Cohen 1988, ch. 9),
    F(u, N - predictors - 1), from scipy.special's noncentral F."""
    df2 = n - predictors - 1
    crit = sp.fdtri(u, df2, 1 - alpha)
    return 1 - sp.ncfdtr(u, df2, f2 * n, crit)


# ------------------------------------------------------------------ the closed forms

@pytest.mark.parametrize("design", [Moderation(0.3, 0.2, 0.15, xz_r=0.3),
                                    Moderation(0.25, -0.1, -0.12),
                                    Moderation(0.3, 0.2, 0.2, xz_r=0.2, binary_moderator=True)])
def test_moderation_from_correlations_recovers_the_coefficients(design):
    """The correlations X-Y, Z-Y, X-Z and the interaction's partial correlation, measured on
    one large simulated sample (np.corrcoef; the partial r as t / sqrt(t^2 + df) from
    statsmodels OLS of Y on X, Z and XZ, Aloe & Becker 2012), give back the design's
    coefficients (path analysis of the correlation matrix, Viswesvaran & Ones 1995; the
    interaction from f^2 = r_p^2 / (1 - r_p^2), Cohen 1988)."""
    import statsmodels.api as sm
    rng = np.random.default_rng(151)
    n = 400_000
    x, z, xz, y = design.simulate(rng, 1, n)[0].T
    fit = sm.OLS(y, sm.add_constant(np.column_stack([x, z, xz]))).fit()
    t, df = fit.tvalues[3], fit.df_resid
    r = np.corrcoef(np.vstack([x, z, y]))
    got = moderation_from_correlations(
        {"X-Y": r[0, 2], "Z-Y": r[1, 2], "X-Z": r[0, 1], "XZ-Y": t / math.sqrt(t * t + df)},
        binary_moderator=design.binary_moderator)
    # sampling error at n = 400,000: SE of each ~ 1 / sqrt(n) = 0.0016; tolerance 0.006
    assert got.x_effect == pytest.approx(design.x_effect, abs=0.006)
    assert got.z_effect == pytest.approx(design.z_effect, abs=0.006)
    assert got.interaction == pytest.approx(design.interaction, abs=0.006)


def test_interaction_f2_is_the_partial_correlations_f2():
    """Cohen (1988, ch. 9): f^2 of one added predictor = partial R^2 / (1 - partial R^2);
    the design built from r_p has exactly that f^2, over a grid of inputs."""
    for rp in (-0.3, 0.05, 0.15, 0.4):
        for rxy, rzy, rxz in ((0.3, 0.2, 0.0), (0.1, 0.4, 0.3), (-0.2, 0.25, -0.4)):
            for binary in (False, True):
                m = moderation_from_correlations(
                    {"X-Y": rxy, "Z-Y": rzy, "X-Z": rxz, "XZ-Y": rp}, binary_moderator=binary)
                assert m.interaction_f2() == pytest.approx(rp * rp / (1 - rp * rp), rel=1e-12)
                assert np.sign(m.interaction) == np.sign(rp)


def test_group_correlations_give_the_slopes():
    """Within-group X-Y correlations and the group-Y correlation of a large simulated sample
    of a binary-moderator design (np.corrcoef) give back its slopes x + xz and x - xz and
    z (the closed form in moderation_from_group_correlations)."""
    design = Moderation(0.25, 0.2, 0.15, binary_moderator=True)
    rng = np.random.default_rng(152)
    x, g, _, y = design.simulate(rng, 1, 400_000)[0].T
    high, low = g > 0, g < 0
    got = moderation_from_group_correlations(np.corrcoef(x[high], y[high])[0, 1],
                                             np.corrcoef(x[low], y[low])[0, 1],
                                             np.corrcoef(g, y)[0, 1])
    assert got.binary_moderator
    assert got.x_effect == pytest.approx(design.x_effect, abs=0.006)
    assert got.interaction == pytest.approx(design.interaction, abs=0.006)
    assert got.z_effect == pytest.approx(design.z_effect, abs=0.006)


# ------------------------------------------------------------------ the sheet

def test_demo_sheet_pools_each_pair_and_plans_the_interaction():
    """Each scenario's interaction has the f^2 of its realistic partial correlation, and the
    simulated power of the interaction at n = 300 equals the noncentral-F power for that
    f^2 (Cohen 1988, ch. 9) within 3 MC SE plus 0.02 (random, heavy-tailed product term; the
    same allowance as tests/test_simdesign.py)."""
    from pooler.reading.pathsheet import pool_paths
    ps = pool_paths(DEMO, "moderation")
    assert [p.path for p in ps.paths] == ["X-Y", "Z-Y", "XZ-Y", "X-Z"]
    assert all(p.source == "sheet" and p.k >= 9 for p in ps.paths)
    for s, d in ps.designs.items():
        rp = ps["XZ-Y"].values[s]
        assert d.interaction_f2() == pytest.approx(rp * rp / (1 - rp * rp), rel=1e-12)
        assert d.xz_r == pytest.approx(ps["X-Z"].values[s])
        mat = np.array(ps.matrices[s])
        assert np.linalg.eigvalsh(mat).min() > 0
        assert mat[0, 3] == pytest.approx(ps["X-Y"].values[s], abs=1e-12)
    d = ps.designs["realistic"]
    est = simulate_power(d, 300, reps=2000, seed=153)["XZ-Y"]
    expect = f_power(d.interaction_f2(), 300, 1, 3)
    assert abs(est.power - expect) <= 3 * est.mc_se + 0.02
    # the scenarios are ordered for the interaction
    f2 = [ps.designs[s].interaction_f2() for s in ("optimistic", "realistic", "pessimistic")]
    assert f2[0] >= f2[1] >= f2[2]


def test_x_z_without_rows_is_zero_and_said(tmp_path):
    from pooler.reading.pathsheet import pool_paths
    s = _write(tmp_path / "m.csv", ["study", "path", "stat", "value", "n", "df", "predictors"],
               [["A", "X-Y", "r", 0.3, 200, "", ""], ["B", "Z-Y", "r", 0.2, 150, "", ""],
                ["C", "X*Z -> Y", "coef_t", 2.2, "", 196, 3]])
    ps = pool_paths(s, "moderation")
    assert ps["X-Z"].source == "option" and ps["X-Z"].values["realistic"] == 0
    assert "no rows" in ps["X-Z"].option
    assert ps["XZ-Y"].rows == (4,)
    assert any("partial correlation of the product term" in n for n in ps.notes)


def test_slope_sheet_plans_a_binary_moderator(tmp_path):
    from pooler.reading.pathsheet import pool_paths
    s = _write(tmp_path / "sl.csv", ["study", "path", "stat", "value", "n"],
               [["A", "X-Y at high Z", "r", 0.40, 100], ["A", "X-Y at low Z", "r", 0.12, 100],
                ["B", "x-y AT HIGH z", "r", 0.35, 80], ["B", "X-Y at low Z", "r", 0.05, 80],
                ["C", "Z-Y", "r", 0.1, 180]])
    ps = pool_paths(s, "moderation")
    for sc, d in ps.designs.items():
        assert d.binary_moderator
        ref = moderation_from_group_correlations(ps["X-Y at high Z"].values[sc],
                                                 ps["X-Y at low Z"].values[sc],
                                                 ps["Z-Y"].values[sc])
        assert d == ref


def test_every_row_mistake_is_listed_at_once(tmp_path, run_cli):
    s = _write(tmp_path / "bad.csv", ["study", "path", "stat", "value", "n"],
               [["A", "X-Y at high Z", "r", 0.40, 100], ["B", "X-Y", "r", 0.35, 80],
                ["C", "X-XZ", "r", 0.1, 180], ["D", "Q-Y", "r", 0.1, 180]])
    res = run_cli("paths", s, "--design", "moderation")
    assert res.exit_code == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 3 and "problem 1 of 3" in lines[0]
    assert "bad.csv, row 3, column 'path'" in lines[0] and "simple slopes" in lines[0]
    assert "row 4, column 'path'" in lines[1] and "uncorrelated with X and with Z" in lines[1]
    assert "row 5, column 'path'" in lines[2] and "names Q" in lines[2]
    # a slope without its partner is said (with the partner's row) once the rows parse
    good = _write(tmp_path / "one.csv", ["study", "path", "stat", "value", "n"],
                  [["A", "X-Y at high Z", "r", 0.40, 100], ["C", "Z-Y", "r", 0.1, 180]])
    res = run_cli("paths", good, "--design", "moderation")
    assert res.exit_code == 2
    assert "row 2, column 'path': the simple slope 'X-Y at high Z' has rows but " \
           "'X-Y at low Z' has none" in res.stderr


@pytest.mark.parametrize("args, fragment", [
    (["--x-reliability", "0.8"], "do not apply with a sheet"),
    (["--interaction", "0.1"], "with a SHEET the moderation's pairs come from its rows"),
    (["--pair", "Z-Y=0.1"], "the path Z-Y has rows in the sheet"),
])
def test_option_mistakes_with_a_moderation_sheet(run_cli, args, fragment):
    res = run_cli("paths", DEMO, "--design", "moderation", "--n", 100, *args)
    assert res.exit_code == 2
    assert fragment in res.stderr


def test_cli_writes_the_plan_the_diagram_and_the_methods(run_cli, tmp_path):
    out = tmp_path / "mod"
    res = run_cli("paths", DEMO, "--design", "moderation", "--power", 0.8, "--reps", 200,
                  "--workers", 1, "--out", out)
    assert res.exit_code == 0, res.output
    for s in ("optimistic", "realistic", "pessimistic"):
        assert f"{s}: moderation (continuous moderator)" in res.output
    names = {p.name for p in out.iterdir()}
    assert {"results.json", "report.md", "path_diagram.png"} <= names
    doc = json.loads((out / "results.json").read_text())
    assert {p["path"] for p in doc["paths"]["paths"]} == {"X-Y", "Z-Y", "XZ-Y", "X-Z"}
    assert [s["solutions"][0]["target"] for s in doc["scenarios"]] == ["XZ-Y"] * 3
    report = (out / "report.md").read_text()
    assert "r_p^2 / (1 - r_p^2)" in report and "Viswesvaran & Ones" in report


def test_a_negative_interaction_says_how_to_recode(tmp_path):
    from pooler.reading.pathsheet import pool_paths
    s = _write(tmp_path / "neg.csv", ["study", "path", "stat", "value", "n", "df", "predictors"],
               [["A", "X-Y", "r", 0.3, 200, "", ""], ["B", "Z-Y", "r", 0.2, 150, "", ""],
                ["C", "XZ-Y", "coef_t", -2.6, "", 196, 3], ["D", "XZ-Y", "coef_t", -2.2, "", 296, 3]])
    ps = pool_paths(s, "moderation")
    assert ps["XZ-Y"].pooled < 0
    assert any("code Z the other way round" in n for n in ps.notes)
