"""The report of the simulated designs (``pooler paths``, and ``pooler run SHEET --design
<simulated>``), written once as blocks.

Every section (the paths pooled from a sheet, the planning table or the power at one n of
each scenario, the methods paragraph, the caution, the reproducibility details) is built
once, from the result objects, as :class:`pooler.output.blocks.Block` values; the terminal
(:func:`summary_blocks`: the blocks not marked ``detail``), ``report.md`` and
``report.html`` (:func:`build_blocks`: every block) and a notebook's ``_repr_html_`` render
those same blocks, as :mod:`pooler.output.document` does for ``pooler run``; so does the
stress check of a path sheet (:func:`stress_check_blocks`). :mod:`pooler.planning.simdesign`
and :mod:`pooler.planning.pathstress` compute the numbers; matplotlib is imported inside the
figure functions only.
"""
from __future__ import annotations

import json

from pooler._results import estimable, fmt, to_jsonable
from pooler.output.blocks import Block, brief, md_escape, safe_md, to_html, to_markdown, to_text

SCHEMA = "pooler.paths/1"

#: The caution's report-only paragraph for a simulated design, then what it adds when the
#: paths were pooled from a sheet (the first paragraph is the one every pooler report shows,
#: :data:`pooler.output.document.CAUTION`).
CAUTION = (
    "The simulated power assumes the data arise from the stated path model: linear effects, "
    "normally distributed variables (but for a moderator stated as binary) measured without "
    "error except as the reliabilities state, independent observations and no missing data. "
    "Real data usually fall short of these, so real needs are higher.",
    "Paths derived from pooled correlations hold only as far as the studies measured the "
    "same variables in comparable samples, and the bias adjustments of each pair are "
    "sensitivity analyses, not corrections that recover the truth.")


# ------------------------------------------------------------------ the sections

def _test_words(test) -> str:
    return f"indirect effects tested by {test}" if test else "t tests of each path"


def _scenario_head(label: str, design) -> str:
    """The paragraph that opens one scenario: its label (if any) and its paths."""
    return (f"**{md_escape(label)}**: " if label else "") + safe_md(design.describe())


def plan_blocks(results, note: str = "") -> list[Block]:
    """The planning table of each :class:`~pooler.planning.simdesign.SampleSizeResult`, with
    its power curve (report only).

    One row per target and power goal: n, its 95 % Monte Carlo uncertainty interval and the
    power confirmed at n with its Monte Carlo SE; a note when a confirmation falls short of
    its goal, and ``note`` (e.g. that Sobel's test is for comparison only) at the end.
    """
    out = [Block("h2", "Sample size for each target")]
    for r, stem in zip(results, figure_stems(results)):
        out.append(Block("p", f"{_scenario_head(r.label, r.design)}; {_test_words(r.test)}; "
                              f"alpha = {r.alpha:g}; seed = {r.seed}"))
        rows = tuple((md_escape(s.target), f"{s.goal:.0%}", md_escape(fmt(s.n)),
                      _interval(s), _confirmed(s)) for s in r.solutions)
        out.append(Block("table", headers=("target", "power", "n", "95% MC interval of n",
                                           "power at n ± MC SE"), rows=rows))
        short = _short_of_goal(r.solutions)
        if short:
            out.append(Block("note", short))
        out.append(Block("figure", _curve_caption(r), src=stem, detail=True))
    if note:
        out.append(Block("note", note))
    return out


def power_blocks(labels, results, note: str = "") -> list[Block]:
    """Power of every path and indirect effect at one n, per scenario
    (:class:`~pooler.planning.simdesign.PowerResult`)."""
    out = [Block("h2", "Power of every path and indirect effect")]
    for label, res in zip(labels, results):
        # coverage exists only for tests by an interval (Monte Carlo CI, bootstrap): the
        # column is shown only when some row has one
        cover = any(e.coverage is not None for e in res.estimates)
        reps = res.estimates[0].reps if res.estimates else 0
        out.append(Block("p", f"{_scenario_head(label, res.design)}; n = {res.n:,}; "
                              f"{_test_words(res.test)}; alpha = {res.alpha:g}; "
                              f"{reps:,} replications; seed = {res.seed}"))
        rows = tuple((md_escape(e.target), fmt(e.power), fmt(e.mc_se))
                     + (("" if e.coverage is None else f"{e.coverage:.3f}",) if cover else ())
                     for e in res.estimates)
        out.append(Block("table", headers=("target", "power", "MC SE")
                         + (("coverage of true value",) if cover else ()), rows=rows))
    if note:
        out.append(Block("note", note))
    return out


