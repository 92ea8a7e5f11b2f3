"""The ``pooler`` command line: parse, call the stages, print. No statistics here.

Every :class:`pooler.errors.PoolerError` becomes one line on stderr and exit code 2
(see :class:`_Group`); nothing else is caught, so a real bug still shows its traceback.
"""
from __future__ import annotations

import json
import sys

import click

from pooler._threads import limit_before_numpy
from pooler.choices import (ADJUSTERS, ANALYSIS_DEFAULTS, ESTIMATORS, INTERVALS, METRICS,
                            MODEL_AVERAGE_OPTIONS, POWERS, AnalysisOptions)
from pooler.planning.design_choices import (DESIGN_OPTIONS, PLANNED_DESIGNS, SIMULATED_DESIGNS,
                                            used_by)
from pooler.errors import OptionError, PoolerError

# One BLAS thread for the whole command (the reason is in pooler/_threads.py); this must run
# before numpy is first imported, which every command does lazily after this point.
limit_before_numpy()


class _Group(click.Group):
    """Turns every PoolerError raised by a command into a clean message and exit 2."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except PoolerError as exc:
            click.echo(f"pooler: error: {_for_the_user(ctx, exc)}", err=True)
            ctx.exit(2)


def _for_the_user(ctx, exc) -> str:
    """The error as the user should read it: library parameter names become the flags of the
    command that ran (``safeguard_level`` -> ``--safeguard``)."""
    cmd = ctx.command.get_command(ctx, ctx.invoked_subcommand or "")
    if not isinstance(exc, OptionError) or cmd is None:
        return str(exc)
    flags = {p.name: max(p.opts, key=len) for p in cmd.params
             if isinstance(p, click.Option) and p.name}
    return exc.naming(flags)


# ------------------------------------------------------------------ option checks
# Each numeric option is checked where it is parsed, so a bad value is a usage error
# (exit 2) naming the flag, before any work is done. The library checks again at its own
# boundaries (OptionError) for Python users.

def _finite(value, param) -> float:
    import math
    if value is not None and not math.isfinite(value):
        raise click.BadParameter(f"{value} is not a number pooler can use; give a finite "
                                 "value", param=param)
    return value


def _fraction(low: float, high: float, *, low_open: bool = True, high_open: bool = True,
              hint: str = "", percent: bool = False):
    """A callback accepting values in the interval (low, high) (ends open or closed), one or
    several. With ``percent``, a value above 1 that fits once divided by 100 is taken
    for a percentage and the message says which fraction to give instead."""
    def inside(x):
        above = low < x if low_open else low <= x
        below = x < high if high_open else x <= high
        return above and below

    def check(ctx, param, value):
        values = value if isinstance(value, tuple) else (value,)
        for v in values:
            if v is None:
                continue
            _finite(v, param)
            if inside(v):
                continue
            lo = ("(" if low_open else "[") + f"{low:g}"
            hi = f"{high:g}" + (")" if high_open else "]")
            if percent and 2 <= v <= 100 and inside(v / 100):
                raise click.BadParameter(f"{v:g} looks like a percentage; give it as a "
                                         f"fraction: use {v / 100:g}", param=param)
            raise click.BadParameter(f"{v:g} is outside {lo}, {hi}"
                                     + (f" ({hint})" if hint else ""), param=param)
        return value
    return check


def _positive(ctx, param, value):
    values = value if isinstance(value, tuple) else (value,)
    for v in values:
        if v is not None and not (_finite(v, param) > 0):
            raise click.BadParameter(f"{v:g} is not allowed; it must be greater than 0",
                                     param=param)
    return value


def _finite_values(ctx, param, value):
    for v in (value if isinstance(value, tuple) else (value,)):
        _finite(v, param)
    return value


_correlation = _fraction(-1, 1, hint="a correlation lies strictly between -1 and 1")


def _allocation(ctx, param, value):
    """--allocation as n1:n2 (e.g. 1:2) or one number n2/n1 -> the ratio n2/n1 (> 0)."""
    import math
    text = str(value).strip()
    parts = [p.strip() for p in text.split(":")]
    try:
        nums = [float(p.replace(",", ".")) for p in parts]
    except ValueError:
        nums = []
    if len(nums) not in (1, 2) or not all(math.isfinite(x) and x > 0 for x in nums):
        raise click.BadParameter(f"{text!r} is not an allocation; give n1:n2 with two "
                                 "positive numbers, e.g. 1:1 or 1:2 (or one number n2/n1)",
                                 param=param)
    return nums[0] if len(nums) == 1 else nums[1] / nums[0]


def _metric_option(f):
    return click.option("--metric", type=click.Choice(list(METRICS)), default=None,
                        help="Common metric: d = Hedges' g, r = Fisher's z of the correlation. "
                             "[default: d; in plan, run and demo: r for the correlation and "
                             "regression-increment designs, d otherwise; a d planned on a "
                             "correlational design (or an r on a group design) is converted, "
                             "and the output says how]")(f)


def _within_r_option(f):
    return click.option("--within-r", type=float, default=ANALYSIS_DEFAULTS["within_r"],
                        show_default=True, callback=_correlation,
                        help="Correlation between repeated measures for within-subject rows "
                             "that do not give one (an assumption, printed).")(f)


def _sample_r_option(f):
    return click.option("--sample-r", type=float, default=ANALYSIS_DEFAULTS["sample_r"],
                        show_default=True, callback=_correlation,
                        help="Assumed correlation between outcomes of rows that share a "
                             "'sample' (they are combined into one effect).")(f)


def _json_option(f):
    return click.option("--json", "as_json", is_flag=True,
                        help="Print the JSON document instead of tables.")(f)


def _conversion_options(f):
    for deco in reversed((_metric_option, _within_r_option, _sample_r_option)):
        f = deco(f)
    return f


def _sheet_argument(f):
    return click.argument("sheet", type=click.Path(dir_okay=False))(f)


def _echo_warnings(items):
    for w in items:
        click.echo(f"pooler: warning: {w}", err=True)


def _print_json(doc: dict) -> None:
    click.echo(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False))


def _load(sheet_path, metric, within_r, sample_r):
    from pooler.evidence.effects import convert
    from pooler.reading.sheet import read_sheet
    sheet = read_sheet(sheet_path)
    return sheet, convert(sheet, metric, within_r=within_r, sample_r=sample_r)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"],
                                           "max_content_width": 100})
@click.version_option(package_name="pooler", prog_name="pooler")
def main():
    """pooler: turn the statistics prior studies reported into a defensible sample size.

    Collect one row per reported result in a sheet (`pooler template sheet.csv` writes a
    starting point); `pooler run` then converts, pools, adjusts for publication bias,
    derives optimistic / realistic / pessimistic planning effects, solves the sample size
    and writes a report. `pooler demo` does it all on an invented literature.

    \b
    Example:
      pooler demo
      pooler template my_literature.csv
      pooler run my_literature.csv --design two-group --out my_plan
      pooler plan --effect 0.3 --design paired
    """


def _seed_and_workers(workers_help: str):
    """--seed and --workers of the simulating commands (stress, paths)."""
    def deco(f):
        f = click.option("--workers", type=click.IntRange(min=1), default=_cpus,
                         show_default="the CPUs this process may use",
                         help=f"{workers_help} (results do not depend on it).")(f)
        return click.option("--seed", type=int, default=2026, show_default=True,
                            help="Random seed.")(f)
    return deco


#: --scheduler of the simulating commands (paths, stress).
_scheduler_option = click.option(
    "--scheduler", default=None, metavar="ADDRESS",
    help="Run the simulation on this dask.distributed scheduler (e.g. tcp://10.0.0.5:8786) "
         "instead of local processes; same results. Needs pooler[cluster]. An address "
         "that cannot be reached within dask's connect timeout (30 s by default) stops "
         "with exit code 2.")


def _figure_file_options(f):
    """--format and --force of the commands that write a figure into an optional --out."""
    f = click.option("--force", is_flag=True,
                     help="Write into --out even if it is not empty and pooler did not write "
                          "it (a folder pooler wrote is replaced by a rerun).")(f)
    return click.option("--format", "fmt", type=click.Choice(["png", "svg", "pdf"]),
                        default="png", show_default=True,
                        help="File format of the figure.")(f)


def _cpus() -> int:
    """The CPUs this process may use (the default number of worker processes)."""
    import os
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on every platform
        return os.cpu_count() or 1


@main.command()
@_sheet_argument
@_conversion_options
@_json_option
def convert(sheet, metric, within_r, sample_r, as_json):
    """Convert every row of SHEET to one metric with its variance.

    Prints one line per sheet row (used or excluded, with the reason or the conversion
    notes), how many independent samples will be pooled, and every assumption made.

    \b
    Example:
      pooler convert demo_literature/break_and_proofreading.csv
      pooler convert my_literature.csv --metric r --json
    """
    from pooler.output.report import effects_text
    s, eff = _load(sheet, metric or ANALYSIS_DEFAULTS["metric"], within_r, sample_r)
    _echo_warnings(eff.warnings)
    if as_json:
        _print_json(eff.to_dict())
    else:
        click.echo(effects_text(eff, s))


def _pooling_options(f):
    f = click.option("--interval", type=click.Choice(list(INTERVALS)),
                     default=ANALYSIS_DEFAULTS["interval"], show_default=True,
                     help="Interval for the mean: Hartung-Knapp-Sidik-Jonkman (t, k-1 df) "
                          "never narrower than Wald's SE (hksj), the same untruncated "
                          "(hksj-plain), or Wald (normal).")(f)
    f = click.option("--estimator", type=click.Choice(list(ESTIMATORS)),
                     default=ANALYSIS_DEFAULTS["estimator"], show_default=True,
                     help="Between-study variance estimator: REML, ML, Paule-Mandel, "
                          "DerSimonian-Laird.")(f)
    return f


def _scenario_options(f):
    f = click.option("--smallest-effect", "sesoi", type=float, default=None,
                     callback=_positive,
                     help="Smallest effect size of interest (d, or r): the pessimistic scenario "
                          "never goes below it, and it is the plan when the literature's "
                          "posterior favours no positive effect. Choose it before looking at "
                          "the literature: the smallest effect that would matter in practice "
                          "or to your theory, or the effect the earlier studies could just "
                          "have detected (Lakens, Scheel & Isager 2018).")(f)
    f = click.option("--safeguard", "safeguard_level", type=float,
                     default=ANALYSIS_DEFAULTS["safeguard_level"], show_default=True,
                     callback=_fraction(0, 1, percent=True, hint="a two-sided level, e.g. 0.6"),
                     help="Two-sided level of the safeguard interval (Perugini et al. 2014) "
                          "of the frequentist rules (--adjuster other than default); the model "
                          "average uses --pessimistic-quantile instead.")(f)
    f = click.option("--adjuster", type=click.Choice(list(ADJUSTERS)),
                     default=ANALYSIS_DEFAULTS["adjuster"], show_default=True,
                     help="How the realistic scenario is chosen: the default Bayesian model "
                          "average over publication-bias models, the earlier safeguard rule, "
                          "the safeguard limit of the median of the adjusters, or one "
                          "adjuster.")(f)
    return f


def _in_range(spec):
    """Callback checking one model-average option against its range in pooler.choices."""
    def check(ctx, param, value):
        if value is not None and not spec.allows(_finite(value, param)):
            raise click.BadParameter(f"{value:g} is outside {spec.range_text()}", param=param)
        return value
    return check


def _model_average_options(f):
    """The priors and the pessimistic quantile of the default rule (pooler.choices)."""
    for spec in reversed(MODEL_AVERAGE_OPTIONS):
        f = click.option(spec.flag, spec.name, type=float, default=spec.default,
                         show_default=True, callback=_in_range(spec), help=spec.help)(f)
    return f


def _analysis_options(f):
    for deco in reversed((_conversion_options, _pooling_options, _scenario_options,
                          _model_average_options)):
        f = deco(f)
    return f


def _check_sesoi(sesoi, metric):
    if sesoi is not None and metric == "r" and not sesoi < 1:
        from pooler.errors import OptionError
        raise OptionError(f"--smallest-effect {sesoi:g} is not a correlation; with the r metric "
                          "the smallest effect of interest must lie below 1")


def _analyse(sheet, metric, within_r, sample_r, estimator, interval, adjuster, safeguard_level,
             sesoi, **model_average):
    from pooler.pipeline import analyse
    _check_sesoi(sesoi, metric)
    a = analyse(sheet, metric=metric, within_r=within_r, sample_r=sample_r, estimator=estimator,
                interval=interval, adjuster=adjuster, safeguard_level=safeguard_level,
                sesoi=sesoi, **model_average)
    _echo_warnings(a.effects.warnings)
    return a


@main.command("pool")
@_sheet_argument
@_analysis_options
@_json_option
def pool_cmd(sheet, metric, within_r, sample_r, estimator, interval, adjuster, safeguard_level,
             sesoi, as_json, **model_average):
    """Pool the studies in SHEET, test for bias, and derive the planning scenarios.

    Prints the random- and common-effect estimates, heterogeneity (tau^2 with its Q-profile
    CI, I^2, H^2, Q), the prediction interval for a new study, study weights, a
    leave-one-out table, cumulative estimates by 'year' and subgroup estimates with the
    Q-between test where the sheet has those columns; then the bias-sensitivity suite
    (Egger, PET-PEESE, trim-and-fill, selection model, WAAP-WLS, selection ratio, excess
    significance), the optimistic / realistic / pessimistic planning effects with their
    bases, and each prior study's power at the realistic effect.

    \b
    Example:
      pooler pool demo_literature/break_and_proofreading.csv
      pooler pool my_literature.csv --estimator pm --interval wald --json
      pooler pool my_literature.csv --smallest-effect 0.2 --adjuster median
    """
    from pooler.output.report import bias_text, pooled_text, scenarios_text
    a = _analyse(sheet, metric or ANALYSIS_DEFAULTS["metric"], within_r, sample_r, estimator,
                 interval, adjuster, safeguard_level, sesoi, **model_average)
    if as_json:
        _print_json(a.pool_document())
    else:
        click.echo(pooled_text(a.pooled, a.effects))
        click.echo("")
        click.echo(bias_text(a.bias, a.audit))
        click.echo("")
        click.echo(scenarios_text(a.scenarios, a.audit))


def _planning_options(f=None, *, simulated: bool = False):
    if f is None:   # @_planning_options(simulated=True): also the simulated designs
        return lambda g: _planning_options(g, simulated=simulated)
    design_help = "The planned study's design."
    if simulated:
        design_help += (" The last four are simulated (" + ", ".join(SIMULATED_DESIGNS)
                        + "): SHEET then needs a 'path' column naming the pair of variables "
                        "each row links, and the run is the same as `pooler paths SHEET`.")
    opts = [
        click.option("--design", type=click.Choice(list(PLANNED_DESIGNS)
                                                   + (list(SIMULATED_DESIGNS) if simulated
                                                      else [])),
                     default="two-group", show_default=True, help=design_help),
        click.option("--alpha", type=float, default=0.05, show_default=True,
                     callback=_fraction(0, 0.5, percent=True,
                                        hint="the significance level, e.g. 0.05"),
                     help="Significance level."),
        click.option("--one-sided", "tails", flag_value=1, default=2, type=int,
                     help="Test in the hypothesised direction only (one-tailed). Without it "
                          "the test is two-tailed."),
        click.option("--power", "powers", type=float, multiple=True,
                     callback=_fraction(0, 1, percent=True,
                                        hint="a target power such as 0.8; 1 would need an "
                                             "infinite sample"),
                     help="Target power; repeat for several.  [default: 0.8 0.9 0.95]"),
        click.option("--attrition", type=float, default=0.0, show_default=True,
                     callback=_fraction(0, 1, low_open=False, percent=True,
                                        hint="the fraction expected to be lost, e.g. 0.1"),
                     help="Expected fraction of participants lost; totals to recruit are "
                          "inflated to n / (1 - attrition)."),
        click.option("--n", "n_total", type=click.IntRange(min=1), default=None,
                     help="A fixed feasible total N, counted as people analysed (after "
                          "attrition): adds power under each scenario and the smallest "
                          "detectable effect."),
        click.option("--allocation", "ratio", type=str, metavar="N1:N2", default="1:1",
                     show_default=True,
                     callback=_allocation,
                     help=f"{used_by('ratio')}: how participants are split between the two "
                          "groups, as n1:n2 (1:2 puts twice as many in the second group) or "
                          "one number n2/n1; the second group is rounded up to whole people."),
        click.option("--planned-r", type=float, default=0.5, show_default=True,
                     callback=_correlation,
                     help=f"{used_by('planned_r')}: planned correlation between the repeated "
                          "measures (d_z = d / sqrt(2(1 - r)); at 0.5, d_z = d)."),
        click.option("--covariate-r", type=float, default=0.5, show_default=True,
                     callback=_correlation,
                     help=f"{used_by('covariate_r')}: correlation between covariate (pre-test) "
                          "and outcome."),
        click.option("--attenuation", type=float, default=0.5, show_default=True,
                     callback=_fraction(0, 2, high_open=False,
                                        hint="1 = the effect vanishes, 2 = full crossover"),
                     help=f"{used_by('attenuation')}: share of the simple effect that disappears "
                          "at the other moderator level (1 = vanishes, 2 = full crossover)."),
        click.option("--predictors-added", type=click.IntRange(min=1), default=1,
                     show_default=True, help=f"{used_by('predictors_added')}: predictors tested."),
        click.option("--predictors-total", type=click.IntRange(min=1), default=None,
                     help=f"{used_by('predictors_total')}: predictors in the full model "
                          "[default: the added ones]."),
        click.option("--exact-r", is_flag=True,
                     help=f"{used_by('exact_r')}: use the exact distribution of r, not "
                          "Fisher's z."),
        click.option("--fixed-covariates", is_flag=True,
                     help=f"{used_by('fixed_covariates')}: hold the covariate / predictor values "
                          "fixed (right when the design sets them) instead of averaging the "
                          "power over normally distributed ones; for sampled values this "
                          "overstates the power slightly."),
    ]
    for o in reversed(opts):
        f = o(f)
    return f


# the planned designs' names, from the light list so that --help need not import numpy
# (tests/test_designs.py checks it against the registry, pooler.planning.designs)
_DESIGNS = PLANNED_DESIGNS


def _planning_metric(metric, design):
    """--metric as given; when not given, the design's own metric (r for the correlational
    designs, d otherwise). A metric that differs from the design's is converted by
    pooler.planning.sample_size, which says so in the plan's notes."""
    if metric is not None:
        return metric
    from pooler.planning.sample_size import design_metric
    return design_metric(design)


