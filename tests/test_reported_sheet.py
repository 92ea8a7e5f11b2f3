"""The 'reported' column inside a sheet: the same effects as typed columns, typed columns
completing or contradicting the string, the consistency check's warnings and list, and
the choice of value in 'trust'. All rows are invented."""
from __future__ import annotations

import json

import pytest

from pooler import convert, read_sheet
from pooler.errors import InputError

HEAD = "study,stat,reported,value,n1,n2,n,df,df1,direction,design,within_r,trust,exclude,ci_low,ci_high"


def _sheet(tmp_path, *rows, name="s.csv"):
    p = tmp_path / name
    p.write_text(HEAD + "\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return p


def _effects(tmp_path, *rows, **kw):
    return convert(read_sheet(_sheet(tmp_path, *rows)), **kw)


# typed row, then the same result pasted; the effects must agree exactly
PAIRS = [
    ("A,t,,2.41,30,30,,,,,,,,,,", 'A,,"t(58) = 2.41, p = .019",,30,30,,,,,,,,,,'),
    ("A,t,,2.41,,,,58,,,,,,,,", 'A,,"t(58) = 2.41",,,,,,,,,,,,,'),
    ("A,t,,-3.10,,,24,,,,within,0.6,,,,", 'A,,"t(23) = \u22123.10",,,,24,,,,within,0.6,,,,'),
    ("A,F,,4.12,,,,212,1,+,,,,,,", 'A,,"F(1, 212) = 4.12, p = .043",,,,,,,+,,,,,,'),
    ("A,r,,0.12,,,310,,,,,,,,,", 'A,,"r(308) = .12",,,,,,,,,,,,,'),
    ("A,r,,-0.24,,,97,,,,,,,,,", 'A,,"r = \u2212.24, n = 97",,,,,,,,,,,,,'),
    ("A,chi2,,5.21,,,80,,,+,,,,,,", 'A,,"\u03c72(1, N = 80) = 5.21",,,,,,,+,,,,,,'),
    ("A,chi2,,5.21,,,80,,,-,,,,,,", 'A,,"chi2(1) = 5.21",,,,80,,,-,,,,,,'),
    ("A,d,,0.52,48,48,,,,,,,,,,", 'A,,"d = 0.52, 95% CI [0.10, 0.94]",,48,48,,,,,,,,,,'),
    ("A,g,,0.40,50,52,,,,,,,,,,", 'A,,"g = 0.40, 95% CI [0.02; 0.78]",,50,52,,,,,,,,,,'),
    ("A,odds_ratio,,2.30,,,,,,,,,,,1.10,4.80", 'A,,"OR = 2.30, 95% CI [1.10, 4.80]",,,,,,,,,,,,,'),
    ("A,p,,0.032,28,28,,,,+,,,,,,", 'A,,"p = .032",,28,28,,,,+,,,,,,'),
]


@pytest.mark.parametrize("typed,pasted", PAIRS, ids=[p[1].split(",", 2)[2][:28] for p in PAIRS])
@pytest.mark.parametrize("metric", ["d", "r"])
def test_same_effect_as_typed(tmp_path, typed, pasted, metric):
    a = _effects(tmp_path, typed, metric=metric).rows[0]
    b = _effects(tmp_path, pasted, metric=metric).rows[0]
    assert b.stat == a.stat
    assert b.effect == pytest.approx(a.effect, rel=1e-12)
    assert b.variance == pytest.approx(a.variance, rel=1e-12)
    assert b.reported is not None and a.reported is None


def test_means_string_same_as_typed(tmp_path):
    typed = tmp_path / "t.csv"
    typed.write_text("study,stat,mean1,sd1,mean2,sd2,n1,n2\nA,means,14.0,3.9,12.1,4.2,30,31\n")
    pasted = tmp_path / "p.csv"
    pasted.write_text('study,reported\nA,"M = 14.0, SD = 3.9, n = 30 vs M = 12.1, SD = 4.2, '
                      'n = 31"\n')
    a, b = convert(read_sheet(typed)).rows[0], convert(read_sheet(pasted)).rows[0]
    assert (b.effect, b.variance) == pytest.approx((a.effect, a.variance), rel=1e-12)


def test_original_text_kept_in_every_output(tmp_path, run_cli):
    text = "t(58) = 2.41, p = .019"
    eff = _effects(tmp_path, f'A,,"{text}",,30,30,,,,,,,,,,', "B,t,,2.0,20,20,,,,,,,,,,")
    assert eff.rows[0].reported == text
    assert eff.to_dict()["rows"][0]["reported"] == text
    assert eff.to_frame()["reported"][0] == text
    from pooler.output.outputs import effects_csv
    assert text in effects_csv(eff)
    res = run_cli("convert", tmp_path / "s.csv")
    assert res.exit_code == 0 and text in res.output


def test_columns_complete_the_string(tmp_path):
    eff = _effects(tmp_path, 'A,,"t(58) = 2.41",,28,32,,,,,,,,,,')
    row = eff.rows[0]
    assert (row.n1, row.n2) == (28, 32)
    assert not eff.warnings


@pytest.mark.parametrize("row,column,fragment", [
    ('A,,"t(58) = 2.41",2.50,30,30,,,,,,,,,,', "value", "'value' holds 2.5"),
    ('A,,"t(58) = 2.41",,30,30,,56,,,,,,,,', "df", "'df' holds 56"),
    ('A,F,"t(58) = 2.41",,30,30,,,,,,,,,,', "stat", "'stat' says F"),
    ('A,,"r = .3, n = 97",,,,90,,,,,,,,,', "n", "'n' holds 90"),
    ('A,,"t(58) = 2.41",,30,30,,,,,,,maybe,,,', "trust", "trust 'maybe'"),
])
def test_conflicts_are_errors(tmp_path, row, column, fragment):
    with pytest.raises(InputError) as exc:
        read_sheet(_sheet(tmp_path, row))
    assert exc.value.row == 2 and exc.value.column == column
    assert fragment in str(exc.value)


def test_unreadable_string_is_located(tmp_path):
    with pytest.raises(InputError) as exc:
        read_sheet(_sheet(tmp_path, 'A,,"p < .001",,30,30,,,,,,,,,,'))
    assert exc.value.row == 2 and exc.value.column == "reported"
    assert "inequality" in str(exc.value) and "s.csv" in str(exc.value)


def test_stat_column_may_be_absent(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text('study,reported\nA,"r(98) = .25"\nB,"t(40) = 2.2"\n', encoding="utf-8")
    eff = convert(read_sheet(p))
    assert [r.stat for r in eff.rows] == ["r", "t"]


# ---------------------------------------------------------------- the consistency check


def test_inconsistent_rows_listed_and_warned(tmp_path):
    eff = _effects(
        tmp_path,
        'A,,"t(58) = 2.41, p = .019",,30,30,,,,,,,,,,',       # consistent
        'B,,"t(28) = 2.05, p = .03",,15,15,,,,,,,,,,',        # wrong p, same side of .05
        'C,,"t(40) = 1.70, p = .04",,21,21,,,,,,,,,,',        # wrong p, crosses .05
        'D,,"r(98) = .20",,,,90,,,,,,,,,',                    # df 98 but n - 2 = 88
        'E,,"OR = 2.95, 95% CI [1.10, 4.80]",,,,,,,,,,,,,',   # not centred on the log scale
    )
    kinds = [(c.row, c.kind, c.changes_significance) for c in eff.inconsistencies]
    assert kinds[0] == (4, "p", True)  # the significance change first
    assert set(kinds[1:]) == {(3, "p", False), (5, "df", False), (6, "ci", False)}
    for c in eff.inconsistencies:
        assert any(f"row {c.row} " in w and f"column '{c.column}'" in w for w in eff.warnings)
    doc = eff.to_dict()["inconsistent_reports"]
    assert [d["row"] for d in doc] == [c.row for c in eff.inconsistencies]
    json.dumps(eff.to_dict())
    assert "the effect uses the statistic" in eff.inconsistencies[0].message


def test_df_checked_against_n_for_typed_rows(tmp_path):
    eff = _effects(tmp_path, "A,t,,2.1,20,20,,36,,,,,,,,",     # n1 + n2 - 2 = 38
                   "B,t,,2.1,,,20,18,,,within,,,,,",           # paired: n - 1 = 19
                   "C,t,,2.1,20,20,,37.2,,,,,,,,",             # Welch df below 38: fine
                   "D,F,,4.4,,,30,29,1,+,within,,,,,")         # within F: n - 1 = 29: fine
    assert [(c.row, c.kind) for c in eff.inconsistencies] == [(2, "df"), (3, "df")]
    assert "n1 + n2 - 2 = 38" in eff.inconsistencies[0].message
    assert "n - 1 = 19" in eff.inconsistencies[1].message


def test_trust_p_uses_the_p(tmp_path):
    from scipy import stats
    rows = ('C,,"t(40) = 1.70, p = .04",,21,21,,,,,,,{},,,')
    stat = _effects(tmp_path, rows.format("")).rows[0]
    pv = _effects(tmp_path, rows.format("p"))
    t_from_p = float(stats.t.isf(0.02, 40))
    typed = _effects(tmp_path, f"C,t,,{t_from_p!r},21,21,,,,,,,,,,").rows[0]
    assert pv.rows[0].effect == pytest.approx(typed.effect, rel=1e-9)
    assert pv.rows[0].effect > stat.effect
    assert pv.inconsistencies[0].used == "p"
    assert "as column 'trust' asks" in pv.warnings[0]


def test_trust_p_needs_an_exact_p(tmp_path):
    with pytest.raises(InputError) as exc:
        _effects(tmp_path, 'C,,"t(40) = 1.70, p < .01",,21,21,,,,,,,p,,,')
    assert exc.value.column == "trust" and "inequality" in str(exc.value)


def test_report_lists_inconsistencies(tmp_path, run_cli):
    rows = [f'S{i},,"t(38) = {2.0 + i / 10:.2f}",,20,20,,,,,,,,,,' for i in range(5)]
    rows.append('Bad,,"t(40) = 1.70, p = .04",,21,21,,,,,,,,,,')
    p = _sheet(tmp_path, *rows)
    out = tmp_path / "out"
    res = run_cli("run", p, "--out", out)
    assert res.exit_code == 0, res.output
    report = next(out.glob("*.md")).read_text(encoding="utf-8")
    assert "Reported numbers that disagree" in report
    assert "row 7, Bad (changes significance at .05)" in report
    assert "t(40) = 1.70, p = .04" in report
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert [c["row"] for c in doc["pool"]["inconsistent_reports"]] == [7]


def test_effect_size_beside_the_test_is_noted(tmp_path):
    row = _effects(tmp_path, 'A,,"t(58) = 2.41, p = .019, d = 0.63",,30,30,,,,,,,,,,').rows[0]
    typed = _effects(tmp_path, "A,t,,2.41,30,30,,,,,,,,,,").rows[0]
    assert row.effect == pytest.approx(typed.effect, rel=1e-12)
    assert any("also prints d = 0.63" in n for n in row.notes)


def test_problem_in_a_value_from_the_string_names_the_string(tmp_path):
    # df 58 from the string cannot fit 12 + 12 people: the message points at 'reported'
    with pytest.raises(InputError) as exc:
        _effects(tmp_path, 'A,,"t(58) = 2.41",,12,12,,,,,,,,,,')
    assert exc.value.column == "reported" and "df = 58 is larger" in str(exc.value)
    with pytest.raises(InputError) as exc:
        _effects(tmp_path, "A,t,,2.41,12,12,,58,,,,,,,,")
    assert exc.value.column == "df"
