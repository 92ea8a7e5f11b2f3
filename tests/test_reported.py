"""Result strings as papers print them (pooler/reading/reported.py) and the reporting
consistency check (pooler/reading/consistency.py). The table of strings lives in tests/data/result_strings.csv (made by
tests/data/make_result_strings.py); every example there and here is invented."""
from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest

from pooler.errors import InputError
from pooler.reading.consistency import (check_ci, check_p, p_from_statistic, p_interval,
                                        statistic_from_p)
from pooler.reading.reported import Number, ReportedP, parse_reported

DATA = Path(__file__).parent / "data" / "result_strings.csv"
TABLE = list(csv.DictReader(open(DATA, encoding="utf-8", newline="")))
FIELDS = ("value", "df", "df1", "n", "n1", "n2", "ci_low", "ci_high", "mean1", "sd1",
          "mean2", "sd2")


def test_table_is_large_enough():
    assert len(TABLE) >= 80
    assert sum(bool(c["error"]) for c in TABLE) >= 20


@pytest.mark.parametrize("case", TABLE, ids=[f"{i}:{c['text'][:30]}" for i, c in enumerate(TABLE)])
def test_result_string(case):
    if case["error"]:
        with pytest.raises(InputError) as exc:
            parse_reported(case["text"], file="s.csv", row=7)
        msg = str(exc.value)
        assert case["error"] in msg
        assert msg.startswith("s.csv, row 7, column 'reported': ")
        return
    got = parse_reported(case["text"])
    assert got.values["stat"] == case["stat"]
    for key in FIELDS:
        if case[key]:
            assert got.values.get(key) == pytest.approx(float(case[key]), abs=1e-12), key
        else:
            assert key not in got.values, key
    if case["p"]:
        rel, val = case["p"].split()
        assert got.p is not None and got.p.relation == rel
        assert got.p.number.value == pytest.approx(float(val), abs=1e-12)
    else:
        assert got.p is None
    assert got.text == case["text"]


# ---------------------------------------------------------------- p recomputed


@pytest.mark.parametrize("stat,value,df,df1,n", [
    ("t", 2.41, 58, None, None), ("t", -3.10, 23, None, None), ("t", 0.4, 200, None, None),
    ("F", 4.12, 212, 1, None), ("F", 0.9, 30, 1, None),
    ("r", 0.12, 308, None, None), ("r", -0.24, None, None, 97),
    ("chi2", 5.21, None, None, 80), ("chi2", 0.3, None, None, 50)])
def test_p_matches_scipy_stats(stat, value, df, df1, n):
    from scipy import stats
    if stat == "t":
        want = 2 * stats.t.sf(abs(value), df)
    elif stat == "F":
        want = stats.f.sf(value, df1, df)
    elif stat == "r":
        # scipy.stats.pearsonr's p: t = r sqrt(df / (1 - r^2)) on n - 2 df, two-sided
        dfr = df if df is not None else n - 2
        want = 2 * stats.t.sf(abs(value) * math.sqrt(dfr / (1 - value ** 2)), dfr)
    else:
        want = stats.chi2.sf(value, 1)
    assert p_from_statistic(stat, value, df, df1, n) == pytest.approx(want, rel=1e-10)


def test_r_p_matches_pearsonr():
    # scipy.stats.pearsonr on invented data: the p of r(n - 2) recomputed from r alone
    import numpy as np
    from scipy import stats
    rng = np.random.default_rng(14)
    x = rng.normal(size=40)
    y = 0.4 * x + rng.normal(size=40)
    res = stats.pearsonr(x, y)
    assert p_from_statistic("r", res.statistic, 38) == pytest.approx(res.pvalue, rel=1e-9)


@pytest.mark.parametrize("stat,p,df", [("t", 0.019, 58), ("F", 0.043, 212),
                                       ("r", 0.034, 308), ("chi2", 0.022, None)])
def test_statistic_from_p_inverts(stat, p, df):
    v = statistic_from_p(stat, p, df)
    assert p_from_statistic(stat, v, df, 1) == pytest.approx(p, rel=1e-9)


# ---------------------------------------------------------------- rounding intervals