def sheet_blocks(ps) -> list[Block]:
    """Per path of a :class:`~pooler.reading.pathsheet.PathSheet`: where it comes from, k,
    the pooled correlation with its 95 % CI, and the optimistic / realistic / pessimistic
    correlations; how each realistic value was chosen; the standardized paths each
    scenario's matrix implies; then (report only) the path diagram."""
    from pooler.reading.pathsheet import SCENARIOS
    rows = []
    for p in ps.paths:
        src = f"rows {_rows(p.rows)}" if p.source == "sheet" else md_escape(p.option)
        ci = f"[{p.ci.low:.3f}, {p.ci.high:.3f}]" if p.ci else ""
        rows.append((md_escape(p.path), src, fmt(p.k), fmt(p.pooled), ci)
                    + tuple(fmt(p.values[s]) for s in SCENARIOS))
    out = [Block("h2", "Paths pooled from the literature"),
           Block("p", f"Paths of {ps.design_name} pooled from {md_escape(ps.file)} "
                      "(correlations of each pair; each path pooled alone on Fisher's z):"),
           Block("table", headers=("pair", "from", "k", "pooled r", "95% CI") + SCENARIOS,
                 rows=tuple(rows)),
           Block("h3", "How each path's realistic value was chosen"),
           Block("list", items=tuple(f"{md_escape(p.path)}: {safe_md(p.bases['realistic'])}"
                                     for p in ps.paths if p.source == "sheet")),
           Block("h3", "Standardized paths implied by each scenario's correlation matrix"),
           Block("list", items=tuple(f"{s}: {safe_md(ps.designs[s].describe())}"
                                     for s in SCENARIOS))]
    out += [Block("note", md_escape(n)) for n in ps.notes]
    out.append(Block("figure", f"Path diagram of {ps.design_name}: the correlation of each "
                               "pair, pooled and realistic", src="path_diagram", detail=True))
    return out


def caution_blocks(from_sheet: bool) -> list[Block]:
    """The caution: the paragraph every pooler output shows, then (report only) what the
    simulation assumes and, ``from_sheet``, what pooling the paths assumes."""
    from pooler.output.document import CAUTION as EVERY_REPORT
    more = CAUTION[0] + (" " + CAUTION[1] if from_sheet else "")
    return [Block("h2", "Caution"), Block("p", EVERY_REPORT[0]), Block("p", more, detail=True)]


def settings_in_words(job) -> list[str]:
    """The settings the numbers depend on, in words."""
    o = job.options
    first = job.results[0]
    out = [f"design: {job.design_name}; {_test_words(first.test)}, alpha = {first.alpha:g} "
           "(two-sided)"]
    if job.fixed_n is None:
        goals = dict.fromkeys(s.goal for s in first.solutions)
        out.append("target power " + ", ".join(f"{g:.0%}" for g in goals))
        out.append(f"replications: {o['reps']:,} per simulated n, {2 * o['reps']:,} to "
                   "confirm each n")
    else:
        out.append(f"n = {job.fixed_n:,}; replications: {o['reps']:,}")
    if first.test == "monte-carlo":
        out.append(f"Monte Carlo draws per replication: {o['draws']:,}")
    if first.test == "bootstrap":
        out.append(f"bootstrap resamples per replication: {o['resamples']:,}")
    out.append(f"seed: {o['seed']} (NumPy SeedSequence; the numbers do not depend on the "
               "number of processes, nor on running on a cluster)")
    if o.get("paths_file"):
        out.append(f"paths file: {o['paths_file']}")
    if job.sheet is not None:
        a = next((p.analysis for p in job.sheet.paths if p.analysis is not None), None)
        if a is not None:
            from pooler.evidence.pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
            out.append(f"pooling of each pair: {ESTIMATOR_NAMES[a.pooled.estimator]} tau^2, "
                       f"{INTERVAL_NAMES[a.pooled.interval]} interval; realistic value by "
                       f"the '{a.scenarios.rule}' rule")
    return [md_escape(x) for x in out]


