"""The options as data: canonical choices and defaults, free of numpy so that `pooler --help`
stays fast. The command line reads its choice lists and defaults from here; the library keeps
the same values as its functions' defaults, and tests/test_options.py pins the two together
(and the adjusters to the bias-method registry).
"""
from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from types import MappingProxyType

#: ``--metric``: Hedges' g (d) or Fisher's z of the correlation (r).
METRICS = ("d", "r")
#: ``--estimator``: the between-study variance estimators of ``pooler.pooling``.
ESTIMATORS = ("reml", "ml", "pm", "dl")
#: ``--interval``: Hartung-Knapp-Sidik-Jonkman or Wald.
INTERVALS = ("hksj", "hksj-plain", "wald")
#: ``--adjuster``: the default rule (the model average), the earlier safeguard rule, the median
#: rule, then one value per bias method that can
#: set the planning effect, in planning order (``pooler.bias.adjuster_choices()``).
ADJUSTERS = ("default", "safeguard", "median", "3psm", "pet-peese", "trim-and-fill", "waap-wls")



@dataclass(frozen=True)
class AnalysisOptions:
    """How one sheet is analysed: the keyword arguments of :func:`pooler.pipeline.analyse`,
    as one frozen value (serialised into ``results.json`` under ``options``). The stages
    validate the values; this only holds them."""

    metric: str = "d"
    within_r: float = 0.5
    sample_r: float = 0.5
    estimator: str = "reml"
    interval: str = "hksj"
    adjuster: str = "default"
    safeguard_level: float = 0.6
    sesoi: float | None = None

    def to_dict(self) -> dict:
        return asdict(self)

    def replace(self, **changes) -> "AnalysisOptions":
        return replace(self, **changes)


#: Defaults of the analysis (``pooler.pipeline.analyse`` and the stages it calls).
ANALYSIS_DEFAULTS = MappingProxyType(AnalysisOptions().to_dict())
#: Target powers of the planning table when none is given.
POWERS = (0.8, 0.9, 0.95)