def _make_design(design, options):
    """The Design from --design and the design options (a mapping holding every name of
    pooler.planning.design_choices.DESIGN_OPTIONS, as click passes them)."""
    from pooler.errors import OptionError
    opts = {k: options[k] for k in DESIGN_OPTIONS}
    added, total = opts["predictors_added"], opts["predictors_total"]
    if total is not None and total < added:
        raise OptionError(f"--predictors-total {total} is smaller than "
                          f"--predictors-added {added}; the full model contains the "
                          "added predictors")
    opts["predictors_total"] = total or added
    from pooler.planning.power import Design
    return Design(design, **opts)


@main.command()
@click.argument("sheet", type=click.Path(dir_okay=False), required=False)
@click.option("--effect", "effects", type=float, multiple=True, callback=_finite_values,
              help="Planning effect (d; r with --metric r, the default for the correlation "
                   "and regression-increment designs); repeat for several. "
                   "Use instead of SHEET.")
@click.option("--effect-sd", type=float, default=None, callback=_positive,
              help="With --effect: SD of the predictive distribution of the true effect "
                   "(sqrt(SE^2 + tau^2)); adds the n for a target assurance, centred on the "
                   "first --effect.")
@_analysis_options
@_planning_options
@click.option("--table", "table_format", type=click.Choice(["text", "csv", "markdown"]),
              default="text", show_default=True,
              help="How to print the planning table (csv: one row per scenario x power).")