def test_number_bounds():
    assert Number(2.41, 2).bounds() == pytest.approx((2.405, 2.415))
    assert Number(2.4, 1).bounds() == pytest.approx((2.35, 2.45))
    assert Number(3.0, 0).bounds() == pytest.approx((2.5, 3.5))
    assert ReportedP("=", Number(0.019, 3)).bounds() == pytest.approx((0.0185, 0.0195))
    assert ReportedP("<", Number(0.001, 3)).bounds() == (0.0, 0.001)
    assert ReportedP(">", Number(0.05, 2)).bounds() == (0.05, 1.0)


def test_p_interval_edges():
    # a printed t = 2.41 allows t in [2.405, 2.415]: p at the ends of that interval
    from scipy import stats
    lo, hi = p_interval("t", Number(2.41, 2), 58)
    assert lo == pytest.approx(2 * stats.t.sf(2.415, 58), rel=1e-10)
    assert hi == pytest.approx(2 * stats.t.sf(2.405, 58), rel=1e-10)


def test_rounding_edges_decide_consistency():
    # t(58) = 2.41 allows p in [0.01891, 0.01939] (scipy.stats.t.sf at 2.415 and 2.405).
    # A printed p with three decimals stands for +-0.0005: .019 ([.0185, .0195]) overlaps,
    # .018 ([.0175, .0185]) misses by 0.0004, .020 ([.0195, .0205]) misses by 0.0001.
    from scipy import stats
    p_hi = 2 * stats.t.sf(2.405, 58)
    p_lo = 2 * stats.t.sf(2.415, 58)
    assert 0.0189 < p_lo < 0.01892 and 0.01938 < p_hi < 0.01939
    for printed, consistent in (("p = .019", True), ("p = .018", False), ("p = .020", False),
                                ("p = .02", True), ("p = .01", False), ("p < .05", True),
                                ("p < .01", False), ("p > .05", False), ("p = .0193", True),
                                ("p = .0195", False), ("p = .0188", False), ("p = .0189", True)):
        parsed = parse_reported(f"t(58) = 2.41, {printed}")
        found = check_p(parsed, 58, None, None)
        assert (found is None) == consistent, printed
    # the edges, to the fifth decimal: p(2.405) = 0.0193842, p(2.415) = 0.0189085
    assert 0.019384 < p_hi < 0.019385 and 0.018908 < p_lo < 0.018909
    for printed, consistent in (("p = .01938", True),   # [.019375, .019385] reaches p_hi
                                ("p = .01939", False),  # [.019385, .019395] starts above it
                                ("p = .01891", True),   # [.018905, .018915] reaches p_lo
                                ("p = .01890", False)):  # [.018895, .018905] ends below it
        found = check_p(parse_reported(f"t(58) = 2.41, {printed}"), 58, None, None)
        assert (found is None) == consistent, printed


def test_hand_computed_inconsistencies():
    # Invented: t(28) = 2.05, p = .03. By hand, the two-sided p of t = 2.045..2.055 on 28 df
    # lies between .0493 and .0504 (table value .05 for t(28) = 2.048, Student t table),
    # so p = .03 ([.0295, .0305]) is inconsistent, but both sides are below/around .05:
    # recomputed .0499 is significant, so significance does not change.
    found = check_p(parse_reported("t(28) = 2.05, p = .03"), 28, None, None)
    assert found is not None
    msg, flips, point = found
    assert point == pytest.approx(0.0499, abs=2e-4) and not flips
    # Invented: t(40) = 1.70, p = .04. t(40) = 1.684 is the two-sided .10 point (Student t
    # table), so t = 1.70 gives p of about .097: not significant, printed significant.
    msg, flips, point = check_p(parse_reported("t(40) = 1.70, p = .04"), 40, None, None)
    assert flips and 0.09 < point < 0.10 and "moves the result across .05" in msg
    # Invented: F(1, 60) = 4.00, p = .05: F(1, 60) = 4.00 is t(60) = 2.00, p = .0500 by hand
    # (t table: 2.000 is the .05 point for 60 df), consistent.
    assert check_p(parse_reported("F(1, 60) = 4.00, p = .05"), 60, 1, None) is None
    # Invented: chi2(1) = 3.84 is the .05 point of chi-square(1) (table value 3.841);
    # printed p = .01 is inconsistent and flips significance (recomputed .050 is not < .05).
    msg, flips, point = check_p(parse_reported("chi2(1, N = 100) = 3.84, p = .01"), None, None,
                                100)
    assert point == pytest.approx(0.05, abs=2e-4) and flips
    # Invented: r(98) = .20: t = .2 sqrt(98 / .96) = 2.0207, p = .046 (by hand with the t
    # table: 1.984 is the .05 point for 98 df); printed p = .46 is a slipped decimal.
    msg, flips, point = check_p(parse_reported("r(98) = .20, p = .46"), 98, None, None)
    assert point == pytest.approx(0.046, abs=1e-3) and flips


