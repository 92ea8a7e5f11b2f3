"""Option mistakes a new user makes: each is a usage error (exit 2) naming the flag, before
any work is done; a fixed N that does not split into the planned groups is said."""
from __future__ import annotations

import json

import pytest

BAD = [
    # (arguments, flag named, fragment of the message)
    (["plan", "--effect", "0.3", "--power", "80"], "--power", "use 0.8"),
    (["plan", "--effect", "0.3", "--power", "0.8", "--power", "95"], "--power", "use 0.95"),
    (["plan", "--effect", "0.3", "--power", "1"], "--power", "outside (0, 1)"),
    (["plan", "--effect", "0.3", "--power", "-0.2"], "--power", "outside (0, 1)"),
    (["plan", "--effect", "0.3", "--effect-sd", "-1"], "--effect-sd", "greater than 0"),
    (["plan", "--effect", "0.3", "--effect-sd", "0"], "--effect-sd", "greater than 0"),
    (["plan", "--effect", "0.3", "--alpha", "5"], "--alpha", "use 0.05"),
    (["plan", "--effect", "0.3", "--alpha", "0.95"], "--alpha", "outside (0, 0.5)"),
    (["plan", "--effect", "0.3", "--alpha", "0"], "--alpha", "outside (0, 0.5)"),
    (["plan", "--effect", "0.3", "--attrition", "15"], "--attrition", "use 0.15"),
    (["plan", "--effect", "0.3", "--attrition", "1"], "--attrition", "outside [0, 1)"),
    (["plan", "--effect", "0.3", "--attrition", "-0.1"], "--attrition", "outside [0, 1)"),
    (["plan", "--effect", "0.3", "--safeguard", "60"], "--safeguard", "use 0.6"),
    (["plan", "--effect", "0.3", "--safeguard", "1"], "--safeguard", "outside (0, 1)"),
    (["plan", "--effect", "0.3", "--smallest-effect", "-0.1"], "--smallest-effect",
     "greater than 0"),
    (["plan", "--effect", "0.3", "--smallest-effect", "0"], "--smallest-effect",
     "greater than 0"),
    (["plan", "--effect", "nan"], "--effect", "finite"),
    (["plan", "--effect", "inf"], "--effect", "finite"),
    (["plan", "--effect", "0.3", "--allocation", "0"], "--allocation", "not an allocation"),
    (["plan", "--effect", "0.3", "--allocation", "inf"], "--allocation", "not an allocation"),
    (["plan", "--effect", "0.3", "--allocation", "1:0"], "--allocation", "not an allocation"),
    (["plan", "--effect", "0.3", "--allocation", "two"], "--allocation", "not an allocation"),
    (["plan", "--effect", "0.3", "--design", "paired", "--planned-r", "1"], "--planned-r",
     "outside (-1, 1)"),
    (["plan", "--effect", "0.3", "--design", "ancova", "--covariate-r", "-1.5"],
     "--covariate-r", "outside (-1, 1)"),
    (["plan", "--effect", "0.3", "--design", "interaction-2x2", "--attenuation", "3"],
     "--attenuation", "outside (0, 2]"),
    (["plan", "--effect", "0.3", "--design", "interaction-2x2", "--attenuation", "0"],
     "--attenuation", "outside (0, 2]"),
    (["plan", "--effect", "0.3", "--within-r", "2"], "--within-r", "outside (-1, 1)"),
    (["convert", "SHEET", "--sample-r", "-1"], "--sample-r", "outside (-1, 1)"),
    (["convert", "SHEET", "--within-r", "1"], "--within-r", "outside (-1, 1)"),
    (["pool", "SHEET", "--safeguard", "0"], "--safeguard", "outside (0, 1)"),
    (["run", "SHEET", "--power", "90", "--out", "OUT"], "--power", "use 0.9"),
    (["run", "SHEET", "--alpha", "10", "--out", "OUT"], "--alpha", "use 0.1"),
    (["stress", "--calibration", "--power", "80"], "--power", "use 0.8"),
    (["plan", "--effect", "0.3", "--n", "0"], "--n", "0"),
]


@pytest.mark.parametrize("args,flag,fragment", BAD, ids=[" ".join(b[0]) for b in BAD])
def test_bad_option_is_a_usage_error_naming_the_flag(tmp_path, write_sheet, run_cli, args,
                                                     flag, fragment):
    sheet = write_sheet([{"study": "A", "stat": "t", "value": "2", "n1": "20", "n2": "20"},
                         {"study": "B", "stat": "t", "value": "1", "n1": "30", "n2": "30"}])
    out = tmp_path / "out"
    args = [sheet if a == "SHEET" else out if a == "OUT" else a for a in args]
    res = run_cli(*args)
    assert res.exit_code == 2, res.output
    assert f"'{flag}'" in res.stderr and fragment in res.stderr
    assert "Traceback" not in res.output and res.stdout == ""
    assert not out.exists()  # nothing written before the refusal


