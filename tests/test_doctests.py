"""Every docstring Example in the package runs as a doctest (numpydoc "Examples" sections)."""
from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import pooler

MODULES = sorted(m.name for m in pkgutil.walk_packages(pooler.__path__, "pooler."))


def test_the_package_has_examples():
    finder = doctest.DocTestFinder()
    n = sum(len(t.examples) for name in MODULES
            for t in finder.find(importlib.import_module(name)))
    assert n >= 10


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples_run(name):
    module = importlib.import_module(name)
    res = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE,
                          report=False)
    assert res.failed == 0, f"{res.failed} of {res.attempted} examples failed in {name}"
