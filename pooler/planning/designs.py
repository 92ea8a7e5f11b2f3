"""The registry of designs: everything pooler knows about a design, in one entry.

A planned design (:class:`PlannedDesign`) holds its power function (noncentrality and df of
its test), the normal-approximation start of the sample-size search, how n per group (or
per cell) becomes the total and back, the smallest n, the units and effect labels, the
metric it plans on (d or r), how a planning effect reaches its own metric, its description
(saying which figures are exact and which approximate) and the :class:`pooler.planning.power.Design`
options it reads. :class:`pooler.planning.power.Design`, :mod:`pooler.planning.sample_size`, the reports and the
command line all read from here; nothing else branches on a design's name.

The simulated designs of ``pooler paths`` and ``pooler run SHEET --design <simulated>``
(:mod:`pooler.planning.simdesign`) keep their own engine; :func:`simulated` lists them through the
same interface (kind ``"simulated"``; :func:`get_simulated` finds one), so that
:func:`catalogue` shows every design pooler can plan, and the command line's light list
(:data:`pooler.planning.design_choices.SIMULATED_DESIGNS`) is checked against it.

To add a planned design, write its section below (or in a module of its own that calls
:func:`register`), add its name and options to :mod:`pooler.planning.design_choices` (the light list
the command line reads), and test it; a design with a new option also needs a field on
:class:`pooler.planning.power.Design` and a command-line option (see DEVELOPERS.md).

References
----------
See :mod:`pooler.planning.power` (Cohen 1988, 1992; Borm, Fransen & Lemmens 2007; Morris & DeShon
2002; Gatsonis & Sampson 1989; Hotelling 1953; Guenther 1981).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import special as sp

from pooler.errors import OptionError
from pooler.planning.power import _f_power, _r_exact_power, _t_power


def _identity(des, x):
    return x


def _two(des) -> int:
    return 2


def _same_total(des, n):
    return n


def _no_details(des) -> str:
    return ""


def _exact(des) -> str:
    return "exact noncentral distributions"


@dataclass(frozen=True)
class PlannedDesign:
    """One planned design, as the registry holds it.

    Attributes
    ----------
    name : str
        The name ``--design`` takes.
    description : str
        One line: the study, the test it is planned for, and whether its power is exact.
    metric : {"d", "r"}
        The literature metric it plans on when none is chosen (r when its test is on a
        correlation).
    effect_label : str
        Its own effect's symbol in tables (d, d_z, r, f², ...).
    unit : {"group", "cell"} or None
        What n counts: one group (one cell), or, with None, the whole sample.
    parameters : tuple of str
        The :class:`pooler.planning.power.Design` options it reads.
    power : callable
        ``power(des, effect, n, alpha, alternative, upper_only)`` on float arrays: the power
        of its test with the effect on its own metric (see :func:`pooler.planning.power.power_at`).
    normal_start : callable
        ``normal_start(des, effect, z, za)``, the normal-approximation n that brackets the
        exact search, with z = (z_α + z_power)² and za = z_α.
    n_min : callable
        ``n_min(des)``, the smallest n its test is defined for.
    total, per_unit : callable
        ``total(des, n)``: participants in all for n per unit (array); ``per_unit(des, N)``:
        the n per unit a total N allows, rounding down (int).
    to_own, from_own : callable
        ``to_own(des, x)`` takes an effect on ``metric`` to its own metric; ``from_own`` back.
    details : callable
        ``details(des)``: the settings shown after the name in its description ("" if none).
    power_basis : callable
        ``power_basis(des)``: how its power is computed, in words, saying whether it is exact.
    check_effect : callable or None
        ``check_effect(des, effect)`` raises OptionError for effects its test cannot take.
    effect_cap : float
        Upper end of the search for the smallest detectable effect (own metric).
    r_note : str
        For a correlational design, what follows the d → r conversion in the plan's note.
    """

    name: str
    description: str
    metric: str
    effect_label: str
    unit: str | None
    parameters: tuple
    power: Callable
    normal_start: Callable
    n_min: Callable = _two
    total: Callable = _same_total
    per_unit: Callable = _same_total
    to_own: Callable = _identity
    from_own: Callable = _identity
    details: Callable = _no_details
    power_basis: Callable = _exact
    check_effect: Callable | None = None
    effect_cap: float = 100.0
    r_note: str = ""
    kind: str = "planned"


@dataclass(frozen=True)
class SimulatedDesign:
    """A design whose power is found by simulation (``pooler paths``); see
    :mod:`pooler.planning.simdesign`, which builds and runs it."""

    name: str
    description: str
    factory: object
    kind: str = "simulated"


_PLANNED: dict[str, PlannedDesign] = {}


def register(spec: PlannedDesign) -> PlannedDesign:
    """Add a planned design to the registry (its name must be new)."""
    if not isinstance(spec, PlannedDesign):
        raise OptionError("a design is registered as a PlannedDesign")
    if spec.name in _PLANNED:
        raise OptionError(f"a design named {spec.name!r} is already registered")
    if spec.metric not in ("d", "r"):
        raise OptionError(f"a design plans on d or r, not {spec.metric!r}")
    if spec.unit not in ("group", "cell", None):
        raise OptionError(f"a design's unit is 'group', 'cell' or None, not {spec.unit!r}")
    _PLANNED[spec.name] = spec
    return spec


def unregister(name: str) -> None:
    """Remove a planned design (used by tests that register a design of their own)."""
    _PLANNED.pop(name, None)


def planned_names() -> tuple:
    """The registered planned designs' names, in registration order."""
    return tuple(_PLANNED)


