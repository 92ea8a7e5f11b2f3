"""Regenerate the bad-sheet corpus: ``python tests/bad_sheets/make_corpus.py``.

Each file is a sheet a user could plausibly produce by hand; ``expected.csv`` lists, per
file, a fragment of the message pooler must give, the row and column it must name
(empty when the problem is not in one cell), the exit code (2: refused; 0: read with a
warning), how many problems the message lists and, for a path sheet, the simulated design it
is run with (``pooler run FILE --design DESIGN``). All content is invented.
"""
from __future__ import annotations

import csv
from pathlib import Path

HERE = Path(__file__).parent
H = "study,stat,value,n1,n2,n,df,df1,direction,design,within_r,tails,exclude\n"
OK = "Ok 2001,t,2.1,20,20,,,,,,,,\n"

TEXT = {
    "unclosed_quote.csv": ('study,stat,value,n1,n2\n"Ash 2001,t,2.1,20,20\nBay 2002,t,1.2,30,30\n',
                           "unclosed quote", "", ""),
    "blank_header_cell.csv": ("study,stat,,n1,n2\nAsh 2001,t,2.1,20,20\n", "has no name", "1", ""),
    "duplicated_header.csv": ("study,stat,value,VALUE,n1,n2\nAsh 2001,t,2.1,2.2,20,20\n",
                              "appears twice", "1", "VALUE"),
    "stars.csv": (H + OK + "Bay 2002,t,2.31*,20,20,,,,,,,,\n", "remove the significance stars", "3",
                  "value"),
    "p_inequality.csv": (H + "Ash 2001,p,p<.05,20,20,,,,+,,,2,\n", "inequality", "2", "value"),
    "t_with_df_text.csv": (H + "Ash 2001,t,t(38)=2.1,,,,,,,,,,\n", "degrees of freedom in 'df'",
                           "2", "value"),
    "units.csv": ("study,stat,mean1,sd1,mean2,sd2,n1,n2\nAsh 2001,means,412 ms,80,390,75,20,20\n",
                  "remove units", "2", "mean1"),
    "word_for_number.csv": (H + "Ash 2001,t,2.1,twenty,20,,,,,,,,\n", "'twenty' is not a number",
                            "2", "n1"),
    "nan_value.csv": (H + "Ash 2001,t,NaN,20,20,,,,,,,,\n", "leave the cell empty", "2", "value"),
    "inf_value.csv": (H + "Ash 2001,t,inf,20,20,,,,,,,,\n", "leave the cell empty", "2", "value"),
    "decimal_comma_unquoted.csv": ("study,stat,value,n1,n2\nAsh 2001,t,2,31,20,20\n",
                                   "decimal comma", "2", ""),
    "decimal_comma_quoted.csv": ('study,stat,value,n1,n2\nAsh 2001,t,"2,31",20,20\n',
                                 "use a dot as decimal separator", "2", "value"),
    "swapped_n_df.csv": (H + "Ash 2001,t,2.1,12,12,,38,,,,,,\n", "are n and df swapped", "2", "df"),
    "r_above_one.csv": (H + "Ash 2001,r,1.3,,,80,,,,,,,\n", "r = 1.3 is impossible", "2", "value"),
    "r_minus_one.csv": (H + "Ash 2001,r,-1,,,80,,,,,,,\n", "strictly between -1 and 1", "2",
                        "value"),
    "negative_sd.csv": ("study,stat,mean1,sd1,mean2,sd2,n1,n2\nAsh 2001,means,5,-1.2,4,1,20,20\n",
                        "sd1 = -1.2 is impossible", "2", "sd1"),
    "zero_n.csv": (H + "Ash 2001,t,2.1,0,20,,,,,,,,\n", "n1 = 0 is impossible", "2", "n1"),
    "tiny_groups.csv": (H + "Ash 2001,t,2.1,1,1,,,,,,,,\n", "n1 + n2 = 2", "2", "n1"),
    "omnibus_F.csv": (H + "Ash 2001,F,5.2,,,,57,2,+,,,,\n", "cannot become one d", "2", "df1"),
    "F_no_direction.csv": (H + "Ash 2001,F,5.2,20,20,,,1,,,,,\n", "'direction' is empty", "2",
                           "direction"),
    "chi2_no_direction.csv": (H + "Ash 2001,chi2,4.1,,,120,,,,,,,\n", "'direction' is empty", "2",
                              "direction"),
    "p_no_direction.csv": (H + "Ash 2001,p,0.03,20,20,,,,,,,2,\n", "'direction' is empty", "2",
                           "direction"),
    "p_zero.csv": (H + "Ash 2001,p,0,20,20,,,,+,,,2,\n", "p = 0 is impossible", "2", "value"),
    "p_above_one.csv": (H + "Ash 2001,p,1.2,20,20,,,,+,,,2,\n", "p = 1.2 is impossible", "2",
                        "value"),
    "one_tailed_p_large.csv": (H + "Ash 2001,p,0.8,20,20,,,,+,,,1,\n", "other way", "2", "value"),
    "tails_three.csv": (H + "Ash 2001,p,0.03,20,20,,,,+,,,3,\n", "use 1 or 2", "2", "tails"),
    "published_unclear.csv": ("study,stat,value,n1,n2,published\nAsh 2001,t,2.1,20,20,maybe\n",
                              "use 'yes'", "2", "published"),
    "counts_exceed_n.csv": ("study,stat,events1,n1,events2,n2\nAsh 2001,counts,25,20,4,20\n",
                            "events1 = 25 is impossible", "2", "events1"),
    "counts_missing_events.csv": ("study,stat,events1,n1,events2,n2\nAsh 2001,counts,5,20,,20\n",
                                  "'events2' is empty", "2", "events2"),
    "within_r_one.csv": (H + "Ash 2001,t,2.1,,,30,,,,within,1,,\n", "within_r = 1 is impossible",
                         "2", "within_r"),
    "within_without_n.csv": (H + "Ash 2001,t,2.1,,,,,,,within,0.5,,\n",
                             "needs the number of participants", "2", "n"),
    "correlation_within.csv": (H + "Ash 2001,r,0.3,,,40,,,,within,,,\n",
                               "not a within-subject contrast", "2", "design"),
    "sample_n_disagree.csv": ("study,sample,stat,value,n1,n2\nAsh 2001,s1,d,0.3,20,20\n"
                              "Ash 2001,s1,d,0.2,25,20\n", "disagree on the sample size", "3", "n"),
    "missing_study_column.csv": ("label,stat,value,n1,n2\nAsh 2001,t,2.1,20,20\n",
                                 "required column 'study' is missing", "1", ""),
    "missing_stat_column.csv": ("study,statistic,value,n1,n2\nAsh 2001,t,2.1,20,20\n",
                                "required column 'stat' is missing", "1", ""),
    "empty.csv": ("", "the file is empty", "", ""),
    "only_blank_lines.csv": ("\n\n  \n", "the file is empty", "", ""),
    "header_only.csv": (H, "no data rows", "", ""),
    "only_excluded.csv": (H + "Ash 2001,t,2.1,20,20,,,,,,,,pilot\nBay 2002,t,1.1,20,20,,,,,,,,"
                          "duplicate\n", "no rows are left to pool", "", ""),
    "unknown_stat.csv": (H + "Ash 2001,beta,0.3,20,20,,,,,,,,\n", "unknown statistic 'beta'", "2",
                         "stat"),
    "bad_direction.csv": (H + "Ash 2001,F,4.1,20,20,,,1,yes,,,,\n", "direction 'yes'", "2",
                          "direction"),
    "bad_design.csv": (H + "Ash 2001,t,2.1,20,20,,,,,crossover,,,\n", "design 'crossover'", "2",
                       "design"),
    "or_outside_ci.csv": ("study,stat,value,ci_low,ci_high\nAsh 2001,odds_ratio,2.0,2.5,4.0\n",
                          "does not contain the odds ratio", "2", "ci_low"),
    "or_without_ci.csv": ("study,stat,value,n1,n2\nAsh 2001,odds_ratio,2.0,40,40\n",
                          "'ci_low' is empty", "2", "ci_low"),
    "means_missing_sd.csv": ("study,stat,mean1,sd1,mean2,sd2,n1,n2\nAsh 2001,means,5,1,4,,20,20\n",
                             "'sd2' is empty", "2", "sd2"),
    "empty_study.csv": (H + ",t,2.1,20,20,,,,,,,,\n", "study label is empty", "2", "study"),
    "extra_cells.csv": ("study,stat,value,n1,n2\nAsh 2001,t,2.1,20,20,extra,more\n",
                        "has 7 cells but the header has 5", "2", ""),
    "sign_contradiction.csv": (H + "Ash 2001,t,-2.1,20,20,,,,+,,,,\n", "negative but direction",
                               "2", "direction"),
    "n_disagrees_with_groups.csv": (H + "Ash 2001,t,2.1,20,20,50,,,,,,,\n", "but n1 + n2 = 40", "2",
                                    "n"),
}

