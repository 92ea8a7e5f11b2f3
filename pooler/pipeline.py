"""The stages chained: sheet → effects → pooled → bias → scenarios (→ plan).

A convenience for the CLI and for users who want everything at once; each stage is still
its own pure function (see the modules named in the fields).
"""
from __future__ import annotations

from dataclasses import dataclass

from ._results import to_jsonable


@dataclass(frozen=True)
class Analysis:
    """Everything from one sheet, stage by stage."""

    sheet: object      # pooler.sheet.Sheet
    effects: object    # pooler.effects.Effects
    pooled: object     # pooler.pooling.PooledResult
    bias: object       # pooler.bias.BiasResult
    scenarios: object  # pooler.scenarios.Scenarios

    def pool_document(self) -> dict:
        """The ``pooler.pool/1`` JSON document."""
        doc = {"schema": "pooler.pool/1", **self.pooled.to_dict()}
        bias = self.bias.to_dict()
        bias["excess_significance"] = to_jsonable(self.scenarios.excess_significance)
        doc["bias"] = bias
        doc["scenarios"] = self.scenarios.to_dict()
        weight = {}
        for u, w in zip(self.effects.units, self.pooled.weights):
            for r in u.rows:
                weight[r] = w
        rows = self.effects.to_dict()["rows"]
        for r in rows:
            r["weight"] = weight.get(r["row"])
        doc["rows"] = rows
        return doc

    def to_dict(self) -> dict:
        return self.pool_document()


def analyse(sheet_path, *, metric="d", within_r=0.5, sample_r=0.5, estimator="reml",
            interval="hksj", adjuster="default", safeguard_level=0.6, sesoi=None) -> Analysis:
    """Read, convert, pool, run the bias suite and derive the planning scenarios."""
    from .bias import bias_suite
    from .effects import convert
    from .pooling import pool
    from .scenarios import make_scenarios
    from .sheet import read_sheet
    sheet = read_sheet(sheet_path)
    effects = convert(sheet, metric, within_r=within_r, sample_r=sample_r)
    pooled = pool(effects, estimator, interval)
    bias = bias_suite(pooled)
    scen = make_scenarios(effects, pooled, bias, adjuster=adjuster,
                          safeguard_level=safeguard_level, sesoi=sesoi)
    return Analysis(sheet, effects, pooled, bias, scen)
