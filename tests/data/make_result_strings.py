"""Write ``result_strings.csv``: invented result strings in the typography papers use,
each with the parse pooler must give or a fragment of the message it must give.

Run ``python tests/data/make_result_strings.py`` after editing the table below. Columns of
the parse that are empty must stay absent from the parse; ``p`` is written as
``relation value`` (e.g. ``= 0.019``). All strings are invented.
"""
from __future__ import annotations

import csv
from pathlib import Path

COLS = ("text", "stat", "value", "df", "df1", "n", "n1", "n2", "ci_low", "ci_high",
        "mean1", "sd1", "mean2", "sd2", "p", "error")
MINUS, EN, EM, THIN, NBSP = "\u2212", "\u2013", "\u2014", "\u2009", "\u00a0"


def ok(text, stat, value=None, p=None, **kw):
    return {"text": text, "stat": stat, "value": value, "p": p, **kw}


def bad(text, fragment):
    return {"text": text, "error": fragment}


CASES = [
    # t
    ok("t(58) = 2.41, p = .019", "t", 2.41, "= 0.019", df=58),
    ok("t(58)=2.41, p=.019", "t", 2.41, "= 0.019", df=58),
    ok("t (58) = 2.41, p = .019", "t", 2.41, "= 0.019", df=58),
    ok("t[58] = 2.41", "t", 2.41, df=58),
    ok(f"t(23) = {MINUS}3.10", "t", -3.10, df=23),
    ok(f"t(23) = {EN}3.10", "t", -3.10, df=23),
    ok(f"t(23) = {EM}3.10", "t", -3.10, df=23),
    ok(f"t(23){THIN}={THIN}{MINUS}3.10,{NBSP}p{NBSP}={NBSP}.005", "t", -3.10, "= 0.005", df=23),
    ok("t(58) = 2,41", "t", 2.41, df=58),
    ok("t(58) = 2,41, p = ,019", "t", 2.41, "= 0.019", df=58),
    ok("t ( 58 )  =\n 2.41 ,  p =  .019", "t", 2.41, "= 0.019", df=58),
    ok("t(58) = --2.41", "t", -2.41, df=58),
    ok(f"t(58) = {MINUS}{MINUS}2.41", "t", -2.41, df=58),
    ok("t(58) == 2.41", "t", 2.41, df=58),
    ok("t(58) = + 2.41", "t", 2.41, df=58),
    ok("T(58) = 2.41", "t", 2.41, df=58),
    ok("t(45.3) = 2.10, p = .041", "t", 2.10, "= 0.041", df=45.3),
    ok("t = 2.41, df = 58, p = .019", "t", 2.41, "= 0.019", df=58),
    ok("t(58) = 2.41, p < .05", "t", 2.41, "< 0.05", df=58),
    ok("t(58) = 4.41, p < .001", "t", 4.41, "< 0.001", df=58),
    ok("t(58) = 4.41, p \u2264 .001", "t", 4.41, "<= 0.001", df=58),
    ok("t(58) = 4.41, p = .000", "t", 4.41, "< 0.0005", df=58),
    ok("t(40) = 1.10, n.s.", "t", 1.10, "> 0.05", df=40),
    ok("t(40) = 1.10, ns", "t", 1.10, "> 0.05", df=40),
    ok("t(40) = 1.10, p > .05", "t", 1.10, "> 0.05", df=40),
    ok("t(1,024) = 2.10", "t", 2.10, df=1024),
    ok("t(58) = 2.41, p = .019, two-tailed", "t", 2.41, "= 0.019", df=58),
    ok("t(58) = 2.41, p-value = .019", "t", 2.41, "= 0.019", df=58),
    ok("t(58) = 2.41; p = .019", "t", 2.41, "= 0.019", df=58),
    ok("t(30) = 2.41, n1 = 16, n2 = 16", "t", 2.41, df=30, n1=16, n2=16),
    # F
    ok("F(1, 212) = 4.12, p = .043", "F", 4.12, "= 0.043", df=212, df1=1),
    ok("F(1,212) = 4.12", "F", 4.12, df=212, df1=1),
    ok("F(1; 212) = 4,12", "F", 4.12, df=212, df1=1),
    ok("F (1, 212) = 4.12, p = .043", "F", 4.12, "= 0.043", df=212, df1=1),
    ok("F[1, 212] = 4.12", "F", 4.12, df=212, df1=1),
    ok("F(1, 1,024) = 4.12", "F", 4.12, df=1024, df1=1),
    ok("F(1, 57.4) = 4.12", "F", 4.12, df=57.4, df1=1),
    ok("F(1, 212) = 4.12, p < .05", "F", 4.12, "< 0.05", df=212, df1=1),
    bad("F(2, 87) = 3.9", "omnibus"),
    bad("F(3, 120) = 5.10, p = .002", "omnibus"),
    bad("F(212) = 4.12", "F needs two df"),
    # r
    ok("r(308) = .12", "r", 0.12, df=308),
    ok("r(308) = 0.12, p = .034", "r", 0.12, "= 0.034", df=308),
    ok(f"r = {MINUS}.24, n = 97", "r", -0.24, n=97),
    ok("r = -.24, N = 97", "r", -0.24, n=97),
    ok("r = -0,24, n = 97", "r", -0.24, n=97),
    ok("r(95) = -.24, p = .018", "r", -0.24, "= 0.018", df=95),
    ok("r = .31, n = 1,204", "r", 0.31, n=1204),
    ok("r = .31, n = 1.204", "r", 0.31, n=1204),
    ok("R = .31, n = 60", "r", 0.31, n=60),
    bad("r = .31, n = 60.5", "not a whole number"),
    bad("r(95, 3) = .24", "r has one df"),
    # chi-square
    ok("\u03c72(1, N = 80) = 5.21", "chi2", 5.21, n=80),
    ok("\u03c7\u00b2(1, N = 80) = 5.21, p = .022", "chi2", 5.21, "= 0.022", n=80),
    ok("chi2(1) = 5.21", "chi2", 5.21),
    ok("chi2(1, N=80)=5.21", "chi2", 5.21, n=80),
    ok("X2(1, N = 80) = 5.21", "chi2", 5.21, n=80),
    ok("x2(1, n = 80) = 5.21", "chi2", 5.21, n=80),
    ok("chi-square(1, N = 80) = 5.21", "chi2", 5.21, n=80),
    ok("\u03c7\u00b2 (1, N = 80) = 5,21", "chi2", 5.21, n=80),
    ok("chi^2(1) = 5.21, N = 80", "chi2", 5.21, n=80),
    bad("\u03c72(2, N = 80) = 7.30", "only a 1-df chi-square"),
    # d and g
    ok("d = 0.52, 95% CI [0.10, 0.94]", "d", 0.52, ci_low=0.10, ci_high=0.94),
    ok("d = 0.52 [0.10, 0.94]", "d", 0.52, ci_low=0.10, ci_high=0.94),
    ok("Cohen's d = 0.52", "d", 0.52),
    ok("Cohen\u2019s d = 0.52, 95% CI: 0.10 to 0.94", "d", 0.52, ci_low=0.10, ci_high=0.94),
    ok(f"d = {MINUS}0.30, 95% CI [{MINUS}0.71, 0.11]", "d", -0.30, ci_low=-0.71, ci_high=0.11),
    ok("d = 0,52; 95 % CI [0,10; 0,94]", "d", 0.52, ci_low=0.10, ci_high=0.94),
    ok("d = .52, n1 = 40, n2 = 38", "d", 0.52, n1=40, n2=38),
    ok("g = 0.40, 95% CI [0.02; 0.78]", "g", 0.40, ci_low=0.02, ci_high=0.78),
    ok("Hedges' g = 0.40", "g", 0.40),
    ok("d = 0.52, 90% CI [0.17, 0.87]", "d", 0.52, ci_low=0.17, ci_high=0.87),
    bad("d = 0.52, 95% CI [0.94, 0.10]", "wrong order"),
    # odds ratios
    ok("OR = 2.30, 95% CI [1.10, 4.80]", "odds_ratio", 2.30, ci_low=1.10, ci_high=4.80),
    ok(f"OR = 2.30 (95% CI 1.10{EN}4.80)", "odds_ratio", 2.30, ci_low=1.10, ci_high=4.80),
    ok("OR = 2.30, 95% CI 1.10-4.80", "odds_ratio", 2.30, ci_low=1.10, ci_high=4.80),
    ok("odds ratio = 2.30, 95% CI [1.10; 4.80]", "odds_ratio", 2.30, ci_low=1.10, ci_high=4.80),
    ok("OR = 2,30; 95% CI [1,10; 4,80]", "odds_ratio", 2.30, ci_low=1.10, ci_high=4.80),
    ok("OR = 0.45, 95% CI [0.21, 0.96], p = .039", "odds_ratio", 0.45, "= 0.039",
       ci_low=0.21, ci_high=0.96),
    bad("OR = 2.30", "needs its 95% CI"),
    bad("OR = 2.30, 90% CI [1.30, 4.10]", "95% CI only"),
    # means and SDs
    ok("M = 14.0, SD = 3.9; M = 12.1, SD = 4.2", "means", mean1=14.0, sd1=3.9, mean2=12.1,
       sd2=4.2),
    ok("M = 14.0 (SD = 3.9) vs M = 12.1 (SD = 4.2)", "means", mean1=14.0, sd1=3.9, mean2=12.1,
       sd2=4.2),
    ok("M = 14.0, SD = 3.9, n = 30 vs M = 12.1, SD = 4.2, n = 31", "means", mean1=14.0,
       sd1=3.9, mean2=12.1, sd2=4.2, n1=30, n2=31),
    ok("M = 14,0, SD = 3,9; M = 12,1, SD = 4,2", "means", mean1=14.0, sd1=3.9, mean2=12.1,
       sd2=4.2),
    ok(f"M = {MINUS}1.5, SD = 2.0; M = 0.3, SD = 2.2", "means", mean1=-1.5, sd1=2.0, mean2=0.3,
       sd2=2.2),
    bad("M = 14.0, SD = 3.9", "need two"),
    bad("M = 14.0, SD = 3.9; M = 12.1, SD = 4.2; M = 11.0, SD = 4.0", "need two"),
    # p alone
    ok("p = .032", "p", 0.032, "= 0.032"),
    ok("p = 0,032", "p", 0.032, "= 0.032"),
    bad("p < .001", "is an inequality"),
    bad("p = .000", "p < .0005"),
    bad("p > .05", "is an inequality"),
    bad("p = 1.3", "p = 1.3 is impossible"),
    # a test statistic printed with an effect size or other extras: the test is read
    ok("t(58) = 2.41, p = .019, d = 0.63", "t", 2.41, "= 0.019", df=58),
    ok("t(58) = 2.41, p = .019, d = 0.63, 95% CI [0.11, 1.15]", "t", 2.41, "= 0.019", df=58),
    ok("F(1, 212) = 4.12, p = .043, \u03b7p\u00b2 = .02", "F", 4.12, "= 0.043", df=212, df1=1),
    ok("F(1, 212) = 4.12, MSE = 3.21, p = .043, partial \u03b7\u00b2 = .019", "F", 4.12,
       "= 0.043", df=212, df1=1),
    ok("F(1, 212) = 4.12, \u03c92 = .01", "F", 4.12, df=212, df1=1),
    bad("d = 0.50, g = 0.48", "more than one statistic"),
    ok("\u03c72(1, N = 80) = 5.21, p = .022, \u03c6 = .26", "chi2", 5.21, "= 0.022", n=80),
    ok("\u03c72(1, N = 80) = 5.21, Cram\u00e9r's V = .26", "chi2", 5.21, n=80),
    ok("t(78) = 2.10, n = 40 per group", "t", 2.10, df=78, n1=40, n2=40),
    ok("d = 0.45, n = 32 in each condition", "d", 0.45, n1=32, n2=32),
    ok("t(58) = 2.41, p = .019*", "t", 2.41, "= 0.019", df=58),
    ok("r = .24**, n = 97", "r", 0.24, n=97),
    ok("p = .019, t(58) = 2.41", "t", 2.41, "= 0.019", df=58),
    ok("t(58) = 2.41 p = .019", "t", 2.41, "= 0.019", df=58),
    ok("r(96) = .21, 95% CI [.01, .39]", "r", 0.21, df=96),
    bad("t(78) = 2.10, n = 40 per group, n1 = 38", "given twice"),
    bad("t58 = 2.41", "cannot be read"),
    # things that cannot be read without guessing
    bad("n.s.", "without a statistic cannot be converted"),
    bad("ns", "without a statistic cannot be converted"),
    bad("not significant", "without a statistic cannot be converted"),
    bad("", "is empty"),
    bad("t(58)", "without '= value'"),
    bad("t(58) = 2.41, F(1, 58) = 5.81", "more than one statistic"),
    bad("t(58) = 2.41, p = .019, p = .02", "more than one p-value"),
    bad("t(58) = 2.41 (one-way)", "cannot be read"),
    bad("beta = .31, p = .02", "cannot be read"),
    bad("t(58) = 2.41, M = 3.0, SD = 1.0", "both a test statistic and means"),
    bad("significant effect of condition", "cannot be read"),
    bad("t(58.5.1) = 2.41", "t(58.5.1)"),
    bad("r = .3, n = 40, n = 42", "given twice"),
    bad("t(58) = 2.41, df = 56", "disagrees"),
]


def main():
    path = Path(__file__).with_name("result_strings.csv")
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=COLS)
        w.writeheader()
        for c in CASES:
            w.writerow({k: ("" if c.get(k) is None else c[k]) for k in COLS})


if __name__ == "__main__":
    main()
