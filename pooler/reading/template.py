"""``pooler template``: an empty-but-explained sheet to start collecting statistics in."""
from __future__ import annotations

import csv
from pathlib import Path

from pooler.errors import OptionError
from pooler.reading.sheet import COLUMN_GUIDE, GUIDE_SHEET

#: Column order of the template.
TEMPLATE_COLUMNS = ("study", "sample", "stat", "reported", "trust", "value", "n1", "n2", "n", "df", "df1",
                    "mean1", "sd1", "mean2", "sd2", "events1", "events2", "ci_low", "ci_high",
                    "direction", "design", "within_r", "tails", "year", "published",
                    "subgroup", "exclude", "note", "path", "predictors")

#: One invented example row per statistic (numbers made up for illustration).
EXAMPLE_ROWS = (
    {"study": "Example A", "stat": "t", "value": "2.10", "n1": "24", "n2": "26",
     "year": "2015", "note": "invented: two-group t-test"},
    {"study": "Example B", "stat": "F", "value": "4.84", "df1": "1", "df": "58",
     "direction": "+", "year": "2016", "note": "invented: F(1, 58); group sizes unknown"},
    {"study": "Example C", "stat": "r", "value": "0.21", "n": "96", "year": "2017",
     "note": "invented: correlation"},
    {"study": "Example D", "stat": "d", "value": "0.45", "n1": "30", "n2": "30",
     "year": "2017", "note": "invented: Cohen's d as reported"},
    {"study": "Example E", "stat": "g", "value": "0.38", "n1": "40", "n2": "38",
     "year": "2018", "note": "invented: Hedges' g as reported"},
    {"study": "Example F", "stat": "means", "mean1": "14.2", "sd1": "3.1", "mean2": "12.9",
     "sd2": "3.4", "n1": "35", "n2": "33", "year": "2018", "note": "invented: means and SDs"},
    {"study": "Example G", "stat": "chi2", "value": "3.90", "n": "120", "direction": "+",
     "year": "2019", "note": "invented: chi-square with 1 df"},
    {"study": "Example H", "stat": "counts", "events1": "18", "n1": "40", "events2": "10",
     "n2": "41", "year": "2019", "note": "invented: 2x2 counts (events in each group)"},
    {"study": "Example I", "stat": "odds_ratio", "value": "1.90", "ci_low": "1.05",
     "ci_high": "3.44", "n1": "70", "n2": "70", "year": "2020",
     "note": "invented: odds ratio with 95% CI"},
    {"study": "Example J", "stat": "p", "value": "0.032", "tails": "2", "direction": "+",
     "n1": "28", "n2": "28", "year": "2020", "note": "invented: exact p only"},
    {"study": "Example K", "stat": "t", "value": "2.45", "n": "32", "design": "within",
     "within_r": "0.6", "year": "2021", "note": "invented: paired t-test"},
    {"study": "Example L", "sample": "L-sample", "stat": "d", "value": "0.30", "n1": "50",
     "n2": "50", "year": "2021", "note": "invented: first of two outcomes in one sample"},
    {"study": "Example L", "sample": "L-sample", "stat": "d", "value": "0.22", "n1": "50",
     "n2": "50", "year": "2021", "note": "invented: second outcome, same people"},
    {"study": "Example N", "reported": "t(46) = 2.38, p = .022", "n1": "24", "n2": "24",
     "year": "2022", "note": "invented: result pasted as printed; stat, value and df are read "
     "from it and its p is checked against t"},
    {"study": "Example O", "stat": "coef_t", "value": "2.60", "df": "117", "predictors": "2",
     "path": "M1-Y", "year": "2022", "note": "invented: t of a regression coefficient with its "
     "df; for `pooler paths SHEET`, the row estimates the path M1-Y"},
    {"study": "Example P", "stat": "std_coef", "value": "0.27", "n": "85", "predictors": "1",
     "path": "X-M1", "year": "2023", "note": "invented: standardized coefficient of the only "
     "predictor (beta = r)"},
    {"study": "Example M", "stat": "t", "value": "3.9", "n1": "12", "n2": "12", "year": "2014",
     "exclude": "retracted", "note": "invented: excluded rows stay listed with their reason"},
)


def write_template(path: str | Path) -> list[Path]:
    """Write the template sheet to ``path`` (.csv, .tsv or .xlsx) and its column guide.

    For .xlsx the guide is a second worksheet; for text sheets it is written beside
    the sheet as ``<name>.guide.txt``. Returns the paths written.
    """
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix not in (".csv", ".tsv", ".xlsx"):
        raise OptionError(f"the template path must end in .csv, .tsv or .xlsx, not '{p.name}'")
    if not p.parent.is_dir():
        why = "is a file, not a folder" if p.parent.exists() else "does not exist"
        raise OptionError(f"cannot write {p}: the folder '{p.parent}' {why}; "
                          "create the folder first or choose another path")
    try:
        return _write(p, suffix)
    except OSError as exc:
        raise OptionError(f"cannot write {p}: {exc.strerror or exc}") from None


def _write(p: Path, suffix: str) -> list[Path]:
    rows = [[r.get(c, "") for c in TEMPLATE_COLUMNS] for r in EXAMPLE_ROWS]
    guide = [(c, COLUMN_GUIDE[c]) for c in TEMPLATE_COLUMNS]
    if suffix == ".xlsx":
        import openpyxl
        wb = openpyxl.Workbook()
        ws = wb.active
        ws.title = "studies"
        ws.append(list(TEMPLATE_COLUMNS))
        for r in rows:
            ws.append([_num(v) for v in r])
        g = wb.create_sheet(GUIDE_SHEET)
        g.append(["column", "meaning"])
        for row in guide:
            g.append(list(row))
        wb.save(p)
        return [p]
    delim = "\t" if suffix == ".tsv" else ","
    with open(p, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter=delim)
        w.writerow(TEMPLATE_COLUMNS)
        w.writerows(rows)
    gp = p.with_name(p.stem + ".guide.txt")
    width = max(len(c) for c in TEMPLATE_COLUMNS)
    gp.write_text("Column guide for " + p.name + " (column names are case-insensitive;\n"
                  "other columns are kept and carried through; example rows are invented)\n\n"
                  + "\n".join(f"{c.ljust(width)}  {m}" for c, m in guide) + "\n", encoding="utf-8")
    return [p, gp]


def _num(v: str):
    try:
        return float(v) if v not in ("", "+", "-") else (v or None)
    except ValueError:
        return v
