"""Figures: forest, contour-enhanced funnel, estimate ladder, power curves.

Each function builds and returns a :class:`matplotlib.figure.Figure` (no pyplot, no global
state); the caller saves it. matplotlib is imported inside the functions.

Palette: the colour-blind-safe set of Okabe & Ito (2008), used sparingly.
"""
from __future__ import annotations


import numpy as np

from pooler._results import estimable

BLUE, ORANGE, VERMILION, GREEN, SKY, PURPLE, GREY = (
    "#0072B2", "#E69F00", "#D55E00", "#009E73", "#56B4E9", "#CC79A7", "#6b6b6b")
SCENARIO_COLOURS = {"optimistic": SKY, "realistic": BLUE, "pessimistic": VERMILION,
                    "assurance": PURPLE}
WIDTH = 6.3  # inches: a thesis page's text width


def _figure(height):
    from matplotlib.figure import Figure
    fig = Figure(figsize=(WIDTH, height), layout="constrained")
    return fig, fig.add_subplot()


def _style(ax):
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=8)


def _short(label: str, n: int = 34) -> str:
    return label if len(label) <= n else label[: n - 1] + "…"


def _scale_label(metric: str) -> str:
    return "Hedges' g" if metric == "g" else "Fisher's z"


#: Above this many studies the forest plot draws them as one cloud instead of a row each.
FOREST_MAX_ROWS = 60
SHARED_LABEL = "all studies, one shared effect"
VARYING_LABEL = "all studies, effects allowed to vary"


def forest_plot(pooled, scenarios=None, *, ax=None, max_rows=FOREST_MAX_ROWS):
    """Forest plot: every study with its 95 % CI (marker area by random-effects weight), the
    two summaries as bars (common effect: "all studies, one shared effect"; random effects:
    "all studies, effects allowed to vary", with its prediction interval as a whiskered line
    beneath), and the realistic and pessimistic planning effects as vertical lines.

    Up to ``max_rows`` studies get a row each; above that they are drawn as one cloud (each
    dot a study, more precise studies higher) so the figure stays readable and small at any
    k — the per-study numbers are in ``effects.csv`` and the report. The legend sits below
    the axes, so it never covers a study.

    The y tick labels are the study rows (or the cloud's label) followed by the two summary
    rows.
    """
    k = pooled.k
    one_row_each = k <= max_rows
    study_rows = k if one_row_each else 6
    fig = None
    if ax is None:
        fig, ax = _figure(max(3.0, 0.24 * (study_rows + 4) + 1.6))
    else:
        fig = ax.figure
    y = np.array(pooled.effects)
    se = np.sqrt(np.array(pooled.variances))
    w = np.array(pooled.weights)
    base = 2.2  # the studies sit above the two summary rows
    if one_row_each:
        rows = np.arange(k)[::-1] + base
        ax.hlines(rows, y - 1.96 * se, y + 1.96 * se, color=GREY, lw=0.9)
        ax.scatter(y, rows, s=14 + 160 * w / w.max(), marker="o", color=BLUE, zorder=3,
                   edgecolor="white", linewidth=0.6)
        ticks, labels = list(rows), [_short(l) for l in pooled.labels]
    else:
        # precision rank on the vertical axis: the most precise study at the top
        order = np.argsort(np.argsort(-se))
        rows = base + (study_rows - 1) * order / max(k - 1, 1)
        ax.scatter(y, rows, s=6, color=BLUE, alpha=min(0.6, max(0.08, 40 / k)), lw=0,
                   zorder=3)
        ticks = [base + (study_rows - 1) / 2]
        labels = [f"{k:,} studies (one dot each;\nmore precise higher)"]

    def summary_bar(est, lo, hi, row, colour):
        ax.hlines(row, lo, hi, color=colour, lw=5.5, alpha=0.85, zorder=3,
                  capstyle="round")
        ax.plot([est, est], [row - 0.28, row + 0.28], color="black", lw=1.6, zorder=4)
    f = pooled.fixed
    summary_bar(f.estimate, f.ci.low, f.ci.high, 1.0, GREY)
    ticks.append(1.0)
    labels.append(SHARED_LABEL)
    if estimable(pooled.pooled):
        p = pooled.pooled
        summary_bar(p.estimate, p.ci.low, p.ci.high, 0.0, BLUE)
        ticks.append(0.0)
        labels.append(VARYING_LABEL)
        if estimable(pooled.prediction):
            lo, hi = pooled.prediction.low, pooled.prediction.high
            ax.hlines(-0.45, lo, hi, color=ORANGE, lw=1.3, zorder=2)
            ax.vlines([lo, hi], -0.6, -0.3, color=ORANGE, lw=1.3, zorder=2)
            ax.plot([], [], color=ORANGE, lw=1.3,
                    label="range of true effects expected in 95% of new studies "
                          "(prediction interval)")
    ax.axvline(0, color="black", lw=0.7)
    if scenarios is not None:
        for s, style in ((scenarios.realistic, "--"), (scenarios.pessimistic, ":")):
            ax.axvline(s.effect, color=SCENARIO_COLOURS[s.name], ls=style, lw=1.2,
                       label=f"{s.name} planning effect ({s.effect:.2f})")
    ax.set_yticks(ticks, labels, fontsize=7.5)
    ax.set_ylim(-0.9, base + study_rows - 0.4)
    ax.set_xlabel(f"{_scale_label(pooled.metric)}, bars and lines 95% intervals")
    ax.set_title("Prior studies and what they add up to", fontsize=10, loc="left")
    _style(ax)
    ax.spines["left"].set_visible(False)
    ax.tick_params(axis="y", length=0)
    handles, names = ax.get_legend_handles_labels()
    if handles:  # below the plotting area, so it never covers a study
        ax.figure.legend(handles, names, fontsize=7, frameon=False, loc="outside lower left")
    return fig