@_json_option
def plan(sheet, effects, effect_sd, metric, within_r, sample_r, estimator, interval, adjuster,
         safeguard_level, sesoi, design, alpha, tails, powers, attrition, n_total, table_format,
         as_json, **design_options):
    """Sample size for a planned study, from a SHEET of prior results or a given effect.

    From SHEET: the optimistic, realistic and pessimistic planning effects (as in
    `pooler pool`) and the n for a target assurance over the predictive distribution of
    the true effect. From --effect: that effect alone. Prints the smallest n reaching each
    target power (noncentral t and F; the covariate of ancova and the predictors of
    regression-increment are averaged over, unless --fixed-covariates); with --n, the power
    a fixed total N gives and the smallest effect it can detect.

    \b
    Example:
      pooler plan --effect 0.3 --design two-group
      pooler plan --effect 0.35 --effect 0.2 --design paired --planned-r 0.6 --attrition 0.1
      pooler plan --effect 0.25 --design correlation --n 250
      pooler plan demo_literature/break_and_proofreading.csv --design paired --n 120
    """
    import math
    from pooler.errors import OptionError
    from pooler.planning.sample_size import PlanningEffect, make_plan
    from pooler.output.report import plan_text
    model_average = {o.name: design_options.pop(o.name) for o in MODEL_AVERAGE_OPTIONS}
    des = _make_design(design, design_options)
    analysis = None
    if sheet and effects:
        raise OptionError("give either SHEET or --effect, not both")
    if sheet and effect_sd is not None:
        raise OptionError("--effect-sd goes with --effect; from a SHEET the predictive "
                          "distribution comes from the pooled literature")
    metric = _planning_metric(metric, design)
    if sheet:
        analysis = _analyse(sheet, metric, within_r, sample_r, estimator, interval, adjuster,
                            safeguard_level, sesoi, **model_average)
        sc = analysis.scenarios
        scen = sc.planning_effects()
        predictive = sc.assurance_density()
        pmetric = sc.planning_metric
        label = "g" if pmetric == "d" else "r"
    elif effects:
        pmetric = metric
        bad = [e for e in effects if pmetric == "r" and not -1 < e < 1]
        if bad:
            own = des.metric == "r"
            why = (f"on the r metric, the default of the {design} design," if own
                   else "with --metric r")
            raise OptionError(f"--effect {bad[0]:g} is not a correlation ({why} a planning "
                              "effect lies strictly between -1 and 1)"
                              + ("; for a standardised mean difference give --metric d"
                                 if own else ""))
        names = ["given"] if len(effects) == 1 else [f"given {i + 1}" for i in range(len(effects))]
        scen = [PlanningEffect(nm, e) for nm, e in zip(names, effects)]
        predictive = None
        if effect_sd is not None:
            predictive = (math.atanh(effects[0]) if pmetric == "r" else effects[0], effect_sd)
        label = pmetric
    else:
        raise OptionError("give a SHEET of prior results or a planning --effect")
    p = make_plan(scen, des, metric=pmetric, alpha=alpha, tails=tails,
                  powers=powers or POWERS, attrition=attrition, predictive=predictive,
                  n_total=n_total, effect_label=label)
    if as_json:
        _print_json(p.to_dict())
    elif table_format != "text":
        from pooler.output.report import plan_csv, plan_markdown
        click.echo(plan_csv(p) if table_format == "csv" else plan_markdown(p), nl=False)
        if table_format == "markdown":
            click.echo("")
    else:
        if analysis is not None:
            from pooler.output.report import scenarios_text
            click.echo(scenarios_text(analysis.scenarios))
            click.echo("")
        click.echo(plan_text(p))


