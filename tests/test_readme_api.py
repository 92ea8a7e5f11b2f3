"""The README's Python API section runs as a doctest, so what it shows stays true."""
from __future__ import annotations

import doctest
import re
from pathlib import Path

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_python_api_block_runs():
    text = README.read_text(encoding="utf-8")
    section = text[text.index("## Python API"):]
    section = section[:section.index("\n## ", 5)]
    blocks = re.findall(r"```pycon\n(.*?)```", section, re.S)
    assert blocks, "the Python API section has no pycon example"
    parser = doctest.DocTestParser()
    test = parser.get_doctest("\n".join(blocks), {}, "README Python API", str(README), 0)
    assert len(test.examples) >= 10
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    runner.run(test)
    res = runner.summarize(verbose=False)
    assert res.failed == 0


def test_results_show_as_tables_in_a_notebook(demo_path):
    # Jupyter shows an object's _repr_html_: each stage's result shows the section the terminal
    # and the report show (one content model), headed and with its table
    from pooler import adjust, convert, planning_scenarios, plan, pool, read_sheet
    from pooler.planning.sample_size import PlanningEffect
    eff = convert(read_sheet(demo_path))
    pooled = pool(eff)
    bias = adjust(pooled)
    sc = planning_scenarios(pooled, bias)
    p = plan([PlanningEffect("given", 0.3)], "two-group")
    heads = {"Conversions": eff, "Pooled estimate": pooled, "Bias-sensitivity suite": bias,
             "Planning scenarios": sc, "Planning table": p}
    for head, res in heads.items():
        html = res._repr_html_()
        assert html.startswith(f"<h2>{head}") and "<table><thead>" in html
    # one table row per sheet row, per bias method, per scenario, as in to_frame()
    for res in (eff, bias, sc):
        assert html_rows(res._repr_html_()) == len(res.to_frame())
    # a result without a section of its own still shows its to_frame() table
    avg = sc.posterior
    html = avg._repr_html_()
    assert html.startswith("<table") and html.count("<tr") == len(avg.to_frame()) + 1


def html_rows(html: str) -> int:
    """Body rows of the first table of an HTML fragment."""
    return html.split("<tbody>", 1)[1].split("</tbody>", 1)[0].count("<tr>")
