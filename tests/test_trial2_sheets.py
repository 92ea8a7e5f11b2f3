"""Three users' invented literatures (tests/data/trial2/, listed in its README.md), checked
against the published formulas they rely on.

Sources named beside each check:
[B] Borenstein, Hedges, Higgins & Rothstein (2009), Introduction to Meta-Analysis:
    eq. 4.18-4.20 (two-group d), 4.28 (within-subject variance), 6.1-6.3 (Fisher z,
    V = 1/(n - 3)), 7.1-7.2 (log odds ratio to d), ch. 24 (outcomes of one sample).
[MD] Morris & DeShon (2002), eq. 11: d = d_z sqrt(2 (1 - r)).
[H] Hedges (1981): J(df) = Γ(df/2) / (sqrt(df/2) Γ((df - 1)/2)).
[C] Chinn (2000): d = ln(OR) sqrt(3) / π.
The t test of a correlation: t = r sqrt(n - 2) / sqrt(1 - r^2), so r = t / sqrt(t^2 + n - 2)
(Fisher 1921; any statistics text).
"""
from __future__ import annotations

import math
from pathlib import Path

from numpy.testing import assert_allclose

from pooler import convert, read_sheet

DATA = Path(__file__).parent / "data" / "trial2"


def _j(df):
    # [H], by math.lgamma rather than pooler's own hedges_j
    return math.exp(math.lgamma(df / 2) - 0.5 * math.log(df / 2) - math.lgamma((df - 1) / 2))


# ------------------------------------------------------------------ user 1: paired literature

def test_paired_literature_matches_morris_deshon_by_hand():
    eff = convert(read_sheet(DATA / "paired.csv"))

    def from_t(t, n, r):      # [MD] eq. 11 from d_z = t / sqrt(n); V [B] eq. 4.28
        d = t / math.sqrt(n) * math.sqrt(2 * (1 - r))
        return d, (1 / n + d * d / (2 * n)) * 2 * (1 - r), n

    def from_means(m1, s1, m2, s2, n, r):   # raw-score d: the SD of one condition [MD]
        d = (m1 - m2) / math.sqrt((s1 * s1 + s2 * s2) / 2)
        return d, (1 / n + d * d / (2 * n)) * 2 * (1 - r), n

    expected = [from_t(2.80, 24, 0.5), from_t(2.10, 30, 0.5),      # n = df + 1
                from_means(52.0, 10.0, 48.5, 9.0, 30, 0.6), from_means(14.2, 3.1, 12.9, 3.5, 20, 0.5),
                from_t(math.sqrt(6.20), 36, 0.5), from_t(1.45, 40, 0.7)]
    for row, (d, v, n) in zip(eff.rows, expected):
        j = _j(n - 1)         # [B] section 4.3: df = n - 1 for a matched design
        assert_allclose(row.effect, j * d, rtol=0, atol=1e-12)
        assert_allclose(row.variance, j * j * v, rtol=0, atol=1e-12)


def test_paired_plan_n_is_the_smallest_n_of_the_noncentral_t():
    # exact paired-t power by scipy.stats.nct (reference), d_z = d / sqrt(2 (1 - r)) [MD]
    from scipy import stats
    from pooler import PlanningEffect, plan
    from pooler.planning.power import Design
    g, r = 0.2876, 0.7
    res = plan([PlanningEffect("realistic", g)], Design("paired", planned_r=r), powers=(0.8,))
    dz = g / math.sqrt(2 * (1 - r))

    def power(n):
        c = stats.t.ppf(0.975, n - 1)
        return stats.nct.sf(c, n - 1, dz * math.sqrt(n)) + stats.nct.cdf(-c, n - 1, dz * math.sqrt(n))
    n = res.rows[0].n_total
    assert_allclose(res.rows[0].design_effect, dz, rtol=1e-12)
    assert power(n) >= 0.8 > power(n - 1)


# ------------------------------------------------------------------ user 2: correlations

