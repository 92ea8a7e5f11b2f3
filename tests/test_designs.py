"""The registry of designs (pooler.planning.designs): the light list the command line reads agrees
with it, nothing outside it branches on a design's name, the simulated designs are listed
through it, and a design registered here (a one-sample z test with known SD) plans and
reports through pooler.planning.sample_size and pooler.output.report with nothing else changed."""
import dataclasses
import io
import math
import tokenize
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from pooler.planning import designs
from pooler.planning.design_choices import (DESIGN_OPTIONS, DESIGN_PARAMETERS, PLANNED_DESIGNS,
                                            used_by)
from pooler.errors import OptionError
from pooler.planning.sample_size import PlanningEffect, make_plan
from pooler.planning.power import DESIGNS, Design, n_for_power, power_at
from pooler.output.report import plan_text

ROOT = Path(__file__).resolve().parents[1]


def test_light_list_is_the_registry():
    assert PLANNED_DESIGNS == designs.planned_names() == DESIGNS
    for name in PLANNED_DESIGNS:
        assert designs.get(name).parameters == DESIGN_PARAMETERS[name], name
    fields = [f.name for f in dataclasses.fields(Design) if f.name != "name"]
    assert list(DESIGN_OPTIONS) == fields
    used = {p for ps in DESIGN_PARAMETERS.values() for p in ps}
    assert used == set(DESIGN_OPTIONS)   # every option is read by some design


def test_option_help_names_the_designs_that_read_it():
    assert used_by("ratio") == "two-group, ancova"
    assert used_by("fixed_covariates") == "ancova, regression-increment"
    assert used_by("exact_r") == "correlation"


def test_no_design_name_is_branched_on_outside_the_registry():
    """No module but the registry (and the light list) spells a planned design's name as a
    string in its code: units, labels, metrics and descriptions come from the registry."""
    names = {f'"{n}"' for n in PLANNED_DESIGNS} | {f"'{n}'" for n in PLANNED_DESIGNS}
    for mod in ("planning/power", "planning/sample_size", "output/report", "output/document"):
        src = (ROOT / "pooler" / f"{mod}.py").read_text(encoding="utf-8")
        toks = tokenize.generate_tokens(io.StringIO(src).readline)
        found = [t.string for t in toks if t.type == tokenize.STRING and t.string in names]
        # "two-group" stays as the default argument of the public functions
        assert set(found) <= {'"two-group"'}, (mod, found)
    cli = (ROOT / "pooler" / "cli.py").read_text(encoding="utf-8")
    for n in PLANNED_DESIGNS:
        if n != "two-group":   # the --design default
            assert f'"{n}"' not in cli, n


def test_each_entry_says_whether_its_power_is_exact():
    assert "exact" in designs.get("two-group").description
    cor = designs.get("correlation").description
    assert "approximation" in cor and "exact_r=True" in cor
    for name in ("ancova", "regression-increment"):
        text = designs.get(name).description
        assert "exact with normally distributed" in text or "exact with a normally" in text
        assert "fixed_covariates=True" in text


def test_units_follow_the_registry():
    assert [Design(n).unit for n in PLANNED_DESIGNS] == [
        "group", None, None, None, "group", "cell", None]
    assert [Design(n).grouped for n in PLANNED_DESIGNS] == [
        True, False, False, False, True, True, False]
    assert [Design(n).metric for n in PLANNED_DESIGNS] == ["d", "d", "d", "r", "d", "d", "r"]
    # n per unit from a total, rounding down; n2 = ceil(ratio n1)
    assert Design("two-group", ratio=1.5).per_unit(101) == 40
    assert int(Design("two-group", ratio=1.5).n_total(40)) == 100
    assert Design("interaction-2x2").per_unit(103) == 25
    assert Design("correlation").per_unit(103) == 103


def test_registry_refuses_a_name_twice_and_unknown_names():
    with pytest.raises(OptionError, match="already registered"):
        designs.register(designs.get("paired"))
    with pytest.raises(OptionError, match="must be one of two-group, paired"):
        Design("three-group")


