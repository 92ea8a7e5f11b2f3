"""The trade-off of the model-average rule: protection under selection against cost without it.

The default planning rule (:func:`pooler.planning.scenarios.posterior_rule`) has two levers: the prior
probability that the literature is free of publication bias (``p_no_bias``; ½ in Bartoš et
al. 2023) and the quantile of the mean effect given a positive effect that is the
pessimistic scenario (the realistic scenario is the median). Both act on the model average
without a refit (:meth:`pooler.evidence.bma.ModelAverage.with_model_prior`), so one stress test
evaluates every point of a grid of rules from one fit per literature
(:func:`pooler.planning.simulate.tradeoff_points`).

For each point this module summarises a stress test the way the calibration goals are
stated: per number of studies k, the median over cells of the median true power that the
recommended n reaches under strong selection (π ≤ 0.2: the protection) and without
selection (π = 1), the median n relative to the oracle n (the n the true δ needs) without
selection (the cost), and the share of literatures with δ ≥ 0.2 that get no positive plan.
It works on the JSON document of a stress test (``StressResult.to_dict()`` or a saved
``stress.json``), so a saved run can be summarised again.

References
----------
.. [BMWDS23] Bartoš, F., Maier, M., Wagenmakers, E.-J., Doucouliagos, H., & Stanley, T. D.
   (2023). Robust Bayesian meta-analysis: Model-averaging across complementary publication
   bias adjustment methods. *Research Synthesis Methods*, 14(1), 99-116.
"""
from __future__ import annotations

import statistics
from dataclasses import dataclass

from pooler._results import ShowsAsTable, to_jsonable
from pooler.errors import OptionError

#: Calibration goals (the issue's): realistic median true power within this band without
#: selection, with n at most REALISTIC_N_RATIO x the oracle n; realistic at least
#: REALISTIC_PROTECTION and pessimistic at least PESSIMISTIC_PROTECTION under strong
#: selection; at most NO_PLAN_LIMIT of literatures with δ ≥ 0.2 without a plan.
REALISTIC_BAND = (0.80, 0.90)
REALISTIC_N_RATIO = 1.25
REALISTIC_PROTECTION = 0.60
PESSIMISTIC_PROTECTION = 0.80
NO_PLAN_LIMIT = 0.02


@dataclass(frozen=True)
class TradeOffPoint:
    """One rule of the grid, summarised per k (in the order of :attr:`TradeOff.ks`).

    Attributes
    ----------
    p_no_bias, quantile : float
        Prior probability of no bias; quantile of μ given μ > 0 (0.5 = the realistic rule).
    protection : tuple of float or None
        Median over cells with π ≤ 0.2 of the median true power.
    power_unselected, n_ratio_unselected : tuple of float or None
        The same over cells with π = 1, and the median n over the oracle n there.
    no_plan_mean, no_plan_worst : float
        Share of literatures with δ ≥ 0.2 without a positive plan: mean and worst cell.
    """

    p_no_bias: float
    quantile: float
    protection: tuple
    power_unselected: tuple
    n_ratio_unselected: tuple
    no_plan_mean: float
    no_plan_worst: float

    def to_dict(self) -> dict:
        return to_jsonable(self.__dict__)


@dataclass(frozen=True)
class TradeOff(ShowsAsTable):
    """The trade-off table of a stress test (:func:`tradeoff_table`)."""

    ks: tuple
    points: tuple
    reps: int
    default: tuple   # (p_no_bias, realistic quantile 0.5, pessimistic quantile)

    def point(self, p_no_bias, quantile) -> TradeOffPoint:
        for p in self.points:
            if abs(p.p_no_bias - p_no_bias) < 1e-9 and abs(p.quantile - quantile) < 1e-9:
                return p
        raise OptionError(f"no point p_no_bias = {p_no_bias:g}, quantile = {quantile:g} in "
                          "the trade-off grid")

    def to_dict(self) -> dict:
        return to_jsonable({"ks": list(self.ks), "reps": self.reps,
                            "default": {"p_no_bias": self.default[0],
                                        "realistic_quantile": self.default[1],
                                        "pessimistic_quantile": self.default[2]},
                            "points": list(self.points)})

    def to_frame(self):
        import pandas as pd
        rows = []
        for p in self.points:
            for i, k in enumerate(self.ks):
                rows.append({"p_no_bias": p.p_no_bias, "quantile": p.quantile, "k": k,
                             "protection": p.protection[i],
                             "power_unselected": p.power_unselected[i],
                             "n_ratio_unselected": p.n_ratio_unselected[i],
                             "no_plan_mean": p.no_plan_mean, "no_plan_worst": p.no_plan_worst})
        return pd.DataFrame(rows)