def reproducibility_blocks(job) -> list[Block]:
    """Version, input file and its SHA-256, the command and the settings."""
    from pooler import __version__
    src = ""
    if job.sheet is not None:
        src = f" from {md_escape(job.sheet.file)} (SHA-256 `{job.sheet.sha256}`)"
    text = f"Made with pooler {md_escape(__version__)}{src}."
    if job.command:
        text += (" This command repeats it; options it does not name were at their defaults, "
                 "and results.json lists every setting:")
    out = [Block("h2", "Reproducibility", detail=True), Block("p", text, detail=True)]
    if job.command:
        out.append(Block("code", text=job.command, detail=True))
    out.append(Block("list", items=tuple(settings_in_words(job)), detail=True))
    return out


def build_blocks(job) -> list[Block]:
    """The report (``report.md``, ``report.html``) of a :class:`pooler.pathsjob.PathsJob`,
    as blocks."""
    search = job.fixed_n is None
    out = [Block("h1", "Sample size by simulation" if search else "Power by simulation")]
    if job.sheet is not None:
        out += sheet_blocks(job.sheet)
    if search:
        out += plan_blocks(job.results, job.note)
    else:
        out += power_blocks(job.scenarios, job.results, job.note)
    methods = methods_text(job, md_escape)
    if methods:
        out += [Block("h2", "Methods", detail=True), Block("p", methods, detail=True)]
    out += caution_blocks(job.sheet is not None)
    out += reproducibility_blocks(job)
    return out


def summary_blocks(job) -> list[Block]:
    """What the terminal shows: the report without its ``detail`` blocks."""
    return brief(build_blocks(job))


def summary_text(job) -> str:
    """The terminal text of a :class:`pooler.pathsjob.PathsJob`."""
    return to_text(summary_blocks(job)) + "\n"


def stress_check_blocks(res) -> list[Block]:
    """The stress check of a path sheet (:class:`pooler.planning.pathstress.PathStressResult`):
    per selection level, scenario and target, how often the plan was cautious, the median
    planned / true effect and how many literatures gave no plan."""
    from pooler.planning.pathstress import SCENARIOS
    effect = ("f^2 of the interaction" if res.design_name == "moderation" else
              "indirect effect (product of its paths)")
    rows = tuple((f"{c.selection:g}", s, md_escape(t), f"{c.cautious[s][t]:.0%}",
                  f"{c.median_ratio[s][t]:.2f}", f"{c.no_plan}/{c.literatures}")
                 for c in res.cells for s in SCENARIOS for t in res.targets)
    out = [Block("h1", "Stress check"),
           Block("p", f"Stress check of {md_escape(res.file)} ({res.design_name}): literatures "
                      "like the sheet's simulated from its realistic correlations:"),
           Block("list", items=(f"truth: {safe_md(res.truth.describe())}",
                                f"planned effect: the {effect}; cautious = no larger than the "
                                f"true one (seed {res.seed})")),
           Block("table", headers=("non-significant published", "scenario", "target",
                                   "cautious", "median planned/true", "no plan"), rows=rows)]
    reasons = sorted({r for c in res.cells for r in c.reasons})
    if reasons:
        out.append(Block("note", "No plan because: " + "; ".join(md_escape(r)
                                                                  for r in reasons[:3])))
    return out


def render_stress_check(res) -> dict:
    """The files of a stress check: results.json, report.md, report.html."""
    blocks = stress_check_blocks(res)
    return {"results.json": (json.dumps(res.to_dict(), indent=2, allow_nan=False,
                                        ensure_ascii=False) + "\n").encode("utf-8"),
            "report.md": to_markdown(blocks).encode("utf-8"),
            "report.html": to_html(blocks, {}, "pooler: stress check").encode("utf-8")}


# ------------------------------------------------------------------ files

def figure_stems(results) -> list[str]:
    """The file stem of each scenario's power-curve figure: ``power_curve`` for one
    scenario, ``power_curve_<label>`` for several."""
    stems = []
    for i, r in enumerate(results):
        slug = "".join(ch if ch.isalnum() else "_" for ch in r.label.lower()).strip("_")
        stems.append("power_curve" if len(results) == 1 else f"power_curve_{slug or i + 1}")
    return stems


def _curve_caption(r) -> str:
    what = "simulated power (points, ±2 Monte Carlo SE) and the fitted curve of each target"
    return f"{md_escape(r.label)}: {what}" if r.label else what[0].upper() + what[1:]