# Mistakes that used to pass silently, and result strings that cannot be read.
TEXT.update({
    "fractional_n.csv": (H + "Ash 2001,t,2.1,24.5,30,,,,,,,,\n", "n1 = 24.5 is not a whole number",
                         "2", "n1"),
    "proportion_as_events.csv": ("study,stat,events1,n1,events2,n2\nAsh 2001,counts,0.45,40,12,40\n",
                                 "looks like a proportion", "2", "events1"),
    "misspelt_excluded.csv": ("study,stat,value,n1,n2,excluded\nAsh 2001,t,2.1,20,20,retracted\n",
                              "did you mean 'exclude'?", "1", "excluded"),
    "misspelt_within_r.csv": ("study,stat,value,n,design,within r\nAsh 2001,t,2.1,30,within,0.7\n",
                              "did you mean 'within_r'?", "1", "within r"),
    "misspelt_samples.csv": ("study,samples,stat,value,n1,n2\nAsh 2001,s1,d,0.3,20,20\n"
                             "Ash 2001,s1,d,0.2,20,20\n", "did you mean 'sample'?", "1", "samples"),
    "thousands_comma.csv": ('study,stat,value,n\nAsh 2001,r,0.12,"1,024"\n',
                            "looks like 1024 written with a thousands separator", "2", "n"),
    "thousands_dot_semicolon.csv": ("study;stat;value;n\nAsh 2001;r;0,12;1.024\n",
                                    "thousands separator", "2", "n"),
    "ns_value.csv": (H + "Ash 2001,t,n.s.,20,20,,,,,,,,\n",
                     "non-significant result without its statistic cannot be converted", "2",
                     "value"),
    "paired_t_between.csv": (H + "Ash 2001,paired t,2.1,,,30,,,,between,,,\n",
                             "within-subject statistic", "2", "stat"),
    "reported_inequality.csv": ('study,reported,n1,n2\nAsh 2001,"p < .001",20,20\n',
                                "is an inequality", "2", "reported"),
    "reported_p_000.csv": ('study,reported,n1,n2\nAsh 2001,"p = .000",20,20\n',
                           "p < .0005", "2", "reported"),
    "reported_omnibus.csv": ('study,reported\nAsh 2001,"F(2, 87) = 3.9, p = .024"\n',
                             "omnibus", "2", "reported"),
    "reported_ns.csv": ('study,reported,n\nAsh 2001,n.s.,40\n',
                        "without a statistic cannot be converted", "2", "reported"),
    "reported_unreadable.csv": ('study,reported\nAsh 2001,"beta = .31, p = .02"\n',
                                "cannot be read", "2", "reported"),
    "reported_conflicts_df.csv": ('study,reported,n1,n2,df\nAsh 2001,"t(58) = 2.41",30,30,56\n',
                                  "'df' holds 56", "2", "df"),
    "reported_missing_n.csv": ('study,reported\nAsh 2001,"d = 0.52, 95% CI [0.10, 0.94]"\n',
                               "group sizes are missing", "2", "n1"),
    "many_problems.csv": (H + "Ash 2001,t,2.1*,20,20,,,,,,,,\nBay 2002,t,2.0,twenty,20,,,,,,,,\n"
                          "Cole 2003,t,1.9,20.5,20,,,,,,,,\nDorn 2004,r,0.3,,,n.s.,,,,,,,\n",
                          "[problem 1 of 4; the others follow]", "2", "value"),
    "many_conversion_problems.csv": (H + "Ash 2001,F,4.1,20,20,,,1,,,,,\n"
                                     "Bay 2002,r,1.3,,,80,,,,,,,\nCole 2003,t,2.0,20,20,,,,,,,,\n",
                                     "[problem 1 of 2; the others follow]", "2", "direction"),
})
#: Sheets that are read, with a warning that must name the row and column (exit 0).
WARN = {
    "duplicate_row.csv": (H + OK + "Bay 2002,t,1.2,30,30,,,,,,,,\n" + OK,
                          "repeats row 2 exactly", "4", ""),
    "reported_inconsistent_p.csv": ('study,reported,n1,n2\nAsh 2001,"t(40) = 1.70, p = .04",21,21\n'
                                    'Bay 2002,"t(58) = 2.41, p = .019",30,30\n'
                                    'Cole 2003,"t(38) = 2.10",20,20\n',
                                    "moves the result across .05", "2", "reported"),
}
# Path sheets (a 'path' column) for the simulated designs: run with the design in the last
# field (expected.csv's 'design' column; `pooler run FILE --design DESIGN`).
P = "study,path,stat,value,n,df,predictors\n"
MED = ("Ash 2001,X-M,r,0.3,120,,\nBay 2002,M-Y,r,0.3,110,,\nCole 2003,X-Y,r,0.1,90,,\n")
MOD = ("Ash 2001,X-Y,r,0.3,120,,\nBay 2002,Z-Y,r,0.2,110,,\nCole 2003,XZ-Y,coef_t,2.2,,150,3\n")
PATHS = {
    "paths_empty_path.csv": (P + MED + "Dorn 2004,,r,0.2,80,,\n", "'path' is empty", "5",
                             "path", "simple-mediation"),
    "paths_not_a_pair.csv": (P + MED + "Dorn 2004,X,r,0.2,80,,\n",
                             "is not a pair of two variables", "5", "path", "simple-mediation"),
    "paths_same_variable.csv": (P + MED + "Dorn 2004,M-M,r,0.2,80,,\n",
                                "is not a pair of two variables", "5", "path",
                                "simple-mediation"),
    "paths_unknown_variable.csv": (P + MED + "Dorn 2004,X-W,r,0.2,80,,\n",
                                   "names W, which is not a variable of simple-mediation", "5",
                                   "path", "simple-mediation"),
    "paths_fifth_mediator.csv": (P + "Ash 2001,X-M1,r,0.3,120,,\nBay 2002,X-M5,r,0.2,90,,\n",
                                 "parallel mediation takes 2 to 4 mediators", "3", "path",
                                 "parallel-mediation"),
    "paths_r_above_one.csv": (P + MED + "Dorn 2004,M-Y,r,1.2,80,,\n", "r = 1.2 is impossible",
                              "5", "value", "simple-mediation"),
    "paths_coef_t_without_df.csv": (P + MED + "Dorn 2004,M-Y,coef_t,2.4,,,\n",
                                    "needs the residual df", "5", "n", "simple-mediation"),
    "paths_std_coef_many_predictors.csv": (P + MED + "Dorn 2004,M-Y,std_coef,0.3,80,,3\n",
                                           "is not the correlation of the pair", "5", "stat",
                                           "simple-mediation"),
    "paths_interaction_std_coef.csv": (P + MOD + "Dorn 2004,XZ-Y,std_coef,0.15,200,,3\n",
                                       "is not the correlation of the pair", "5", "stat",
                                       "moderation"),
    "paths_product_with_x.csv": (P + MOD + "Dorn 2004,X-XZ,r,0.1,80,,\n",
                                 "uncorrelated with X and with Z by construction", "5", "path",
                                 "moderation"),
    "paths_slopes_and_interaction.csv": (P + MOD + "Dorn 2004,X-Y at high Z,r,0.4,80,,\n"
                                         "Dorn 2004,X-Y at low Z,r,0.1,80,,\n",
                                         "gives the interaction by simple slopes", "2", "path",
                                         "moderation"),
    "paths_slope_misspelt.csv": (P + "Ash 2001,X-Y at hi Z,r,0.4,80,,\n"
                                 "Ash 2001,X-Y at low Z,r,0.1,80,,\nBay 2002,Z-Y,r,0.1,90,,\n",
                                 "write it like X-Y, XZ-Y (the interaction) or X-Y at high Z",
                                 "2", "path", "moderation"),
    "paths_many_problems.csv": (P + MED + "Dorn 2004,M-Y,r,1.2,80,,\nEast 2005,X-Q,r,0.2,80,,\n"
                                "Fenn 2006,,r,0.2,80,,\n",
                                "[problem 1 of 3; the others follow]", "5", "value",
                                "simple-mediation"),
}
#: How many problems the message must list (default 1).
PROBLEMS = {"many_problems.csv": 4, "many_conversion_problems.csv": 2,
            "formula_without_value.xlsx": 2, "paths_slopes_and_interaction.csv": 2,
            "paths_many_problems.csv": 3}