def _simulation_options(f):
    """The options of the simulated designs that `pooler paths` and `pooler run` share."""
    opts = [
        click.option("--pair", "pair_values", multiple=True, metavar="PAIR=R",
                     help="With a SHEET: the correlation of a pair that has no rows, e.g. "
                          "--pair X-M2=0.2 (any pair of the model; repeatable; used in every "
                          "scenario)."),
        click.option("--xz-r", type=float, default=0.0, show_default=True,
                     help="Moderation: correlation of X and Z (with a SHEET: when X-Z has "
                          "no rows)."),
        click.option("--binary-moderator", is_flag=True,
                     help="Moderation: Z is two equal groups instead of a continuous score."),
        click.option("--test", "test_name", default=None,
                     type=click.Choice(["joint", "monte-carlo", "bootstrap", "sobel"]),
                     help="Test of the indirect effects [default: monte-carlo]; sobel only "
                          "for comparison (low-powered)."),
        click.option("--reps", type=click.IntRange(min=1), default=None,
                     help="Replications per simulated n [default: 1,000 for the search, "
                          "2,000 at --n; a fifth of that for the bootstrap]."),
        click.option("--draws", type=click.IntRange(min=100), default=1000, show_default=True,
                     help="Monte Carlo draws per replication (monte-carlo test)."),
        click.option("--resamples", type=click.IntRange(min=100), default=1000,
                     show_default=True,
                     help="Bootstrap resamples per replication (bootstrap test)."),
        _seed_and_workers("Local processes for the simulation"),
        _scheduler_option,
    ]
    for o in reversed(opts):
        f = o(f)
    return f


#: The parameters _simulation_options declares.
_SIMULATION_PARAMS = ("pair_values", "xz_r", "binary_moderator", "test_name", "reps", "draws",
                      "resamples", "seed", "workers", "scheduler")


def _output_options(f):
    f = click.option("--force", is_flag=True,
                     help="Write into --out even if it is not empty and pooler did not "
                          "write it (a folder pooler wrote is replaced by a rerun).")(f)
    f = click.option("--format", "fmt", type=click.Choice(["png", "svg", "pdf"]),
                     default="png", show_default=True, help="File format of the figures.")(f)
    f = click.option("--out", "out_dir", type=click.Path(file_okay=False), default="pooler_out",
                     show_default=True, help="Folder for the report, figures and tables.")(f)
    return f


def _progress():
    """Progress messages on stderr, only when stderr is a terminal."""
    if sys.stderr.isatty():
        return lambda msg: click.echo(f"pooler: {msg}...", err=True)
    return None