def funnel_plot(pooled, bias, *, ax=None):
    """Contour-enhanced funnel plot (Peters et al. 2008): tinted regions where a study of
    that standard error would be significant (two-sided) at 10 %, 5 % and 1 %; studies imputed by trim-and-fill drawn
    hollow; the PET or PEESE line chosen by PET-PEESE."""
    fig = None
    if ax is None:
        fig, ax = _figure(4.6)
    else:
        fig = ax.figure
    y = np.array(pooled.effects)
    se = np.sqrt(np.array(pooled.variances))
    top = se.max() * 1.08
    s_grid = np.linspace(0, top, 100)
    span = max(np.abs(y).max() * 1.15, 1.96 * top * 1.05)
    # where a study of that SE would come out significant (two-sided), in warm tints
    shades = [(1.645, "#fdf3e1", "a study here is significant at 10%"),
              (1.96, "#f9e2b8", "... at 5%"), (2.576, "#f3cf8e", "... at 1%")]
    for z, colour, lab in shades:
        for sign in (1, -1):
            ax.fill_betweenx(s_grid, sign * z * s_grid, sign * span, color=colour, lw=0,
                             label=lab if sign == 1 else None)
    ax.scatter(y, se, s=18, color=BLUE, zorder=3, label="studies")
    tf = bias.trim_and_fill
    if estimable(tf) and tf.k0:
        ax.scatter(tf.filled_effects, np.sqrt(tf.filled_variances), s=18, facecolor="white",
                   edgecolor=VERMILION, zorder=3, label=f"imputed by trim-and-fill ({tf.k0})")
    pp = bias.pet_peese
    if estimable(pp):
        reg = bias.pet if pp.chosen == "PET" else bias.peese
        x = reg.estimate + reg.slope * (s_grid if pp.chosen == "PET" else s_grid ** 2)
        ax.plot(x, s_grid, color=GREEN, lw=1.4, label=f"{pp.chosen} line")
    ax.axvline(pooled.mu, color=BLUE, lw=0.8, ls="--", label="random-effects estimate")
    ax.axvline(0, color="black", lw=0.6)
    ax.set_xlim(-span, span)
    ax.set_ylim(top, 0)
    ax.set_xlabel(_scale_label(pooled.metric))
    ax.set_ylabel("standard error")
    ax.set_title("Effect against precision, with where significance lies", fontsize=10,
                 loc="left")
    _style(ax)
    ax.legend(fontsize=6.5, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.13),
              ncol=4)
    return fig


