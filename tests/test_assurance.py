"""Assurance (O'Hagan, Stevens & Campbell 2005): the expected power over a predictive
distribution of the true effect, E[power(δ)], counting only significant results in the
hypothesised direction.

Each check recomputes the integral independently: scipy.integrate.quad with a high
subdivision limit and the steep point of the power curve located by the test itself, and
Monte Carlo over δ (seeded, 10⁶ draws, tolerance from the Monte Carlo SE). The power
function being integrated is pooler's own (it is checked against statsmodels in
test_power.py); what is under test here is the integration and the n search.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, special, stats

from pooler.planning.power import (Design, EffectDensity, assurance, assurance_over,
                                   n_for_assurance, power_at, to_design_effect)

# the three designs of the check: a two-group t, a paired t (r = .7), and an F test with
# u = 3 numerator df (the R² increment of 3 of 5 predictors), whose upper-tail power jumps
# from 0 to alpha at effect 0
DESIGNS = {
    "two-group": (Design("two-group"), "d", 0.2, 0.2),
    "paired": (Design("paired", planned_r=0.7), "d", 0.3, 0.15),
    "increment-u3": (Design("regression-increment", predictors_added=3, predictors_total=5),
                     "r", 0.15, 0.1),
}
# the noncentral-F design takes 10-60 s in the two checks below: in the slow set (.ci/run)
_SLOW_LAST = [pytest.param(n, marks=pytest.mark.slow) if n == "increment-u3" else n
              for n in DESIGNS]
# Monte Carlo is checked at one n per design (10⁶ power evaluations cost 1-3 s each); the
# quadrature check covers the whole grid of n
MC_N = {"two-group": 1_000_000, "paired": 50_000, "increment-u3": 300_000}
# draws per design: the noncentral F costs about 100 µs per value (scipy's ncfdtr), so 10⁶
# draws took 2.5 minutes; with 50,000 the Monte Carlo SE is about 0.0011 (the check: 5 SEs)
MC_DRAWS = {"two-group": 1_000_000, "paired": 1_000_000, "increment-u3": 50_000}
N_GRID = [10, 40, 200, 1_000, 7_922, 50_000, 300_000, 1_000_000]


def _design_effect(x, metric, des):
    """Effect on the design's metric for draws x on the literature's (Fisher z for r)."""
    x = np.asarray(x, float)
    return to_design_effect(np.tanh(x), "r", des) if metric == "r" else \
        to_design_effect(x, "d", des)


def _crossing(des, metric, n, alpha=0.05):
    """The effect (literature metric) at which the noncentrality equals the critical value:
    t designs λ = c (Cohen 1988, ch. 2), F designs λ = u·F_crit (ch. 9). Computed here from
    the design formulas, not by pooler's integrator."""
    if des.name == "two-group":
        c = special.stdtrit(2 * n - 2, 1 - alpha / 2)
        return c / math.sqrt(n / 2)
    if des.name == "paired":
        c = special.stdtrit(n - 1, 1 - alpha / 2)
        return c / math.sqrt(n) * math.sqrt(2 * (1 - des.planned_r))
    u, p = des.predictors_added, des.predictors_total
    f2 = u * special.fdtri(u, n - p - 1, 1 - alpha) / n
    return math.atanh(math.sqrt(f2 / (1 + f2)))


def _quad_reference(des, metric, mean, sd, n):
    """scipy.integrate.quad over mean ± 12 sd, breakpoints at 0, the mean and the crossing
    effect ± a few widths of the power curve; limit 2,000 subintervals."""
    def integrand(x):
        e = _design_effect(x, metric, des)
        return float(power_at(e, n, des, upper_only=True)) * stats.norm.pdf(x, mean, sd)
    lo, hi = mean - 12 * sd, mean + 12 * sd
    x0 = _crossing(des, metric, n)
    width = x0 / 2 + 1e-3
    pts = sorted({p for p in (0.0, mean, x0, x0 - width, x0 + width, x0 - 2 * width,
                              x0 + 2 * width) if lo < p < hi})
    total = 0.0
    for a, b in zip([lo, *pts], [*pts, hi]):
        total += integrate.quad(integrand, a, b, epsabs=1e-12, epsrel=1e-12, limit=2000)[0]
    return total


@pytest.mark.parametrize("name", list(DESIGNS))
def test_assurance_matches_quad_over_n_up_to_a_million(name):
    des, metric, mean, sd = DESIGNS[name]
    ours = assurance(mean, sd, np.array(N_GRID), des, metric=metric)
    for n, a in zip(N_GRID, ours):
        ref = _quad_reference(des, metric, mean, sd, n)
        assert abs(a - ref) < 1e-7, (name, n, a, ref)


@pytest.mark.parametrize("name", _SLOW_LAST)
def test_assurance_matches_monte_carlo_over_the_effect(name):
    des, metric, mean, sd = DESIGNS[name]
    rng = np.random.default_rng(20261202)
    draws = rng.normal(mean, sd, MC_DRAWS[name])
    e = _design_effect(draws, metric, des)
    n = MC_N[name]
    p = power_at(e, n, des, upper_only=True)
    mc, se = p.mean(), p.std(ddof=1) / math.sqrt(p.size)
    ours = float(assurance(mean, sd, n, des, metric=metric))
    assert abs(ours - mc) < 5 * se, (name, n, ours, mc, se)


