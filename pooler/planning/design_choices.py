"""The planned designs' names and the design options each uses, without importing numpy.

The command line builds its ``--design`` choices and the "which design uses this option"
part of each design option's help from here, so that ``pooler --help`` stays fast. The
designs themselves (power, sample size, units, labels, descriptions) are registered in
:mod:`pooler.planning.designs`; ``tests/test_designs.py`` checks that this list and the registry
agree, name for name and option for option.
"""
from __future__ import annotations

#: Each planned design, in the order the command line lists them, with the
#: :class:`pooler.planning.power.Design` options it reads.
DESIGN_PARAMETERS = {
    "two-group": ("ratio",),
    "paired": ("planned_r",),
    "one-sample": (),
    "correlation": ("exact_r",),
    "ancova": ("ratio", "covariate_r", "fixed_covariates"),
    "interaction-2x2": ("attenuation",),
    "regression-increment": ("predictors_added", "predictors_total", "fixed_covariates"),
}

#: The planned designs' names (the ``--design`` choices).
PLANNED_DESIGNS = tuple(DESIGN_PARAMETERS)

#: The simulated designs (pooler.planning.simdesign; `pooler paths`, and `pooler run` with a path
#: sheet), in the order the command line lists them.
SIMULATED_DESIGNS = ("simple-mediation", "parallel-mediation", "serial-mediation",
                     "moderation")

#: Every design option, in the order of :class:`pooler.planning.power.Design`'s fields.
DESIGN_OPTIONS = ("ratio", "planned_r", "covariate_r", "attenuation", "predictors_added",
                  "predictors_total", "exact_r", "fixed_covariates")


def used_by(option: str) -> str:
    """The designs that read ``option``, as the start of its help text.

    Examples
    --------
    >>> used_by("ratio")
    'two-group, ancova'
    """
    return ", ".join(name for name, opts in DESIGN_PARAMETERS.items() if option in opts)