BYTES = {
    "latin1_accents.csv": ("study,stat,value,n1,n2\nMüller 2003,t,2.1,20,20\n".encode("latin-1"),
                           "not UTF-8", "2", ""),
    "utf16.csv": ("study,stat,value,n1,n2\nAsh 2001,t,2.1,20,20\n".encode("utf-16"),
                  "UTF-16", "", ""),
    "binary.csv": (b"\x00\x01\x02\x03garbage\x00\xff", "binary", "", ""),
    "bom_then_stars.csv": ("\ufeffstudy,stat,value,n1,n2\nAsh 2001,t,2.1**,20,20\n".encode("utf-8"),
                           "significance stars", "2", "value"),
    "broken.xlsx": (b"PK\x03\x04 this is not really a workbook", "not a readable .xlsx", "", ""),
}


def xlsx_cases():
    import openpyxl
    out = {}
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "stat", "value", "n1", "n2"])
    ws.append(["Ash 2001", "t", 2.1, 20, 20])
    ws.append([None, "t", 1.1, 30, 30])
    ws.merge_cells("A2:A3")
    out["merged_cells.xlsx"] = (wb, "merged cells", "", "")
    wb = openpyxl.Workbook()
    wb.active.title = "notes"
    data = wb.create_sheet("studies")
    data.append(["study", "stat", "value", "n1", "n2"])
    data.append(["Ash 2001", "t", 2.1, 20, 20])
    out["data_on_second_sheet.xlsx"] = (wb, "first worksheet", "", "")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "stat", "value", "n1", "n2"])
    ws.append(["Ash 2001", "t", "2.1*", 20, 20])
    wb.create_sheet("other").append(["ignored"])
    out["several_sheets_bad_value.xlsx"] = (wb, "significance stars", "2", "value")
    import datetime
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "stat", "value", "n1", "n2"])
    ws.append(["Ash 2001", "t", datetime.datetime(2024, 3, 2), 20, 20])  # "2.3" became a date
    out["excel_date.xlsx"] = (wb, "is an Excel date", "2", "value")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "stat", "value", "n", "n1", "n2"])
    ws.append(["Ash 2001", "t", 2.1, 40, "=D2/2", "=D2/2"])  # openpyxl saves no result
    out["formula_without_value.xlsx"] = (wb, "formula (=D2/2) without a saved result", "2", "n1")
    return out


def main():
    rows = []
    for name, (text, frag, row, col) in TEXT.items():
        (HERE / name).write_text(text, encoding="utf-8")
        rows.append((name, frag, row, col, 2, PROBLEMS.get(name, 1), ""))
    for name, (text, frag, row, col) in WARN.items():
        (HERE / name).write_text(text, encoding="utf-8")
        rows.append((name, frag, row, col, 0, 0, ""))
    for name, (data, frag, row, col) in BYTES.items():
        (HERE / name).write_bytes(data)
        rows.append((name, frag, row, col, 2, 1, ""))
    for name, (wb, frag, row, col) in xlsx_cases().items():
        wb.save(HERE / name)
        rows.append((name, frag, row, col, 2, PROBLEMS.get(name, 1), ""))
    for name, (text, frag, row, col, design) in PATHS.items():
        (HERE / name).write_text(text, encoding="utf-8")
        rows.append((name, frag, row, col, 2, PROBLEMS.get(name, 1), design))
    with open(HERE / "expected.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["file", "fragment", "row", "column", "exit", "problems", "design"])
        w.writerows(sorted(rows))
    print(f"{len(rows)} bad sheets written")


if __name__ == "__main__":
    main()
