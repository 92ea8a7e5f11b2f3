"""Effect-size conversions checked against published formulas and statsmodels.

Sources named beside each check:
[B] Borenstein, Hedges, Higgins & Rothstein (2009), Introduction to Meta-Analysis.
[H] Hedges (1981); [HO] Hedges & Olkin (1985) Table 2 (J values, from memory, and
    re-derived here from the gamma form).
[MD] Morris & DeShon (2002).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from pooler import convert, read_sheet
from pooler.evidence.effects import d_to_r, group_factor, hedges_j, r_to_d


def one(write_sheet, metric="d", **row):
    eff = convert(read_sheet(write_sheet([{"study": "S", **row}])), metric)
    (r,) = eff.rows
    return r, eff


# ---------------------------------------------------------------- J

def test_hedges_j_exact_gamma_form():
    # [H] eq. 6e: J(df) = Γ(df/2) / (sqrt(df/2) Γ((df-1)/2)), computed here with math.gamma
    for df in (2, 5, 10, 20, 48, 100):
        expected = math.gamma(df / 2) / (math.sqrt(df / 2) * math.gamma((df - 1) / 2))
        assert_allclose(hedges_j(df), expected, rtol=1e-12)


def test_hedges_j_table_values_and_approximation():
    # [HO] Table 2 (from memory): J(2) = .5642, J(10) = .9227
    assert_allclose([hedges_j(2), hedges_j(10)], [0.5642, 0.9227], atol=5e-5)
    # [B] eq. 4.22 approximation 1 - 3/(4 df - 1) is close for moderate df
    for df in (10, 30, 100):
        assert abs(hedges_j(df) - (1 - 3 / (4 * df - 1))) < 4e-4


# ---------------------------------------------------------------- between-subject

def test_two_group_t_by_hand(write_sheet):
    # [B] eq. 4.18 via d = t sqrt(1/n1 + 1/n2); variance eq. 4.20; g = J d, V_g = J^2 V_d (4.23-4.24)
    r, _ = one(write_sheet, stat="t", value=2.10, n1=24, n2=26)
    d = 2.10 * math.sqrt(1 / 24 + 1 / 26)             # 0.594445
    vd = (24 + 26) / (24 * 26) + d ** 2 / (2 * 50)    # 0.0801282 + 0.0035337
    j = hedges_j(48)
    assert_allclose(d, 0.594445, atol=1e-6)
    assert_allclose(r.effect, j * d, rtol=1e-12)
    assert_allclose(r.variance, j * j * vd, rtol=1e-12)
    assert r.n_total == 50 and r.status == "used"


def test_means_against_statsmodels_effectsize_smd(write_sheet):
    # statsmodels.stats.meta_analysis.effectsize_smd uses the approximate J = 1 - 3/(4N - 9);
    # dividing it out recovers d with the pooled SD exactly ([B] eqs. 4.18-4.19).
    from statsmodels.stats.meta_analysis import effectsize_smd
    m1, s1, n1, m2, s2, n2 = 14.2, 3.1, 35, 12.9, 3.4, 33
    r, _ = one(write_sheet, stat="means", mean1=m1, sd1=s1, n1=n1, mean2=m2, sd2=s2, n2=n2)
    g_sm, v_sm = effectsize_smd(m1, s1, n1, m2, s2, n2)
    j_approx = 1 - 3 / (4 * (n1 + n2) - 9)
    d_sm = g_sm / j_approx
    assert_allclose(r.effect / hedges_j(n1 + n2 - 2), d_sm, rtol=1e-12)
    assert_allclose(r.effect, g_sm, rtol=2e-4)        # exact vs approximate J
    # statsmodels' variance is the Hedges & Olkin form N/(n1 n2) + g^2 / (2 (N - 3.94)),
    # ours J^2 (N/(n1 n2) + d^2 / (2N)) ([B] 4.20, 4.24): close, not identical
    assert_allclose(r.variance, v_sm, rtol=0.03)


def test_means_array_against_statsmodels(write_sheet):
    rng = np.random.default_rng(7)
    rows = []
    for i in range(12):
        rows.append({"study": f"S{i}", "stat": "means", "mean1": rng.normal(10, 2),
                     "sd1": rng.uniform(1, 4), "n1": int(rng.integers(5, 200)),
                     "mean2": rng.normal(10, 2), "sd2": rng.uniform(1, 4),
                     "n2": int(rng.integers(5, 200))})
    eff = convert(read_sheet(write_sheet(rows)))
    from statsmodels.stats.meta_analysis import effectsize_smd
    a = {k: np.array([r[k] for r in rows], float) for k in rows[0] if k not in ("study", "stat")}
    g_sm, _ = effectsize_smd(a["mean1"], a["sd1"], a["n1"], a["mean2"], a["sd2"], a["n2"])
    d_sm = g_sm / (1 - 3 / (4 * (a["n1"] + a["n2"]) - 9))
    ours_d = np.array([r.effect for r in eff.rows]) / hedges_j(a["n1"] + a["n2"] - 2)
    assert_allclose(ours_d, d_sm, rtol=1e-10)


def test_t_with_df_only_splits_equally_and_says_so(write_sheet):
    r, eff = one(write_sheet, stat="t", value=2.0, df=38)
    d = 2.0 * math.sqrt(2 / 20)
    assert_allclose(r.effect, hedges_j(38) * d, rtol=1e-12)
    assert r.n_total == 40
    assert any("equal split" in a for a in eff.assumptions)
    assert any("equal split" in w for w in eff.warnings)


def test_welch_df_without_n_takes_the_smallest_whole_n(write_sheet):
    """A Welch df (45.3) is at most n1 + n2 - 2, so N >= 47.3: the smallest whole N, 48, is
    taken (the largest variance any consistent N gives) and the note says so."""
    r, eff = one(write_sheet, stat="t", value=2.1, df=45.3)
    assert r.n_total == 48
    assert_allclose(r.effect, hedges_j(46) * 2.1 * math.sqrt(2 / 24), rtol=1e-12)
    assert any("not a whole number" in n and "taken as 48" in n for n in r.notes)


def test_f_one_df_equals_t(write_sheet):
    rt, _ = one(write_sheet, stat="t", value=-2.5, n1=20, n2=22)
    rf, _ = one(write_sheet, stat="F", value=6.25, df1=1, n1=20, n2=22, direction="-")
    assert_allclose(rf.effect, rt.effect, rtol=1e-12)
    assert_allclose(rf.variance, rt.variance, rtol=1e-12)


def test_p_to_t_against_scipy_stats(write_sheet):
    # exact p -> t by the inverse Student t; scipy.stats.t.isf is the reference
    r, _ = one(write_sheet, stat="p", value=0.032, tails=2, direction="+", n1=28, n2=28)
    t = stats.t.isf(0.032 / 2, 54)
    d = t * math.sqrt(2 / 28)
    assert_allclose(r.effect, hedges_j(54) * d, rtol=1e-9)
    r1, _ = one(write_sheet, stat="p", value=0.016, tails=1, direction="+", n1=28, n2=28)
    assert_allclose(r1.effect, r.effect, rtol=1e-9)
    rneg, _ = one(write_sheet, stat="p", value=0.032, tails=2, direction="-", n1=28, n2=28)
    assert_allclose(rneg.effect, -r.effect, rtol=1e-12)


def test_reported_g_and_d_agree(write_sheet):
    rd, _ = one(write_sheet, stat="d", value=0.5, n1=15, n2=15)
    rg, _ = one(write_sheet, stat="g", value=0.5 * hedges_j(28), n1=15, n2=15)
    assert_allclose(rg.effect, rd.effect, rtol=1e-12)
    assert_allclose(rg.variance, rd.variance, rtol=1e-12)


def test_correlation_to_d_by_hand(write_sheet):
    # [B] eqs. 6.1, 7.5-7.6: V_r = (1 - r^2)^2 / (n - 1); d = 2r / sqrt(1 - r^2); V_d = 4 V_r / (1 - r^2)^3
    r, _ = one(write_sheet, stat="r", value=0.21, n=96)
    vr = (1 - 0.21 ** 2) ** 2 / 95
    d = 2 * 0.21 / math.sqrt(1 - 0.21 ** 2)   # 0.42 / 0.977701 = 0.429579
    vd = 4 * vr / (1 - 0.21 ** 2) ** 3
    assert_allclose(d, 0.429579, atol=1e-6)
    j = hedges_j(94)
    assert_allclose([r.effect, r.variance], [j * d, j * j * vd], rtol=1e-12)


def test_d_r_round_trip_with_group_factor():
    # [B] eqs. 7.7-7.8 invert 7.5-7.6 for any factor a: 4, [B]'s (n1 + n2)^2 / (n1 n2), and
    # the exact group factor N (N - 2) / (n1 n2) that pooler uses
    for a in (4.0, (30 + 70) ** 2 / (30 * 70), group_factor(30, 70)):
        r, vr = d_to_r(0.6, 0.05, a)
        d, vd = r_to_d(r, vr, a)
        assert_allclose([d, vd], [0.6, 0.05], rtol=1e-12)


def test_d_to_r_is_the_point_biserial_correlation():
    # The pooled two-group t and the correlation of the outcome with the group indicator
    # satisfy r = t / sqrt(t^2 + df), df = n1 + n2 - 2 (point-biserial identity), and
    # d = t sqrt(1/n1 + 1/n2) ([B] eq. 4.18 via t). Over many generated (t, n1, n2),
    # d -> r ([B] eq. 7.7) with a = group_factor(n1, n2) must give that r, and r -> d
    # ([B] eq. 7.5) must give d back. [B]'s large-sample a = N^2/(n1 n2) gives t / sqrt(t^2 + N)
    # instead (shown too, so the test says which identity each factor satisfies).
    rng = np.random.default_rng(11)
    t = rng.normal(0, 4, 5000)
    n1 = rng.integers(2, 2000, 5000).astype(float)
    n2 = rng.integers(2, 2000, 5000).astype(float)
    n2 = np.where(n1 + n2 < 4, 3.0, n2)
    d = t * np.sqrt(1 / n1 + 1 / n2)
    a = group_factor(n1, n2)
    r_pb = t / np.sqrt(t * t + n1 + n2 - 2)
    got = np.array([d_to_r(di, 1.0, ai)[0] for di, ai in zip(d, a)])
    assert_allclose(got, r_pb, rtol=1e-12, atol=1e-15)
    back = np.array([r_to_d(ri, 1.0, ai)[0] for ri, ai in zip(r_pb, a)])
    assert_allclose(back, d, rtol=1e-10, atol=1e-13)
    a_large = (n1 + n2) ** 2 / (n1 * n2)
    got_large = np.array([d_to_r(di, 1.0, ai)[0] for di, ai in zip(d, a_large)])
    assert_allclose(got_large, t / np.sqrt(t * t + n1 + n2), rtol=1e-12, atol=1e-15)
    # equal groups: a -> 4 ([B] eq. 7.5) as N grows
    assert_allclose(group_factor(1e8, 1e8), 4.0, rtol=1e-7)


def test_group_factor_matches_a_correlation_computed_from_data():
    # Independent of the t identity: simulate two groups, standardise the mean difference by
    # the pooled SD, and compare d -> r with numpy's Pearson correlation of y with the group
    # indicator (the point-biserial correlation).
    rng = np.random.default_rng(12)
    for _ in range(200):
        n1, n2 = (int(x) for x in rng.integers(2, 300, 2))
        y1 = rng.normal(rng.normal(0, 1), 1, n1)
        y2 = rng.normal(0, 1, n2)
        sp = math.sqrt(((n1 - 1) * y1.var(ddof=1) + (n2 - 1) * y2.var(ddof=1)) / (n1 + n2 - 2))
        d = (y1.mean() - y2.mean()) / sp
        r_data = np.corrcoef(np.r_[np.ones(n1), np.zeros(n2)], np.r_[y1, y2])[0, 1]
        assert_allclose(d_to_r(d, 1.0, group_factor(n1, n2))[0], r_data, rtol=1e-9)


def test_d_to_r_variance_uses_the_same_factor():
    # The variance of the converted r is the delta method of the same conversion:
    # V_r = (dr/dd)^2 V_d; checked against a central finite difference of d_to_r itself,
    # so a factor in the variance that differs from the one in the estimate fails.
    rng = np.random.default_rng(13)
    for _ in range(500):
        d, vd = rng.normal(0, 1.5), rng.uniform(0.001, 0.5)
        n1, n2 = (float(x) for x in rng.integers(2, 1000, 2))
        a = group_factor(n1, n2) if n1 + n2 > 2 else 4.0
        h = 1e-6
        slope = (d_to_r(d + h, vd, a)[0] - d_to_r(d - h, vd, a)[0]) / (2 * h)
        assert_allclose(d_to_r(d, vd, a)[1], slope ** 2 * vd, rtol=1e-6)
        r = d_to_r(d, vd, a)[0]
        slope_back = (r_to_d(r + h, vd, a)[0] - r_to_d(r - h, vd, a)[0]) / (2 * h)
        assert_allclose(r_to_d(r, vd, a)[1], slope_back ** 2 * vd, rtol=1e-5)


def test_unequal_groups_on_r_give_the_point_biserial_r(write_sheet):
    # The same result reported as t(508) = 3 with 10 + 500, and as its correlation:
    # on --metric r the t row is r = t / sqrt(t^2 + df) = 0.131940 (not 0.432, which a = 4
    # gave), and on d both rows agree (the r row rounded to 4 decimals).
    eff = convert(read_sheet(write_sheet([
        {"study": "A", "stat": "t", "value": 3, "n1": 10, "n2": 500},
        {"study": "B", "stat": "r", "value": 0.131940, "n1": 10, "n2": 500}])), "r")
    a, b = eff.rows
    assert_allclose(math.tanh(a.effect), 3 / math.sqrt(9 + 508), rtol=1e-12)
    assert_allclose(math.tanh(b.effect), 0.131940, rtol=1e-12)
    eff_d = convert(read_sheet(write_sheet([
        {"study": "A", "stat": "t", "value": 3, "n1": 10, "n2": 500},
        {"study": "B", "stat": "r", "value": 0.131940, "n1": 10, "n2": 500}])), "d")
    assert_allclose(eff_d.rows[0].effect, eff_d.rows[1].effect, rtol=1e-5)


def test_fisher_z_metric(write_sheet):
    # Fisher (1921): z = atanh(r), V = 1/(n - 3) ([B] eqs. 6.2-6.3)
    r, eff = one(write_sheet, "r", stat="r", value=0.3, n=85)
    assert eff.metric == "z"
    assert_allclose([r.effect, r.variance], [math.atanh(0.3), 1 / 82], rtol=1e-12)
    # a d converted to r ([B] 7.7-7.8 with the exact group factor a = N(N - 2)/(n1 n2) = 3.9
    # for 40 + 40, see test_d_to_r_is_the_point_biserial_correlation), then z with the
    # delta-method variance V_r / (1 - r^2)^2
    r2, _ = one(write_sheet, "r", stat="d", value=0.5, n1=40, n2=40)
    vd = 80 / 1600 + 0.25 / 160
    a = 80 * 78 / 1600
    rr = 0.5 / math.sqrt(0.25 + a)
    vr = a * a * vd / (0.25 + a) ** 3
    assert_allclose([r2.effect, r2.variance], [math.atanh(rr), vr / (1 - rr * rr) ** 2],
                    rtol=1e-12)


def test_chi2_as_phi(write_sheet):
    r, _ = one(write_sheet, stat="chi2", value=3.90, n=120, direction="+")
    phi = math.sqrt(3.90 / 120)
    ref, _ = one(write_sheet, stat="r", value=phi, n=120)
    assert_allclose(r.effect, ref.effect, rtol=1e-12)


def test_odds_ratio_logistic_conversion_by_hand(write_sheet):
    # [B] eqs. 7.1-7.2 (Hasselblad & Hedges 1995): d = ln(OR) sqrt(3)/pi, V_d = V_lnOR 3/pi^2
    r, _ = one(write_sheet, stat="odds_ratio", value=1.90, ci_low=1.05, ci_high=3.44,
               n1=70, n2=70)
    se = (math.log(3.44) - math.log(1.05)) / (2 * 1.959963984540054)
    d = math.log(1.90) * math.sqrt(3) / math.pi
    vd = se ** 2 * 3 / math.pi ** 2
    j = hedges_j(138)
    assert_allclose([r.effect, r.variance], [j * d, j * j * vd], rtol=1e-12)


def test_counts_log_odds_ratio_and_zero_cell(write_sheet):
    # [B] eqs. 5.8-5.10: ln OR = ln(AD/BC), V = 1/A + 1/B + 1/C + 1/D
    r, _ = one(write_sheet, stat="counts", events1=18, n1=40, events2=10, n2=41)
    lor = math.log(18 * 31 / (22 * 10))
    v = 1 / 18 + 1 / 22 + 1 / 10 + 1 / 31
    j = hedges_j(79)
    assert_allclose(r.effect, j * lor * math.sqrt(3) / math.pi, rtol=1e-12)
    assert_allclose(r.variance, j * j * v * 3 / math.pi ** 2, rtol=1e-12)
    # 0.5 added to every cell only when a cell is zero
    rz, _ = one(write_sheet, stat="counts", events1=5, n1=20, events2=0, n2=20)
    lorz = math.log(5.5 * 20.5 / (15.5 * 0.5))
    assert_allclose(rz.effect, hedges_j(38) * lorz * math.sqrt(3) / math.pi, rtol=1e-12)
    assert any("0.5 added" in n for n in rz.notes)


# ---------------------------------------------------------------- within-subject

def test_paired_t_to_raw_score_scale_by_hand(write_sheet):
    # d_z = t / sqrt(n); raw-score d = d_z sqrt(2 (1 - r)) [MD] eq. 11; V from [B] eq. 4.28
    r, _ = one(write_sheet, stat="t", value=2.45, n=32, design="within", within_r=0.6)
    dz = 2.45 / math.sqrt(32)              # 0.433103
    d = dz * math.sqrt(2 * 0.4)            # 0.387379
    v = (1 / 32 + d * d / 64) * 2 * 0.4
    j = hedges_j(31)
    assert_allclose(d, 0.387379, atol=1e-6)
    assert_allclose([r.effect, r.variance], [j * d, j * j * v], rtol=1e-12)
    assert r.design == "within"


def test_within_default_r_is_an_assumption(write_sheet):
    r, eff = one(write_sheet, stat="d", value=0.5, n=30, design="within")
    assert any("assumed" in n for n in r.notes)
    assert any("0.5" in a for a in eff.assumptions)
    eff2 = convert(read_sheet(write_sheet([{"study": "S", "stat": "d", "value": 0.5, "n": 30,
                                            "design": "within"}])), within_r=0.8)
    # a higher correlation shrinks the raw-score d: d = d_z sqrt(2 (1 - r))
    assert_allclose(eff2.rows[0].effect / r.effect, math.sqrt(0.4) / math.sqrt(1.0), rtol=1e-12)


def test_within_f_equals_within_t(write_sheet):
    rt, _ = one(write_sheet, stat="t", value=3.0, n=20, design="within", within_r=0.5)
    rf, _ = one(write_sheet, stat="F", value=9.0, df1=1, df=19, design="within",
                within_r=0.5, direction="+")
    assert_allclose([rf.effect, rf.variance], [rt.effect, rt.variance], rtol=1e-12)


# ---------------------------------------------------------------- samples and exclusions

def test_rows_sharing_a_sample_are_combined(write_sheet):
    # [B] ch. 24 (eq. 24.6 for two outcomes): mean of the effects,
    # V = (1/m)^2 (sum V_i + sum_{i != j} rho sqrt(V_i V_j))
    rows = [{"study": "A", "sample": "s1", "stat": "d", "value": 0.30, "n1": 50, "n2": 50},
            {"study": "A", "sample": "s1", "stat": "d", "value": 0.22, "n1": 50, "n2": 50},
            {"study": "B", "stat": "d", "value": 0.40, "n1": 20, "n2": 20}]
    eff = convert(read_sheet(write_sheet(rows)), sample_r=0.5)
    a, b, _ = eff.rows
    assert eff.k == 2
    u = eff.units[0]
    assert_allclose(u.effect, (a.effect + b.effect) / 2, rtol=1e-12)
    v = (a.variance + b.variance + 2 * 0.5 * math.sqrt(a.variance * b.variance)) / 4
    assert_allclose(u.variance, v, rtol=1e-12)
    assert u.rows == (2, 3)
    assert "combined" in a.reason
    # with rho = 1 the composite is no more precise than its parts
    eff1 = convert(read_sheet(write_sheet(rows)), sample_r=0.99)
    assert eff1.units[0].variance > u.variance


def test_excluded_rows_are_kept_with_reason(write_sheet):
    rows = [{"study": "A", "stat": "t", "value": 2.0, "n1": 20, "n2": 20},
            {"study": "B", "stat": "t", "value": 2.0, "n1": 20, "n2": 20, "exclude": "duplicate"},
            {"study": "C", "stat": "t", "value": "", "exclude": "numbers missing"}]
    eff = convert(read_sheet(write_sheet(rows)))
    assert [r.status for r in eff.rows] == ["used", "excluded", "excluded"]
    assert eff.rows[1].reason == "duplicate" and eff.rows[1].effect is not None
    assert eff.rows[2].effect is None and eff.k == 1
    assert eff.n_used + eff.n_excluded == 3


def test_large_d_warns(write_sheet):
    _, eff = one(write_sheet, stat="d", value=3.5, n1=10, n2=10)
    assert any("unusually large" in w for w in eff.warnings)


def test_direction_flips_and_contradictions(write_sheet):
    from pooler import InputError
    r, _ = one(write_sheet, stat="t", value=2.0, n1=20, n2=20, direction="-")
    assert r.effect < 0
    with pytest.raises(InputError, match="negative but direction is '\\+'"):
        one(write_sheet, stat="t", value=-2.0, n1=20, n2=20, direction="+")


def test_demo_sheet_converts_every_row(demo_path):
    sheet = read_sheet(demo_path)
    eff = convert(sheet)
    assert len(eff.rows) == len(sheet.records)
    assert eff.n_used + eff.n_excluded == len(sheet.records)
    kinds = {r.stat for r in eff.rows}
    assert {"t", "F", "p", "r", "d", "g", "means", "chi2", "counts", "odds_ratio"} <= kinds
    assert {"between", "within"} <= {r.design for r in eff.rows}
    assert all(math.isfinite(u.effect) and u.variance > 0 for u in eff.units)
