"""Bad input: one clear line naming file, row and column, exit 2, no traceback, nothing written."""
from __future__ import annotations

import pytest

T = {"study": "A", "stat": "t", "value": "2.1", "n1": "20", "n2": "20"}

CASES = [
    # (id, rows, expected fragment, row, column)
    ("unknown stat", [{**T, "stat": "beta"}], "unknown statistic 'beta'", 2, "stat"),
    ("non-numeric", [{**T, "value": "two"}], "'two' is not a number", 2, "value"),
    ("stars", [{**T, "value": "2.31*"}], "remove the significance stars", 2, "value"),
    ("decimal comma", [{**T, "value": "2,31"}], "decimal separator", None, None),
    ("r too big", [{"study": "A", "stat": "r", "value": "1.2", "n": "50"}],
     "r = 1.2 is impossible", 2, "value"),
    ("r exactly 1", [{"study": "A", "stat": "r", "value": "1", "n": "50"}],
     "strictly between -1 and 1", 2, "value"),
    ("zero n", [{**T, "n1": "0"}], "n1 = 0 is impossible", 2, "n1"),
    ("negative n", [{**T, "n2": "-5"}], "n2 = -5 is impossible", 2, "n2"),
    ("negative sd", [{"study": "A", "stat": "means", "mean1": "1", "sd1": "-1", "mean2": "0",
                      "sd2": "1", "n1": "10", "n2": "10"}], "sd1 = -1 is impossible", 2, "sd1"),
    ("zero sd", [{"study": "A", "stat": "means", "mean1": "1", "sd1": "1", "mean2": "0",
                  "sd2": "0", "n1": "10", "n2": "10"}], "sd2 = 0 is impossible", 2, "sd2"),
    ("n1+n2<=2", [{**T, "n1": "1", "n2": "1"}], "n1 + n2 = 2", 2, "n1"),
    ("omnibus F", [{"study": "A", "stat": "F", "value": "4", "df1": "2", "df": "57",
                    "direction": "+"}], "cannot become one d", 2, "df1"),
    ("F no direction", [{"study": "A", "stat": "F", "value": "4", "df1": "1", "n1": "20",
                         "n2": "20"}], "'direction' is empty", 2, "direction"),
    ("chi2 no direction", [{"study": "A", "stat": "chi2", "value": "4", "n": "100"}],
     "'direction' is empty", 2, "direction"),
    ("p no direction", [{"study": "A", "stat": "p", "value": "0.03", "n1": "20", "n2": "20"}],
     "'direction' is empty", 2, "direction"),
    ("p zero", [{"study": "A", "stat": "p", "value": "0", "n1": "20", "n2": "20",
                 "direction": "+"}], "p = 0 is impossible", 2, "value"),
    ("p above 1", [{"study": "A", "stat": "p", "value": "1.3", "n1": "20", "n2": "20",
                    "direction": "+"}], "p = 1.3 is impossible", 2, "value"),
    ("p inequality", [{"study": "A", "stat": "p", "value": "<.05", "n1": "20", "n2": "20",
                       "direction": "+"}], "inequality is not an exact value", 2, "value"),
    ("counts > n", [{"study": "A", "stat": "counts", "events1": "25", "n1": "20",
                     "events2": "3", "n2": "20"}], "events1 = 25 is impossible", 2, "events1"),
    ("within_r 1", [{"study": "A", "stat": "t", "value": "2", "n": "20", "design": "within",
                     "within_r": "1"}], "within_r = 1 is impossible", 2, "within_r"),
    ("sample n disagree", [{"study": "A", "sample": "s", "stat": "d", "value": "0.3",
                            "n1": "20", "n2": "20"},
                           {"study": "A", "sample": "s", "stat": "d", "value": "0.2",
                            "n1": "25", "n2": "20"}], "disagree on the sample size", 3, "n"),
    ("missing study col", [{"stat": "t", "value": "2", "n1": "20", "n2": "20"}],
     "required column 'study' is missing", 1, None),
    ("missing stat col", [{"study": "A", "value": "2", "n1": "20", "n2": "20"}],
     "required column 'stat' is missing", 1, None),
    ("empty study", [{**T, "study": ""}], "study label is empty", 2, "study"),
    ("df larger than n", [{**T, "df": "60"}], "are n and df swapped?", 2, "df"),
    ("n disagrees", [{**T, "n": "55"}], "but n1 + n2 = 40", 2, "n"),
    ("no group sizes", [{"study": "A", "stat": "t", "value": "2"}], "group sizes are missing",
     2, "n1"),
    ("bad direction", [{**T, "direction": "up"}], "direction 'up' is not understood", 2,
     "direction"),
    ("bad design", [{**T, "design": "mixed"}], "design 'mixed' is not understood", 2, "design"),
    ("OR outside CI", [{"study": "A", "stat": "odds_ratio", "value": "2", "ci_low": "2.5",
                        "ci_high": "4"}], "does not contain the odds ratio", 2, "ci_low"),
    ("t with df text", [{**T, "value": "t(38)=2.1"}], "put degrees of freedom in 'df'", 2,
     "value"),
]


