"""Reading sheets (CSV, TSV, semicolons, XLSX), the convert/template commands, and help."""
from __future__ import annotations

import json

import pytest

from pooler import convert, read_sheet


def test_row_numbers_survive_blank_lines_and_case(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("Study,STAT,Value,N1,n2,Lab\n\nA,t,2.0,20,20,north\n\n\nB,T,1.5,15,15,south\n")
    s = read_sheet(p)
    assert [r.row for r in s.records] == [3, 6]
    assert s.records[1].stat == "t"
    assert s.records[0].extra == {"Lab": "north"}
    assert s.extra_columns == ("Lab",)
    assert any("blank" in n for n in s.notes)
    eff = convert(s)
    assert eff.rows[1].extra == {"Lab": "south"}


def test_tsv_and_semicolon_with_decimal_commas(tmp_path):
    a = tmp_path / "a.tsv"
    a.write_text("study\tstat\tvalue\tn1\tn2\nA\tt\t2.0\t20\t20\n")
    b = tmp_path / "b.csv"
    b.write_text("study;stat;value;n1;n2\nA;t;2,0;20;20\n")
    ea, eb = convert(read_sheet(a)), convert(read_sheet(b))
    assert ea.rows[0].effect == pytest.approx(eb.rows[0].effect, rel=1e-12)
    assert any("semicolons" in n for n in read_sheet(b).notes)


def test_utf8_bom_is_fine(tmp_path):
    p = tmp_path / "bom.csv"
    p.write_bytes("\ufeffstudy,stat,value,n1,n2\nÅsa,t,2,20,20\n".encode("utf-8"))
    s = read_sheet(p)
    assert s.records[0].study == "Åsa"


def test_xlsx_reads_like_csv(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "stat", "value", "n1", "n2"])
    ws.append(["A", "t", 2.0, 20, 20])
    ws.append([None, None, None, None, None])
    ws.append(["B", "d", 0.4, 30, 31])
    wb.create_sheet("notes").append(["ignored"])
    p = tmp_path / "s.xlsx"
    wb.save(p)
    s = read_sheet(p)
    assert [r.row for r in s.records] == [2, 4]
    assert any("2 sheets" in n for n in s.notes)
    c = tmp_path / "s.csv"
    c.write_text("study,stat,value,n1,n2\nA,t,2.0,20,20\n")
    assert convert(s).rows[0].effect == pytest.approx(convert(read_sheet(c)).rows[0].effect)


def test_xlsx_merged_cells_refused(tmp_path, run_cli):
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["study", "stat", "value", "n1", "n2"])
    ws.append(["A", "t", 2.0, 20, 20])
    ws.append(["", "t", 2.0, 20, 20])
    ws.merge_cells("A2:A3")
    p = tmp_path / "m.xlsx"
    wb.save(p)
    res = run_cli("convert", p)
    assert res.exit_code == 2 and "merged cells" in res.stderr


def test_convert_demo_prints_every_row(run_cli, demo_path):
    res = run_cli("convert", demo_path)
    assert res.exit_code == 0, res.output
    s = read_sheet(demo_path)
    lines = res.stdout.splitlines()
    for rec in s.records:
        assert any(line.lstrip().startswith(f"{rec.row} ") and rec.study in line
                   for line in lines), rec.row
    assert "excluded" in res.stdout and "Assumptions:" in res.stdout


def test_convert_json_contract(run_cli, demo_path):
    res = run_cli("convert", demo_path, "--json")
    assert res.exit_code == 0
    doc = json.loads(res.stdout)
    assert doc["schema"] == "pooler.convert/1" and doc["metric"] == "g"
    keys = {"row", "study", "stat", "effect", "variance", "n_total", "design", "status", "reason"}
    for row in doc["rows"]:
        assert keys <= set(row)
        assert row["status"] in ("used", "excluded")
    assert doc["rows"][0]["row"] == 2
    assert doc["rows_used"] + doc["rows_excluded"] == len(doc["rows"])
    res_r = run_cli("convert", demo_path, "--json", "--metric", "r")
    assert json.loads(res_r.stdout)["metric"] == "z"


@pytest.mark.parametrize("name", ["t.csv", "t.tsv", "t.xlsx"])
def test_template_round_trip(tmp_path, run_cli, name):
    p = tmp_path / name
    res = run_cli("template", p)
    assert res.exit_code == 0 and p.exists()
    eff = convert(read_sheet(p))
    from pooler.reading.template import EXAMPLE_ROWS
    assert len(eff.rows) == len(EXAMPLE_ROWS)
    assert {r.stat for r in eff.rows} >= {"t", "F", "r", "d", "g", "means", "chi2", "counts",
                                          "odds_ratio", "p"}
    assert sum(r.status == "excluded" for r in eff.rows) == 1
    # the template's own column-guide worksheet is not worth a reading note
    assert not any("sheets; read the first" in n for n in read_sheet(p).notes)
    again = run_cli("template", p)
    assert again.exit_code == 2 and "--force" in again.stderr


def test_template_covers_every_known_column():
    from pooler.reading.sheet import COLUMN_GUIDE, KNOWN
    from pooler.reading.template import TEMPLATE_COLUMNS
    assert set(TEMPLATE_COLUMNS) == set(KNOWN) == set(COLUMN_GUIDE)


def test_template_bad_suffix(tmp_path, run_cli):
    res = run_cli("template", tmp_path / "t.txt")
    assert res.exit_code == 2 and ".csv, .tsv or .xlsx" in res.stderr


def _commands():
    from pooler.cli import main
    return sorted(main.commands)


@pytest.mark.parametrize("cmd", _commands())
def test_every_command_has_help_with_example(run_cli, cmd):
    res = run_cli(cmd, "--help")
    assert res.exit_code == 0
    assert "Example:" in res.stdout
    from pooler.cli import main
    assert main.commands[cmd].help


def test_top_level_help_and_version(run_cli):
    assert run_cli("--help").exit_code == 0
    res = run_cli("--version")
    assert res.exit_code == 0 and "pooler" in res.stdout


def test_bad_option_values_exit_2(run_cli, demo_path):
    res = run_cli("convert", demo_path, "--within-r", "1.5")
    assert res.exit_code == 2 and "'--within-r'" in res.stderr  # the flag as typed