def test_the_reported_inputs_get_the_right_n():
    # two-group, Normal(0.2, 0.2²) at 80 % (ceiling 0.841): the old 64-point Gauss–Hermite
    # rule gave 100,548, whose real assurance is about 0.83
    res = n_for_assurance(0.2, 0.2, (0.8,))
    assert res.n == (7922,)
    assert float(assurance(0.2, 0.2, 7921)) < 0.8 <= float(assurance(0.2, 0.2, 7922))
    assert float(assurance(0.2, 0.2, 100_548)) > 0.83
    assert n_for_assurance(0.4, 0.25, (0.9,)).n == (1339,)
    assert n_for_assurance(0.3, 0.15, (0.95,), Design("paired", planned_r=0.7)).n == (933,)


@pytest.mark.parametrize("name", _SLOW_LAST)
def test_n_search_is_the_smallest_n_and_assurance_rises_with_n(name):
    des, metric, mean, sd = DESIGNS[name]
    ceiling = stats.norm.cdf(mean / sd)
    targets = [t for t in (0.5, 0.7, 0.8, 0.9, 0.95) if t < ceiling - 0.005]
    res = n_for_assurance(mean, sd, tuple(targets), des, metric=metric)
    for t, n, a in zip(targets, res.n, res.achieved):
        pair = assurance(mean, sd, np.array([n - 1, n]), des, metric=metric)
        assert pair[0] < t <= pair[1] and a == pytest.approx(pair[1], abs=1e-12)
    grid = np.unique(np.geomspace(des.n_min, 10 ** 6, 60).astype(int))
    curve = assurance(mean, sd, grid, des, metric=metric)
    assert np.all(np.diff(curve) > -1e-9) and curve[-1] < ceiling + 1e-9


# ---------------------------------------------------------------- any density

def _mixture():
    """A smooth, skewed, bimodal predictive density: 0.7 N(0.35, 0.1²) + 0.3 N(0.05, 0.15²)."""
    w, m, s = np.array([0.7, 0.3]), np.array([0.35, 0.05]), np.array([0.1, 0.15])

    def pdf(x):
        x = np.asarray(x, float)[..., None]
        return (w * np.exp(-0.5 * ((x - m) / s) ** 2) / (s * math.sqrt(2 * math.pi))).sum(-1)

    def draw(rng, size):
        k = rng.choice(2, size=size, p=w)
        return rng.normal(m[k], s[k])
    return pdf, draw, float((w * stats.norm.cdf(m / s)).sum())


def test_any_density_callable_and_grid_against_quad_and_monte_carlo():
    pdf, draw, ceiling = _mixture()
    des = Design("two-group")
    dens = EffectDensity.from_pdf(pdf, -1.5, 1.5)
    assert_allclose(dens.ceiling, ceiling, atol=1e-10)
    x = np.linspace(-1.5, 1.5, 3001)
    grid = EffectDensity.from_grid(x, pdf(x))
    # the piecewise-linear interpolant moves the ceiling by O(h²)
    assert_allclose(grid.ceiling, ceiling, atol=1e-6)
    draws = draw(np.random.default_rng(7), 1_000_000)
    for n in (30, 2_000, 1_000_000):
        def integrand(t):
            return float(power_at(t, n, des, upper_only=True)) * float(pdf(t))
        x0 = _crossing(des, "d", n)
        pts = sorted({p for p in (0.0, 0.05, 0.35, x0, x0 / 2, 1.5 * x0) if -1.5 < p < 1.5})
        ref = sum(integrate.quad(integrand, a, b, epsabs=1e-12, limit=2000)[0]
                  for a, b in zip([-1.5, *pts], [*pts, 1.5]))
        a_pdf = float(assurance_over(dens, n, des))
        a_grid = float(assurance_over(grid, n, des))
        assert abs(a_pdf - ref) < 1e-7, (n, a_pdf, ref)
        assert abs(a_grid - ref) < 2e-6, (n, a_grid, ref)
    # Monte Carlo at the steepest power curve (n = 10⁶)
    p = power_at(draws, n, des, upper_only=True)
    se = p.std(ddof=1) / math.sqrt(p.size)
    assert abs(a_pdf - p.mean()) < 5 * se, (n, a_pdf, p.mean(), se)


def test_grid_density_of_a_normal_gives_the_normal_answer():
    # a Normal tabulated on a fine grid (Fisher z scale, correlation design) integrates to
    # the same assurance and the same n as the Normal itself
    des = Design("correlation")
    z = np.linspace(0.31 - 1.2, 0.31 + 1.2, 4001)
    grid = EffectDensity.from_grid(z, stats.norm.pdf(z, 0.31, 0.1), metric="r")
    assert_allclose(grid.mean, 0.31, atol=1e-9)
    assert_allclose(grid.sd, 0.1, atol=1e-5)
    n = np.array([20, 108, 1000, 10 ** 6])
    assert_allclose(assurance_over(grid, n, des), assurance(0.31, 0.1, n, des, metric="r"),
                    atol=2e-6)
    assert n_for_assurance(0, 0, (0.8, 0.9), des, density=grid).n == \
        n_for_assurance(0.31, 0.1, (0.8, 0.9), des, metric="r").n