@pytest.mark.parametrize("rows,fragment,row,column", [c[1:] for c in CASES],
                         ids=[c[0] for c in CASES])
def test_bad_sheet_gives_clean_error(write_sheet, run_cli, rows, fragment, row, column):
    path = write_sheet(rows)
    res = run_cli("convert", path)
    assert res.exit_code == 2
    err = res.stderr
    assert "Traceback" not in res.output
    assert err.startswith("pooler: error: ")
    assert len(err.strip().splitlines()) == 1
    assert fragment in err
    assert path.name in err
    if row is not None:
        assert f"row {row}" in err
    if column is not None:
        assert f"column '{column}'" in err
    assert res.stdout == ""


def test_column_named_as_user_spelled_it(write_sheet, run_cli):
    path = write_sheet([{"Study": "A", "STAT": "t", "Value": "x2", "N1": "20", "N2": "20"}])
    res = run_cli("convert", path)
    assert res.exit_code == 2 and "column 'Value'" in res.stderr


RAW_FILES = [
    # (file name, bytes, fragment, expected "row N" or None); the corpus in tests/bad_sheets
    # runs these kinds through `pooler run`, here they go through `pooler convert`
    ("empty.csv", b"", "empty", None),
    ("head.csv", b"study,stat,value\n", "no data rows", None),
    ("junk.csv", b"\x00\x01\x02garbage\x00", "binary", None),
    ("latin.csv", "study,stat,value,n1,n2\nM\u00fcller,t,2,20,20\n".encode("latin-1"),
     "not UTF-8", 2),
    ("broken.xlsx", b"PK\x03\x04 not really a zip", "not a readable .xlsx", None),
    ("dup.csv", b"study,stat,value,Value,n1,n2\nA,t,2,3,20,20\n", "appears twice", 1),
    ("quote.csv", b'study,stat,value,n1,n2\n"A,t,2,20,20\nB,t,2,20,20\n', "quote", None),
]


@pytest.mark.parametrize("name,data,fragment,row", RAW_FILES, ids=[r[0] for r in RAW_FILES])
def test_unreadable_files(tmp_path, run_cli, name, data, fragment, row):
    p = tmp_path / name
    p.write_bytes(data)
    res = run_cli("convert", p)
    assert res.exit_code == 2 and fragment in res.stderr and name in res.stderr
    if row is not None:
        assert f"row {row}" in res.stderr


def test_missing_file(tmp_path, run_cli):
    res = run_cli("convert", tmp_path / "nope.csv")
    assert res.exit_code == 2 and "file not found" in res.stderr


def test_warnings_go_to_stderr_and_run_continues(write_sheet, run_cli):
    path = write_sheet([{"study": "A", "stat": "t", "value": "2", "n": "40"},
                        {"study": "B", "stat": "d", "value": "3.4", "n1": "10", "n2": "10"}])
    res = run_cli("convert", path)
    assert res.exit_code == 0
    assert "equal split" in res.stderr and "unusually large" in res.stderr
    assert "pooler: warning:" in res.stderr


def test_excluded_row_with_bad_numbers_is_listed_not_fatal(write_sheet, run_cli):
    path = write_sheet([T, {"study": "B", "stat": "p", "value": "", "exclude": "only p<.05"}])
    res = run_cli("convert", path)
    assert res.exit_code == 0
    assert "only p<.05" in res.stdout and "excluded" in res.stdout
