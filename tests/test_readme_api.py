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
    # Jupyter shows an object's _repr_html_: each stage's result shows its to_frame() table
    from pooler import adjust, convert, planning_scenarios, plan, pool, read_sheet
    from pooler.planning import PlanningEffect
    eff = convert(read_sheet(demo_path))
    pooled = pool(eff)
    bias = adjust(pooled)
    sc = planning_scenarios(pooled, bias)
    p = plan([PlanningEffect("given", 0.3)], "two-group")
    for res in (eff, pooled, bias, sc, p):
        html = res._repr_html_()
        assert html.startswith("<table") and html.count("<tr") == len(res.to_frame()) + 1