def _command_line(ctx, sheet_label) -> str:
    """The command that reproduces this run: the options that differ from their defaults."""
    import shlex
    parts = ["pooler", ctx.info_name] + ([sheet_label] if sheet_label else [])
    for param in ctx.command.params:
        if param.name in ("sheet", "out_dir", "force", "as_json") or not param.opts:
            continue
        value = ctx.params.get(param.name)
        default = param.get_default(ctx)
        if param.callback is not None and isinstance(default, str):
            default = param.callback(ctx, param, default)  # e.g. --allocation "1:1" -> 1.0
        if value == default or value in (None, (), False):
            continue
        flag = param.opts[0]
        if getattr(param, "is_flag", False):
            parts.append(flag)
        elif isinstance(value, tuple):
            for v in value:
                parts += [flag, str(v)]
        else:
            parts += [flag, str(value)]
    return shlex.join(parts)


def _whole_job(ctx, sheet, sheet_label, params):
    from pooler.output.outputs import render, write
    from pooler.pipeline import run
    from pooler.output.report import run_summary_text
    p = dict(params)
    des = _make_design(p["design"], p)
    metric = _planning_metric(p["metric"], p["design"])
    _check_sesoi(p["sesoi"], metric)
    analysis_options = AnalysisOptions(
        **{k: p[k] for k in ANALYSIS_DEFAULTS if k != "metric"}, metric=metric)
    plan_options = {"alpha": p["alpha"], "tails": p["tails"],
                    "powers": tuple(p["powers"] or POWERS),
                    "attrition": p["attrition"], "n_total": p["n_total"]}
    from pooler.output.outputs import check_out
    out = check_out(p["out_dir"], p["force"])   # before the work, so a refusal costs nothing
    result = run(sheet, design=des, analysis_options=analysis_options,
                 plan_options=plan_options, command=_command_line(ctx, sheet_label),
                 progress=_progress())
    _echo_warnings(result.analysis.effects.warnings)
    files = render(result, p["fmt"])
    paths = write(files, out, force=p["force"])
    if p["as_json"]:
        _print_json(result.to_dict())
    else:
        click.echo(run_summary_text(result, paths))


@main.command("run")
@_sheet_argument
@_analysis_options
@_planning_options(simulated=True)
@_output_options
@_json_option
@_simulation_options
@click.pass_context
def run_cmd(ctx, sheet, **params):
    """The whole job on SHEET: convert, pool, adjust for bias, plan, plot and report.

    Prints a compact summary (pooled estimate and heterogeneity, the bias table, the three
    planning scenarios with their bases, the planning table, the fixed-N view with --n) and
    writes into --out: report.md, report.html (self-contained), results.json,
    planning_table.csv, effects.csv and four figures (forest, funnel, ladder, power).

    With a simulated design (simple-mediation, parallel-mediation, serial-mediation,
    moderation) SHEET has a 'path' column; each pair is pooled from its own rows and each
    scenario's n is found by simulation, exactly as `pooler paths SHEET` does: the planning
    table of every indirect effect (or the interaction), a power curve per scenario and a
    path diagram. The simulation options (--test, --reps, --pair, ...) apply to these
    designs only.

    \b
    Example:
      pooler run my_literature.csv --design two-group --out my_plan
      pooler run my_literature.csv --design paired --planned-r 0.6 --n 120 --format svg
      pooler run demo_literature/garden_paths.csv --design parallel-mediation --test joint
    """
    if params["design"] in SIMULATED_DESIGNS:
        _simulated_run(ctx, sheet, params)
        return
    _refuse_given(ctx, _SIMULATION_PARAMS, "for the simulated designs only "
                  f"({', '.join(SIMULATED_DESIGNS)}), not {params['design']}")
    _whole_job(ctx, sheet, sheet, params)


#: The parameters of `pooler run` a simulated design reads (the others are refused).
_SIMULATED_RUN_PARAMS = ("sheet", "design", "estimator", "interval", "adjuster",
                         "safeguard_level", "sample_r", "alpha", "powers", "n_total", "out_dir",
                         "fmt", "force", "as_json")


def _refuse_given(ctx, names, why: str, *, keep: bool = False) -> None:
    """An OptionError naming the options the user gave (on the command line or from the
    environment) among ``names`` (or, with keep=True, outside them): "FLAGS: why"."""
    from click.core import ParameterSource
    from pooler.errors import OptionError
    given = [p for p in ctx.command.params
             if p.opts and (p.name in names) != keep
             and ctx.get_parameter_source(p.name) in (ParameterSource.COMMANDLINE,
                                                      ParameterSource.ENVIRONMENT)]
    if given:
        raise OptionError(", ".join(max(p.opts, key=len) for p in given) + ": " + why)


def _simulated_run(ctx, sheet, p):
    """`pooler run SHEET --design <simulated>`: the same job as `pooler paths SHEET`."""
    from pooler.errors import OptionError
    design = p["design"]
    if p["metric"] not in (None, "r"):
        raise OptionError(f"--metric {p['metric']}: the paths of {design} are pooled as "
                          "correlations (r); leave --metric out")
    _refuse_given(ctx, _SIMULATED_RUN_PARAMS + _SIMULATION_PARAMS + ("metric",),
                  f"not used by the simulated design {design} (its paths are pooled as "
                  "correlations and its n is found by simulation, two-sided)", keep=True)
    if design != "moderation" and (p["xz_r"] or p["binary_moderator"]):
        raise OptionError("--xz-r and --binary-moderator apply to moderation only")
    given, names = {}, {}
    if p["xz_r"]:
        given["X-Z"], names["X-Z"] = p["xz_r"], "--xz-r (r of X and Z)"
    for key, (r, how) in _pair_values(p["pair_values"], given).items():
        given[key], names[key] = r, how
    from pooler.output.outputs import check_out
    check_out(p["out_dir"], p["force"])
    from pooler.pathsjob import paths_job
    job = paths_job(design, sheet=sheet, given=given, option_names=names,
                    settings={"binary_moderator": p["binary_moderator"]}, test=p["test_name"],
                    fixed_n=p["n_total"], powers=p["powers"], alpha=p["alpha"], reps=p["reps"],
                    draws=p["draws"], resamples=p["resamples"], seed=p["seed"],
                    workers=p["workers"], scheduler=p["scheduler"],
                    progress=_simulation_bar(), estimator=p["estimator"],
                    interval=p["interval"], adjuster=p["adjuster"],
                    safeguard_level=p["safeguard_level"], sample_r=p["sample_r"],
                    option_hints=False, command=_command_line(ctx, sheet))
    _echo_paths_job(job, p["out_dir"], p["fmt"], p["force"], p["as_json"])


@main.command("demo")
@_analysis_options
@_planning_options
@_output_options
@_json_option
@click.pass_context
def demo_cmd(ctx, **params):
    """The whole job on the bundled, invented demo literature.

    Same as `pooler run` on demo_literature/break_and_proofreading.csv (25 invented reports
    on whether a short movement break improves proofreading accuracy).

    \b
    Example:
      pooler demo
      pooler demo --design paired --out demo_plan --force
    """
    from pooler.demo import demo_sheet_path
    _whole_job(ctx, demo_sheet_path(), None, params)


