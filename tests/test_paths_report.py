"""The report of the simulated designs (pooler.output.pathsreport) is one content model: each
section is built once as blocks, and the terminal, report.md, report.html and a notebook only
lay them out (as tests/test_content_model.py checks for `pooler run`). The literatures are the
invented demo sheets; the Monte Carlo SE is the binomial one, sqrt(p (1 - p) / reps)."""
from __future__ import annotations

import json
import math
import re

import pytest
from test_content_model import numbers

from pooler.output.blocks import Block, brief, html_fragment, to_markdown, to_text


def _demo(name):
    from pathlib import Path
    return str(Path(__file__).resolve().parents[1] / "demo_literature" / name)


@pytest.fixture(scope="module")
def sheet_job():
    """The sheet route: every pair of the invented garden literature pooled, each scenario's
    n found by simulation (the joint test, few replications: the layout is under test)."""
    from pooler.pathsjob import paths_job
    return paths_job("parallel-mediation", sheet=_demo("garden_paths.csv"), test="joint",
                     powers=(0.8,), reps=200, seed=5,
                     command="pooler paths garden_paths.csv --design parallel-mediation")


@pytest.fixture(scope="module")
def fixed_job():
    """Power at one n of two invented scenarios given directly, under Sobel's test (whose
    comparison-only note must show)."""
    from pooler.pathsjob import paths_job
    return paths_job("simple-mediation", given={"X-M": 0.3, "M-Y": 0.3}, test="sobel",
                     fixed_n=120, reps=250, seed=6)


@pytest.fixture(scope="module")
def sheet_files(sheet_job):
    return sheet_job.files()


def _jobs(sheet_job, fixed_job):
    return {"search from a sheet": sheet_job, "power at one n": fixed_job}


def test_every_block_shows_the_same_numbers_in_all_three(sheet_job, fixed_job):
    from pooler.output.pathsreport import build_blocks
    kinds = set()
    for name, job in _jobs(sheet_job, fixed_job).items():
        blocks = [b for b in build_blocks(job) if b.kind not in ("figure", "begin", "end")]
        for b in blocks:
            text, md, page = to_text([b]), to_markdown([b]), html_fragment([b])
            assert numbers(text) == numbers(md) == numbers(page), (name, b)
            kinds.add(b.kind)
    assert {"h1", "h2", "h3", "p", "note", "list", "table", "code"} <= kinds


def test_the_numbers_are_the_results_numbers(sheet_job, sheet_files, fixed_job):
    # every solution's n, its interval and the confirmed power with its binomial MC SE
    # (sqrt(p (1 - p) / reps)) in the terminal, report.md and report.html alike
    files = sheet_files
    outputs = {"terminal": sheet_job.text(), "md": files["report.md"].decode(),
               "html": files["report.html"].decode()}
    for r in sheet_job.results:
        for s in r.solutions:
            c = s.confirmed
            p = c.rejections / c.reps
            row = [s.target, f"{s.goal:.0%}", f"{s.n:,}",
                   f"{s.interval.low:,.0f}-{s.interval.high:,.0f}",
                   f"{p:.3f} ± {math.sqrt(p * (1 - p) / c.reps):.3f}"]
            assert re.search(r"\s+".join(map(re.escape, row)), outputs["terminal"]), row
            assert "| " + " | ".join(row) + " |" in outputs["md"], row
            assert all(f">{x}</td>" in outputs["html"] for x in row), row
    for res in fixed_job.results:
        for e in res.estimates:
            p = e.rejections / e.reps
            assert re.search(rf"{re.escape(e.target)}\s+{p:.3f}\s+"
                             rf"{math.sqrt(p * (1 - p) / e.reps):.3f}", fixed_job.text())
    # the pooled pairs: the pooled r and its CI as the sheet's result holds them
    for p in sheet_job.sheet.paths:
        assert f"[{p.ci.low:.3f}, {p.ci.high:.3f}]" in outputs["md"]
        assert f"| {p.path} | rows " in outputs["md"]


def test_the_terminal_is_a_selection_of_the_report(sheet_job, fixed_job):
    # the terminal shows the report's blocks in the report's order, leaving out exactly the
    # detail ones: the methods, the figures, the reproducibility details
    from pooler.output.pathsreport import build_blocks, summary_blocks
    for job in _jobs(sheet_job, fixed_job).values():
        report = build_blocks(job)
        assert summary_blocks(job) == brief(report)
        assert job.text() == to_text(brief(report)) + "\n"
    report = build_blocks(sheet_job)
    left_out = [b for b in report if b.detail]
    assert {b.kind for b in left_out} == {"h2", "p", "figure", "code", "list"}
    assert {b.src for b in left_out if b.kind == "figure"} == {
        "path_diagram", "power_curve_optimistic", "power_curve_realistic",
        "power_curve_pessimistic"}
    text = sheet_job.text()
    assert "Methods" not in text and "Reproducibility" not in text
    assert "Sobel" in fixed_job.text()          # the comparison-only note, as a note


