"""Shared test helpers."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest
from click.testing import CliRunner


@pytest.fixture
def write_sheet(tmp_path):
    """Write rows (dicts) to a CSV in tmp_path and return its path."""
    def _write(rows, name="sheet.csv", columns=None):
        cols = columns or list(dict.fromkeys(k for r in rows for k in r))
        p = tmp_path / name
        with open(p, "w", newline="", encoding="utf-8") as fh:
            w = csv.DictWriter(fh, fieldnames=cols)
            w.writeheader()
            for r in rows:
                w.writerow(r)
        return p
    return _write


@pytest.fixture
def run_cli():
    """Invoke the pooler CLI; returns click's Result (stdout and stderr kept apart)."""
    from pooler.cli import main

    def _run(*args):
        return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)
    return _run


@pytest.fixture
def demo_path() -> Path:
    from pooler import demo_sheet_path
    return demo_sheet_path()