@main.command()
@click.argument("sheet", type=click.Path(dir_okay=False), required=False)
@click.option("--calibration", is_flag=True,
              help="Run the general calibration grid (k 5/10/20/40, delta 0.1/0.2/0.4, tau "
                   "0/0.1/0.2, pi 1/0.2/0.05; two-group studies of 10-60 per group and a "
                   "quarter paired studies of 10-60) instead of a grid around SHEET.")
@click.option("--reps", type=click.IntRange(min=1), default=60, show_default=True,
              help="Simulated literatures per grid cell.")
@_seed_and_workers("Processes to spread the work over")
@_scheduler_option
@click.option("--power", "target", type=float, default=0.8, show_default=True,
              callback=_fraction(0, 1, percent=True, hint="a target power such as 0.8"),
              help="Target power the planning rules are asked for.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Folder for stress.json and the figure stress.<format> (with "
                   "--calibration also the trade-off figure tradeoff.<format>).")
@_figure_file_options
@_conversion_options
@_model_average_options
@_json_option
def stress(sheet, calibration, reps, seed, workers, scheduler, target, out_dir, fmt, force,
           metric, within_r, sample_r, as_json, **model_average):
    """Stress-test the planning rules on literatures simulated like SHEET.

    Simulates literatures with the same number of studies and the same designs and sample
    sizes as SHEET, over a small grid around its realistic effect (delta = 0.5, 1 and 1.5
    times it) and three strengths of publication selection (non-significant results
    published with probability pi = 1, 0.2, 0.05). Each runs the real pipeline; the table
    shows the true power that the n recommended at --power by each rule would reach, and
    each estimator's bias and RMSE. The model-average options (priors, pessimistic quantile)
    set the rule under test.

    With --calibration it also prints the trade-off table of the model-average rule: every
    literature is fitted once and the rule re-weighted to other prior probabilities of no
    bias (0.5, 0.35, 0.2, 0.1) and posterior quantiles (0.1 to 0.5), giving the protection
    under strong selection against the cost without selection (n over the n the true
    effect needs) for each.

    \b
    Example:
      pooler stress demo_literature/break_and_proofreading.csv
      pooler stress my_literature.csv --reps 200 --out stress_results
      pooler stress --calibration --reps 200 --out calibration
      pooler stress --calibration --scheduler tcp://10.0.0.5:8786 --out calibration
    """
    from pooler.errors import OptionError
    from pooler.output.report import stress_text
    from pooler.planning.simulate import (Shapes, calibration_grid, grid_around, grid_note,
                                          stress_test)
    if calibration == bool(sheet):
        raise OptionError("give a SHEET, or --calibration for the general grid (not both)")
    if out_dir:
        from pooler.output.outputs import check_out
        check_out(out_dir, force)
    note = None
    if calibration:
        cells, shapes = calibration_grid(), Shapes.calibration()
    else:
        d = ANALYSIS_DEFAULTS
        a = _analyse(sheet, metric or d["metric"], within_r, sample_r, d["estimator"],
                     d["interval"], d["adjuster"], d["safeguard_level"], d["sesoi"],
                     **model_average)
        cells, shapes = grid_around(a), Shapes.from_effects(a.effects)
        note = grid_note(a)
    bar = None
    if sys.stderr.isatty():
        def bar(done, total):
            filled = int(30 * done / total)
            click.echo(f"\rsimulating [{'#' * filled}{'.' * (30 - filled)}] {done}/{total}",
                       err=True, nl=done == total)
    res = stress_test(cells, shapes, reps=reps, seed=seed, workers=workers, power=target,
                      progress=bar, rule_options=model_average, scheduler=scheduler)
    doc = res.to_dict()
    trade = None
    if calibration:
        from pooler.planning.tradeoff import tradeoff_table, tradeoff_text
        trade = tradeoff_table(doc)
        doc["tradeoff"] = trade.to_dict()
    if out_dir:
        import json as _json
        from pooler.output import plots
        from pooler.output.outputs import write
        import io
        figs = {"stress": plots.stress_plot(res)}
        if trade is not None:
            from pooler.planning.tradeoff import tradeoff_plot
            figs["tradeoff"] = tradeoff_plot(trade)
        files = {"stress.json": (_json.dumps(doc, indent=2, allow_nan=False) + "\n").encode()}
        for name, fig in figs.items():
            buf = io.BytesIO()
            plots.save(fig, buf, fmt)
            files[f"{name}.{fmt}"] = buf.getvalue()
        paths = write(files, out_dir, force=force)
    if as_json:
        _print_json(doc)
    else:
        if note:
            click.echo(note + "\n")
        click.echo(stress_text(res))
        if trade is not None:
            click.echo("\n" + tradeoff_text(trade))
        if out_dir:
            click.echo(f"\nWritten to {out_dir}/: " + ", ".join(p.name for p in paths))


@main.command()
@click.argument("path", type=click.Path(dir_okay=False))
@click.option("--force", is_flag=True, help="Overwrite PATH if it exists.")
def template(path, force):
    """Write a starting sheet to PATH (.csv, .tsv or .xlsx) with a column guide.

    The sheet has one invented example row per kind of reported statistic; replace them
    with your literature.

    \b
    Example:
      pooler template my_literature.xlsx
    """
    from pathlib import Path
    from pooler.errors import OptionError
    from pooler.reading.template import write_template
    if Path(path).exists() and not force:
        raise OptionError(f"{path} exists; choose another name or add --force")
    for p in write_template(path):
        click.echo(f"wrote {p}")


# ---- pooler paths: simulated power for mediation and moderation (pooler.planning.simdesign) ----------


@main.command("paths")
@click.argument("sheet", required=False, type=click.Path(dir_okay=False))
@click.option("--design", "design_name", required=True,
              type=click.Choice(list(SIMULATED_DESIGNS)),
              help="The path model to plan for.")
@click.option("--a", "a_paths", type=float, multiple=True,
              help="Standardized path from X to a mediator; repeat once per mediator "
                   "(serial: X-M1, then optionally X-M2).")
@click.option("--b", "b_paths", type=float, multiple=True,
              help="Standardized path from a mediator to Y; repeat once per mediator "
                   "(serial: M1-Y, then M2-Y).")
@click.option("--direct", type=float, default=None,
              help="Direct path X-Y (mediation), controlling for the mediators [default: 0].")
@click.option("--m1-m2", type=float, default=None,
              help="Serial mediation: the path from M1 to M2.")
@click.option("--mediator-r", type=float, default=0.0, show_default=True,
              help="Parallel mediation: correlation of the mediators' residuals.")
@click.option("--x-effect", type=float, default=None,
              help="Moderation: effect of X on Y at the mean of Z.")