def render(job, fmt_: str = "png") -> dict:
    """Every output file of a :class:`pooler.pathsjob.PathsJob` as name -> bytes:
    results.json, report.md, report.html and the figures (a power curve per scenario and,
    from a sheet, the path diagram; none at a fixed n)."""
    from pooler.output.outputs import figure_files
    figs = {}
    if job.fixed_n is None:
        figs = {stem: curve_figure(r) for r, stem in zip(job.results, figure_stems(job.results))}
        if job.sheet is not None:
            figs["path_diagram"] = diagram_figure(job.sheet)
    files, png = figure_files(figs, fmt_)
    blocks = build_blocks(job)
    title = "Sample size by simulation" if job.fixed_n is None else "Power by simulation"
    files["report.md"] = to_markdown(blocks, fmt_).encode("utf-8")
    files["report.html"] = to_html(blocks, png, f"pooler: {title.lower()}").encode("utf-8")
    files["results.json"] = (json.dumps(to_jsonable(job.to_dict()), indent=2, allow_nan=False,
                                        ensure_ascii=False) + "\n").encode("utf-8")
    return files


# ------------------------------------------------------------------ wording

def _interval(s) -> str:
    if not estimable(s.n):
        return ""
    return f"{s.interval.low:,.0f}-{s.interval.high:,.0f}"


def _confirmed(s) -> str:
    if not estimable(s.n):
        return ""
    c = s.confirmed
    return f"{c.power:.3f} ± {c.mc_se:.3f}"


def _short_of_goal(solutions) -> str:
    """A note when the power confirmed at n falls below the goal: within 2 Monte Carlo SE it
    is simulation noise (the n comes from a fit over many n, not from this one check)."""
    gaps = [(s, (s.goal - s.confirmed.power) / s.confirmed.mc_se) for s in solutions
            if estimable(s.n) and s.confirmed.power < s.goal and s.confirmed.mc_se > 0]
    if not gaps:
        return ""
    worst = max(g for _, g in gaps)
    rows = len(gaps)
    if worst <= 2:
        return (f"{rows} row{'s' if rows > 1 else ''} confirm{'' if rows > 1 else 's'} "
                f"below {'their' if rows > 1 else 'its'} target by at most {worst:.1f} Monte "
                "Carlo SE: simulation noise around an n found from the power curve, not a "
                "shortfall (more --reps narrows it).")
    return (f"{rows} row{'s' if rows > 1 else ''} confirm{'' if rows > 1 else 's'} below "
            f"{'their' if rows > 1 else 'its'} target by up to {worst:.1f} Monte Carlo SE: run "
            "again with more --reps before relying on these n.")


def methods_text(job, quote=str) -> str:
    """The methods paragraph of a :class:`pooler.pathsjob.PathsJob` (the report's and the
    JSON document's): how the paths were pooled (from a sheet), then how the sample sizes
    were found (a search); user words go through ``quote``."""
    parts = []
    if job.sheet is not None:
        parts.append(sheet_methods_paragraph(job.sheet, quote))
    if job.fixed_n is None:
        o = job.options
        parts.append(methods_paragraph(job.results, o["reps"], o["draws"], o["resamples"],
                                       quote))
    return " ".join(parts)


def methods_paragraph(results, reps: int, draws: int, resamples: int, quote=str) -> str:
    """A methods paragraph describing how the sample sizes were found; the scenarios'
    labels (the user's words) go through ``quote`` (``md_escape`` for a report)."""
    r = results[0]
    tests = {
        "joint": "the joint significance test (every component path significant in its "
                 "regression t test)",
        "monte-carlo": f"a Monte Carlo confidence interval (Preacher & Selig, 2012) with "
                       f"{draws:,} draws per replication",
        "bootstrap": f"a percentile bootstrap confidence interval with {resamples:,} "
                     f"resamples per replication",
        "sobel": "Sobel's (1982) first-order test, which is known to be low-powered "
                 "(MacKinnon et al., 2002)",
    }
    if r.test is None:
        tested = ("the interaction was tested with the t test of the coefficient of the "
                  "product of the sample-centred observed scores (measurement error "
                  "simulated from the stated reliabilities)")
    else:
        tested = f"indirect effects were tested with {tests[r.test]}"
    model = r.design.describe() if len(results) == 1 else (
        f"{r.design.name}, with the paths of each of the {len(results)} scenarios "
        f"{', '.join(quote(x.label) for x in results)} as listed in the table")
    goals = ", ".join(f"{s.goal:.0%}" for s in r.solutions if s.target == r.solutions[0].target)
    return (
        f"Sample sizes were found by simulation with pooler. Data were generated from the "
        f"standardized path model ({model}), each variable with variance 1 and "
        f"residual variances set accordingly; each simulated sample was analysed by ordinary "
        f"least squares, and {tested} at alpha = "
        f"{r.alpha:g} (two-sided). Power was simulated over a grid of sample sizes "
        f"({reps:,} replications per point), a probit curve of power against the square "
        f"root of n was fitted to the rejection counts by maximum likelihood, and the n "
        f"reaching each target power ({goals}) was confirmed with {2 * reps:,} new "
        f"replications. The interval beside each n is a 95 % Monte Carlo uncertainty "
        f"interval from the fitted curve's parameter uncertainty. Random numbers came from "
        f"seed {r.seed} (NumPy SeedSequence), so the results can be reproduced exactly.")


