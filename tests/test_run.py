"""The whole job: `pooler run` / `pooler demo`, the files they write, plots and report."""
from __future__ import annotations

import json
import re

import numpy as np

import pytest

EXPECTED = {"report.md", "report.html", "results.json", "planning_table.csv", "effects.csv"}
FIGS = ("forest", "funnel", "ladder", "power")


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    from click.testing import CliRunner
    from pooler.cli import main
    out = tmp_path_factory.mktemp("demo") / "out"
    res = CliRunner().invoke(main, ["demo", "--out", str(out), "--n", "200", "--attrition",
                                    "0.1"], catch_exceptions=False)
    return res, out


def test_demo_writes_everything(demo_run):
    res, out = demo_run
    assert res.exit_code == 0, res.output
    names = {p.name for p in out.iterdir()}
    assert EXPECTED | {f"{f}.png" for f in FIGS} <= names
    assert all((out / n).stat().st_size > 0 for n in names)
    for text in ("Random effects", "Bias-sensitivity suite", "Planning scenarios",
                 "Planning table", "With a fixed total N = 200", "Written to"):
        assert text in res.stdout


def test_results_json_contract(demo_run):
    _, out = demo_run
    doc = json.loads((out / "results.json").read_text())
    assert doc["schema"] == "pooler.run/1"
    assert doc["pool"]["schema"] == "pooler.pool/1" and doc["plan"]["schema"] == "pooler.plan/1"
    inp = doc["inputs"]
    assert {"file", "sha256", "rows_used", "rows_excluded"} <= set(inp)
    assert inp["rows_used"] + inp["rows_excluded"] == inp["rows_read"] == len(doc["pool"]["rows"])
    assert doc["plan"]["fixed_n"]["n_total"] == 200
    assert {"options", "command"} <= set(doc)


def _key_numbers(md: str) -> dict[str, str]:
    section = md.split("## Key numbers", 1)[1].split("\n## ", 1)[0]
    rows = {}
    for line in section.splitlines():
        m = re.match(r"^\| (.+?) \| (.+?) \|$", line)
        if m and m.group(1) not in ("quantity", "---"):
            rows[m.group(1)] = m.group(2)
    return rows


def test_report_numbers_equal_results_json(demo_run):
    _, out = demo_run
    md = (out / "report.md").read_text()
    doc = json.loads((out / "results.json").read_text())
    key = _key_numbers(md)
    pool, plan = doc["pool"], doc["plan"]
    assert int(key["k (independent samples)"]) == pool["k"]
    assert float(key["random-effects estimate"]) == round(pool["pooled"]["estimate"], 3)
    assert float(key["random-effects CI low"]) == round(pool["pooled"]["ci_low"], 3)
    assert float(key["tau^2"]) == round(pool["heterogeneity"]["tau2"], 4)
    assert key["I^2"] == f"{100 * pool['heterogeneity']['i2']:.1f}%"   # a percentage
    for s in ("optimistic", "realistic", "pessimistic"):
        assert float(key[f"{s} effect"]) == round(pool["scenarios"][s]["effect"], 3)
    for row in plan["rows"]:
        label = f"{row['scenario']} n total at {100 * row['power']:g}% power"
        assert int(key[label].replace(",", "")) == row["n_total"]
    # the methods paragraph carries the realistic n at the first target power
    first = next(r for r in plan["rows"] if r["scenario"] == "realistic")
    para = md.split("## Methods paragraph", 1)[1]
    assert f"{first['n_per_group']} per group ({first['n_total']} in total)" in para


def test_every_input_row_in_report(demo_run, demo_path):
    _, out = demo_run
    md = (out / "report.md").read_text()
    from pooler import read_sheet
    from pooler.output.document import md_escape
    table = md.split("## Conversions", 1)[1].split("\n## ", 1)[0]
    for rec in read_sheet(demo_path).records:
        assert f"| {rec.row} | {md_escape(rec.study)} |" in table


def test_report_has_caution_methods_and_reproducibility(demo_run):
    _, out = demo_run
    md = (out / "report.md").read_text()
    for heading in ("## Caution", "## Methods paragraph", "## Reproducibility", "## Inputs"):
        assert heading in md
    assert "not replace a statistician, an ethics board" in md
    assert "pooler demo --attrition 0.1 --n 200" in md
    html = (out / "report.html").read_text()
    assert "data:image/png;base64," in html
    assert not re.search(r'(src|href)="(https?:)?//', html)   # self-contained