def get(name: str) -> PlannedDesign:
    """The registry entry of a planned design."""
    try:
        return _PLANNED[name]
    except KeyError:
        raise OptionError(f"`design` must be one of {', '.join(_PLANNED)}, "
                          f"not {name!r}") from None


def simulated() -> tuple:
    """The simulated designs of :mod:`pooler.planning.simdesign`, as registry entries (kind
    ``"simulated"``), each described by the first paragraph of its class docstring."""
    from pooler.planning.simdesign import DESIGNS
    out = []
    for name, cls in DESIGNS.items():
        first = (cls.__doc__ or "").strip().split("\n\n")[0]
        out.append(SimulatedDesign(name, " ".join(first.split()), cls))
    return tuple(out)


def get_simulated(name: str) -> SimulatedDesign:
    """The registry entry of a simulated design (``pooler paths``, or ``pooler run`` with a
    path sheet)."""
    for entry in simulated():
        if entry.name == name:
            return entry
    raise OptionError(f"`design` must be one of {', '.join(e.name for e in simulated())}, "
                      f"not {name!r}")


def catalogue() -> tuple:
    """Every design pooler can plan: the planned ones, then the simulated ones."""
    return tuple(_PLANNED.values()) + simulated()


# ------------------------------------------------------------------ shared pieces

def _allocation_text(ratio: float) -> str:
    """The allocation as the user writes it: n1:n2 with n1 = 1 (ratio 2 -> "1:2")."""
    return f"1:{ratio:g} (n2/n1 = {ratio:g})"


def _two_groups_total(des, n):
    return n + des.n2(n)


def _two_groups_per_unit(des, n_total):
    return int(math.floor(n_total / (1 + des.ratio) + 1e-9))


def _covariate_basis(des, kind: str, sampled: str) -> str:
    if des.fixed_covariates:
        return f"{kind} values held fixed (approximate if sampled)"
    return "power averaged over " + sampled


def _fixed_basis(kind: str):
    def basis(des) -> str:
        if des.fixed_covariates:
            return ("noncentral distributions (an approximation when the "
                    f"{kind} values are sampled)")
        return "exact noncentral distributions"
    return basis


# ------------------------------------------------------------------ two-group
# t, df = n1 + n2 - 2, λ = d √(n1 n2 / (n1 + n2)) (Cohen 1988, ch. 2)

def _two_group_power(des, e, n, alpha, alternative, upper_only):
    n2 = des.n2(n)   # integer second group, n2 = ceil(ratio n1)
    scale = np.sqrt(n * n2 / (n + n2))
    return _t_power(e * scale, n + n2 - 2, alpha, alternative, upper_only)


def _two_group_start(des, e, z, za):
    return z / e ** 2 * (1 + des.ratio) / des.ratio + za ** 2 / 4


