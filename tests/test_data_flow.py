"""Each stage takes the stage before it and nothing older: the pooled result carries its
studies; the scenarios need only (pooled, bias); the audit only (pooled, effect)."""
from __future__ import annotations

import inspect
import json

import numpy as np
import pytest

from pooler._results import estimable

from pooler.evidence.audit import Audit, audit_literature, excess_significance, unit_powers
from pooler.evidence.bias import bias_suite
from pooler.evidence.pooling import pool
from pooler.planning.scenarios import make_scenarios

from test_pooling import make_effects

Y = np.array([0.52, 0.31, 0.44, 0.12, 0.65, 0.28, 0.05, 0.39])
V = np.array([0.040, 0.025, 0.050, 0.010, 0.080, 0.030, 0.012, 0.045])


def test_pooled_result_carries_its_studies():
    eff = make_effects(Y, V)
    pooled = pool(eff)
    assert pooled.studies == eff.units
    assert [s.effect for s in pooled.studies] == list(pooled.effects)
    assert pool(eff, influence=False).studies == eff.units


def test_later_stages_take_only_the_stage_before():
    assert list(inspect.signature(make_scenarios).parameters)[:2] == ["pooled", "bias"]
    assert list(inspect.signature(audit_literature).parameters) == ["pooled", "effect"]


def test_audit_stage_is_the_studies_power_at_the_realistic_effect():
    eff = make_effects(Y, V)
    pooled = pool(eff)
    sc = make_scenarios(pooled, bias_suite(pooled))
    effect = sc.realistic.effect if sc.realistic.effect > 0 else 0.2
    au = audit_literature(pooled, effect)
    assert isinstance(au, Audit) and au.effect == effect
    powers = [r.power for r in unit_powers(eff.units, effect, "g")]
    assert [r.power for r in au.literature.rows] == powers
    assert au.excess_significance == excess_significance(eff.units, powers)
    json.dumps(au.to_dict(), allow_nan=False)


@pytest.mark.parametrize("effect", [0.0, -0.15])
def test_audit_is_not_computed_at_a_non_positive_effect(effect):
    # a study's "power" at a true effect of zero or below is its false-positive rate: the
    # audit and the excess-significance test would only mislead, so they say why instead
    pooled = pool(make_effects(Y, V))
    au = audit_literature(pooled, effect)
    assert not estimable(au.literature) and not estimable(au.excess_significance)
    assert "not positive" in au.literature.reason
    json.dumps(au.to_dict(), allow_nan=False)


def test_pool_document_keeps_the_audit_where_the_contract_puts_it(run_cli, write_sheet):
    rows = [{"study": f"Invented {i}", "stat": "d", "value": y + 0.3, "n1": 20 + 15 * i,
             "n2": 20 + 15 * i}
            for i, y in enumerate(Y)]
    doc = json.loads(run_cli("pool", write_sheet(rows), "--json").stdout)
    assert doc["scenarios"]["realistic"]["effect"] > 0   # the audit is computed
    assert list(doc["bias"])[-1] == "excess_significance"
    assert list(doc["scenarios"])[-1] == "audit"
    assert {"effect", "median_power", "share_adequate", "rows"} <= set(doc["scenarios"]["audit"])