@click.option("--z-effect", type=float, default=None,
              help="Moderation: effect of the moderator Z on Y [default: 0].")
@click.option("--interaction", type=float, default=None,
              help="Moderation: coefficient of the product of standardized X and Z.")
@click.option("--slope-high", type=float, default=None,
              help="Moderation, instead of --x-effect/--interaction: effect of X at +1 SD "
                   "of Z (binary: in the group coded +1).")
@click.option("--slope-low", type=float, default=None,
              help="Moderation: effect of X at -1 SD of Z (with --slope-high).")
@click.option("--x-reliability", type=float, default=1.0, show_default=True,
              help="Moderation: reliability of the measure of X.")
@click.option("--z-reliability", type=float, default=1.0, show_default=True,
              help="Moderation: reliability of the measure of Z.")
@click.option("--paths-file", type=click.Path(dir_okay=False), default=None,
              help="CSV with columns scenario, path, value (paths named like X-M1, M1-Y, "
                   "X-Y, M1-M2, XZ-Y): one plan per scenario; paths the file lacks are "
                   "taken from the options.")
@click.option("--correlations", "as_correlations", is_flag=True,
              help="The values in --paths-file are correlations between the named variables "
                   "(X-M1, M1-Y, X-Y, M1-M2, ...; every pair), e.g. pooled from literatures; "
                   "the paths are the standardized coefficients they imply. Mediation only.")
@click.option("--n", "fixed_n", type=click.IntRange(min=5), default=None,
              help="Simulate power at this total n instead of searching for n.")
@click.option("--power", "powers", type=float, multiple=True,
              help="Target power; repeatable [default: 0.8 0.9 0.95].")
@click.option("--alpha", type=float, default=0.05, show_default=True,
              help="Two-sided significance level.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Folder for results.json, report.md, report.html and the figures (a "
                   "power curve per scenario; from a SHEET, the path diagram; none with --n).")
@click.option("--stress", is_flag=True,
              help="With a SHEET: instead of planning, simulate literatures like the sheet's "
                   "from its realistic correlations (with and without selection for "
                   "significance), plan each through the same route, and report how often "
                   "each scenario planned an effect no larger than the true one.")
@click.option("--literatures", type=click.IntRange(min=1), default=40, show_default=True,
              help="With --stress: literatures simulated per selection level.")
@_figure_file_options
@_json_option
@_simulation_options
@click.pass_context
def paths_cmd(ctx, sheet, design_name, a_paths, b_paths, direct, m1_m2, mediator_r, x_effect,
              z_effect, interaction, slope_high, slope_low, xz_r, x_reliability, z_reliability,
              binary_moderator, paths_file, as_correlations, pair_values, test_name, fixed_n,
              powers, alpha, reps, draws, resamples, seed, workers, scheduler, out_dir, fmt,
              force, as_json, stress, literatures):
    """Sample size (or power) for mediation and moderation, by simulation.

    Give the standardized paths as options, or several scenarios of them in
    --paths-file, or a SHEET of reported results with a 'path' column naming the pair of
    variables each row links (X-M1, M1-Y, X-Y, M1-M2, ...): each pair is then pooled from its
    own rows, its optimistic / realistic / pessimistic correlations form one correlation
    matrix per scenario, and each scenario is planned on the standardized paths that matrix
    implies. With a SHEET, --a, --b, --direct and --m1-m2 give the correlation of a pair
    that has no literature (X-Mi, Mi-Y, X-Y, M1-M2), the same in every scenario; --pair
    gives any pair. A moderation SHEET names X-Y, Z-Y, X-Z and the interaction XZ-Y (the t
    of the interaction coefficient, read as its partial correlation), or the simple slopes
    'X-Y at high Z' and 'X-Y at low Z'. `pooler run SHEET --design ...` does the same.
    --stress checks the SHEET route on literatures simulated like the sheet's.

    The table shows, for each indirect effect (and for the total and for "all indirect
    effects significant" with several mediators), the n that reaches each target power, a
    95 % Monte Carlo interval for that n, and the power confirmed at n with its Monte Carlo
    SE. Moderation plans for the interaction.

    \b
    Example:
      pooler paths --design simple-mediation --a 0.3 --b 0.3 --test joint
      pooler paths --design parallel-mediation --a 0.3 --a 0.25 --b 0.3 --b 0.2 \\
          --direct 0.1 --out two_mediators
      pooler paths --design serial-mediation --a 0.4 --m1-m2 0.3 --b 0.1 --b 0.3
      pooler paths --design moderation --slope-high 0.375 --slope-low 0.225 \\
          --z-effect 0.3 --x-reliability 0.8 --z-reliability 0.8
      pooler paths --design parallel-mediation --paths-file my_paths.csv --direct 0.1
      pooler paths demo_literature/garden_paths.csv --design parallel-mediation --out garden
      pooler paths demo_literature/practice_feedback_moderation.csv --design moderation
    """
    from pooler.errors import OptionError
    mediation_opts = {"--a": a_paths, "--b": b_paths, "--m1-m2": m1_m2}
    moderation_opts = {"--x-effect": x_effect, "--interaction": interaction,
                       "--slope-high": slope_high, "--slope-low": slope_low}
    settings: dict = {}
    if design_name == "moderation":
        used = [k for k, v in mediation_opts.items() if v] + (["--test"] if test_name else [])
        if used:
            raise OptionError(f"{', '.join(used)} does not apply to moderation")
        if (slope_high is None) != (slope_low is None):
            raise OptionError("give both --slope-high and --slope-low")
        if slope_high is not None:
            if x_effect is not None or interaction is not None:
                raise OptionError("give either --slope-high/--slope-low or "
                                  "--x-effect/--interaction, not both")
            x_effect, interaction = (slope_high + slope_low) / 2, (slope_high - slope_low) / 2
        given = {"X-Y": x_effect, "Z-Y": z_effect, "XZ-Y": interaction}
        settings = dict(xz_r=xz_r, x_reliability=x_reliability, z_reliability=z_reliability,
                        binary_moderator=binary_moderator)
    else:
        used = [k for k, v in moderation_opts.items() if v is not None]
        if used:
            raise OptionError(f"{', '.join(used)} applies to moderation only")
        a_, b_ = list(a_paths), list(b_paths)
        if design_name == "simple-mediation":
            if len(a_) > 1 or len(b_) > 1:
                raise OptionError("simple mediation takes one --a and one --b")
            given = {"X-M": a_[0] if a_ else None, "M-Y": b_[0] if b_ else None}
        elif design_name == "parallel-mediation":
            if len(a_) != len(b_):
                raise OptionError("give --a and --b once per mediator (as many --a as --b)")
            given = {f"X-M{i}": v for i, v in enumerate(a_, start=1)}
            given.update({f"M{i}-Y": v for i, v in enumerate(b_, start=1)})
            settings = dict(mediator_r=mediator_r)
        else:
            if len(a_) > 2 or len(b_) not in (0, 2):
                raise OptionError("serial mediation takes --a once (X-M1) or twice (X-M1, "
                                  "X-M2) and --b twice (M1-Y, then M2-Y; 0 if absent)")
            given = {"X-M1": a_[0] if a_ else None, "X-M2": a_[1] if len(a_) == 2 else None,
                     "M1-M2": m1_m2, "M1-Y": b_[0] if b_ else None,
                     "M2-Y": b_[1] if b_ else None}
        given["X-Y"] = direct
    given = {k: v for k, v in given.items() if v is not None}
    hints = {"X-M": "--a", "M-Y": "--b", "X-M1": "--a", "M1-M2": "--m1-m2",
             "M2-Y": "--b twice: M1-Y, then M2-Y",
             "X-Y": "--x-effect, or --slope-high and --slope-low",
             "XZ-Y": "--interaction, or --slope-high and --slope-low"}
    if pair_values and not sheet:
        raise OptionError("--pair gives a pair's correlation for a SHEET of path literatures; "
                          "without one, give the paths with --a, --b, --direct, ...")
    names: dict = {}
    if sheet:
        if design_name == "moderation":
            used = [k for k, v in moderation_opts.items() if v is not None]
            if used or z_effect is not None:
                raise OptionError(f"{', '.join(used or ['--z-effect'])}: with a SHEET the "
                                  "moderation's pairs come from its rows; give a pair without "
                                  "rows with --pair (e.g. --pair Z-Y=0.1)")
            given = {}
            if xz_r:
                given["X-Z"], names["X-Z"] = xz_r, "--xz-r (r of X and Z)"
        else:
            given, names = _mediation_pairs(design_name, a_paths, b_paths, direct, m1_m2)
        for key, (r, how) in _pair_values(pair_values, given).items():
            given[key], names[key] = r, how
    elif paths_file and as_correlations:
        extra = [k for k, v in {**mediation_opts, "--direct": direct,
                                "--mediator-r": mediator_r or None}.items() if v]
        if design_name == "moderation":
            raise OptionError("--correlations applies to the mediation designs only")
        if extra:
            raise OptionError(f"with --correlations every path comes from the correlations; "
                              f"drop {', '.join(extra)}")
    if stress and not sheet:
        raise OptionError("--stress checks the planning of a SHEET of path literatures; give "
                          "one")
    if out_dir:
        from pooler.output.outputs import check_out
        check_out(out_dir, force)
    if stress:
        from pooler.pathsjob import paths_stress
        res = paths_stress(design_name, sheet, given=given, option_names=names,
                           settings=settings, literatures=literatures, seed=seed,
                           workers=workers, scheduler=scheduler, progress=_simulation_bar())
        if out_dir:
            from pooler.output.outputs import write
            from pooler.output.pathsreport import render_stress_check
            write(render_stress_check(res), out_dir, force=force)
        if as_json:
            _print_json(res.to_dict())
        else:
            click.echo(res.text(), nl=False)
        return
    from pooler.pathsjob import paths_job
    job = paths_job(design_name, sheet=sheet or None, given=given, option_names=names,
                    paths_file=paths_file, as_correlations=as_correlations, settings=settings,
                    hints=hints, test=test_name, fixed_n=fixed_n, powers=powers, alpha=alpha,
                    reps=reps, draws=draws, resamples=resamples, seed=seed, workers=workers,
                    scheduler=scheduler, progress=_simulation_bar(),
                    command=_command_line(ctx, sheet))
    _echo_paths_job(job, out_dir, fmt, force, as_json)