register(PlannedDesign(
    name="two-group", metric="d", effect_label="d", unit="group", parameters=("ratio",),
    description="two independent groups: t test, df = n1 + n2 - 2, λ = d √(n1 n2 / (n1 + n2)); "
                "exact (noncentral t)",
    power=_two_group_power, normal_start=_two_group_start, total=_two_groups_total,
    per_unit=_two_groups_per_unit,
    details=lambda des: "" if des.ratio == 1 else f"allocation {_allocation_text(des.ratio)}"))


# ------------------------------------------------------------------ paired
# t, df = n - 1, λ = d_z √n, d_z = d / √(2 (1 - ρ)) (Morris & DeShon 2002, eq. 11)

def _one_sample_power(des, e, n, alpha, alternative, upper_only):
    return _t_power(e * np.sqrt(n), n - 1, alpha, alternative, upper_only)


def _one_sample_start(des, e, z, za):
    return z / e ** 2 + za ** 2 / 2


register(PlannedDesign(
    name="paired", metric="d", effect_label="d_z", unit=None, parameters=("planned_r",),
    description="repeated measures on one sample: t test, df = n - 1, λ = d_z √n with "
                "d_z = d / √(2 (1 - ρ)); exact (noncentral t)",
    power=_one_sample_power, normal_start=_one_sample_start,
    to_own=lambda des, d: d / math.sqrt(2 * (1 - des.planned_r)),
    from_own=lambda des, x: x * math.sqrt(2 * (1 - des.planned_r)),
    details=lambda des: f"planned correlation between measures {des.planned_r:g}"))


# ------------------------------------------------------------------ one-sample
# t, df = n - 1, λ = d √n (Cohen 1988, ch. 2)

register(PlannedDesign(
    name="one-sample", metric="d", effect_label="d", unit=None, parameters=(),
    description="one sample against a fixed value: t test, df = n - 1, λ = d √n; exact "
                "(noncentral t)",
    power=_one_sample_power, normal_start=_one_sample_start))


# ------------------------------------------------------------------ correlation
# Fisher z: z_r √(n - 3) (Cohen 1988, ch. 3), or the exact distribution of r (Hotelling 1953)

def _correlation_power(des, e, n, alpha, alternative, upper_only):
    if des.exact_r:
        return _r_exact_power(e, n, alpha, alternative, upper_only)
    z = np.arctanh(e) * np.sqrt(n - 3)
    if alternative == "two-sided":
        c = sp.ndtri(1 - alpha / 2)
        return sp.ndtr(z - c) + (0 if upper_only else sp.ndtr(-z - c))
    return sp.ndtr(z - sp.ndtri(1 - alpha))


def _correlation_check(des, e):
    if np.any(np.abs(e) >= 1):
        raise OptionError("a correlation effect must lie strictly between -1 and 1")


register(PlannedDesign(
    name="correlation", metric="r", effect_label="r", unit=None, parameters=("exact_r",),
    description="a correlation against zero: the Fisher z test, z_r √(n - 3), a normal "
                "approximation; exact_r=True uses the exact distribution of r",
    power=_correlation_power,
    normal_start=lambda des, e, z, za: z / np.arctanh(e) ** 2 + 3,
    n_min=lambda des: 4, check_effect=_correlation_check, effect_cap=0.999999,
    details=lambda des: "exact distribution of r" if des.exact_r else "Fisher z test",
    power_basis=lambda des: ("the exact distribution of r" if des.exact_r
                             else "the Fisher z approximation")))


# ------------------------------------------------------------------ ancova
# t, df = n1 + n2 - 3, λ = λ₀ √B averaged over B ~ Beta((N-2)/2, ½),
# λ₀ = d √(n1 n2/(n1 + n2)) / √(1 - ρ²) (Borm, Fransen & Lemmens 2007 for λ₀ with the
# covariate held fixed)

def _ancova_power(des, e, n, alpha, alternative, upper_only):
    n2 = des.n2(n)   # integer second group, n2 = ceil(ratio n1)
    if des.fixed_covariates:   # Borm et al. (2007): covariate balanced, held fixed
        scale = np.sqrt(n * n2 / (n + n2))
        return _t_power(e * scale / math.sqrt(1 - des.covariate_r ** 2), n + n2 - 3,
                        alpha, alternative, upper_only)
    from pooler.planning._random_predictors import ancova_power
    return ancova_power(e, n, n2, des.covariate_r, alpha, alternative, upper_only)


def _ancova_start(des, e, z, za):
    return z / e ** 2 * (1 + des.ratio) / des.ratio * (1 - des.covariate_r ** 2) + za ** 2 / 4