def ladder_rows(pooled, bias, scenarios):
    """(label, estimate, low, high, group) rows of the estimate ladder."""
    rows = []
    if estimable(pooled.pooled):
        p = pooled.pooled
        rows.append(("as published (random effects)", p.estimate, p.ci.low, p.ci.high, "pooled"))
    f = pooled.fixed
    rows.append(("common effect", f.estimate, f.ci.low, f.ci.high, "pooled"))
    for name, est, lo, hi in bias.ladder():   # the registered bias methods, in suite order
        rows.append((name, est, lo, hi, "adjusted"))
    if scenarios is not None:
        for s in (scenarios.optimistic, scenarios.realistic, scenarios.pessimistic):
            rows.append((f"{s.name} scenario", s.effect, None, None, s.name))
    return rows


def estimate_ladder(pooled, bias, scenarios=None, *, ax=None):
    """Every estimate on one axis: as published, each adjuster, and the scenarios."""
    rows = ladder_rows(pooled, bias, scenarios)
    fig = None
    if ax is None:
        fig, ax = _figure(0.3 * len(rows) + 1.2)
    else:
        fig = ax.figure
    colours = {"pooled": GREY, "adjusted": GREEN, **SCENARIO_COLOURS}
    pos = np.arange(len(rows))[::-1]
    for p, (lab, est, lo, hi, grp) in zip(pos, rows):
        c = colours.get(grp, GREY)
        if lo is not None:
            ax.hlines(p, lo, hi, color=c, lw=1.2)
        ax.plot(est, p, "o" if grp in ("pooled", "adjusted") else "D", color=c, ms=5)
    ax.axvline(0, color="black", lw=0.6)
    ax.set_yticks(pos, [r[0] for r in rows], fontsize=7.5)
    ax.set_xlabel(f"{_scale_label(pooled.metric)} (95% CI where available)")
    ax.set_title("What the evidence supports: every estimate", fontsize=10, loc="left")
    _style(ax)
    ax.tick_params(axis="y", length=0)
    return fig


def power_curves(plan, *, ax=None, n_max=None):
    """Power against total N for each scenario, the target-power lines, the assurance curve
    (when a predictive distribution is known), and the n of the realistic scenario at the
    first target power marked.

    Power is computed at whole groups: n per group (per cell, or in total) runs over
    integers and each total is the design's own (:meth:`pooler.planning.power.Design.n_total`, with
    n2 = ceil(ratio x n1)), so the curves rise without the saw-tooth a total split by
    rounding would draw at small N."""
    from pooler.planning.power import assurance_curve, power_at, to_design_effect
    des = plan.design
    fig = None
    if ax is None:
        fig, ax = _figure(3.8)
    else:
        fig = ax.figure
    first = plan.powers[0]
    chosen = next((r for r in plan.rows if r.scenario == "realistic" and r.power == first
                   and isinstance(r.n_total, int)), None)
    ns = [r.n_total for r in plan.rows if isinstance(r.n_total, int)]
    top = max(ns) * 1.3 if ns else 200
    if chosen is not None:
        top = min(top, max(4 * chosen.n_total, 60))
    top = int(min(n_max or top, 50_000))
    per_top = max(int(np.searchsorted(des.n_total(np.arange(1, top + 2)), top)) + 1,
                  des.n_min + 1)
    per = np.unique(np.linspace(des.n_min, per_top, 400).round().astype(np.int64))
    totals = des.n_total(per)
    for s in plan.scenarios:
        d = float(to_design_effect(s.effect, plan.metric, des))
        if d <= 0:
            continue
        pw = power_at(d, per, des, plan.alpha, plan.alternative)
        ax.plot(totals, pw, color=SCENARIO_COLOURS.get(s.scenario, BLUE), lw=1.6,
                label=f"{s.scenario} ({plan.effect_label} = {s.effect:.2f})")
    a = plan.assurance
    if a is not None and estimable(a):
        # one fixed quadrature over the plan's own predictive distribution for every size
        # (pooler.planning.power.assurance_curve; within about 1e-7 of the table's adaptive
        # integrals): every 8th size plus 40 spaced geometrically (the curve is steepest at
        # small N), about 60 in all
        pick = np.unique(np.r_[np.searchsorted(totals, np.geomspace(totals[0], totals[-1], 40)),
                               np.arange(0, len(totals), 8), len(totals) - 1])
        pick = pick[pick < len(totals)]
        asr = assurance_curve(plan.predictive, per[pick], des, plan.alpha, plan.alternative)
        ax.plot(totals[pick], asr, color=PURPLE, lw=1.4, ls="--",
                label="assurance (over the predictive distribution)")
    for p in plan.powers:
        ax.axhline(p, color=GREY, lw=0.6, ls=":")
    if chosen is not None:
        ax.axvline(chosen.n_total, color=SCENARIO_COLOURS.get("realistic", BLUE), lw=0.8,
                   ls="--", zorder=1)
        ax.plot(chosen.n_total, chosen.achieved_power, "o", color="black", ms=5, zorder=4)
        each = ""
        if des.grouped:
            from pooler.planning.sample_size import unit_sizes
            sizes = unit_sizes(chosen.n_per_group, des)
            each = (f" ({sizes[0]:,} per {des.unit})" if len(set(sizes)) == 1
                    else " (" + " + ".join(f"{x:,}" for x in sizes) + ")")
        ax.annotate(f"realistic: N = {chosen.n_total:,}{each}",
                    (chosen.n_total, chosen.achieved_power), xytext=(6, -14),
                    textcoords="offset points", fontsize=7.5)
    ax.set_ylim(0, 1.02)
    ax.set_xlim(0, totals.max())
    ax.set_xlabel("total sample size N (whole groups)")
    ax.set_ylabel("power")
    tails = "two-tailed" if plan.tails == 2 else "one-tailed"
    ax.set_title(f"Power of the planned {des.name} study ({tails}, alpha = {plan.alpha:g})",
                 fontsize=10, loc="left")
    _style(ax)
    ax.legend(fontsize=7, frameon=False, loc="lower right")
    return fig


