"""The corpus of bad sheets (tests/bad_sheets/, listed in expected.csv with the fragment,
row and column each message must name): `pooler run` on each exits 2 with one clear line,
no traceback, and writes nothing."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

HERE = Path(__file__).parent / "bad_sheets"
CASES = list(csv.DictReader(open(HERE / "expected.csv", encoding="utf-8")))


def test_corpus_is_large_enough():
    assert len(CASES) >= 40
    assert all((HERE / c["file"]).exists() for c in CASES)


@pytest.mark.parametrize("case", CASES, ids=[c["file"] for c in CASES])
def test_bad_sheet(case, run_cli, tmp_path):
    out = tmp_path / "out"
    res = run_cli("run", HERE / case["file"], "--out", out)
    assert res.exit_code == 2, res.output
    err = res.stderr.strip()
    assert "Traceback" not in res.output
    lines = [ln for ln in err.splitlines() if not ln.startswith("pooler: warning:")]
    assert len(lines) == 1 and lines[0].startswith("pooler: error: ")
    assert case["fragment"] in lines[0]
    assert case["file"] in lines[0]
    if case["row"]:
        assert f"row {case['row']}" in lines[0]
    if case["column"]:
        assert f"column '{case['column']}'" in lines[0]
    assert not out.exists()
