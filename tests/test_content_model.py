"""One content model for every output: each section is built once as blocks
(pooler.output.report, pooler.output.document) and the terminal, Markdown, HTML and notebook renderers
(pooler.output.blocks) only lay them out. The demo literature is invented."""
from __future__ import annotations

import dataclasses
import re

import pytest

from pooler.output.blocks import Block, brief, html_fragment, to_markdown, to_text

#: A printed number: an optional sign, digits with thousands separators, decimals, percent.
NUMBER = re.compile(r"(?<![\w.])[-+]?\d[\d,]*(?:\.\d+)?%?")


def numbers(text: str) -> list[str]:
    return NUMBER.findall(text)


@pytest.fixture(scope="module")
def demo_result(demo_path_module):
    from pooler.choices import AnalysisOptions
    from pooler.pipeline import run
    from pooler.planning.power import Design
    return run(demo_path_module, design=Design("two-group"),
               analysis_options=AnalysisOptions(),
               plan_options={"alpha": 0.05, "tails": 2, "powers": (0.8, 0.9),
                             "attrition": 0.1, "n_total": 200},
               command="pooler demo --attrition 0.1 --n 200 --power 0.8 --power 0.9")


@pytest.fixture(scope="module")
def demo_path_module():
    from pooler.demo import demo_sheet_path
    return demo_sheet_path()


def test_every_block_shows_the_same_numbers_in_all_three(demo_result):
    # each block of the report, rendered alone by the terminal, Markdown and HTML renderers,
    # carries the same numbers in the same order: a renderer never words or rounds anything
    from pooler.output.document import build_blocks
    blocks = [b for b in build_blocks(demo_result) if b.kind not in ("figure", "begin", "end")]
    assert len(blocks) > 60
    kinds = set()
    for b in blocks:
        text, md, page = to_text([b]), to_markdown([b]), html_fragment([b])
        assert numbers(text) == numbers(md) == numbers(page), b
        kinds.add(b.kind)
    assert {"h1", "h2", "h3", "p", "list", "table", "key", "code"} <= kinds


def test_the_terminal_summary_is_a_selection_of_the_report(demo_result):
    # the terminal summary adds no wording of its own to a section: apart from its divider
    # heading and the list of files written, every block it shows is a block of the report
    from pathlib import Path

    from pooler.output.document import build_blocks, summary_blocks
    report = build_blocks(demo_result)
    summary = summary_blocks(demo_result, [Path("out/report.md")])
    own = [b for b in summary if b not in report]
    assert [b.kind for b in own] == ["h1", "p"]
    assert own[0].text == "How it was reached" and own[1].text.startswith("Written to")
    # what it leaves out is what the report marks as detail
    shown = set(summary)
    left_out = [b for b in report if b not in shown]
    assert any(b.detail for b in left_out)
    assert not any(b.detail for b in summary)
    # the sections come in the report's order (the caution, second in the report, closes
    # the terminal summary)
    from pooler.output.document import CAUTION
    idx = [report.index(b) for b in summary
           if b in report and b.text not in ("Caution", CAUTION[0])]
    assert idx == sorted(idx) and summary[-1] == Block("p", CAUTION[0])


def test_the_same_section_reads_the_same_in_the_terminal_and_the_report(demo_result):
    from pooler.output.document import build_blocks, summary_blocks
    md = to_markdown(build_blocks(demo_result))
    term = to_text(summary_blocks(demo_result))
    a = demo_result.analysis
    # excess significance, the selection ratio and the audit, worded once
    for start in ("Excess significance (Ioannidis & Trikalinos 2007): ",
                  "How much selective publication it would take",
                  "Literature audit: at the realistic g = "):
        md_par = next(p for p in md.split("\n\n") if p.startswith(start))
        t = start + term.split(start, 1)[1].split("\n\n", 1)[0]
        assert " ".join(md_par.split()) == " ".join(t.split())
    # and the numbers agree with the result objects
    tes = a.audit.excess_significance
    assert f"{tes.observed} of {tes.k} studies significant, {tes.expected:.1f} expected" in md
    assert f"{tes.observed} of {tes.k} studies significant, {tes.expected:.1f} expected" in term


