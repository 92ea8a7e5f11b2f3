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
