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
#: ``--estimator``: the between-study variance estimators of ``pooler.evidence.pooling``.
ESTIMATORS = ("reml", "ml", "pm", "dl")
#: ``--interval``: Hartung-Knapp-Sidik-Jonkman or Wald.
INTERVALS = ("hksj", "hksj-plain", "wald")
#: ``--adjuster``: the default rule (the model average), the earlier safeguard rule, the median
#: rule, then one value per bias method that can
#: set the planning effect, in planning order (``pooler.evidence.bias.adjuster_choices()``).
ADJUSTERS = ("default", "safeguard", "median", "3psm", "pet-peese", "trim-and-fill", "waap-wls")


@dataclass(frozen=True)
class ModelAverageOption:
    """One setting of the model-average rule as an option: its name (the flag is the name
    with dashes), default, allowed range, the ``pooler.evidence.bma.Priors`` field it sets (None for
    the pessimistic quantile) and its help text."""

    name: str
    default: float
    low: float
    high: float
    low_open: bool
    high_open: bool
    prior_field: str | None
    help: str

    @property
    def flag(self) -> str:
        return "--" + self.name.replace("_", "-")

    def allows(self, value) -> bool:
        import math
        if not isinstance(value, (int, float)) or not math.isfinite(value):
            return False
        above = self.low < value if self.low_open else self.low <= value
        below = value < self.high if self.high_open else value <= self.high
        return above and below

    def range_text(self) -> str:
        lo = ("(" if self.low_open else "[") + f"{self.low:g}"
        hi = ("inf)" if self.high == float("inf") else f"{self.high:g}"
              + (")" if self.high_open else "]"))
        return f"{lo}, {hi}"


_INF = float("inf")
#: The priors and the pessimistic quantile of the default rule (``--adjuster default``), as
#: options of run, pool, plan SHEET, demo and stress. Scales are on Cohen's d; for
#: correlations pooler converts them to Fisher z (pooler.evidence.bma.Priors.on_metric). Defaults:
#: the published ones (Bartoš et al. 2023; see pooler/evidence/bma.py) and the 15th percentile, chosen
#: from the calibration's trade-off table by pooler.planning.tradeoff.choose_default (README,
#: "Calibration"): the cheapest quantile of the grid whose median true power under strong
#: selection reaches 0.80 at every k of 5 to 40 studies (0.25, the earlier default, reached
#: 0.65 at k = 5 and 0.76 at k = 10).
MODEL_AVERAGE_OPTIONS = (
    ModelAverageOption("effect_prior_sd", 1.0, 0, _INF, True, True, "effect_sd",
                       "Model average: prior SD of the mean effect (d scale), a normal prior "
                       "centred on 0."),
    ModelAverageOption("heterogeneity_prior_shape", 1.0, 0, _INF, True, True, "tau_shape",
                       "Model average: shape of the inverse-gamma prior on the between-study "
                       "SD tau."),
    ModelAverageOption("heterogeneity_prior_scale", 0.15, 0, _INF, True, True, "tau_scale",
                       "Model average: scale of the inverse-gamma prior on the between-study "
                       "SD tau (d scale); larger expects more heterogeneity."),
    ModelAverageOption("pet_prior_scale", 1.0, 0, _INF, True, True, "pet_scale",
                       "Model average: scale of the half-Cauchy prior on the PET slope (the "
                       "effect's rise per unit of standard error)."),
    ModelAverageOption("peese_prior_scale", 5.0, 0, _INF, True, True, "peese_scale",
                       "Model average: scale of the half-Cauchy prior on the PEESE slope (per "
                       "unit of sampling variance; d scale)."),
    ModelAverageOption("chance_of_effect", 0.5, 0, 1, True, False, "p_effect",
                       "Model average: prior probability that there is an effect at all."),
    ModelAverageOption("chance_of_heterogeneity", 0.5, 0, 1, False, False, "p_heterogeneity",
                       "Model average: prior probability that the true effects vary between "
                       "studies."),
    ModelAverageOption("chance_of_no_bias", 0.5, 0, 1, False, False, "p_no_bias",
                       "Model average: prior probability that the literature is free of "
                       "publication bias (the rest is shared by the selection, PET and PEESE "
                       "models). Lower values plan more cautiously."),
    ModelAverageOption("pessimistic_quantile", 0.15, 0, 0.5, True, False, None,
                       "Model average: the pessimistic scenario is this quantile of the "
                       "posterior of the mean effect given a positive effect (the realistic "
                       "one is its median). Lower protects more against an inflated "
                       "literature and asks for more participants."),
)
#: name -> default of the model-average options
MODEL_AVERAGE_DEFAULTS = MappingProxyType({o.name: o.default for o in MODEL_AVERAGE_OPTIONS})



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
    effect_prior_sd: float = MODEL_AVERAGE_DEFAULTS["effect_prior_sd"]
    heterogeneity_prior_shape: float = MODEL_AVERAGE_DEFAULTS["heterogeneity_prior_shape"]
    heterogeneity_prior_scale: float = MODEL_AVERAGE_DEFAULTS["heterogeneity_prior_scale"]
    pet_prior_scale: float = MODEL_AVERAGE_DEFAULTS["pet_prior_scale"]
    peese_prior_scale: float = MODEL_AVERAGE_DEFAULTS["peese_prior_scale"]
    chance_of_effect: float = MODEL_AVERAGE_DEFAULTS["chance_of_effect"]
    chance_of_heterogeneity: float = MODEL_AVERAGE_DEFAULTS["chance_of_heterogeneity"]
    chance_of_no_bias: float = MODEL_AVERAGE_DEFAULTS["chance_of_no_bias"]
    pessimistic_quantile: float = MODEL_AVERAGE_DEFAULTS["pessimistic_quantile"]

    def to_dict(self) -> dict:
        return asdict(self)

    def replace(self, **changes) -> "AnalysisOptions":
        return replace(self, **changes)


#: Defaults of the analysis (``pooler.pipeline.analyse`` and the stages it calls).
ANALYSIS_DEFAULTS = MappingProxyType(AnalysisOptions().to_dict())
#: Target powers of the planning table when none is given.
POWERS = (0.8, 0.9, 0.95)