def test_special_characters_are_escaped(tmp_path, write_sheet, run_cli):
    rows = [{"study": "<script>alert(1)</script> | *bold* [x](y)", "stat": "t", "value": 2.1,
             "n1": 20, "n2": 20, "year": 2010},
            {"study": "=HYPERLINK(\"x\")", "stat": "t", "value": 1.1, "n1": 30, "n2": 30,
             "year": 2011},
            {"study": "Plain & simple", "stat": "d", "value": 0.4, "n1": 25, "n2": 25,
             "year": 2012}]
    path = write_sheet(rows)
    out = tmp_path / "o"
    res = run_cli("run", path, "--out", out)
    assert res.exit_code == 0, res.output
    html = (out / "report.html").read_text()
    assert "<script>" not in html and "&lt;script&gt;" in html
    md = (out / "report.md").read_text()
    assert "<script>" not in md and "\\|" in md and "\\*bold\\*" in md
    csv_text = (out / "effects.csv").read_text()
    assert "'=HYPERLINK" in csv_text


@pytest.mark.parametrize("fmt", ["png", "svg", "pdf"])
def test_figures_in_each_format(tmp_path, run_cli, demo_path, fmt):
    out = tmp_path / fmt
    res = run_cli("run", demo_path, "--out", out, "--format", fmt)
    assert res.exit_code == 0
    magic = {"png": b"\x89PNG", "svg": b"<?xml", "pdf": b"%PDF"}[fmt]
    for f in FIGS:
        data = (out / f"{f}.{fmt}").read_bytes()
        assert data.startswith(magic) and len(data) > 1000


def test_forest_plot_has_one_row_per_study_plus_summaries(demo_path):
    from pooler.pipeline import analyse
    from pooler.output.plots import forest_plot
    a = analyse(demo_path)
    fig = forest_plot(a.pooled, a.scenarios)
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert len(labels) == a.pooled.k + 2
    assert labels[-2:] == ["all studies, one shared effect",
                           "all studies, effects allowed to vary"]
    lines = {ln.get_label() for ln in ax.get_lines()}
    assert any("realistic" in s for s in lines) and any("pessimistic" in s for s in lines)


@pytest.mark.filterwarnings("error")
def test_demo_raises_no_warnings(tmp_path):
    from pooler.cli import main
    from click.testing import CliRunner
    res = CliRunner().invoke(main, ["demo", "--out", str(tmp_path / "w")],
                             catch_exceptions=False)
    assert res.exit_code == 0


def test_existing_out_needs_force(tmp_path, run_cli):
    out = tmp_path / "full"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    res = run_cli("demo", "--out", out)
    assert res.exit_code == 2 and "--force" in res.stderr
    assert {p.name for p in out.iterdir()} == {"keep.txt"}
    assert run_cli("demo", "--out", out, "--force").exit_code == 0


def test_bad_input_writes_nothing(tmp_path, write_sheet, run_cli):
    path = write_sheet([{"study": "A", "stat": "t", "value": "2.1*", "n1": 20, "n2": 20}])
    out = tmp_path / "none"
    res = run_cli("run", path, "--out", out)
    assert res.exit_code == 2 and "significance stars" in res.stderr
    assert not out.exists()


@pytest.mark.slow
def test_two_runs_are_byte_identical(tmp_path, run_cli, demo_path):
    outs = []
    for i in range(2):
        out = tmp_path / f"r{i}"
        assert run_cli("run", demo_path, "--out", out, "--format", "svg").exit_code == 0
        outs.append(out)
    for name in ("results.json", "planning_table.csv", "effects.csv", "report.md",
                 "forest.svg", "funnel.svg", "ladder.svg", "power.svg"):
        assert (outs[0] / name).read_bytes() == (outs[1] / name).read_bytes(), name


@pytest.mark.parametrize("args", [["--design", "correlation", "--metric", "r"],
                                  pytest.param(["--design", "ancova", "--covariate-r", "0.6"],
                                               marks=pytest.mark.slow),
                                  ["--design", "interaction-2x2", "--attenuation", "1"],
                                  ["--design", "paired", "--planned-r", "0.7", "--one-sided"],
                                  pytest.param(["--design", "regression-increment",
                                                "--predictors-added", "2",
                                                "--predictors-total", "4"],
                                               marks=pytest.mark.slow)])
def test_run_every_design(tmp_path, run_cli, demo_path, args):
    out = tmp_path / "d"
    res = run_cli("run", demo_path, "--out", out, *args)
    assert res.exit_code == 0, res.output
    doc = json.loads((out / "results.json").read_text())
    assert doc["plan"]["design"] == args[1]
    assert any(isinstance(r["n_total"], int) for r in doc["plan"]["rows"])