def test_changing_one_section_changes_every_output(monkeypatch, tmp_path):
    # one block changed at its single source shows in the terminal, report.md, report.html,
    # and the `pooler pool` text
    from click.testing import CliRunner

    import pooler.output.report as report
    from pooler.cli import main
    from pooler.demo import demo_sheet_path
    marker = "Excess significance, reworded once: 12.345 of 67,890"
    monkeypatch.setattr(report, "_excess_significance_block", lambda tes: Block("p", marker))
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["demo", "--out", str(out)], catch_exceptions=False)
    assert res.exit_code == 0, res.output
    assert marker in " ".join(res.stdout.split())
    assert marker in (out / "report.md").read_text(encoding="utf-8")
    assert marker in (out / "report.html").read_text(encoding="utf-8")
    pool = CliRunner().invoke(main, ["pool", str(demo_sheet_path())], catch_exceptions=False)
    assert marker in " ".join(pool.stdout.split())
    assert "Ioannidis" not in res.stdout + pool.stdout


def test_a_notebook_shows_the_same_section(demo_result):
    from pooler.output.report import bias_blocks, plan_blocks, pooled_blocks, scenario_blocks
    a = demo_result.analysis
    for res, section in ((a.pooled, pooled_blocks), (a.bias, bias_blocks),
                         (a.scenarios, scenario_blocks), (demo_result.plan, plan_blocks)):
        page = res._repr_html_()
        assert page == html_fragment(section(res))
        shown = [b for b in section(res) if b.kind != "figure"]   # no PNG in a notebook
        assert numbers(page) == numbers(to_markdown(shown)) == numbers(to_text(shown))


def test_methods_paragraph_names_the_interval_and_level_used(demo_result):
    # the pooled result of a Wald 90% interval: the methods paragraph, the pooled summary
    # and the settings all name that method and level, and no Hartung-Knapp citation
    from pooler.output.document import build_blocks, methods_paragraph
    from pooler.evidence.pooling import INTERVAL_NAMES, pool
    a = demo_result.analysis
    wald = pool(a.effects, interval="wald", level=0.9)
    rerun = dataclasses.replace(demo_result, analysis=dataclasses.replace(a, pooled=wald))
    m = methods_paragraph(rerun)
    assert f"{INTERVAL_NAMES['wald']} confidence interval) gave g = " in m
    assert f"90% CI [{wald.pooled.ci.low:.2f}, {wald.pooled.ci.high:.2f}]" in m
    assert "the 90% prediction interval" in m
    assert "Hartung" not in m and "95% CI" not in m
    md = to_markdown(build_blocks(rerun))
    assert f"{INTERVAL_NAMES['wald']} 90% CI): g = {wald.pooled.estimate:.3f}" in md
    assert f"{INTERVAL_NAMES['wald']} 90% interval" in md       # the settings, in words
    # the default run names Hartung-Knapp and 95 %
    m0 = methods_paragraph(demo_result)
    assert "Hartung-Knapp-Sidik-Jonkman confidence interval; Hartung & Knapp, 2001" in m0
    assert "95% CI" in m0


# ------------------------------------------------------------------ the renderers

def test_text_renderer_aligns_numbers_and_strips_markdown():
    blocks = [Block("h2", "Table \\*one\\*"),
              Block("table", headers=("name", "value", "CI"),
                    rows=(("a\\_b", "1,234", "[0.1, 0.2]"), ("c", "-0.5", "[0.3, 0.4]"),
                          ("d", "12.5%", ""))),
              Block("p", "**Bold** words with `code` and &lt;tags&gt; and --long-option-names "
                         + "word " * 30),
              Block("note", "a note"), Block("p", "left out", detail=True)]
    text = to_text(blocks, width=60)
    lines = text.splitlines()
    assert lines[:2] == ["Table *one*", "-----------"]
    assert lines[4] == "a_b   1,234  [0.1, 0.2]"       # numbers right, text left
    assert lines[5] == "c      -0.5  [0.3, 0.4]"
    assert lines[6] == "d     12.5%"
    assert "Bold words with code and <tags> and --long-option-names" in text
    assert all(len(x) <= 60 for x in lines if not x.startswith(("a_b", "c ", "d ")))
    assert "  note: a note" in lines and "left out" in text
    assert "left out" not in to_text(brief(blocks))
    md = to_markdown(blocks)
    assert "| a\\_b | 1,234 | [0.1, 0.2] |" in md and "Note: a note" in md
    page = html_fragment(blocks)
    assert "<td>a_b</td>" in page and "<strong>Bold</strong>" in page
    assert '<td class="num">1,234</td>' in page and '<td class="ci">[0.1, 0.2]</td>' in page
    assert "&lt;tags&gt;" in page and "<tags>" not in page