def _median(xs):
    xs = [x for x in xs if x is not None]
    return statistics.median(xs) if xs else None


def tradeoff_table(doc: dict, *, default=None) -> TradeOff:
    """Summarise the trade-off grid of a stress test's JSON document.

    Parameters
    ----------
    doc : dict
        ``StressResult.to_dict()`` or a loaded ``stress.json`` (schema ``pooler.stress/1``
        with a ``tradeoff`` list per cell).
    default : (p_no_bias, pessimistic_quantile), optional
        The point the rule takes (marked in the text and the figure; default: the settings
        the stress test ran with, else the defaults of :mod:`pooler.choices`).

    Examples
    --------
    >>> from pooler.planning.simulate import Cell, Shapes, stress_test
    >>> res = stress_test([Cell(5, 0.4, 0.0, 1.0), Cell(5, 0.4, 0.0, 0.05)],
    ...                   Shapes.calibration(), reps=2, seed=1, workers=1)
    >>> t = tradeoff_table(res.to_dict())
    >>> t.ks, len(t.points) == len(res.cells[0].tradeoff)
    ((5,), True)
    """
    from pooler.choices import ANALYSIS_DEFAULTS
    cells = doc.get("cells") or []
    if not cells or any("tradeoff" not in c for c in cells):
        raise OptionError("this stress test has no trade-off grid (run it with this version "
                          "of pooler)")
    if default is None:
        used = {**ANALYSIS_DEFAULTS, **(doc.get("rule_options") or {})}
        default = (used["chance_of_no_bias"], used["pessimistic_quantile"])
    ks = tuple(sorted({c["cell"]["k"] for c in cells}))
    keys = [(t["p_no_bias"], t["quantile"]) for t in cells[0]["tradeoff"]]
    points = []
    for j, (w, q) in enumerate(keys):
        prot, free, ratio = [], [], []
        for k in ks:
            at_k = [c for c in cells if c["cell"]["k"] == k]
            prot.append(_median(c["tradeoff"][j]["median_power"] for c in at_k
                                if c["cell"]["pi"] <= 0.2))
            free.append(_median(c["tradeoff"][j]["median_power"] for c in at_k
                                if c["cell"]["pi"] == 1))
            ratio.append(_median(c["tradeoff"][j]["median_n_ratio"] for c in at_k
                                 if c["cell"]["pi"] == 1))
        nop = [c["tradeoff"][j]["share_no_positive_effect"] for c in cells
               if c["cell"]["delta"] >= 0.2]
        points.append(TradeOffPoint(w, q, tuple(prot), tuple(free), tuple(ratio),
                                    statistics.mean(nop) if nop else 0.0,
                                    max(nop) if nop else 0.0))
    return TradeOff(ks, tuple(points), int(doc.get("reps", 0)),
                    (float(default[0]), 0.5, float(default[1])))


def _fmt(xs, digits=2):
    return " / ".join("-" if x is None else f"{x:.{digits}f}" for x in xs)


def tradeoff_text(t: TradeOff) -> str:
    """The trade-off table as ``pooler stress --calibration`` prints it."""
    from pooler._results import text_table
    ks = " / ".join(map(str, t.ks))
    out = ["Trade-off of the model-average rule (every rule from the same fit per literature, "
           "re-weighted):",
           "prior P(no bias) and the posterior quantile of the mean effect given a positive "
           "effect (0.5 = the realistic scenario); median over cells of the median true power "
           f"under strong selection (pi <= 0.2) and without selection (pi = 1), k = {ks}; the "
           "median n over the n the true effect needs (oracle) without selection; share of "
           "literatures with delta >= 0.2 without a positive plan (mean / worst cell). "
           "* = the default realistic and pessimistic scenarios.", ""]
    rows = []
    for p in t.points:
        mark = ("*" if abs(p.p_no_bias - t.default[0]) < 1e-9
                and any(abs(p.quantile - q) < 1e-9 for q in t.default[1:]) else "")
        rows.append([f"{p.p_no_bias:g}", f"{p.quantile:g}{mark}", _fmt(p.protection),
                     _fmt(p.power_unselected), _fmt(p.n_ratio_unselected),
                     f"{100 * p.no_plan_mean:.0f}% / {100 * p.no_plan_worst:.0f}%"])
    out.append(text_table(["P(no bias)", "quantile", "strong selection", "no selection",
                           "n / oracle n", "no plan"], rows))
    out += ["", f"Goals: realistic (quantile 0.5) {REALISTIC_BAND[0]:.2f}-"
                f"{REALISTIC_BAND[1]:.2f} without selection with n <= {REALISTIC_N_RATIO:g} x "
                f"oracle, >= {REALISTIC_PROTECTION:.2f} under strong selection; pessimistic >= "
                f"{PESSIMISTIC_PROTECTION:.2f} under strong selection; no plan <= "
                f"{100 * NO_PLAN_LIMIT:g}%."]
    c = choose_default(t)
    out.append(f"The principle of pooler.planning.tradeoff.choose_default picks prior P(no bias) = "
               f"{c.p_no_bias:g} and pessimistic quantile {c.pessimistic_quantile:g} on this "
               "grid: " + "; ".join(c.reasons) + ".")
    return "\n".join(out)


