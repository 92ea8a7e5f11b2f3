"""Review checks of pooler.reading.reported and its use in pooler.reading.consistency. Every row is invented.

Sources: two-sided p of t from Student's t; of F(1, df) from the F upper tail; of r from
t = r sqrt(df / (1 - r²)) with df = n - 2 (e.g. Cohen 1988, ch. 3); of a 1-df chi-square from
its upper tail; a printed number x with d decimals stands for [x - 0.5·10^-d, x + 0.5·10^-d]
(the rounding rule the consistency check of printed p-values rests on).
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from pooler import convert, read_sheet
from pooler.reading.consistency import check_p
from pooler.errors import InputError
from pooler.reading.reported import parse_reported


def _p_two_sided(stat, x, df):
    x = np.abs(x)
    if stat == "t":
        return 2 * stats.t.sf(x, df)
    if stat == "F":
        return stats.f.sf(x, 1, df)
    if stat == "r":
        x = np.minimum(x, 1 - 1e-12)
        return 2 * stats.t.sf(x * np.sqrt(df / (1 - x * x)), df)
    return stats.chi2.sf(x, 1)


def test_consistency_verdict_agrees_with_a_dense_search_of_the_rounding_intervals():
    # brute force: the printed pair is consistent when some statistic inside its rounding
    # interval has a p inside the printed p's rounding interval (3001 values per interval)
    rng = np.random.default_rng(20261202)
    checked = {True: 0, False: 0}
    for _ in range(240):
        stat = rng.choice(["t", "F", "r", "chi2"])
        df = int(rng.integers(8, 300))
        true = {"t": rng.uniform(0.5, 4), "F": rng.uniform(0.3, 16), "r": rng.uniform(0.05, 0.6),
                "chi2": rng.uniform(0.3, 16)}[stat]
        dec_s = 2 if stat != "F" or rng.random() < 0.5 else 1
        shown = round(true, dec_s)
        # a printed p near the right one: sometimes right, sometimes off by a few steps
        dec_p = int(rng.choice([2, 3]))
        p_true = float(_p_two_sided(stat, shown, df))
        p_shown = round(p_true + rng.integers(-2, 3) * 10.0 ** -dec_p, dec_p)
        if not 0 < p_shown < 1:
            continue
        h_s, h_p = 0.5 * 10.0 ** -dec_s, 0.5 * 10.0 ** -dec_p
        grid = np.linspace(max(shown - h_s, 0), shown + h_s, 3001)
        ps = _p_two_sided(stat, grid, df)
        want = bool(np.any((ps >= p_shown - h_p) & (ps <= p_shown + h_p)))
        head = {"t": f"t({df})", "F": f"F(1, {df})", "r": f"r({df})", "chi2": "chi2(1)"}[stat]
        text = f"{head} = {shown:.{dec_s}f}, p = {p_shown:.{dec_p}f}".replace("0.", ".")
        parsed = parse_reported(text)
        got = check_p(parsed, None if stat == "chi2" else float(df),
                      1.0 if stat == "F" else None, None) is None
        # a grid point landing exactly on an edge is the only way the two can differ
        if got != want:
            edge = np.min(np.abs(np.concatenate([ps - (p_shown - h_p), ps - (p_shown + h_p)])))
            assert edge < 1e-6, text
        checked[want] += 1
    assert checked[True] > 40 and checked[False] > 40


def test_trust_p_with_a_one_tailed_p_recovers_the_statistic(tmp_path):
    # t(28) = 2.10 has one-sided p = .0225. A row printing 't(28) = 3.50, p = .0225' with
    # tails = 1 and trust = p must be converted from t = t_.9775(28) = 2.0986, like the consistent
    # row; before the fix the one-sided p was inverted as if two-sided (t = 2.415, g 15 % larger)
    sheet = tmp_path / "s.csv"
    sheet.write_text("study,reported,n1,n2,tails,trust\n"
                     'A,"t(28) = 3.50, p = .0225",15,15,1,p\n'
                     'B,"t(28) = 2.10, p = .0225",15,15,1,\n', encoding="utf-8")
    eff = convert(read_sheet(sheet))
    a, b = eff.rows[0], eff.rows[1]
    t_from_p = stats.t.isf(0.0225, 28)
    assert t_from_p == pytest.approx(2.0986, abs=1e-4)
    assert a.effect == pytest.approx(b.effect * t_from_p / 2.10, rel=1e-9)


@pytest.mark.parametrize("text", ["t(28) = 2.10, p = 4.5e-2", "t(28) = 2.10, p = 4.5E-2",
                                  "t(58) = 5.2, p = 1.2 \u00d7 10^-6"])
def test_a_p_in_scientific_notation_is_refused_with_a_clear_message(text):
    # before: "p = 4.5 is impossible" (the exponent was dropped and the mantissa read as p)
    with pytest.raises(InputError, match="scientific notation"):
        parse_reported(text)


# review finding 6, fixed: '1.024' is read as 1,024 for n and N (thousands separator); as a df
# it is now refused as ambiguous (reported.py _intish) instead of read as 1.024
@pytest.mark.parametrize("text", ["t(1.024) = 2.10", "F(1, 1.024) = 4.41"])
def test_a_df_with_a_dot_thousands_separator_is_not_read_as_a_fraction(text):
    try:
        df = parse_reported(text).values["df"]
    except InputError:
        return  # refusing the ambiguous number is fine too
    assert df == 1024


def test_a_welch_df_with_three_decimals_is_read_as_it_stands():
    """Only a df below 3 with three decimals is refused as ambiguous: t(37.125) is a Welch
    df (SPSS prints three decimals), not 37,125."""
    assert parse_reported("t(37.125) = 2.10").values["df"] == 37.125