def test_ci_checks():
    # OR: log(2.30) = 0.8329; (log 1.10 + log 4.80) / 2 = (0.0953 + 1.5686) / 2 = 0.8320
    # -> exp = 2.298, within the rounding of 2.30: consistent.
    assert check_ci(parse_reported("OR = 2.30, 95% CI [1.10, 4.80]")) is None
    # The same limits around OR = 2.95 (the raw midpoint): not centred on the log scale.
    assert "centre" in check_ci(parse_reported("OR = 2.95, 95% CI [1.10, 4.80]"))
    # d: (0.10 + 0.94) / 2 = 0.52 exactly; 0.60 is off by far more than rounding.
    assert check_ci(parse_reported("d = 0.52, 95% CI [0.10, 0.94]")) is None
    assert check_ci(parse_reported("d = 0.53, 95% CI [0.10, 0.94]")) is None  # 0.525 reachable
    assert check_ci(parse_reported("d = 0.60, 95% CI [0.10, 0.94]")) is not None
    # one decimal on each limit: [0.1, 0.9] allows midpoints 0.45..0.55
    assert check_ci(parse_reported("d = 0.55, 95% CI [0.1, 0.9]")) is None
    assert check_ci(parse_reported("d = 0.57, 95% CI [0.1, 0.9]")) is not None


# ---------------------------------------------------------------- robustness

_PIECES = ["t(", "F(1, ", "r(", "chi2(1, N = ", "d = ", "OR = ", "p = ", "p < ", "95% CI [",
           "M = ", ", SD = ", "n = ", ", ", "; ", ") = ", "]", "\u2212", "\u2013", ".", ",",
           "0", "1", "2", "5", "9", " ", "\n", "n.s.", "--", "=="]


def test_any_string_gives_a_parse_or_an_input_error():
    # 5,000 random strings assembled from the pieces results are made of (seeded): the
    # parser and the checks either succeed or raise InputError, never anything else
    import random
    rng = random.Random(14)
    for _ in range(5000):
        s = "".join(rng.choice(_PIECES) for _ in range(rng.randint(1, 12)))
        try:
            r = parse_reported(s)
        except InputError:
            continue
        check_ci(r)
        check_p(r, r.values.get("df") or 30, r.values.get("df1"), r.values.get("n") or 40)


def test_one_tailed_p_is_halved(tmp_path):
    # t(58) = 2.41 gives two-sided p = .0191, one-sided .0096: a printed one-tailed
    # p = .010 ([.0095, .0105]) is consistent only when tails = 1
    parsed = parse_reported("t(58) = 2.41, p = .010")
    assert check_p(parsed, 58, None, None, tails=1) is None
    assert check_p(parsed, 58, None, None, tails=2) is not None


def test_a_rounding_edge_says_which_end_misses_the_printed_p():
    """F(1, 212) = 4.12 stands for [4.115, 4.125], whose smallest p (scipy.stats.f.sf(4.125,
    1, 212) = 0.043502) rounds to .044: the printed .043 misses by 2e-6, and the message
    shows that number instead of two values that look alike at 4 decimals."""
    from scipy import stats
    parsed = parse_reported("F(1, 212) = 4.12, p = .043")
    msg, moves, _ = check_p(parsed, 212, 1, None)
    assert f"{stats.f.sf(4.125, 1, 212):.6f}" == "0.043502"
    assert "its smallest p is 0.043502, which rounds to 0.044" in msg and not moves


def test_a_one_tailed_tag_sets_tails():
    """'(one-tailed)' after a result says how its p was computed: t(40) = 2.1 gives a
    two-sided p of .0421 (scipy.stats.t.sf(2.1, 40) * 2), so p = .021 is consistent one-tailed."""
    from scipy import stats
    assert round(2 * stats.t.sf(2.1, 40), 4) == 0.0421
    for text in ("t(40) = 2.1, p = .021 (one-tailed)", "t(40) = 2.1, p = .021, 1-tailed",
                 "t(40) = 2.1, p = .021, one-sided"):
        parsed = parse_reported(text)
        assert parsed.values["tails"] == 1.0
        assert check_p(parsed, 40, None, None, tails=1) is None