def test_t_f_and_p_of_a_correlation_convert_as_r_with_fisher_variance():
    # design 'correlation': r = t / sqrt(t^2 + n - 2), z = atanh r, V = 1/(n - 3) [B] 6.2-6.3;
    # read as a two-group t instead, the variance was the d route's (SE 0.128 for row 2,
    # not 1/sqrt(57) = 0.132) and an equal split of N was warned about
    from scipy import stats
    eff = convert(read_sheet(DATA / "corr_tests.csv"), "r")
    t_p = stats.t.isf(0.012 / 2, 138)
    for row, (t, n) in zip(eff.rows, [(2.45, 60), (3.10, 120), (t_p, 140), (math.sqrt(6.0), 60)]):
        assert_allclose(row.effect, math.atanh(t / math.sqrt(t * t + n - 2)), rtol=0, atol=1e-12)
        assert_allclose(row.variance, 1 / (n - 3), rtol=0, atol=1e-15)
        assert row.n_total == n
    assert not any("equal split" in w for w in eff.warnings)


def test_correlation_design_refused_for_a_group_statistic(write_sheet):
    import pytest
    from pooler.errors import InputErrors, InputError
    path = write_sheet([{"study": "Invented Site", "stat": "counts", "n1": 40, "n2": 40,
                         "events1": 10, "events2": 5, "design": "correlation"}])
    with pytest.raises((InputError, InputErrors), match="design 'correlation' is for a t"):
        convert(read_sheet(path))


def test_p_row_says_its_assumptions_once():
    # a between-subject p with total N only, and a within-subject p with df only, each
    # gave its sizes note (and the equal-split warning) twice
    eff = convert(read_sheet(DATA / "p_notes.csv"))
    between, within = eff.rows
    assert sum("equal split" in n for n in between.notes) == 1
    assert sum("equal split" in w for w in eff.warnings) == 1
    assert sum("N taken as df + 1" in n for n in within.notes) == 1
    assert "(row 2)" in " ".join(eff.assumptions)      # one row: "row", not "rows"


# ------------------------------------------------------------------ user 3: binary outcomes

def test_binary_literature_logit_conversions_by_hand():
    eff = convert(read_sheet(DATA / "binary.csv"))
    k = math.sqrt(3) / math.pi            # [C]; [B] eq. 7.1-7.2

    def counts(e1, n1, e2, n2):
        a, b, c, d = e1, n1 - e1, e2, n2 - e2
        if 0 in (a, b, c, d):             # 0.5 added to every cell only when one is zero
            a, b, c, d = a + .5, b + .5, c + .5, d + .5
        return math.log(a * d / (b * c)) * k, (1 / a + 1 / b + 1 / c + 1 / d) * k * k, n1 + n2 - 2

    def odds(o, lo, hi, df):
        se = (math.log(hi) - math.log(lo)) / (2 * 1.959963984540054)
        return math.log(o) * k, se * se * k * k, df

    def chi2(x, n, n1=None, n2=None):     # phi = sqrt(chi2 / N), then r to d [B] eq. 7.5-7.6
        r = math.sqrt(x / n)
        a = 4.0 if n1 is None else n * (n - 2) / (n1 * n2)
        vr = (1 - r * r) ** 2 / (n - 1)   # [B] eq. 6.1
        return math.sqrt(a) * r / math.sqrt(1 - r * r), a * vr / (1 - r * r) ** 3, n - 2

    expected = [counts(30, 50, 20, 50), counts(12, 40, 0, 45), odds(2.10, 1.05, 4.20, 118),
                odds(1.60, 0.90, 2.84, None), chi2(4.80, 120), counts(20, 35, 12, 35),
                counts(18, 35, 11, 35), chi2(3.10, 100, 45, 55), counts(15, 30, 10, 30)]
    for row, (d, v, df) in zip(eff.rows, expected):
        j = _j(df) if df else 1.0          # no J without group sizes (said as an assumption)
        assert_allclose(row.effect, j * d, rtol=0, atol=1e-6)
        assert_allclose(row.variance, j * j * v, rtol=0, atol=1e-6)
    assert [r.status for r in eff.rows].count("excluded") == 1
    # two outcomes of sample F1: mean, V = (V1 + V2 + 2 rho sqrt(V1 V2)) / 4, rho = 0.5 [B] ch. 24
    f1 = next(u for u in eff.units if u.rows == (7, 8))
    (g1, v1), (g2, v2) = [(r.effect, r.variance) for r in eff.rows[5:7]]
    assert_allclose(f1.effect, (g1 + g2) / 2, rtol=1e-12)
    assert_allclose(f1.variance, (v1 + v2 + 2 * 0.5 * math.sqrt(v1 * v2)) / 4, rtol=1e-12)