def _mediation_pairs(design_name, a_paths, b_paths, direct, m1_m2):
    """With a SHEET, --a, --b, --direct and --m1-m2 give the correlations of mediation pairs
    without rows: pair -> value and pair -> how it was given."""
    from pooler.errors import OptionError
    pairs, names = {}, {}
    a_, b_ = list(a_paths), list(b_paths)
    if design_name == "simple-mediation":
        if len(a_) > 1 or len(b_) > 1:
            raise OptionError("simple mediation takes one --a and one --b")
        med = ["M"]
    else:
        med = [f"M{i}" for i in range(1, max(len(a_), len(b_), 2) + 1)]
    for i, v in enumerate(a_):
        pairs[f"X-{med[i]}"], names[f"X-{med[i]}"] = v, f"--a #{i + 1} (r of X and {med[i]})"
    for i, v in enumerate(b_):
        pairs[f"{med[i]}-Y"], names[f"{med[i]}-Y"] = v, f"--b #{i + 1} (r of {med[i]} and Y)"
    if direct is not None:
        pairs["X-Y"], names["X-Y"] = direct, "--direct (r of X and Y)"
    if m1_m2 is not None:
        pairs["M1-M2"], names["M1-M2"] = m1_m2, "--m1-m2 (r of M1 and M2)"
    return pairs, names


def _pair_values(pair_values, already) -> dict:
    """--pair PAIR=R (repeatable) -> {pair: (r, how it was given)}."""
    from pooler.errors import OptionError
    from pooler.reading.pathsheet import split_path
    out: dict = {}
    for text in pair_values:
        key, eq, val = text.partition("=")
        pr = split_path(key)
        try:
            r = float(val) if eq else None
        except ValueError:
            r = None
        if pr is None or r is None:
            raise OptionError(f"--pair {text!r}: write a pair and its correlation, "
                              "e.g. --pair X-M2=0.2")
        k = "-".join(pr)
        if any(x in already or x in out for x in (k, "-".join(pr[::-1]))):
            raise OptionError(f"--pair {text!r}: the pair {k} is given twice")
        out[k] = (r, f"--pair {text}")
    return out


def _simulation_bar():
    """A progress bar on stderr for the simulations, only when stderr is a terminal."""
    if not sys.stderr.isatty():
        return None

    def bar(done, total):
        filled = int(30 * done / total)
        click.echo(f"\rsimulating [{'#' * filled}{'.' * (30 - filled)}] {done}/{total}",
                   err=True, nl=done == total)
    return bar


def _echo_paths_job(job, out_dir, fmt, force, as_json):
    """Warnings, files into out_dir (if any), then the JSON document or the text."""
    _echo_warnings(job.warnings)
    paths = []
    if out_dir:
        from pooler.output.outputs import write
        paths = write(job.files(fmt), out_dir, force=force)
    if as_json:
        _print_json(job.to_dict())
        return
    text = job.text()
    click.echo(text, nl=not text.endswith("\n"))
    if paths:
        click.echo(f"Written to {out_dir}/: " + ", ".join(p.name for p in paths))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
