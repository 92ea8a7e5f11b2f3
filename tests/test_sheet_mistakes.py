"""Sheet mistakes a new user makes that used to pass silently (each file in
tests/bad_sheets too); here the behaviour around them: what must keep working, and the
exact location and wording. All rows are invented."""
from __future__ import annotations

import pytest

from pooler import convert, read_sheet
from pooler.errors import InputError, InputErrors
from pooler.reading.sheet import MAX_PROBLEMS


def _write(tmp_path, text, name="s.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_equal_split_of_an_odd_total_still_works(tmp_path):
    eff = convert(read_sheet(_write(tmp_path, "study,stat,value,n\nA,t,2.1,41\n")))
    row = eff.rows[0]
    assert (row.n1, row.n2) == (20.5, 20.5) and row.status == "used"


@pytest.mark.parametrize("text,col", [
    ("study,stat,value,n1,n2\nA,t,2.1,24.5,30\n", "n1"),
    ("study,stat,value,n1,n2\nA,t,2.1,24,30.2\n", "n2"),
    ("study,stat,value,n\nA,r,0.2,60.5\n", "n"),
    ("study,stat,events1,n1,events2,n2\nA,counts,12.5,30,4,30\n", "events1"),
    ("study,stat,value,n1,n2,df1,direction\nA,F,4.1,20,20,1.5,+\n", "df1"),
])
def test_fractional_counts_refused(tmp_path, text, col):
    with pytest.raises(InputError) as exc:
        read_sheet(_write(tmp_path, text))
    assert exc.value.column == col and exc.value.row == 2
    assert f"{col} = " in str(exc.value) and "is not a whole number" in str(exc.value)


def test_half_group_size_hint(tmp_path):
    with pytest.raises(InputError, match="put it in 'n' and leave n1 and n2 empty"):
        read_sheet(_write(tmp_path, "study,stat,value,n1,n2\nA,t,2.1,24.5,24.5\n"))


def test_proportion_typed_as_count(tmp_path):
    with pytest.raises(InputError) as exc:
        read_sheet(_write(tmp_path, "study,stat,events1,n1,events2,n2\nA,counts,0.45,40,0.3,40\n"))
    assert "0.45 of the group is 18 people" in str(exc.value)
    assert exc.value.column == "events1"


def test_duplicate_rows_warned_not_dropped(tmp_path):
    text = "study,stat,value,n1,n2,exclude\nA,t,2.1,20,20,\nB,t,1.0,25,25,\nA,t,2.1,20,20,\n"
    eff = convert(read_sheet(_write(tmp_path, text)))
    assert eff.k == 3
    assert any("row 4 repeats row 2 exactly" in w for w in eff.warnings)
    text = text.rsplit("\n", 2)[0] + "\nA,t,2.1,20,20,duplicate of row 2\n"
    eff = convert(read_sheet(_write(tmp_path, text)))
    assert eff.k == 2 and eff.n_excluded == 1
    assert not any("repeats" in w for w in eff.warnings)


def test_rows_differing_in_one_cell_are_not_duplicates(tmp_path):
    eff = convert(read_sheet(_write(tmp_path, "study,stat,value,n1,n2\nA,t,2.1,20,20\n"
                                              "A,t,2.1,20,21\n")))
    assert not any("repeats" in w for w in eff.warnings)


@pytest.mark.parametrize("header,meant", [("excluded", "exclude"), ("within r", "within_r"),
                                          ("samples", "sample"), ("Within-R", "within_r"),
                                          ("desing", "design"), ("direktion", "direction")])
def test_misspelt_known_columns(tmp_path, header, meant):
    with pytest.raises(InputError) as exc:
        read_sheet(_write(tmp_path, f"study,stat,value,n1,n2,{header}\nA,t,2.1,20,20,x\n"))
    assert f"did you mean '{meant}'?" in str(exc.value)
    assert exc.value.row == 1 and exc.value.column == header


def test_unrelated_extra_columns_still_carried(tmp_path):
    sheet = read_sheet(_write(tmp_path, "study,stat,value,n1,n2,country,outcome measure\n"
                                        "A,t,2.1,20,20,NZ,recall\n"))
    assert sheet.extra_columns == ("country", "outcome measure")


@pytest.mark.parametrize("cell,col,fragment", [
    ('"1,024"', "n", "looks like 1024 written with a thousands separator"),
    ('"12,500"', "n1", "looks like 12500"),
    ('"1,024"', "value", "is ambiguous: type 1024"),
])
def test_thousands_separators(tmp_path, cell, col, fragment):
    cells = {"study": "A", "stat": "r", "value": "0.2", "n": "100", "n1": "", "n2": ""}
    if col == "n1":
        cells.update(stat="t", n="", n1="", n2="20")
    cells[col] = cell
    text = ",".join(cells) + "\n" + ",".join(cells.values()) + "\n"
    with pytest.raises(InputError) as exc:
        read_sheet(_write(tmp_path, text))
    assert fragment in str(exc.value) and exc.value.column == col


def test_decimal_comma_sheet_keeps_decimals(tmp_path):
    # in a semicolon sheet "2,415" is a decimal, not a thousand
    eff = convert(read_sheet(_write(tmp_path, "study;stat;value;n1;n2\nA;t;2,415;20;20\n")))
    assert eff.rows[0].status == "used"
    with pytest.raises(InputError, match="thousands separator"):
        read_sheet(_write(tmp_path, "study;stat;value;n\nA;r;0,2;1.024\n"))


def test_ns_explained(tmp_path):
    with pytest.raises(InputError) as exc:
        read_sheet(_write(tmp_path, "study,stat,value,n1,n2\nA,t,n.s.,20,20\n"))
    msg = str(exc.value)
    assert "non-significant result without its statistic cannot be converted" in msg
    assert "exact p" in msg and "'exclude'" in msg


@pytest.mark.parametrize("stat", ["d_z", "dz", "paired t", "Paired T"])
def test_within_aliases(tmp_path, stat):
    base = "d" if stat.lower().startswith("d") else "t"
    a = convert(read_sheet(_write(tmp_path, f"study,stat,value,n\nA,{stat},0.5,30\n"))).rows[0]
    b = convert(read_sheet(_write(tmp_path, f"study,stat,value,n,design\nA,{base},0.5,30,within\n",
                                  name="b.csv"))).rows[0]
    assert a.design == "within" and a.stat == base
    assert (a.effect, a.variance) == pytest.approx((b.effect, b.variance), rel=1e-12)


def test_every_problem_reported_at_once(tmp_path):
    rows = "".join(f"S{i},t,{i}x,20,20\n" for i in range(8))
    with pytest.raises(InputErrors) as exc:
        read_sheet(_write(tmp_path, "study,stat,value,n1,n2\n" + rows))
    assert [e.row for e in exc.value.errors] == list(range(2, 10))
    text = str(exc.value)
    assert text.count("\n") == 7 and "[problem 1 of 8" in text


def test_problems_are_capped(tmp_path):
    rows = "".join(f"S{i},t,{i}x,20,20\n" for i in range(MAX_PROBLEMS + 30))
    with pytest.raises(InputErrors) as exc:
        read_sheet(_write(tmp_path, "study,stat,value,n1,n2\n" + rows))
    assert len(exc.value.errors) == MAX_PROBLEMS + 30
    text = str(exc.value)
    assert text.count("\n  - ") == MAX_PROBLEMS - 1
    assert "... and 30 more; fix these and run again" in text


def test_several_cells_of_one_row(tmp_path):
    with pytest.raises(InputErrors) as exc:
        read_sheet(_write(tmp_path, "study,stat,value,n1,n2\nA,t,2.1*,twenty,20\n"))
    assert [(e.row, e.column) for e in exc.value.errors] == [(2, "value"), (2, "n1")]


def test_conversion_problems_reported_together(tmp_path):
    text = ("study,stat,value,n1,n2,n,direction\nA,F,4.1,20,20,,\nB,r,1.3,,,80,\n"
            "C,t,2.0,20,20,,\nD,chi2,3.1,,,50,\n")
    with pytest.raises(InputErrors) as exc:
        convert(read_sheet(_write(tmp_path, text)))
    assert [(e.row, e.column) for e in exc.value.errors] == [
        (2, "direction"), (3, "value"), (5, "direction")]


def test_reading_and_conversion_problems_together(tmp_path):
    # row 2 cannot be read, row 3 cannot be converted, row 4 is fine: both problems at once
    text = "study,stat,value,n1,n2,direction\nA,t,2.1*,20,20,\nB,F,4.1,20,20,\nC,t,2.0,20,20,\n"
    with pytest.raises(InputErrors) as exc:
        read_sheet(_write(tmp_path, text))
    assert [(e.row, e.column) for e in exc.value.errors] == [(2, "value"), (3, "direction")]


def test_excluded_rows_may_hold_what_cannot_be_read(tmp_path):
    # the messages suggest excluding a row with a reason: doing so must work
    text = ('study,stat,reported,value,n1,n2,exclude\n'
            'A,t,,2.1,20,20,\n'
            'B,,"p < .001",,20,20,only an inequality reported\n'
            'C,t,,n.s.,20,20,only n.s. reported\n')
    sheet = read_sheet(_write(tmp_path, text))
    eff = convert(sheet)
    assert eff.k == 1 and eff.n_excluded == 2
    assert [r.reason for r in eff.rows[1:]] == ["only an inequality reported",
                                                 "only n.s. reported"]
    assert eff.rows[1].reported == "p < .001"
    assert any("row 3 is excluded" in n for n in sheet.notes)
    assert any("row 4 is excluded" in n and "'value'" in n for n in sheet.notes)


def test_rows_differing_only_in_their_note_are_warned_not_dropped(tmp_path):
    """A result entered twice with different notes (new-user trial, messy2.csv) would be
    pooled twice: warned like an exact copy; another study with the same numbers is not."""
    text = ("study,stat,value,n1,n2,note\nA,t,2.1,20,20,first\nA,t,2.1,20,20,again\n"
            "B,t,2.1,20,20,another study\n")
    eff = convert(read_sheet(_write(tmp_path, text)))
    assert eff.k == 3
    warned = [w for w in eff.warnings if "repeats" in w]
    assert len(warned) == 1 and "row 3 repeats the study and every number of row 2" in warned[0]