def test_bad_binary_sheet_lists_every_problem_and_exits_2(run_cli):
    res = run_cli("convert", DATA / "bad_binary.csv")
    assert res.exit_code == 2
    err = res.stderr
    assert "Traceback" not in err and res.stdout == ""
    for row, col in ((3, "events1"), (4, "value"), (5, "sd1")):
        assert f"bad_binary.csv, row {row}, column '{col}'" in err
    assert "problem 1 of 3" in err
    # an SD of 0 is refused too, so a negative SD is not told "zero or more"
    assert "sd1 = -2.5 is impossible; it must be positive" in err


def test_typed_odds_ratio_whose_ci_is_not_centred_on_it_is_warned_about():
    # a 95% CI of an OR is ln OR ± 1.96 SE, so ln OR is the centre of ln(lo), ln(hi)
    # [B] eqs. 5.5-5.7; each typed number stands for its rounding interval (2.1 for
    # [2.05, 2.15]); sqrt(1.05 x 42) = 6.64 is far outside, sqrt(1.05 x 4.2) = 2.1 is on it
    eff = convert(read_sheet(DATA / "or_ci_typo.csv"))
    warned = [w for w in eff.warnings if "centre of its CI" in w]
    assert len(warned) == 1 and "row 2 (Invented Clinic C)" in warned[0]
    assert "column 'ci_low'" in warned[0] and "6.64" in warned[0]
    assert [c.row for c in eff.inconsistencies] == [2]


def test_rows_combined_into_one_sample_keep_their_conversion_notes(run_cli):
    # the note cell showed only "combined with row(s) 8 into sample 'F1'" for a used row,
    # hiding how it was converted ([B] ch. 24 for the combination itself)
    res = run_cli("convert", DATA / "binary.csv")
    line = next(ln for ln in res.stdout.splitlines() if ln.lstrip().startswith("7 "))
    assert "combined with row(s) 8 into sample 'F1'" in line
    assert "log odds ratio to d by the logistic conversion" in line


def test_excluded_rows_with_impossible_values_are_listed_not_fatal():
    # an excluded row is never pooled; its impossible numbers (an SD below 0: an SD is a
    # square root of a variance) must not stop the run, as its unreadable cells did not
    sheet = read_sheet(DATA / "excluded_typos.csv")
    eff = convert(sheet)
    assert [r.status for r in eff.rows] == ["used", "excluded", "excluded", "excluded"]
    assert all(r.reason == "typo in the paper" for r in eff.rows[1:])
    assert any("row 4 is excluded" in n and "'sd1'" in n for n in sheet.notes)


def test_a_subgroup_of_one_study_has_no_tau2():
    # one study gives no heterogeneity estimate (README "pooler pool"; Borenstein et al. 2009
    # ch. 19: each subgroup's τ² is estimated from its own studies): τ² is not estimable,
    # like I², rather than a 0.0 that reads as "no heterogeneity found"
    from pooler import pool
    from pooler._results import NotEstimable
    res = pool(convert(read_sheet(DATA / "subgroup_of_one.csv")))
    rows = {r.label: r for r in res.subgroups.rows}
    assert rows["home"].k == 1
    assert isinstance(rows["home"].tau2, NotEstimable) and isinstance(rows["home"].i2, NotEstimable)
    assert rows["home"].to_dict()["tau2"] == {"status": "not estimable", "reason": "one study"}
    assert rows["clinic"].tau2 == 0.0 and rows["clinic"].k == 4


def test_pool_json_row_weights_are_shares_of_the_pooled_estimate():
    # the two rows of sample F1 each carried the sample's whole weight, so the rows'
    # weights added up to 1.16 while the samples' add up to 1. The sample's effect is the
    # mean of its m rows ([B] ch. 24), so the pooled mean sum_u w_u y_u equals
    # sum_rows (w_u / m) y_row: each row's share is w_u / m.
    import json
    from pooler.cli import main
    from click.testing import CliRunner
    res = CliRunner().invoke(main, ["pool", str(DATA / "binary.csv"), "--json"])
    doc = json.loads(res.stdout)
    used = [r for r in doc["rows"] if r["status"] == "used"]
    assert_allclose(sum(r["weight"] for r in used), 1.0, rtol=0, atol=1e-12)
    assert_allclose(sum(r["weight"] * r["effect"] for r in used), doc["pooled"]["estimate"],
                    rtol=1e-12)
    f1 = [r for r in used if r["sample"] == "F1"]
    unit = next(u for u in doc["units"] if u["label"].startswith("Invented Clinic F"))
    assert [r["sample_weight"] for r in f1] == [unit["weight"]] * 2
    assert_allclose([r["weight"] for r in f1], [unit["weight"] / 2] * 2, rtol=1e-15)