CROSS = [
    # refused after parsing, as pooler errors (exit 2, one line)
    (["plan", "--effect", "0.3", "--design", "regression-increment", "--predictors-added", "3",
      "--predictors-total", "2"], "--predictors-total 2 is smaller than --predictors-added 3"),
    (["plan", "SHEET", "--effect-sd", "0.1"], "--effect-sd goes with --effect"),
    (["plan", "SHEET", "--metric", "r", "--smallest-effect", "1.2"],
     "--smallest-effect 1.2 is not a correlation"),
    (["plan", "--effect", "0.3", "--design", "two-group", "--n", "3"], "--n 3 is too small"),
]


@pytest.mark.parametrize("args,fragment", CROSS, ids=[" ".join(c[0]) for c in CROSS])
def test_conflicting_options_are_refused(write_sheet, run_cli, args, fragment):
    sheet = write_sheet([{"study": "A", "stat": "t", "value": "2", "n1": "20", "n2": "20"},
                         {"study": "B", "stat": "t", "value": "1", "n1": "30", "n2": "30"}])
    res = run_cli(*[sheet if a == "SHEET" else a for a in args])
    assert res.exit_code == 2, res.output
    assert res.stderr.startswith("pooler: error: ") and fragment in res.stderr
    assert len(res.stderr.strip().splitlines()) == 1


def test_odd_n_with_two_equal_groups_is_said(run_cli):
    # --n 121 with two equal groups gives 60 + 60: the fixed-N figures are for 120, and the
    # output says so (before, the 121 was printed and 120 silently used)
    res = run_cli("plan", "--effect", "0.3", "--n", "121", "--power", "0.8")
    assert res.exit_code == 0
    said = " ".join(res.stdout.split())          # the note is wrapped like every paragraph
    assert "a total N of 121 does not split into whole groups" in said
    assert "60 per group, 120 in all" in said
    doc = json.loads(run_cli("plan", "--effect", "0.3", "--n", "121", "--power", "0.8",
                             "--json").stdout)
    assert doc["fixed_n"]["n_total"] == 121 and doc["fixed_n"]["n_total_used"] == 120
    assert doc["fixed_n"]["n_per_group"] == 60
    assert any("121" in n for n in doc["notes"])
    # an N that splits evenly, and a design counted in all, need no note
    for args in (["--n", "120"], ["--n", "121", "--design", "paired"]):
        doc = json.loads(run_cli("plan", "--effect", "0.3", "--power", "0.8", "--json",
                                 *args).stdout)
        assert doc["notes"] == [] and doc["fixed_n"]["n_total_used"] == doc["fixed_n"]["n_total"]
    # 2x2 cells: 121 -> 30 per cell, 120 in all
    res = run_cli("plan", "--effect", "0.3", "--n", "121", "--design", "interaction-2x2",
                  "--power", "0.8")
    assert "30 per cell, 120 in all" in " ".join(res.stdout.split())


def test_template_into_a_missing_folder(tmp_path, run_cli):
    target = tmp_path / "no" / "such" / "dir" / "x.csv"
    res = run_cli("template", target)
    assert res.exit_code == 2
    assert res.stderr.startswith("pooler: error: ") and "does not exist" in res.stderr
    assert "Traceback" not in res.output and not target.parent.exists()
    afile = tmp_path / "plain.txt"
    afile.write_text("x")
    res = run_cli("template", afile / "x.xlsx")
    assert res.exit_code == 2 and "is a file, not a folder" in res.stderr


def test_template_write_failure_is_a_clean_error(tmp_path, run_cli, monkeypatch):
    # an operating-system refusal (here simulated: permission denied) is one line, exit 2
    import pooler.reading.template as tpl

    def refuse(p, suffix):
        raise PermissionError(13, "Permission denied")
    monkeypatch.setattr(tpl, "_write", refuse)
    res = run_cli("template", tmp_path / "x.csv")
    assert res.exit_code == 2 and "cannot write" in res.stderr and "Permission denied" in res.stderr


def test_good_values_still_pass(run_cli):
    res = run_cli("plan", "--effect", "0.3", "--power", "0.8", "--alpha", "0.01",
                  "--attrition", "0", "--safeguard", "0.5", "--effect-sd", "0.1",
                  "--allocation", "1:2", "--within-r", "-0.3")
    assert res.exit_code == 0, res.output


def test_effect_outside_a_correlation_names_the_flag_and_the_way_out(run_cli):
    res = run_cli("plan", "--effect", "1.5", "--design", "correlation")
    assert res.exit_code == 2
    assert "--effect 1.5 is not a correlation" in res.stderr and "--metric d" in res.stderr
    res = run_cli("plan", "--effect", "-1", "--metric", "r")
    assert res.exit_code == 2 and "--effect -1 is not a correlation" in res.stderr
    # the same number as a d on the correlation design is converted, not refused
    assert run_cli("plan", "--effect", "1.5", "--metric", "d", "--design",
                   "correlation").exit_code == 0