def test_density_inputs_are_validated():
    from pooler.errors import OptionError
    with pytest.raises(OptionError):
        EffectDensity.normal(0.3, 0.0)
    with pytest.raises(OptionError):
        EffectDensity.from_grid([0.0, 1.0, 0.5], [1.0, 1.0, 1.0])
    with pytest.raises(OptionError):
        EffectDensity.from_grid([0.0, 1.0], [-1.0, 1.0])
    with pytest.raises(OptionError):
        EffectDensity.from_pdf(lambda t: np.zeros_like(t), -1, 1)


@pytest.mark.parametrize("args, n", [
    (["--effect", "0.2", "--effect-sd", "0.2", "--design", "two-group", "--power", "0.8"], 7922),
    (["--effect", "0.4", "--effect-sd", "0.25", "--power", "0.9"], 1339),
    (["--effect", "0.3", "--effect-sd", "0.15", "--design", "paired", "--planned-r", "0.7",
      "--power", "0.95"], 933),
])
def test_cli_assurance_n(run_cli, args, n):
    # n from the quadrature and Monte Carlo checks above; the 64-point Gauss–Hermite rule
    # gave 100,548, 1,398 and 947
    res = run_cli("plan", *args, "--json")
    assert res.exit_code == 0, res.stderr
    row = json.loads(res.stdout)["assurance"]["rows"][0]
    assert row["n_per_group"] == n and row["assurance"] >= row["target"]


def test_narrow_callable_density_is_not_missed():
    # a predictive SD of 0.03 on a support 100 SDs wide, given only as a function
    dens = EffectDensity.from_pdf(lambda t: stats.norm.pdf(t, 0.4, 0.03), -1.5, 1.5)
    assert_allclose([dens.mean, dens.sd], [0.4, 0.03], atol=1e-9)
    n = np.array([20, 100, 1000])
    assert_allclose(assurance_over(dens, n), assurance(0.4, 0.03, n), atol=1e-8)


def test_a_target_just_below_the_ceiling_is_not_useful():
    """Normal(0.4, 0.25²) has ceiling Φ(0.4/0.25) = 0.9452 (scipy.special.ndtr): 0.94 is
    within 0.01 of it and said to be not useful (with the n it would need), 0.93 is planned."""
    from scipy.special import ndtr
    ceiling = float(ndtr(0.4 / 0.25))
    assert abs(ceiling - 0.9452) < 1e-4
    res = n_for_assurance(0.4, 0.25, (0.93, 0.94))
    assert isinstance(res.n[0], int)
    assert not res.n[1] and "not a useful target" in str(res.n[1]) and "per group" in str(res.n[1])


def test_the_plan_keeps_the_density_its_assurance_used():
    """The power figure draws assurance over the plan's own predictive distribution: a
    skewed tabulated density (not a normal one) gives the same value at the planned n as
    the table's assurance, and a (mean, sd) pair is kept as that Normal."""
    from pooler.planning.sample_size import PlanningEffect, make_plan
    x = np.linspace(-0.5, 1.5, 2001)
    dens = EffectDensity.from_grid(x, stats.gamma.pdf(x + 0.1, 3, scale=0.2))
    plan = make_plan([PlanningEffect("realistic", 0.4)], powers=(0.6,), predictive=dens)
    n = plan.assurance.n[0]
    assert plan.predictive is dens
    assert_allclose(assurance_over(plan.predictive, np.array([n]))[0],
                    plan.assurance.achieved[0], atol=1e-9)
    normal = make_plan([PlanningEffect("realistic", 0.4)], powers=(0.6,),
                       predictive=(0.4, 0.1))
    assert normal.predictive.form == "normal" and normal.predictive.mean == 0.4


@pytest.mark.slow
def test_the_curve_for_figures_matches_the_adaptive_assurance():
    """pooler.planning.power.assurance_curve (fixed Gauss-Legendre between the density's
    breaks, all n at once) against assurance_over (adaptive, to 1e-9 per n): a normal, a
    skewed tabulated density with an F test of 3 numerator df, and a Fisher-z density."""
    from pooler.planning.power import assurance_curve
    x = np.linspace(-0.5, 1.5, 401)
    skewed = EffectDensity.from_grid(x, stats.gamma.pdf(x + 0.3, 3, scale=0.2))
    z = np.linspace(-0.4, 0.9, 301)
    fisher = EffectDensity.from_grid(z, stats.norm.pdf(z, 0.2, 0.12), metric="r")
    n = np.array([5, 20, 64, 200, 900, 5000])
    for dens, des in ((EffectDensity.normal(0.3, 0.15), Design("two-group")),
                      (skewed, Design("regression-increment", predictors_added=3,
                                      predictors_total=3)),
                      (fisher, Design("correlation"))):
        assert_allclose(assurance_curve(dens, n, des), assurance_over(dens, n, des), atol=1e-6)
