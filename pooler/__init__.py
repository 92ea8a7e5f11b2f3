"""pooler: from the statistics that prior studies reported to a defensible sample size.

The pipeline, one module per stage (each a pure function returning a frozen result
with ``to_frame()`` and ``to_dict()``)::

    read_sheet  (pooler.sheet)    file -> Sheet
    convert     (pooler.effects)  Sheet -> Effects (one metric, variance per row)
    pool        (pooler.pooling)  Effects -> PooledResult (carrying its studies)
    bias_suite  (pooler.bias)     PooledResult -> BiasResult (every registered bias method)

Names are imported lazily so that ``import pooler`` and ``pooler --help`` stay fast.
"""
from __future__ import annotations

__version__ = "0.1.0"

_API = {
    "read_sheet": "pooler.sheet",
    "Sheet": "pooler.sheet",
    "convert": "pooler.effects",
    "Effects": "pooler.effects",
    "hedges_j": "pooler.effects",
    "pool": "pooler.pooling",
    "PooledResult": "pooler.pooling",
    "bias_suite": "pooler.bias",
    "BiasResult": "pooler.bias",
    "demo_sheet_path": "pooler.demo",
    "write_template": "pooler.template",
    "PoolerError": "pooler.errors",
    "InputError": "pooler.errors",
    "OptionError": "pooler.errors",
    "Interval": "pooler._results",
    "NotEstimable": "pooler._results",
}

__all__ = sorted(_API) + ["__version__"]


def __getattr__(name: str):
    if name in _API:
        import importlib
        return getattr(importlib.import_module(_API[name]), name)
    raise AttributeError(f"module 'pooler' has no attribute {name!r}")


def __dir__():
    return __all__
