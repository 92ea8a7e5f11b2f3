"""Pooling checked against statsmodels, independent likelihood maximisation, and the
published formulas.

Sources named beside each check:
statsmodels.stats.meta_analysis.combine_effects (DerSimonian-Laird: method_re="chi2";
Paule-Mandel: method_re="iterated"); Viechtbauer (2005) ML/REML likelihoods;
Viechtbauer (2007) Q-profile; Hartung & Knapp (2001); Sidik & Jonkman (2002);
Higgins & Thompson (2002); Higgins, Thompson & Spiegelhalter (2009);
IntHout, Ioannidis & Borm (2014) for the coverage pattern.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import optimize, stats

from pooler.evidence.effects import Effects, Unit
from pooler.evidence.pooling import (estimate_tau2, heterogeneity, pool, prediction_interval,
                                     q_statistic, random_effects, tau2_qprofile_ci)

sm_meta = pytest.importorskip("statsmodels.stats.meta_analysis")


def make_effects(y, v, years=None, subgroups=None, metric="g") -> Effects:
    # group sizes with 1/n1 + 1/n2 = v: the size-based variance of the regression methods
    # (pooler.evidence.bias.size_variances) then equals v, as for any literature without effect in v
    units = tuple(Unit(label=f"S{i}", effect=float(a), variance=float(b), n_total=4.0 / b,
                       n1=2.0 / b, n2=2.0 / b, design="between", rows=(i + 2,),
                       year=None if years is None else years[i],
                       subgroup=None if subgroups is None else subgroups[i])
                  for i, (a, b) in enumerate(zip(y, v)))
    return Effects(metric=metric, rows=(), units=units, assumptions=(), warnings=(),
                   file="test", sha256="", within_r=0.5, sample_r=0.5)


def datasets(n=6, k=12, seed=3):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        v = rng.uniform(0.01, 0.2, k)
        y = rng.normal(0.3, 0.25, k) + rng.normal(0, np.sqrt(v))
        yield y, v


@pytest.mark.filterwarnings("ignore:invalid value encountered in sqrt:RuntimeWarning")
def test_dl_and_pm_match_statsmodels():
    for y, v in datasets():
        dl = sm_meta.combine_effects(y, v, method_re="chi2")
        t_dl = estimate_tau2(y, v, "dl").tau2
        # statsmodels does not truncate DL tau^2 at 0: compare with max(0, tau^2)
        assert_allclose(t_dl, max(0.0, dl.tau2), rtol=1e-8, atol=1e-12)
        # Paule-Mandel: statsmodels' loop stops early at its default atol=1e-5, and at
        # atol=1e-12 it can stop at tau^2 = 0 where the equation is barely negative;
        # atol=1e-10 avoids both on these data sets
        pm = sm_meta.combine_effects(y, v, method_re="iterated", atol=1e-10, maxiter=1000)
        t_pm = estimate_tau2(y, v, "pm").tau2
        assert_allclose(t_pm, pm.tau2, rtol=1e-8, atol=1e-12)
        assert_allclose(q_statistic(y, v), dl.q, rtol=1e-10)
        for est, ref in (("dl", dl), ("pm", pm)):
            if ref.tau2 <= 0:   # statsmodels uses a negative DL tau^2 as is
                continue
            fit = random_effects(y, v, est, "wald")
            assert_allclose(fit.mu, ref.mean_effect_re, rtol=1e-8)
            assert_allclose(fit.se, ref.sd_eff_w_re, rtol=1e-8)
            # statsmodels computes the untruncated Hartung-Knapp SE; the default floors the
            # variance factor at 1 (Knapp & Hartung 2003): the larger of the two SEs
            hk = random_effects(y, v, est, "hksj-plain")
            assert_allclose(hk.se, ref.sd_eff_w_re_hksj, rtol=1e-8)
            floored = random_effects(y, v, est, "hksj")
            assert_allclose(floored.se, max(ref.sd_eff_w_re_hksj, ref.sd_eff_w_re), rtol=1e-8)
        res = pool(make_effects(y, v), "dl", "wald")
        assert_allclose([res.fixed.estimate, res.fixed.se], [dl.mean_effect_fe, dl.sd_eff_w_fe],
                        rtol=1e-10)


def _brute(y, v, restricted):
    """Independent maximisation of the (restricted) log-likelihood (Viechtbauer 2005,
    eqs. 6 and 8, with mu profiled out) by a bounded scalar optimiser on a log scale."""
    def negll(log_t2):
        t2 = math.exp(log_t2)
        w = 1 / (v + t2)
        mu = np.sum(w * y) / np.sum(w)
        ll = -0.5 * np.sum(np.log(2 * np.pi * (v + t2))) - 0.5 * np.sum((y - mu) ** 2 * w)
        if restricted:
            ll -= 0.5 * np.log(np.sum(w))
        return -ll
    r = optimize.minimize_scalar(negll, bounds=(-30, 5), method="bounded",
                                 options={"xatol": 1e-12})
    t2 = math.exp(r.x)
    return t2 if t2 > 1e-9 else 0.0


def test_reml_and_ml_agree_with_brute_force_likelihood():
    for y, v in datasets(seed=9):
        for est, restricted in (("reml", True), ("ml", False)):
            ours = estimate_tau2(y, v, est)
            assert ours.converged
            ref = _brute(y, v, restricted)
            assert_allclose(ours.tau2, ref, rtol=1e-5, atol=1e-8)


def test_tau2_zero_gives_fixed_effect_exactly():
    v = np.array([0.04, 0.05, 0.06, 0.03])
    y = np.array([0.30, 0.31, 0.29, 0.30])      # far less spread than v implies
    res = pool(make_effects(y, v), "reml", "wald")
    assert res.tau2 == 0.0
    assert res.pooled.estimate == res.fixed.estimate
    assert res.pooled.se == res.fixed.se
    assert res.heterogeneity.i2 == 0.0


def test_hksj_by_hand():
    # Hartung & Knapp (2001); Sidik & Jonkman (2002): q = sum w (y - mu)^2 / (k - 1),
    # SE^2 = q / sum w, CI mu +- t(k-1) SE; the default floors q at 1 (Knapp & Hartung
    # 2003, the "ad hoc" modification; Röver, Knapp & Friede 2015, BMC Med Res Methodol 15:99)
    y, v = next(datasets(seed=5))
    t = stats.t.ppf(0.975, len(y) - 1)
    for interval, floor in (("hksj-plain", 0.0), ("hksj", 1.0)):
        fit = random_effects(y, v, "reml", interval)
        w = 1 / (v + fit.tau2)
        mu = np.sum(w * y) / w.sum()
        q = np.sum(w * (y - mu) ** 2) / (len(y) - 1)
        se = math.sqrt(max(q, floor) / w.sum())
        assert_allclose([fit.mu, fit.se, fit.ci.low, fit.ci.high],
                        [mu, se, mu - t * se, mu + t * se], rtol=1e-12)
    assert q < 1    # this data set shows the floor at work


def test_two_near_identical_studies_do_not_collapse_the_interval():
    """Two small studies that agree to the second decimal (the new-user trial's twins.csv):
    untruncated Hartung-Knapp gives an SE near 0; the default's interval contains the
    common-effect one (Röver, Knapp & Friede 2015 describe exactly this failure)."""
    y, v = np.array([0.680, 0.684]), np.array([0.099, 0.101])
    res = pool(make_effects(y, v))
    plain = pool(make_effects(y, v), interval="hksj-plain")
    assert plain.pooled.se < 0.01
    assert res.pooled.ci.low <= res.fixed.ci.low and res.pooled.ci.high >= res.fixed.ci.high


def test_prediction_interval_by_hand():
    # Higgins, Thompson & Spiegelhalter (2009) eq. 12: mu +- t(k-2) sqrt(tau^2 + SE^2)
    y, v = next(datasets(seed=6))
    fit = random_effects(y, v, "reml", "wald")
    pi = prediction_interval(fit)
    half = stats.t.ppf(0.975, len(y) - 2) * math.sqrt(fit.tau2 + fit.se ** 2)
    assert_allclose([pi.low, pi.high], [fit.mu - half, fit.mu + half], rtol=1e-12)


def test_q_profile_limits_solve_the_generalised_q_equation():
    # Viechtbauer (2007): Q(tau2_low) = chi2_{k-1, .975}, Q(tau2_high) = chi2_{k-1, .025}
    for y, v in datasets(seed=12):
        ci = tau2_qprofile_ci(y, v)
        k = len(y)
        if ci.low > 0:
            assert abs(q_statistic(y, v, ci.low) - stats.chi2.ppf(0.975, k - 1)) < 1e-6
        if ci.high > 0:
            assert abs(q_statistic(y, v, ci.high) - stats.chi2.ppf(0.025, k - 1)) < 1e-6
        assert ci.low <= estimate_tau2(y, v, "pm").tau2 <= ci.high


def test_i2_and_h2_by_hand():
    # Higgins & Thompson (2002): s^2 = (k-1) sum w / ((sum w)^2 - sum w^2), I^2 = tau^2/(tau^2+s^2);
    # with the DL tau^2, I^2 equals (Q - df)/Q
    y, v = next(datasets(seed=8))
    tau2 = estimate_tau2(y, v, "dl").tau2
    h = heterogeneity(y, v, tau2)
    w = 1 / v
    s2 = (len(y) - 1) * w.sum() / (w.sum() ** 2 - np.sum(w ** 2))
    assert_allclose(h.i2, tau2 / (tau2 + s2), rtol=1e-12)
    assert_allclose(h.h2, (tau2 + s2) / s2, rtol=1e-12)
    if tau2 > 0:
        assert_allclose(h.i2, (h.q - h.q_df) / h.q, rtol=1e-10)


def test_invariances():
    y, v = next(datasets(seed=21))
    base = pool(make_effects(y, v))
    perm = np.random.default_rng(0).permutation(len(y))
    p2 = pool(make_effects(y[perm], v[perm]))
    assert_allclose([p2.pooled.estimate, p2.tau2, p2.pooled.se],
                    [base.pooled.estimate, base.tau2, base.pooled.se], rtol=1e-9)
    shifted = pool(make_effects(y + 0.7, v))
    assert_allclose(shifted.pooled.estimate, base.pooled.estimate + 0.7, rtol=1e-9)
    assert_allclose(shifted.tau2, base.tau2, rtol=1e-9, atol=1e-14)


def test_small_k_is_honest():
    one = pool(make_effects([0.4], [0.05]))
    assert not one.pooled and "one study" in str(one.pooled)
    assert not one.heterogeneity and not one.prediction
    assert one.fixed.estimate == 0.4
    two = pool(make_effects([0.4, 0.1], [0.05, 0.04]))
    assert two.pooled and not two.prediction
    assert "at least 3" in str(two.prediction)
    assert any("two studies" in n for n in two.notes)


def test_leave_one_out_cumulative_and_subgroups():
    y, v = next(datasets(seed=2))
    k = len(y)
    years = [2000 + (i * 7) % k for i in range(k)]
    subs = ["lab" if i % 2 else "online" for i in range(k)]
    res = pool(make_effects(y, v, years, subs))
    assert len(res.leave_one_out) == k
    idx = np.arange(k)
    ref = random_effects(y[idx != 3], v[idx != 3])
    assert_allclose(res.leave_one_out[3].estimate, ref.mu, rtol=1e-12)
    assert len(res.cumulative) == k
    assert_allclose(res.cumulative[-1].estimate, res.pooled.estimate, rtol=1e-12)
    first = int(np.argsort(years, kind="stable")[0])
    assert_allclose(res.cumulative[0].estimate, y[first])
    s = res.subgroups
    assert len(s.rows) == 2 and s.df == 1
    # Borenstein et al. (2009) ch. 19: Q_between over the subgroup means, weights 1/SE^2
    fits = [random_effects(y[np.array(subs) == g], v[np.array(subs) == g], "reml", "wald")
            for g in ("online", "lab")]
    wj = np.array([1 / f.se ** 2 for f in fits])
    mj = np.array([f.mu for f in fits])
    qb = np.sum(wj * (mj - np.sum(wj * mj) / wj.sum()) ** 2)
    assert_allclose(s.q_between, qb, rtol=1e-10)
    assert_allclose(s.p, stats.chi2.sf(qb, 1), rtol=1e-10)


def test_weights_sum_to_one():
    y, v = next(datasets(seed=4))
    res = pool(make_effects(y, v))
    assert_allclose(sum(res.weights), 1.0, rtol=1e-12)


def test_coverage_hksj_close_to_nominal_wald_undercovers():
    # IntHout, Ioannidis & Borm (2014): with few studies and tau^2 > 0 the HKSJ interval
    # keeps close to 95 % coverage while the Wald (DerSimonian-Laird style) interval falls short.
    rng = np.random.default_rng(20261201)
    reps, k, mu, tau2 = 600, 10, 0.3, 0.05
    hit_hk = hit_wald = 0
    for _ in range(reps):
        v = rng.uniform(0.01, 0.1, k)
        y = rng.normal(mu, np.sqrt(tau2 + v))
        hk = random_effects(y, v, "reml", "hksj")
        wa = random_effects(y, v, "dl", "wald")
        hit_hk += hk.ci.low <= mu <= hk.ci.high
        hit_wald += wa.ci.low <= mu <= wa.ci.high
    assert 0.92 <= hit_hk / reps <= 0.98
    assert hit_wald / reps < hit_hk / reps
    assert hit_wald / reps < 0.94


def test_demo_pool_and_json(run_cli, demo_path):
    import json
    res = run_cli("pool", demo_path)
    assert res.exit_code == 0
    for text in ("Random effects", "Heterogeneity", "Prediction interval", "Leave one out",
                 "Cumulative, by year"):
        assert text in res.stdout
    doc = json.loads(run_cli("pool", demo_path, "--json").stdout)
    assert doc["schema"] == "pooler.pool/1" and doc["k"] == 24
    for key in ("estimate", "se", "ci_low", "ci_high", "p"):
        assert key in doc["pooled"] and key in doc["fixed"]
    for key in ("tau2", "tau2_ci_low", "tau2_ci_high", "i2", "q", "q_df", "q_p"):
        assert key in doc["heterogeneity"]
    assert 0 <= doc["heterogeneity"]["i2"] <= 1
    assert {"low", "high"} <= set(doc["prediction"])
    used = [r for r in doc["rows"] if r["status"] == "used"]
    assert all(r["weight"] is not None for r in used)
    assert all(r["weight"] is None for r in doc["rows"] if r["status"] == "excluded")


def test_r_metric_reports_back_on_r_scale(run_cli, demo_path):
    import json
    doc = json.loads(run_cli("pool", demo_path, "--metric", "r", "--json").stdout)
    assert doc["metric"] == "z"
    assert_allclose(doc["on_r_scale"]["pooled"]["estimate"], math.tanh(doc["pooled"]["estimate"]))


def test_all_rows_excluded_is_a_clean_error(write_sheet, run_cli):
    path = write_sheet([{"study": "A", "stat": "t", "value": 2, "n1": 20, "n2": 20,
                         "exclude": "pilot"}])
    res = run_cli("pool", path)
    assert res.exit_code == 2 and "no rows are left to pool" in res.stderr


def test_published_against_unpublished_is_a_subgroup_comparison(write_sheet):
    """The `published` column (yes/no) gives separate random-effects estimates for published
    and unpublished studies with Q-between (Borenstein et al. 2009, ch. 19 and 30), the same
    computation as a `subgroup` column with those labels."""
    from pooler import convert, read_sheet
    rows = [{"study": f"S{i}", "stat": "t", "value": t, "n1": n, "n2": n, "published": p}
            for i, (t, n, p) in enumerate([(2.6, 20, "yes"), (2.3, 25, "Yes"), (2.9, 18, "y"),
                                           (0.8, 30, "no"), (1.1, 40, "No"), (0.4, 35, "0"),
                                           (2.2, 22, "yes")])]
    res = pool(convert(read_sheet(write_sheet(rows))))
    same = pool(convert(read_sheet(write_sheet(
        [{**{k: v for k, v in r.items() if k != "published"},
          "subgroup": "published" if r["published"].lower() in ("yes", "y") else "unpublished"}
         for r in rows]))))
    bp, sg = res.by_publication, same.subgroups
    assert [r.label for r in bp.rows] == ["published", "unpublished"]
    assert_allclose([r.estimate for r in bp.rows], [r.estimate for r in sg.rows], rtol=1e-12)
    assert_allclose([bp.q_between, bp.p], [sg.q_between, sg.p], rtol=1e-12)
    assert bp.rows[0].estimate > bp.rows[1].estimate
    doc = res.to_dict()
    assert doc["by_publication"]["q_between"] == bp.q_between
    assert "no 'published' column" in str(same.to_dict()["by_publication"])


def test_an_empty_q_profile_interval_is_explained():
    """Q(0) below the 2.5th percentile of chi^2(k - 1) puts both Q-profile limits at 0
    (Viechtbauer 2007); the result says why instead of printing [0, 0] as if certain."""
    from scipy import stats
    y, v = np.array([0.30, 0.301, 0.299, 0.30]), np.array([0.04, 0.05, 0.04, 0.06])
    res = pool(make_effects(y, v))
    assert q_statistic(y, v) < stats.chi2.ppf(0.025, 3)
    assert res.heterogeneity.tau2_ci.high == 0.0
    assert any("Q-profile interval of tau^2 is [0, 0]" in n for n in res.notes)
