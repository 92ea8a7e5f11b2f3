"""pooler: from the statistics that prior studies reported to a defensible sample size.

The pipeline, one module per stage (each a pure function returning a frozen result
with ``to_frame()`` and ``to_dict()``)::

    read_sheet      (pooler.sheet)     path or DataFrame -> Sheet
    convert         (pooler.effects)   Sheet -> Effects (one metric, variance per row)
    pool            (pooler.pooling)   Effects -> PooledResult (carrying its studies)
    adjust          (pooler.bias)      PooledResult -> BiasResult (every registered bias method)
    model_average   (pooler.bma)       effects and variances -> ModelAverage (20 bias models)
    planning_scenarios (pooler.scenarios) PooledResult, BiasResult -> Scenarios
    plan            (pooler.planning)  planning effects, design -> Plan
    analyse, run    (pooler.pipeline)  the stages chained on one sheet

Names are imported lazily so that ``import pooler`` and ``pooler --help`` stay fast.
"""
from __future__ import annotations

__version__ = "0.1.0"

#: public name -> (module, attribute)
_API = {
    "read_sheet": ("pooler.sheet", "read_sheet"),
    "Sheet": ("pooler.sheet", "Sheet"),
    "convert": ("pooler.effects", "convert"),
    "Effects": ("pooler.effects", "Effects"),
    "hedges_j": ("pooler.effects", "hedges_j"),
    "pool": ("pooler.pooling", "pool"),
    "PooledResult": ("pooler.pooling", "PooledResult"),
    "adjust": ("pooler.bias", "bias_suite"),
    "bias_suite": ("pooler.bias", "bias_suite"),
    "BiasResult": ("pooler.bias", "BiasResult"),
    "model_average": ("pooler.bma", "model_average"),
    "ModelAverage": ("pooler.bma", "ModelAverage"),
    "planning_scenarios": ("pooler.scenarios", "make_scenarios"),
    "Scenarios": ("pooler.scenarios", "Scenarios"),
    "plan": ("pooler.planning", "make_plan"),
    "PlanningEffect": ("pooler.planning", "PlanningEffect"),
    "Plan": ("pooler.planning", "Plan"),
    "Design": ("pooler.power", "Design"),
    "n_for_power": ("pooler.power", "n_for_power"),
    "power_at": ("pooler.power", "power_at"),
    "analyse": ("pooler.pipeline", "analyse"),
    "run": ("pooler.pipeline", "run"),
    "demo_sheet_path": ("pooler.demo", "demo_sheet_path"),
    "write_template": ("pooler.template", "write_template"),
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