def _rows(rows) -> str:
    rows = list(rows)
    if len(rows) > 4:
        return f"{rows[0]}-{rows[-1]} ({len(rows)})" if rows == list(range(rows[0], rows[-1] + 1)) \
            else ", ".join(map(str, rows[:3])) + f", ... ({len(rows)})"
    return ", ".join(map(str, rows))


def sheet_methods_paragraph(ps, quote=str) -> str:
    """How the paths were pooled and turned into each scenario's design; the sheet's name
    (the user's words) goes through ``quote`` (``md_escape`` for a report)."""
    from_sheet = [p for p in ps.paths if p.source == "sheet"]
    given = [p for p in ps.paths if p.source == "option"]
    a = from_sheet[0].analysis if from_sheet else None
    how = ""
    if a is not None:
        how = (f" (Fisher's z metric, {a.pooled.estimator.upper()} between-study variance, "
               f"{a.pooled.interval.upper()} interval)")
    text = (
        f"The correlation of each pair of variables of the model was pooled separately from "
        f"its own rows of {quote(ps.file.split('/')[-1])} "
        f"({', '.join(f'{p.path}: k = {p.k}' for p in from_sheet)}) with the same "
        f"random-effects pooling{how}, publication-bias sensitivity suite and "
        f"optimistic / realistic / pessimistic planning rule as a single literature. Rows "
        f"that reported the t of a regression coefficient were read as partial correlations, "
        f"r_p = t / sqrt(t^2 + df) (Aloe & Becker, 2012), with the sampling variance of a "
        f"correlation from df + 2 cases (Fisher, 1924); a partial correlation from a model with "
        f"other predictors was treated as the pair's correlation, which it equals only when "
        f"those predictors are unrelated to the pair. Standardized coefficients were accepted "
        f"only from one-predictor models, where they equal the correlation. ")
    if given:
        text += ("The pairs " + ", ".join(f"{p.path} = {p.values['realistic']:.3g}"
                                          for p in given)
                 + " had no literature and were fixed at the values given, in every scenario. ")
    if ps.design_name == "moderation":
        return text + _moderation_methods(ps)
    text += ("For each scenario, the scenario's value of every pair formed one correlation "
             "matrix, which was checked to be positive definite; the standardized paths were the "
             "regression coefficients it implies, as in meta-analytic path analysis "
             "(Viswesvaran & Ones, 1995).")
    return text


def _moderation_methods(ps) -> str:
    from pooler.reading.pathsheet import SLOPES
    if any(p.path in SLOPES for p in ps.paths):
        return ("The simple slopes were read as the correlations of X and Y within two equal "
                "groups of the moderator, X unrelated to the groups; with Var(Y) = 1 each "
                "within-group slope is s = q sigma, q = r / sqrt(1 - r^2), sigma^2 = "
                "(1 - z^2) / (1 + (q_high^2 + q_low^2) / 2), z the correlation of the groups "
                "with Y; the main effect of X is the mean of the two slopes and the "
                "interaction half their difference. Each slope was pooled as its own "
                "literature, so its scenarios are chosen separately: the cautious case of an "
                "interaction (a weaker high slope with a stronger low one) is not what they "
                "give; rows of the interaction itself (XZ-Y) avoid this.")
    return ("For each scenario, the main effects were the standardized coefficients implied "
            "by the correlations X-Y, Z-Y and X-Z (checked to form a positive definite "
            "matrix), as in meta-analytic path analysis (Viswesvaran & Ones, 1995). The "
            "interaction rows were read as the partial correlation r_p of the product term "
            "with Y given X and Z; its f^2 = r_p^2 / (1 - r_p^2) (Cohen, 1988, ch. 9) fixed "
            "the interaction coefficient, xz = r_p sqrt((1 - R^2_main) / Var(XZ)).")