register(PlannedDesign(
    name="ancova", metric="d", effect_label="d", unit="group",
    parameters=("ratio", "covariate_r", "fixed_covariates"),
    description="two groups adjusted for one covariate: t test, df = n1 + n2 - 3; exact with a "
                "normally distributed covariate (power averaged over it); fixed_covariates=True "
                "gives the figure with the covariate held fixed",
    power=_ancova_power, normal_start=_ancova_start, total=_two_groups_total,
    per_unit=_two_groups_per_unit,
    details=lambda des: (f"covariate-outcome correlation {des.covariate_r:g}, "
                         f"allocation {_allocation_text(des.ratio)}, "
                         + _covariate_basis(des, "covariate", "a normal covariate")),
    power_basis=_fixed_basis("covariate")))


# ------------------------------------------------------------------ interaction-2x2
# contrast t, df = 4m - 4, λ = d a √m / 2 with m per cell

register(PlannedDesign(
    name="interaction-2x2", metric="d", effect_label="d (simple effect)", unit="cell",
    parameters=("attenuation",),
    description="the interaction of a 2x2 between-subjects design: contrast t test, "
                "df = 4m - 4, λ = d a √m / 2 with m per cell; exact (noncentral t)",
    power=lambda des, e, n, alpha, alternative, upper_only: _t_power(
        e * des.attenuation * np.sqrt(n) / 2, 4 * n - 4, alpha, alternative, upper_only),
    normal_start=lambda des, e, z, za: 4 * z / (e * des.attenuation) ** 2,
    total=lambda des, n: 4 * n, per_unit=lambda des, n_total: n_total // 4,
    details=lambda des: (f"attenuation {des.attenuation:g} "
                         "(1 = effect vanishes, 2 = full crossover)")))


# ------------------------------------------------------------------ regression-increment
# F(u, N - p - 1), λ = f² K averaged over K ~ χ²(N - p + u - 1) (Gatsonis & Sampson 1989);
# λ = f² N with the predictors held fixed (Cohen 1988, ch. 9); f² = r² / (1 - r²)

def _increment_power(des, e, n, alpha, alternative, upper_only):
    u, p = des.predictors_added, des.predictors_total
    if alternative == "greater" and u > 1:
        raise OptionError("a one-tailed test is defined only when one predictor is added")
    if not des.fixed_covariates:   # normal predictors (Gatsonis & Sampson 1989)
        from pooler.planning._random_predictors import increment_power
        power = increment_power(e, n, u, p, alpha, alternative, upper_only)
        if upper_only and u > 1:
            return np.where(np.asarray(e) > 0, power, 0.0)
        return power
    df2 = n - p - 1
    lam = np.abs(e) * n   # Cohen (1988), ch. 9: predictors held fixed
    if u == 1 and (alternative == "greater" or upper_only):
        return _t_power(np.sign(e) * np.sqrt(lam), df2, alpha, alternative, upper_only)
    power = _f_power(lam, u, df2, alpha)
    # the F test of several predictors has no direction: for assurance, an effect against
    # the hypothesis counts as no success
    return np.where(np.asarray(e) > 0, power, 0.0) if upper_only else power


register(PlannedDesign(
    name="regression-increment", metric="r", effect_label="f²", unit=None,
    parameters=("predictors_added", "predictors_total", "fixed_covariates"),
    description="R² increment of u predictors in a model of p: F(u, N - p - 1), "
                "f² = r² / (1 - r²); "
                "exact with normally distributed predictors (power averaged over them); "
                "fixed_covariates=True gives the figure with the predictor values held fixed "
                "(λ = f² N)",
    power=_increment_power,
    normal_start=lambda des, e, z, za: z / np.abs(e) + des.predictors_total + 1,
    n_min=lambda des: des.predictors_total + 2,
    to_own=lambda des, r: np.sign(r) * r * r / (1 - r * r),
    from_own=lambda des, x: np.sign(x) * np.sqrt(np.abs(x) / (1 + np.abs(x))),
    details=lambda des: (f"{des.predictors_added} of {des.predictors_total} predictors "
                         "tested, " + _covariate_basis(des, "predictor", "normal predictors")),
    power_basis=_fixed_basis("predictor"),
    r_note=", then f^2 = r^2 / (1 - r^2)"))