def test_the_report_keeps_its_methods_caution_and_reproducibility(sheet_job, sheet_files):
    from pooler.output.document import CAUTION as EVERY_REPORT
    from pooler.output.pathsreport import CAUTION, build_blocks
    blocks = build_blocks(sheet_job)
    words = " ".join(to_text(blocks).split())
    # the methods paragraphs read as the JSON document words them (one source)
    assert " ".join(sheet_job.to_dict()["methods"].split()) in words
    assert " ".join(sheet_job.methods.split()) in words
    for sentence in (EVERY_REPORT[0], CAUTION[0], CAUTION[1]):
        assert sentence in words
    assert f"SHA-256 {sheet_job.sheet.sha256}" in words
    assert Block("code", text=sheet_job.command, detail=True) in blocks
    assert "seed: 5 (NumPy SeedSequence" in words
    assert "replications: 200 per simulated n, 400 to confirm each n" in words
    md = sheet_files["report.md"].decode()
    for head in ("## Methods", "## Caution", "## Reproducibility",
                 "![Path diagram of parallel-mediation"):
        assert head in md


def test_a_notebook_shows_the_report(fixed_job):
    from pooler.output.pathsreport import build_blocks
    assert fixed_job._repr_html_() == html_fragment(build_blocks(fixed_job))


def test_html_embeds_every_figure_the_folder_gets(sheet_files):
    files = sheet_files
    figures = sorted(n[:-4] for n in files if n.endswith(".png"))
    assert figures == ["path_diagram", "power_curve_optimistic", "power_curve_pessimistic",
                       "power_curve_realistic"]
    page = files["report.html"].decode()
    assert page.count("data:image/png;base64,") == 4
    assert all(f"]({name}.png)" in files["report.md"].decode() for name in figures)


def test_changing_one_block_changes_every_output(monkeypatch, run_cli, tmp_path):
    # one block changed at its single source shows in the terminal, report.md and
    # report.html, for `pooler paths` (a search) and `pooler run --design` (power at one n)
    import pooler.output.pathsreport as pathsreport
    marker = "Scenario reworded once: 12.345 of 67,890"
    monkeypatch.setattr(pathsreport, "_scenario_head", lambda label, design: marker)
    runs = {"paths": ("paths", "--design", "simple-mediation", "--a", 0.3, "--b", 0.3,
                      "--test", "joint", "--power", 0.8, "--reps", 200, "--workers", 1),
            "run": ("run", _demo("garden_paths.csv"), "--design", "parallel-mediation",
                    "--test", "joint", "--n", 150, "--reps", 200, "--workers", 1)}
    for name, args in runs.items():
        out = tmp_path / name
        res = run_cli(*args, "--out", out)
        assert res.exit_code == 0, res.output
        assert marker in " ".join(res.stdout.split())
        assert marker in (out / "report.md").read_text(encoding="utf-8")
        assert marker in (out / "report.html").read_text(encoding="utf-8")
        tables = re.split("Sample size for each target|Power of every path", res.stdout)[1]
        assert "mediation: a = " not in tables          # the old wording is gone everywhere


@pytest.mark.slow
def test_the_stress_check_is_one_source(run_cli, tmp_path):
    # `pooler paths SHEET --stress`: the terminal, report.md and report.html show the same
    # numbers in the same order, and they are results.json's
    out = tmp_path / "stress"
    res = run_cli("paths", _demo("practice_feedback_moderation.csv"), "--design",
                  "moderation", "--stress", "--literatures", 1, "--workers", 1, "--out", out)
    assert res.exit_code == 0, res.output
    md = (out / "report.md").read_text(encoding="utf-8")
    page = (out / "report.html").read_text(encoding="utf-8").split("<body>", 1)[1]
    assert numbers(res.stdout) == numbers(md) == numbers(page)
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    for cell in doc["cells"]:
        for scenario, shares in cell["cautious"].items():
            ratio = cell["median_ratio"][scenario]["XZ-Y"]
            row = [f"{cell['selection']:g}", scenario, "XZ-Y", f"{shares['XZ-Y']:.0%}",
                   f"{ratio:.2f}", f"{cell['no_plan']}/{cell['literatures']}"]
            assert re.search(r"\s+".join(map(re.escape, row)), res.stdout), row
            assert "| " + " | ".join(row) + " |" in md, row