# ------------------------------------------------------------------ figures

def _figure_and_axes(ax, size):
    """``ax`` and its Figure, or a new Figure of ``size`` inches with one Axes."""
    if ax is not None:
        return ax.figure, ax
    from matplotlib.figure import Figure
    fig = Figure(figsize=size, layout="constrained")
    return fig, fig.add_subplot()


def curve_figure(result, *, ax=None):
    """Simulated power (points, +-2 MC SE) and the fitted curve of every target, with the
    power goals as light horizontal lines. Returns the Figure."""
    import numpy as np
    fig, ax = _figure_and_axes(ax, (6.3, 3.8))
    colours = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#6b6b6b"]
    targets = list(dict.fromkeys(s.target for s in result.solutions))
    ns_all = [p.n for p in result.points]
    grid = np.geomspace(min(ns_all), max(ns_all), 200)
    for goal in sorted({s.goal for s in result.solutions}):
        ax.axhline(goal, color="#bbbbbb", lw=0.6, zorder=0)
    for i, t in enumerate(targets):
        c = colours[i % len(colours)]
        pts = [p for p in result.points if p.target == t]
        ax.errorbar([p.n for p in pts], [p.power for p in pts],
                    yerr=[2 * p.mc_se for p in pts], fmt="o", ms=3, color=c, lw=0.8,
                    label=t)
        fitted = result.curve(t, grid)
        if fitted is not None:
            ax.plot(grid, fitted, color=c, lw=1.2)
        for s in result.solutions:
            if s.target == t and estimable(s.n):
                ax.plot([s.n], [s.goal], marker="|", ms=10, color=c)
    ax.set_xscale("log")
    from matplotlib.ticker import FuncFormatter, NullFormatter
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:,.0f}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_ylim(0, 1.02)
    ax.set_xlabel("total sample size n (log scale)")
    ax.set_ylabel("simulated power")
    title = (result.label + ": " if result.label else "") + result.design.name
    ax.set_title(title, fontsize=9, loc="left")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(fontsize=7, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.18),
              ncol=min(4, len(targets)))
    return fig


def diagram_figure(ps, *, ax=None):
    """A path diagram: boxes for X, the mediators and Y; an arrow for every path of the
    model and a dashed line for a correlation between parallel mediators, each labelled
    with the pair's pooled and realistic correlation. Returns the Figure."""
    from matplotlib.patches import FancyArrowPatch, FancyBboxPatch
    fig, ax = _figure_and_axes(ax, (6.6, 4.0))
    if ps.design_name == "moderation":
        return _moderation_diagram(ps, ax, FancyArrowPatch, FancyBboxPatch)
    variables = ps.variables
    meds = [v for v in variables if v not in ("X", "Y")]
    pos = {"X": (0.08, 0.18), "Y": (0.92, 0.18)}
    if ps.design_name == "serial-mediation":
        pos.update({"M1": (0.33, 0.78), "M2": (0.67, 0.78)})
    else:
        top, bottom = 0.9, (0.5 if len(meds) > 1 else 0.9)
        for i, m in enumerate(meds):
            y = top - (top - bottom) * (i / max(1, len(meds) - 1))
            pos[m] = (0.5, y)
    vals = {p.path: p for p in ps.paths}
    w, h = 0.11, 0.09
    for v, (x, y) in pos.items():
        ax.add_patch(FancyBboxPatch((x - w / 2, y - h / 2), w, h,
                                    boxstyle="round,pad=0.01,rounding_size=0.02",
                                    fc="#eef3f7" if v in meds else "#dde6ee", ec="#34495e",
                                    lw=1.0))
        ax.text(x, y, v, ha="center", va="center", fontsize=10, weight="bold",
                color="#1f2d3a")
    for key, p in vals.items():
        a, b = key.split("-")
        (x0, y0), (x1, y1) = pos[a], pos[b]
        arrow = not (a.startswith("M") and b.startswith("M")) or \
            ps.design_name == "serial-mediation"
        bend = 0.0
        if a.startswith("M") and b.startswith("M") and ps.design_name != "serial-mediation":
            bend = 0.6
        ax.add_patch(FancyArrowPatch((x0, y0), (x1, y1), arrowstyle="-|>" if arrow else "-",
                                     mutation_scale=12, lw=1.1, color="#4a5a6a",
                                     ls="-" if arrow else "--", shrinkA=24, shrinkB=24,
                                     connectionstyle=f"arc3,rad={bend}"))
        mx, my = (x0 + x1) / 2, (y0 + y1) / 2
        if bend:  # correlations among parallel mediators: labelled in the corner
            n_side = sum(1 for k in vals if k.split("-")[0].startswith("M")
                         and k.split("-")[1].startswith("M") and k < key)
            ax.text(0.0, 0.97 - 0.1 * n_side,
                    f"{key} (dashed): " + _path_label(p).replace("\n", ", "),
                    ha="left", va="top", fontsize=7, color="#1f2d3a")
            continue
        ax.text(mx, my, _path_label(p), ha="center", va="center", fontsize=7, color="#1f2d3a",
                bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.9))
    ax.set_xlim(-0.02, 1.02)
    ax.set_ylim(0.0, 1.0)
    ax.axis("off")
    ax.set_title(f"{ps.design_name}: correlations of each pair, pooled and realistic",
                 fontsize=9, loc="left")
    return fig