def test_double_zero_counts_are_listed_as_excluded_not_pooled(run_cli):
    # a 2×2 table with no events (or only events) in both groups gives no estimate of the
    # odds ratio; it is left out of an odds-ratio meta-analysis (Higgins et al. 2023,
    # Cochrane Handbook section 10.4.4.2; from memory) instead of pooled as ln OR = 0 with
    # the variance the 0.5 correction invents (1/0.5 + 1/40.5 + 1/0.5 + 1/40.5 on ln OR)
    eff = convert(read_sheet(DATA / "double_zero.csv"))
    status = {r.row: (r.status, r.reason) for r in eff.rows}
    assert status[3][0] == "excluded" and "no events in both groups" in status[3][1]
    assert status[5][0] == "excluded" and "only events in both groups" in status[5][1]
    assert status[2][0] == status[4][0] == "used"
    assert eff.n_used == 2 and eff.n_excluded == 2        # nothing dropped silently
    res = run_cli("convert", DATA / "double_zero.csv")
    assert res.exit_code == 0
    assert "row 3" in res.stderr and "not pooled" in res.stderr


def test_within_subject_df_above_n_minus_1_is_refused(run_cli, write_sheet):
    # a paired t (and a within-subject F(1, df)) has df = n - 1; a larger df is impossible,
    # refused as the two-group df > n1 + n2 - 2 is (file, row and column named, exit 2)
    sheet = write_sheet([{"study": "Invented Lab A", "stat": "t", "value": 2.1, "n": 24,
                          "df": 40, "design": "within"},
                         {"study": "Invented Lab B", "stat": "t", "value": 2.4, "n": 30,
                          "df": 29, "design": "within"}],
                        columns=["study", "stat", "value", "n", "df", "design"])
    res = run_cli("convert", sheet)
    assert res.exit_code == 2
    assert "row 2, column 'df'" in res.stderr and "larger than n - 1 = 23" in res.stderr
    assert "row 3" not in res.stderr


def test_chi_square_without_group_sizes_says_equal_groups_are_assumed():
    # phi to d needs the groups' split (Borenstein et al. 2009 eq. 7.5, a = (n1 + n2)² /
    # (n1 n2)); without n1 and n2 it is a = 4, two equal groups, and the row says so
    eff = convert(read_sheet(DATA / "binary.csv"))
    e = next(r for r in eff.rows if r.study == "Invented Clinic E")   # chi2 with only N
    g = next(r for r in eff.rows if r.study == "Invented Clinic G")   # chi2 with n1, n2
    assert any("two equal groups" in x for x in e.notes)
    assert not any("two equal groups" in x for x in g.notes)
    phi = math.sqrt(4.80 / 120)
    d = 2 * phi / math.sqrt(1 - phi * phi)          # eq. 7.5 with a = 4
    assert_allclose(e.effect, _j(118) * d, rtol=0, atol=1e-12)


def test_paired_plan_notes_a_planned_r_outside_the_literatures(run_cli, tmp_path):
    # d_z = d / sqrt(2 (1 - r)) (Morris & DeShon 2002, eq. 11): the planned correlation moves
    # the n directly, so a plan at r = 0.5 on a literature converted with 0.6-0.7 says so;
    # a planned r inside that range says nothing
    import json
    for extra, expect in ((("--within-r", "0.7"), True),
                          (("--within-r", "0.7", "--planned-r", "0.65"), False)):
        out = tmp_path / "_".join(extra)
        res = run_cli("run", DATA / "paired.csv", "--design", "paired", *extra, "--out", out)
        assert res.exit_code == 0, res.stderr
        notes = json.loads((out / "results.json").read_text())["plan"]["notes"]
        said = [x for x in notes if "correlation of" in x]
        assert bool(said) is expect
        if expect:
            assert "correlation of 0.5" in said[0] and "0.6 to 0.7" in said[0]
    # a design without a planned correlation (two-group) never gets the note
    out = tmp_path / "two_group"
    res = run_cli("run", DATA / "paired.csv", "--design", "two-group", "--within-r", "0.7",
                  "--out", out)
    assert res.exit_code == 0, res.stderr
    notes = json.loads((out / "results.json").read_text())["plan"]["notes"]
    assert not [x for x in notes if "correlation of" in x]