def tradeoff_markdown(t: TradeOff) -> str:
    """The trade-off table as Markdown (for the README)."""
    ks = " / ".join(map(str, t.ks))
    out = [f"| P(no bias) | quantile | strong selection (π ≤ 0.2), k = {ks} | no selection "
           f"(π = 1), k = {ks} | n / oracle n, no selection "
           "| no plan, δ ≥ 0.2 (mean / worst) |",
           "|---|---|---|---|---|---|"]
    for p in t.points:
        default = (abs(p.p_no_bias - t.default[0]) < 1e-9
                   and any(abs(p.quantile - q) < 1e-9 for q in t.default[1:]))
        q = f"**{p.quantile:g}**" if default else f"{p.quantile:g}"
        out.append(f"| {p.p_no_bias:g} | {q} | {_fmt(p.protection)} | "
                   f"{_fmt(p.power_unselected)} | {_fmt(p.n_ratio_unselected)} | "
                   f"{100 * p.no_plan_mean:.0f} % / {100 * p.no_plan_worst:.0f} % |")
    return "\n".join(out)


def tradeoff_plot(t: TradeOff):
    """One panel per k: cost without selection (median n over the oracle n, x) against
    protection under strong selection (median true power, y), one line per prior
    P(no bias) through the quantiles (the realistic scenario, quantile 0.5, at the left end);
    the goals as dotted lines and the defaults ringed."""
    from matplotlib.figure import Figure
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullFormatter
    from pooler.output.plots import BLUE, GREEN, GREY, ORANGE, PURPLE, VERMILION, WIDTH, _style
    colours = [BLUE, ORANGE, GREEN, PURPLE, VERMILION]
    fig = Figure(figsize=(WIDTH, 2.2 * ((len(t.ks) + 1) // 2) + 0.6), layout="constrained")
    axes = fig.subplots(max(1, (len(t.ks) + 1) // 2), min(2, len(t.ks)), squeeze=False,
                        sharey=True)
    ws = list(dict.fromkeys(p.p_no_bias for p in t.points))
    for i, k in enumerate(t.ks):
        ax = axes.flat[i]
        for w, col in zip(ws, colours * 3):
            pts = sorted((p for p in t.points if p.p_no_bias == w), key=lambda p: -p.quantile)
            xy = [(p.n_ratio_unselected[i], p.protection[i], p.quantile) for p in pts
                  if p.n_ratio_unselected[i] is not None and p.protection[i] is not None]
            if not xy:
                continue
            xs, ys, qs = zip(*xy)
            ax.plot(xs, ys, "-o", color=col, ms=3, lw=1,
                    label=f"prior P(no bias) = {w:g}")
            if w == ws[0]:
                for x, y, q in xy:
                    ax.annotate(f"{q:g}", (x, y), xytext=(3, -8), textcoords="offset points",
                                fontsize=5.5, color=GREY)
            if abs(w - t.default[0]) < 1e-9:
                for x, y, q in xy:
                    if any(abs(q - d) < 1e-9 for d in t.default[1:]):
                        ax.plot([x], [y], "o", mfc="none", mec="black", ms=8, mew=0.8)
        for level in (REALISTIC_PROTECTION, PESSIMISTIC_PROTECTION):
            ax.axhline(level, color=GREY, ls=":", lw=0.7)
        ax.axvline(REALISTIC_N_RATIO, color=GREY, ls=":", lw=0.7)
        ax.set_xscale("log")
        ax.xaxis.set_major_locator(FixedLocator([0.5, 0.75, 1, 1.5, 2, 3, 5, 10, 20, 50]))
        ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _: f"{x:g}"))
        ax.xaxis.set_minor_formatter(NullFormatter())
        ax.set_title(f"k = {k} studies", fontsize=8, loc="left")
        ax.set_ylim(0, 1)
        _style(ax)
        if i % 2 == 0:
            ax.set_ylabel("true power under\nstrong selection", fontsize=7)
        if i >= len(t.ks) - 2:
            ax.set_xlabel("n over the oracle n without selection", fontsize=7)
    for ax in list(axes.flat)[len(t.ks):]:
        ax.set_visible(False)
    handles, labels = axes.flat[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncol=len(ws), fontsize=6.5,
               frameon=False)
    fig.suptitle("Protection under selection against cost without it (numbers: posterior "
                 "quantile; ring: default)", fontsize=8.5, x=0.02, ha="left")
    return fig


@dataclass(frozen=True)
class Choice:
    """The default point a :class:`TradeOff` calls for (:func:`choose_default`)."""

    p_no_bias: float
    pessimistic_quantile: float
    reasons: tuple

    def to_dict(self) -> dict:
        return to_jsonable({"p_no_bias": self.p_no_bias,
                            "pessimistic_quantile": self.pessimistic_quantile,
                            "reasons": list(self.reasons)})


def _all(xs, ok):
    return all(x is not None and ok(x) for x in xs)


def choose_default(t: TradeOff, *, current=None) -> Choice:
    """Choose the default rule from a trade-off table by a fixed principle.

    1. The realistic scenario (quantile 0.5) carries the cost limit: without selection its
       median true power stays at most ``REALISTIC_BAND[1]`` and its median n at most
       ``REALISTIC_N_RATIO`` times the oracle n, at every k, with no plan in at most
       ``NO_PLAN_LIMIT`` of literatures with δ ≥ 0.2 on average. Among the prior
       probabilities of no bias that keep it, take the one whose realistic scenario protects
       most under strong selection at the worst k (max-min over k; ties: the larger prior
       probability, the published default side); when none keeps it, the one whose largest
       n ratio is smallest.
    2. The pessimistic scenario: with that prior, the highest quantile (the cheapest) whose
       protection under strong selection is at least ``PESSIMISTIC_PROTECTION`` at every k;
       when no quantile of the grid reaches it at every k, the current quantile stays (no
       move to an extreme for the sake of one k) and the reasons say so.

    The whole grid is judged on medians over cells, never on one cell.
    """
    from pooler.choices import ANALYSIS_DEFAULTS
    if current is None:
        current = (ANALYSIS_DEFAULTS["chance_of_no_bias"],
                   ANALYSIS_DEFAULTS["pessimistic_quantile"])
    reasons = []
    realistic = [p for p in t.points if abs(p.quantile - 0.5) < 1e-9]
    ok = [p for p in realistic
          if _all(p.power_unselected, lambda x: x <= REALISTIC_BAND[1] + 1e-12)
          and _all(p.n_ratio_unselected, lambda x: x <= REALISTIC_N_RATIO + 1e-12)
          and p.no_plan_mean <= NO_PLAN_LIMIT]
    if ok:
        best = max(ok, key=lambda p: (min(x for x in p.protection if x is not None),
                                      p.p_no_bias))
        reasons.append(f"prior P(no bias) {best.p_no_bias:g}: of "
                       f"{', '.join(f'{p.p_no_bias:g}' for p in ok)} (the priors whose "
                       "realistic scenario keeps the cost limit at every k) it protects most "
                       "at the worst k")
        w = best.p_no_bias
    else:
        # none keeps it: the prior whose realistic scenario over-asks least (lower priors
        # on no bias only ask for more)
        w = min(realistic, key=lambda p: (max(x for x in p.n_ratio_unselected
                                              if x is not None), -p.p_no_bias)).p_no_bias
        reasons.append(f"no prior P(no bias) of the grid keeps the realistic cost limit at "
                       f"every k; {w:g} over-asks least")
    pess = sorted((p for p in t.points if abs(p.p_no_bias - w) < 1e-9 and p.quantile < 0.5),
                  key=lambda p: -p.quantile)
    meet = [p for p in pess if _all(p.protection, lambda x: x >= PESSIMISTIC_PROTECTION)]
    if meet:
        q = meet[0].quantile
        reasons.append(f"pessimistic quantile {q:g}: the highest (cheapest) whose protection "
                       f"under strong selection is at least {PESSIMISTIC_PROTECTION:.2f} at "
                       "every k")
    else:
        q = current[1]
        reasons.append(f"no quantile of the grid reaches {PESSIMISTIC_PROTECTION:.2f} under "
                       f"strong selection at every k; the current {q:g} stays")
    return Choice(w, q, tuple(reasons))
