"""Tables, a methods paragraph, power-curve figures and files for simulated path designs.

The command ``pooler paths`` prints these; :mod:`pooler.planning.simdesign` computes them. matplotlib
is imported inside :func:`curve_figure` only.
"""
from __future__ import annotations

import io
import json

from pooler._results import estimable, text_table, to_jsonable

SCHEMA = "pooler.paths/1"


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


def plan_text(results, test_note: str = "") -> str:
    """The planning table of one or more :class:`~pooler.planning.simdesign.SampleSizeResult`.

    One row per target and power goal: n, its 95 % Monte Carlo uncertainty interval and the
    power confirmed at n with its Monte Carlo SE.
    """
    out = []
    for r in results:
        head = r.label + ": " if r.label else ""
        out.append(head + r.design.describe())
        test = f"indirect effects tested by {r.test}" if r.test else "t tests of each path"
        out.append(f"  {test}; alpha = {r.alpha:g}; seed = {r.seed}")
        rows = []
        for s in r.solutions:
            n = s.n if estimable(s.n) else str(s.n)
            rows.append([s.target, f"{s.goal:.0%}", n, _interval(s), _confirmed(s)])
        out.append(text_table(["target", "power", "n", "95% MC interval of n",
                               "power at n ± MC SE"], rows))
        short = _short_of_goal(r.solutions)
        if short:
            out.append(short)
        out.append("")
    if test_note:
        out.append(test_note)
    return "\n".join(out).rstrip() + "\n"


def power_text(res) -> str:
    """Power of every path and indirect effect at one n
    (:class:`~pooler.planning.simdesign.PowerResult`)."""
    # coverage exists only for tests by an interval (Monte Carlo CI, bootstrap): the column
    # is shown only when some row has one
    cover = any(e.coverage is not None for e in res.estimates)
    rows = []
    for e in res.estimates:
        rows.append([e.target, e.power, e.mc_se]
                    + (["" if e.coverage is None else f"{e.coverage:.3f}"] if cover else []))
    test = f"indirect effects tested by {res.test}" if res.test else "t tests of each path"
    reps = res.estimates[0].reps if res.estimates else 0
    head = (f"{res.design.describe()}\n  n = {res.n:,}; {test}; alpha = {res.alpha:g}; "
            f"{reps:,} replications; seed = {res.seed}")
    return head + "\n" + text_table(["target", "power", "MC SE"]
                                    + (["coverage of true value"] if cover else []), rows) + "\n"


def methods_paragraph(results, reps: int, draws: int, resamples: int) -> str:
    """A methods paragraph describing how the sample sizes were found."""
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
        f"{', '.join(x.label for x in results)} as listed in the table")
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


def curve_figure(result, *, ax=None):
    """Simulated power (points, +-2 MC SE) and the fitted curve of every target, with the
    power goals as light horizontal lines. Returns the Figure."""
    import numpy as np
    if ax is None:
        from matplotlib.figure import Figure
        fig = Figure(figsize=(6.3, 3.8), layout="constrained")
        ax = fig.add_subplot()
    else:
        fig = ax.figure
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


def render_files(results, options: dict, methods: str, fmt_: str = "png") -> dict:
    """Every output file as name -> bytes: results.json, report.md and one power-curve
    figure per scenario."""
    from pooler.output.plots import save
    files = {}
    doc = {"schema": SCHEMA, "scenarios": [r.to_dict() for r in results],
           "options": options, "methods": methods}
    files["results.json"] = (json.dumps(to_jsonable(doc), indent=2, allow_nan=False,
                                        ensure_ascii=False) + "\n").encode()
    names = []
    for i, r in enumerate(results):
        fig = curve_figure(r)
        buf = io.BytesIO()
        save(fig, buf, fmt_)
        slug = "".join(ch if ch.isalnum() else "_" for ch in r.label.lower()).strip("_")
        stem = "power_curve" if len(results) == 1 else f"power_curve_{slug or i + 1}"
        files[f"{stem}.{fmt_}"] = buf.getvalue()
        names.append(f"{stem}.{fmt_}")
    md = ["# Sample size by simulation", "", "```", plan_text(results).rstrip(), "```", "",
          "## Methods", "", methods, ""]
    md += [f"![power curve]({n})" for n in names]
    files["report.md"] = ("\n".join(md) + "\n").encode()
    return files



# --------------------------------------------------------------------------------------------
# Paths pooled from a sheet (pooler.reading.pathsheet)
# --------------------------------------------------------------------------------------------