def save(fig, path, fmt: str) -> None:
    """Save ``fig`` reproducibly (no dates or random ids in SVG/PDF/PNG metadata)."""
    import matplotlib
    meta = {"svg": {"Date": None}, "pdf": {"CreationDate": None, "ModDate": None},
            "png": {"Software": None}}[fmt]
    with matplotlib.rc_context({"svg.hashsalt": "pooler", "svg.fonttype": "path"}):
        fig.savefig(path, format=fmt, metadata=meta, dpi=200 if fmt == "png" else None)


def stress_plot(res, *, ax=None):
    """Median true power (marker) and its 10th percentile (line end) of the n each planning
    rule recommends, per simulation cell, with the target power drawn; where a rule found no
    positive planning effect in 5 % or more of a cell's literatures, that share is written
    beside its marker (the median is then over the planned literatures only)."""
    colours = {"random effects": SKY, "median of adjusters": GREEN, "realistic": BLUE,
               "pessimistic": VERMILION}
    fig = None
    if ax is None:
        fig, ax = _figure(3.8)
    else:
        fig = ax.figure
    cells = res.cells
    offs = np.linspace(-0.27, 0.27, len(res.rules))
    for off, rule in zip(offs, res.rules):
        xs, med, p10 = [], [], []
        for i, c in enumerate(cells):
            a = c.true_power[rule]
            ok = a[np.isfinite(a)]
            no_plan = 1 - ok.size / a.size if a.size else 0.0
            if ok.size:
                xs.append(i + off)
                med.append(np.median(ok))
                p10.append(np.quantile(ok, 0.1))
            if no_plan >= 0.05:  # a median over the few planned literatures would flatter
                ax.annotate(f"{100 * no_plan:.0f}% no plan", (i + off, med[-1] if ok.size
                                                              else 0.02),
                            xytext=(0, 4), textcoords="offset points", rotation=90,
                            fontsize=5.5, color=colours[rule], ha="center", va="bottom")
        ax.vlines(xs, p10, med, color=colours[rule], lw=1)
        ax.plot(xs, med, "o", color=colours[rule], ms=4, label=rule)
    ax.axhline(res.power, color=GREY, ls=":", lw=0.8)
    ax.set_xticks(range(len(cells)),
                  [f"δ={c.cell.delta:g}\nπ={c.cell.pi:g}" for c in cells], fontsize=6.5)
    ax.set_ylim(0, 1.02)
    ax.set_ylabel("true power of the recommended n")
    ax.set_title("How often would the recommended n really reach its power?", fontsize=10,
                 loc="left")
    _style(ax)
    ax.legend(fontsize=7, frameon=False, loc="lower left", ncol=2)
    return fig
