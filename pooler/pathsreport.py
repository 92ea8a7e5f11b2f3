"""Tables, a methods paragraph, power-curve figures and files for simulated path designs.

The command ``pooler paths`` prints these; :mod:`pooler.simdesign` computes them. matplotlib
is imported inside :func:`curve_figure` only.
"""
from __future__ import annotations

import io
import json

from ._results import estimable, text_table, to_jsonable

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


def plan_text(results, test_note: str = "") -> str:
    """The planning table of one or more :class:`~pooler.simdesign.SampleSizeResult`.

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
        out.append("")
    if test_note:
        out.append(test_note)
    return "\n".join(out).rstrip() + "\n"


def power_text(res) -> str:
    """Power of every path and indirect effect at one n
    (:class:`~pooler.simdesign.PowerResult`)."""
    rows = []
    for e in res.estimates:
        rows.append([e.target, e.power, e.mc_se,
                     "" if e.coverage is None else f"{e.coverage:.3f}"])
    test = f"indirect effects tested by {res.test}" if res.test else "t tests of each path"
    reps = res.estimates[0].reps if res.estimates else 0
    head = (f"{res.design.describe()}\n  n = {res.n:,}; {test}; alpha = {res.alpha:g}; "
            f"{reps:,} replications; seed = {res.seed}")
    return head + "\n" + text_table(["target", "power", "MC SE", "coverage of true value"],
                                    rows) + "\n"


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
    from .plots import save
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

