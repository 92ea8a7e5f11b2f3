"""pooler: from the statistics that prior studies reported to a defensible sample size.

The pipeline, one module per stage (each a pure function returning a frozen result
with ``to_frame()`` and ``to_dict()``)::

    read_sheet          (pooler.reading.sheet)         path or DataFrame -> Sheet
    convert             (pooler.evidence.effects)      Sheet -> Effects (one metric, variance per row)
    pool                (pooler.evidence.pooling)      Effects -> PooledResult (carrying its studies)
    adjust              (pooler.evidence.bias)         PooledResult -> BiasResult (every bias method)
    model_average       (pooler.evidence.bma)          effects, variances -> ModelAverage (20 models)
    planning_scenarios  (pooler.planning.scenarios)    PooledResult, BiasResult -> Scenarios
    plan                (pooler.planning.sample_size)  planning effects, design -> Plan
    analyse, run        (pooler.pipeline)              the stages chained on one sheet

Names are imported lazily so that ``import pooler`` and ``pooler --help`` stay fast.
"""
from __future__ import annotations

__version__ = "0.1.0"

#: public name -> (module, attribute)
_API = {
    "read_sheet": ("pooler.reading.sheet", "read_sheet"),
    "Sheet": ("pooler.reading.sheet", "Sheet"),
    "convert": ("pooler.evidence.effects", "convert"),
    "Effects": ("pooler.evidence.effects", "Effects"),
    "hedges_j": ("pooler.evidence.effects", "hedges_j"),
    "pool": ("pooler.evidence.pooling", "pool"),
    "PooledResult": ("pooler.evidence.pooling", "PooledResult"),
    "adjust": ("pooler.evidence.bias", "bias_suite"),
    "bias_suite": ("pooler.evidence.bias", "bias_suite"),
    "BiasResult": ("pooler.evidence.bias", "BiasResult"),
    "model_average": ("pooler.evidence.bma", "model_average"),
    "ModelAverage": ("pooler.evidence.bma", "ModelAverage"),
    "planning_scenarios": ("pooler.planning.scenarios", "make_scenarios"),
    "Scenarios": ("pooler.planning.scenarios", "Scenarios"),
    "plan": ("pooler.planning.sample_size", "make_plan"),
    "PlanningEffect": ("pooler.planning.sample_size", "PlanningEffect"),
    "Plan": ("pooler.planning.sample_size", "Plan"),
    "Design": ("pooler.planning.power", "Design"),
    "n_for_power": ("pooler.planning.power", "n_for_power"),
    "power_at": ("pooler.planning.power", "power_at"),
    "analyse": ("pooler.pipeline", "analyse"),
    "run": ("pooler.pipeline", "run"),
    "demo_sheet_path": ("pooler.demo", "demo_sheet_path"),
    "write_template": ("pooler.reading.template", "write_template"),
    "PoolerError": ("pooler.errors", "PoolerError"),
    "InputError": ("pooler.errors", "InputError"),
    "OptionError": ("pooler.errors", "OptionError"),
    "Interval": ("pooler._results", "Interval"),
    "NotEstimable": ("pooler._results", "NotEstimable"),
}

__all__ = sorted(_API) + ["__version__"]


def __getattr__(name: str):
    if name in _API:
        import importlib
        module, attr = _API[name]
        return getattr(importlib.import_module(module), attr)
    raise AttributeError(f"module 'pooler' has no attribute {name!r}")


def __dir__():
    return __all__