def test_simulated_designs_are_listed_with_their_kind():
    from pooler.planning.simdesign import DESIGNS as SIMULATED
    sims = designs.simulated()
    assert [s.name for s in sims] == list(SIMULATED)
    assert all(s.kind == "simulated" and s.description for s in sims)
    assert sims[0].description.startswith("X -> M -> Y")
    assert all(s.factory is SIMULATED[s.name] for s in sims)
    cat = designs.catalogue()
    assert [e.name for e in cat] == list(PLANNED_DESIGNS) + list(SIMULATED)
    assert {e.kind for e in cat[:len(PLANNED_DESIGNS)]} == {"planned"}
    # listing does not make a simulated design plannable by the analytic engine
    with pytest.raises(OptionError):
        Design("simple-mediation")


# ------------------------------------------------------------------ a design added in a test
# One-sample z test of a mean with known SD: z = d √n, two-sided power
# Φ(d √n − z_{1−α/2}) + Φ(−d √n − z_{1−α/2}); the usual start n = (z_{1−α/2} + z_{1−β})² / d²
# (Chow, Shao & Wang 2008, Sample Size Calculations in Clinical Research, 2nd ed., sec. 3.1.1).

def _z_power(des, e, n, alpha, alternative, upper_only):
    from scipy import special as sp
    lam = e * np.sqrt(n)
    if alternative == "two-sided":
        c = sp.ndtri(1 - alpha / 2)
        return sp.ndtr(lam - c) + (0 if upper_only else sp.ndtr(-lam - c))
    return sp.ndtr(lam - sp.ndtri(1 - alpha))


@pytest.fixture
def z_design():
    spec = designs.PlannedDesign(
        name="one-sample-z", metric="d", effect_label="d", unit=None, parameters=(),
        description="one sample, SD known: z test, z = d √n; exact (normal)",
        power=_z_power, normal_start=lambda des, e, z, za: z / e ** 2,
        n_min=lambda des: 1, details=lambda des: "SD known",
        power_basis=lambda des: "the normal distribution of the z statistic (exact)")
    designs.register(spec)
    try:
        yield Design("one-sample-z")
    finally:
        designs.unregister("one-sample-z")
    assert "one-sample-z" not in designs.planned_names()


def test_a_registered_design_plans_and_reports(z_design):
    za, zb = stats.norm.ppf(0.975), stats.norm.ppf(0.8)
    start = (za + zb) ** 2 / 0.5 ** 2          # 31.40 (Chow et al. 2008, eq. 3.1.2)
    assert start == pytest.approx(31.396, abs=1e-3)

    def by_hand(n):
        return stats.norm.cdf(0.5 * math.sqrt(n) - za) + stats.norm.cdf(-0.5 * math.sqrt(n) - za)
    assert by_hand(31) < 0.8 <= by_hand(32)
    assert int(n_for_power(0.5, 0.8, z_design).n) == 32
    assert float(power_at(0.5, 32, z_design)) == pytest.approx(by_hand(32), abs=1e-12)

    plan = make_plan([PlanningEffect("given", 0.5)], z_design, metric="d", powers=(0.8, 0.9),
                     n_total=40)
    row = plan.row("given", 0.8)
    assert (row.n_per_group, row.n_total) == (32, 32)
    # 90 %: (1.95996 + 1.28155)^2 / 0.25 = 42.03 -> 43 (the lower tail adds < 1e-6)
    assert plan.row("given", 0.9).n_total == 43
    f = plan.fixed_n
    assert f.n_per_group == 40 and f.n_total_used == 40
    assert f.power[0][2] == pytest.approx(by_hand(40), abs=1e-12)
    # smallest detectable d at N = 40 and 80 % power solves by_hand(40) at d
    d80 = f.detectable[0][1]
    assert stats.norm.cdf(d80 * math.sqrt(40) - za) + stats.norm.cdf(
        -d80 * math.sqrt(40) - za) == pytest.approx(0.8, abs=1e-9)
    assert plan.to_dict()["design"] == "one-sample-z"

    text = plan_text(plan)
    assert text.splitlines()[0] == "Planning table: one-sample-z (SD known), two-tailed alpha = 0.05"
    assert "N @80%" in text and "n/group" not in text
    assert "With a fixed total N = 40 (40 in all):" in text
