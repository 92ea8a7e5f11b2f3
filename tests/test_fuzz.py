"""Property-based fuzzing of reading → converting → pooling → bias → scenarios → planning.

Valid sheets always give finite numbers or an explicit "not estimable" (the JSON document is
dumped with allow_nan=False, so a NaN anywhere fails); invalid ones always give a PoolerError;
no other exception ever escapes. Nothing is lost: rows in = rows used + rows excluded.

CI runs a modest number of examples; a long run:
    POOLER_FUZZ_EXAMPLES=10000 python -m pytest tests/test_fuzz.py
"""
from __future__ import annotations

import csv
import json
import math
import os
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pooler import PoolerError

N = int(os.environ.get("POOLER_FUZZ_EXAMPLES", "30"))
SETTINGS = settings(max_examples=N, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

n_st = st.integers(2, 400)
sign = st.sampled_from(["+", "-"])
fl = lambda a, b: st.floats(a, b, allow_nan=False, allow_infinity=False)  # noqa: E731


@st.composite
def valid_row(draw, i):
    stat = draw(st.sampled_from(["t", "F", "p", "r", "d", "g", "means", "chi2", "counts",
                                 "odds_ratio", "t_within", "d_within"]))
    row = {"study": f"S{i} {draw(st.text('ab <|*&', max_size=4))}", "year": 2000 + i}
    n1, n2 = draw(n_st), draw(n_st)
    if stat == "t":
        row.update(stat="t", value=draw(fl(-6, 6)), n1=n1, n2=n2)
    elif stat == "F":
        row.update(stat="F", value=draw(fl(0, 30)), df1=1, n1=n1, n2=n2, direction=draw(sign))
    elif stat == "p":
        row.update(stat="p", value=draw(fl(1e-8, 1)), tails=2, n1=n1, n2=n2,
                   direction=draw(sign))
    elif stat == "r":
        row.update(stat="r", value=draw(fl(-0.999, 0.999)), n=draw(st.integers(4, 5000)))
    elif stat in ("d", "g"):
        row.update(stat=stat, value=draw(fl(-2.5, 2.5)), n1=n1, n2=n2)
    elif stat == "means":
        row.update(stat="means", mean1=draw(fl(-50, 50)), mean2=draw(fl(-50, 50)),
                   sd1=draw(fl(0.1, 20)), sd2=draw(fl(0.1, 20)), n1=n1, n2=n2)
    elif stat == "chi2":
        n = draw(st.integers(10, 3000))
        row.update(stat="chi2", value=draw(fl(0, 0.9)) * n, n=n, direction=draw(sign))
    elif stat == "counts":
        row.update(stat="counts", n1=n1, n2=n2, events1=draw(st.integers(0, n1)),
                   events2=draw(st.integers(0, n2)))
    elif stat == "odds_ratio":
        lor = draw(fl(-2, 2))
        se = draw(fl(0.05, 1.5))
        row.update(stat="odds_ratio", value=math.exp(lor), ci_low=math.exp(lor - 1.96 * se),
                   ci_high=math.exp(lor + 1.96 * se))
    elif stat == "t_within":
        row.update(stat="t", value=draw(fl(-6, 6)), n=draw(st.integers(3, 400)),
                   design="within", within_r=draw(fl(-0.9, 0.95)))
    else:
        row.update(stat="d", value=draw(fl(-2, 2)), n=draw(st.integers(3, 400)), design="within")
    if draw(st.integers(0, 9)) == 0:
        row["exclude"] = "fuzz exclusion"
    return row


@st.composite
def valid_sheet(draw):
    k = draw(st.integers(1, 12))
    return [draw(valid_row(i)) for i in range(k)]


def write(rows, d: Path) -> Path:
    cols = list(dict.fromkeys(k for r in rows for k in r))
    p = d / "fuzz.csv"
    with open(p, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=cols)
        w.writeheader()
        for r in rows:
            w.writerow({k: (repr(v) if isinstance(v, float) else v) for k, v in r.items()})
    return p


def whole_job(path, design):
    from pooler.planning.power import Design
    from pooler.pipeline import run
    return run(path, design=Design(design), analysis_options={},
               plan_options={"n_total": 120, "attrition": 0.1})


DESIGNS = st.sampled_from(["two-group", "paired", "ancova", "interaction-2x2", "one-sample"])


@SETTINGS
@given(rows=valid_sheet(), design=DESIGNS)
@pytest.mark.slow
def test_valid_sheets_give_finite_results_or_reasons(rows, design):
    with tempfile.TemporaryDirectory() as d:
        path = write(rows, Path(d))
        try:
            res = whole_job(path, design)
        except PoolerError as exc:
            # the only legitimate refusal of a valid sheet: nothing left to pool
            assert "no rows are left to pool" in str(exc) or "not estimable" in str(exc) \
                or "no random-effects estimate" in str(exc), str(exc)
            return
        doc = json.loads(json.dumps(res.to_dict(), allow_nan=False))
        inp = doc["inputs"]
        assert inp["rows_read"] == len(rows) == inp["rows_used"] + inp["rows_excluded"]
        assert len(doc["pool"]["rows"]) == len(rows)
        from pooler.output.outputs import effects_csv
        assert len(effects_csv(res.analysis.effects).splitlines()) == len(rows) + 1


BAD = st.sampled_from(["2.1*", "p<.05", "abc", "-", "1,5", "t(20)=2", "n/a", "∞", "45 ms"])


@SETTINGS
@given(rows=valid_sheet(), which=st.integers(0, 50), bad=BAD,
       column=st.sampled_from(["value", "n1", "n2", "n", "sd1", "within_r", "events1"]))
def test_invalid_cells_give_input_errors_only(rows, which, bad, column):
    row = rows[which % len(rows)]
    row.pop("exclude", None)
    row[column] = bad
    with tempfile.TemporaryDirectory() as d:
        path = write(rows, Path(d))
        try:
            whole_job(path, "two-group")
        except PoolerError as exc:
            assert "fuzz.csv" in str(exc)
            return
    raise AssertionError(f"a bad cell ({column} = {bad!r}) was accepted")


@SETTINGS
@given(rows=valid_sheet(), which=st.integers(0, 50),
       mutation=st.sampled_from(["neg_n", "zero_sd", "r_big", "p_zero", "no_direction"]))
def test_impossible_values_are_refused_or_harmless(rows, which, mutation):
    row = rows[which % len(rows)]
    row.pop("exclude", None)
    if mutation == "neg_n":
        key = next((k for k in ("n1", "n", "n2") if k in row), "n1")
        row[key] = -3
    elif mutation == "zero_sd":
        row.update(stat="means", mean1=1, mean2=0, sd1=0, sd2=1, n1=10, n2=10)
    elif mutation == "r_big":
        row.update(stat="r", value=1.5, n=40)
    elif mutation == "p_zero":
        row.update(stat="p", value=0, n1=10, n2=10, direction="+")
    else:
        row.update(stat="F", value=4.0, n1=10, n2=10, df1=1)
        row.pop("direction", None)
    with tempfile.TemporaryDirectory() as d:
        path = write(rows, Path(d))
        try:
            whole_job(path, "two-group")
        except PoolerError:
            return
    raise AssertionError(f"mutation {mutation} was accepted")