@pytest.mark.slow
def test_rerun_into_its_own_folder_replaces_it(tmp_path, run_cli):
    # The README's first command runs `pooler demo` into pooler_out/: it must work twice.
    out = tmp_path / "again"
    assert run_cli("demo", "--out", out).exit_code == 0
    (out / "my_notes.txt").write_text("mine")
    first = {p.name for p in out.iterdir()}
    assert "forest.png" in first
    res = run_cli("demo", "--out", out, "--format", "svg")
    assert res.exit_code == 0, res.stderr
    names = {p.name for p in out.iterdir()}
    # the PNG figures of the first run are gone, the SVGs are there, the user's file is kept
    assert not any(n.endswith(".png") for n in names)
    assert {"forest.svg", "funnel.svg", "power.svg", "my_notes.txt", "report.md"} <= names


@pytest.mark.slow
def test_a_manifest_cannot_delete_outside_the_folder(tmp_path, run_cli):
    import json
    out = tmp_path / "out"
    assert run_cli("demo", "--out", out).exit_code == 0
    victim = tmp_path / "victim.txt"
    victim.write_text("keep")
    man = out / ".written-by-pooler.json"
    doc = json.loads(man.read_text())
    doc["files"] += ["../victim.txt", str(victim), "..", ""]
    man.write_text(json.dumps(doc))
    assert run_cli("demo", "--out", out).exit_code == 0
    assert victim.read_text() == "keep"


def test_forest_plot_stays_small_at_large_k(tmp_path, write_sheet):
    # Above FOREST_MAX_ROWS studies the forest plot draws one cloud, not a row per study.
    from pooler.evidence.effects import convert
    from pooler.output.plots import FOREST_MAX_ROWS, forest_plot
    from pooler.evidence.pooling import pool
    from pooler.reading.sheet import read_sheet
    rng = np.random.default_rng(7)
    rows = [{"study": f"S{i}", "stat": "d", "value": round(float(rng.normal(0.3, 0.3)), 3),
             "n1": int(rng.integers(10, 80)), "n2": int(rng.integers(10, 80))}
            for i in range(400)]
    pooled = pool(convert(read_sheet(write_sheet(rows))))
    fig = forest_plot(pooled)
    labels = [t.get_text() for t in fig.axes[0].get_yticklabels()]
    assert len(labels) == 3 and labels[0].startswith("400 studies")
    assert fig.get_size_inches()[1] < 5
    assert 400 > FOREST_MAX_ROWS


def test_forest_legend_never_covers_a_study(demo_path):
    from pooler.pipeline import analyse
    from pooler.output.plots import forest_plot
    a = analyse(demo_path)
    fig = forest_plot(a.pooled, a.scenarios)
    fig.canvas.draw()
    ax = fig.axes[0]
    leg = fig.legends[0].get_window_extent()
    axes_box = ax.get_window_extent()
    assert leg.y1 <= axes_box.y0  # entirely below the plotting area


def test_large_literature_json_keeps_every_row_and_summarises_the_other_tables(write_sheet):
    # above pooler.pipeline.JSON_ALL_ROWS_MAX_K studies the per-study tables other than
    # `rows` keep JSON_SHOWN_ROWS chosen entries and say so; `rows` keeps every row
    import numpy as np
    from pooler.pipeline import JSON_ALL_ROWS_MAX_K, JSON_SHOWN_ROWS, analyse
    k = JSON_ALL_ROWS_MAX_K + 1
    rng = np.random.default_rng(3)
    a = analyse(write_sheet([{"study": f"Invented {i}", "stat": "d", "value": round(float(x), 4),
                              "n1": int(n1), "n2": int(n2), "year": 1990 + i % 30}
                             for i, (x, n1, n2) in enumerate(zip(rng.normal(0.3, 0.3, k),
                                                                 rng.integers(10, 200, k),
                                                                 rng.integers(10, 200, k)))]))
    doc = a.pool_document()
    assert len(doc["rows"]) == k
    assert set(doc["summarised"]) == {"units", "leave_one_out", "cumulative",
                                      "scenarios.audit.rows"}
    for part in (doc["units"], doc["leave_one_out"], doc["cumulative"],
                 doc["scenarios"]["audit"]["rows"]):
        assert len(part) == JSON_SHOWN_ROWS
    # the omissions kept are those that move the estimate most
    moves = sorted(abs(r.estimate - a.pooled.mu) for r in a.pooled.leave_one_out)
    kept = sorted(abs(r["estimate"] - a.pooled.mu) for r in doc["leave_one_out"])
    assert kept == moves[-JSON_SHOWN_ROWS:]
    # the cumulative steps include the first and the whole literature
    assert doc["cumulative"][0]["k"] == 1 and doc["cumulative"][-1]["k"] == k
