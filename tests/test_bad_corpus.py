"""The corpus of bad sheets (tests/bad_sheets/, listed in expected.csv with the fragment,
row and column each message must name): `pooler run` on each (with `--design` for the path
sheets of the simulated designs) exits 2 with one clear line per problem, no traceback, and
writes nothing."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

HERE = Path(__file__).parent / "bad_sheets"
CASES = list(csv.DictReader(open(HERE / "expected.csv", encoding="utf-8")))


def test_corpus_is_large_enough():
    assert len(CASES) >= 75
    assert sum(1 for c in CASES if c["design"]) >= 12   # path sheets
    assert all((HERE / c["file"]).exists() for c in CASES)


@pytest.mark.parametrize("case", CASES, ids=[c["file"] for c in CASES])
def test_bad_sheet(case, run_cli, tmp_path):
    out = tmp_path / "out"
    design = ["--design", case["design"]] if case.get("design") else []
    res = run_cli("run", HERE / case["file"], "--out", out, *design)
    assert "Traceback" not in res.output
    err = res.stderr.strip()
    where = [case["file"]]
    if case["row"]:
        where.append(f"row {case['row']}")
    if case["column"]:
        where.append(f"column '{case['column']}'")
    if case["exit"] == "0":
        # read, with a warning that names the row and column
        assert res.exit_code == 0, res.output
        warns = [ln for ln in err.splitlines() if ln.startswith("pooler: warning:")
                 and case["fragment"] in ln]
        assert warns and all(w in warns[0] for w in where[1:])
        return
    assert res.exit_code == 2, res.output
    lines = [ln for ln in err.splitlines() if not ln.startswith("pooler: warning:")]
    n = int(case["problems"])
    assert lines[0].startswith("pooler: error: ")
    assert case["fragment"] in lines[0]
    assert all(w in lines[0] for w in where)
    # one line per problem: the first, then the others indented, each located
    assert len(lines) == n
    assert all(ln.startswith("  - ") and "row " in ln for ln in lines[1:])
    assert not out.exists()