def paths_sheet_text(ps) -> str:
    """Per path of a :class:`~pooler.reading.pathsheet.PathSheet`: where it comes from, k, the pooled
    correlation with its 95 % CI, and the optimistic / realistic / pessimistic correlations;
    then the standardized paths each scenario's matrix implies."""
    from pooler.reading.pathsheet import SCENARIOS
    rows = []
    for p in ps.paths:
        src = f"rows {_rows(p.rows)}" if p.source == "sheet" else p.option
        ci = f"[{p.ci.low:.3f}, {p.ci.high:.3f}]" if p.ci else ""
        rows.append([p.path, src, p.k, p.pooled, ci] + [p.values[s] for s in SCENARIOS])
    out = [f"Paths of {ps.design_name} pooled from {ps.file} (correlations of each pair; "
           "each path pooled alone on Fisher's z)",
           text_table(["pair", "from", "k", "pooled r", "95% CI"] + list(SCENARIOS), rows), ""]
    out.append("How each path's realistic value was chosen:")
    out += [f"  {p.path}: {p.bases['realistic']}" for p in ps.paths if p.source == "sheet"]
    out.append("")
    out.append("Standardized paths implied by each scenario's correlation matrix:")
    out += [f"  {s}: {ps.designs[s].describe()}" for s in SCENARIOS]
    for n in ps.notes:
        out.append(f"Note: {n}")
    return "\n".join(out) + "\n"


def _rows(rows) -> str:
    rows = list(rows)
    if len(rows) > 4:
        return f"{rows[0]}-{rows[-1]} ({len(rows)})" if rows == list(range(rows[0], rows[-1] + 1)) \
            else ", ".join(map(str, rows[:3])) + f", ... ({len(rows)})"
    return ", ".join(map(str, rows))


def sheet_methods_paragraph(ps) -> str:
    """How the paths were pooled and turned into each scenario's design."""
    from_sheet = [p for p in ps.paths if p.source == "sheet"]
    given = [p for p in ps.paths if p.source == "option"]
    a = from_sheet[0].analysis if from_sheet else None
    how = ""
    if a is not None:
        how = (f" (Fisher's z metric, {a.pooled.estimator.upper()} between-study variance, "
               f"{a.pooled.interval.upper()} interval)")
    text = (
        f"The correlation of each pair of variables of the model was pooled separately from "
        f"its own rows of {ps.file.split('/')[-1]} "
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


def diagram_figure(ps, *, ax=None):
    """A path diagram: boxes for X, the mediators and Y; an arrow for every path of the
    model and a dashed line for a correlation between parallel mediators, each labelled
    with the pair's pooled and realistic correlation. Returns the Figure."""
    from matplotlib.patches import FancyArrowPatch, FancyBboxPatch
    if ax is None:
        from matplotlib.figure import Figure
        fig = Figure(figsize=(6.6, 4.0), layout="constrained")
        ax = fig.add_subplot()
    else:
        fig = ax.figure
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

    def label(p):
        if p.source == "option":
            return f"r = {p.values['realistic']:.2f} (given)"
        return f"r {p.pooled:.2f} pooled\n{p.values['realistic']:.2f} realistic (k={p.k})"

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
            ax.text(0.0, 0.97 - 0.1 * n_side, f"{key} (dashed): " + label(p).replace("\n", ", "),
                    ha="left", va="top", fontsize=7, color="#1f2d3a")
            continue
        ax.text(mx, my, label(p), ha="center", va="center", fontsize=7, color="#1f2d3a",
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


def render_sheet_files(results, ps, options: dict, methods: str, fmt_: str = "png") -> dict:
    """:func:`render_files` plus what a path sheet adds: every path's pooling in
    results.json, the per-path table and a pooling paragraph in report.md, and the path
    diagram."""
    from pooler.output.plots import save
    files = render_files(results, options, methods, fmt_)
    doc = json.loads(files["results.json"])
    doc["paths"] = ps.to_dict()
    files["results.json"] = (json.dumps(to_jsonable(doc), indent=2, allow_nan=False,
                                        ensure_ascii=False) + "\n").encode()
    fig = diagram_figure(ps)
    buf = io.BytesIO()
    save(fig, buf, fmt_)
    files[f"path_diagram.{fmt_}"] = buf.getvalue()
    md = files["report.md"].decode()
    head, _, rest = md.partition("\n\n")
    section = ("## Paths pooled from the literature\n\n```\n" + paths_sheet_text(ps).rstrip()
               + "\n```\n\n" + sheet_methods_paragraph(ps) + "\n\n"
               + f"![path diagram](path_diagram.{fmt_})\n\n")
    files["report.md"] = (head + "\n\n" + section + rest).encode()
    return files