def _path_label(p) -> str:
    if p.source == "option":
        return f"r = {p.values['realistic']:.2f} (given)"
    return f"r {p.pooled:.2f} pooled\n{p.values['realistic']:.2f} realistic (k={p.k})"


def _moderation_diagram(ps, ax, arrow_patch, box_patch):
    """X -> Y with Z pointing at that arrow (the interaction); Z -> Y; X - Z dashed."""
    pos = {"X": (0.1, 0.2), "Y": (0.9, 0.2), "Z": (0.5, 0.85)}
    w, h = 0.11, 0.09
    for v, (x, y) in pos.items():
        ax.add_patch(box_patch((x - w / 2, y - h / 2), w, h,
                               boxstyle="round,pad=0.01,rounding_size=0.02",
                               fc="#dde6ee", ec="#34495e", lw=1.0))
        ax.text(x, y, v, ha="center", va="center", fontsize=10, weight="bold",
                color="#1f2d3a")
    vals = {p.path: p for p in ps.paths}

    def arrow(a, b, *, dashed=False, head=True, shrink_b=24):
        ax.add_patch(arrow_patch(a, b, arrowstyle="-|>" if head else "-", mutation_scale=12,
                                 lw=1.1, color="#4a5a6a", ls="--" if dashed else "-",
                                 shrinkA=24, shrinkB=shrink_b))

    def text(x, y, s):
        ax.text(x, y, s, ha="center", va="center", fontsize=7, color="#1f2d3a",
                bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.9))
    arrow(pos["X"], pos["Y"])
    arrow(pos["Z"], pos["Y"])
    arrow(pos["Z"], (0.5, 0.2), shrink_b=2)
    if "X-Z" in vals:
        arrow(pos["X"], pos["Z"], dashed=True, head=False)
        text(0.24, 0.55, "X-Z: " + _path_label(vals["X-Z"]))
    text(0.76, 0.55, "Z-Y: " + _path_label(vals["Z-Y"]))
    if "XZ-Y" in vals:
        text(0.3, 0.1, "X-Y: " + _path_label(vals["X-Y"]))
        text(0.62, 0.42, "XZ-Y (interaction, partial r):\n" + _path_label(vals["XZ-Y"]))
    else:
        from pooler.reading.pathsheet import SLOPES
        text(0.3, 0.1, "X-Y at high Z: " + _path_label(vals[SLOPES[0]]))
        text(0.7, 0.1, "X-Y at low Z: " + _path_label(vals[SLOPES[1]]))
        text(0.62, 0.42, "Z: two groups")
    ax.set_xlim(-0.02, 1.02)
    ax.set_ylim(0.0, 1.0)
    ax.axis("off")
    ax.set_title("moderation: correlations of each pair, pooled and realistic", fontsize=9,
                 loc="left")
    return ax.figure
