"""The written report: one structure of blocks rendered to Markdown and to self-contained HTML.

Both renderings come from the same blocks, so every number in ``report.md`` is the number
in ``report.html``, and both are formatted from the result objects that ``results.json``
serialises. No statistics are computed here.
"""
from __future__ import annotations

import base64
import html
import re
from dataclasses import dataclass

from ._results import NotEstimable, estimable, fmt, plural
from .report import _p

CAUTION = (
    "This report is a planning aid. It does not replace a statistician, an ethics board, or the "
    "regulations that apply where the study will run; for clinical or safety-relevant studies "
    "have the sample size reviewed by a qualified statistician before recruitment. The power "
    "calculations assume the planned analysis and its assumptions hold: normally distributed "
    "outcomes without floor or ceiling effects, the stated correlations, independent "
    "observations and no missing data beyond the stated attrition. Real data usually fall "
    "short of these, so real needs are higher. The bias adjustments are sensitivity analyses, "
    "not corrections that recover the truth: each assumes a particular way in which studies "
    "went missing."
)


@dataclass(frozen=True)
class Block:
    kind: str            # "h1", "h2", "p", "table", "list", "figure", "code", "key",
    #                      "begin" / "end" (a named section: text is its id; HTML only)
    text: str = ""
    headers: tuple = ()
    rows: tuple = ()
    items: tuple = ()
    src: str = ""        # figure file name


def md_escape(text: str) -> str:
    """Escape user text for Markdown (and for the HTML many Markdown renderers allow)."""
    text = str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return re.sub(r"([\\`*_\[\]|#!])", r"\\\1", text)


def _cell(x) -> str:
    if isinstance(x, NotEstimable):
        return str(x)
    return fmt(x)


def _num(x, d=3) -> str:
    if isinstance(x, NotEstimable) or x is None:
        return str(x) if x is not None else ""
    if isinstance(x, int):
        return f"{x:,}"
    return f"{x:.{d}f}"


def _count(x: float) -> str:
    return f"{int(x):,}" if float(x).is_integer() else f"{x:.1f}"


def _ci(ci, d=3) -> str:
    if ci is None or not estimable(ci):
        return ""
    return f"[{ci.low:.{d}f}, {ci.high:.{d}f}]"


# ------------------------------------------------------------------ building

def decision_blocks(run) -> list[Block]:
    """The decision, first in the terminal summary, ``report.md`` and ``report.html``: the
    verdict in one sentence; for each scenario the planning effect and the whole people to
    recruit (per group and in total, after attrition) at the first target power; and what a
    feasible N buys when that is too many. Written once, rendered by every output."""
    from .planning import recruit_sizes
    from ._results import plural
    from .report import sizes_and_total
    a, plan = run.analysis, run.plan
    sc, des = a.scenarios, plan.design
    lab, first = plan.effect_label, plan.powers[0]
    pw = f"{100 * first:g}%"
    real = plan.row("realistic", first)
    opt = plan.row("optimistic", first)

    def recruit(row):
        if not isinstance(row.n_per_group, int):
            return None
        groups, total = sizes_and_total(row.n_per_group, des, plan.attrition)
        kept = (f"{row.n_total:,} analysed after {100 * plan.attrition:g}% attrition"
                if plan.attrition else "")
        inner = "; ".join(x for x in (groups, kept) if x)
        return plural(total, "participant") + (f" ({inner})" if inner else "")

    who = recruit(real)
    sesoi = sc.sesoi
    post = getattr(sc, "posterior", None)
    if who is not None and sc.supported and post is not None:
        verdict = (f"Recruit {who} for {pw} power at the realistic {lab} = {real.effect:.2f}, "
                   "the model-averaged estimate once publication bias is allowed for, given "
                   f"a positive effect (P(effect > 0) = {post.p_positive:.2f}; as published: "
                   f"{opt.effect:.2f}).")
    elif who is not None and sc.supported:
        verdict = (f"Recruit {who} for {pw} power at the realistic {lab} = "
                   f"{real.effect:.2f}, the effect the literature supports once publication "
                   f"bias is allowed for (as published: {opt.effect:.2f}).")
    elif who is not None and sesoi is not None:
        verdict = (f"The literature does not support an effect of at least the smallest "
                   f"effect of interest ({lab} = {real.effect:.2f}), so the plan rests on that "
                   f"smallest effect: recruit {who} for {pw} power.")
    elif not sc.supported:
        verdict = (f"The literature does not support a positive effect (realistic {lab} = "
                   f"{real.effect:.2f}), so it cannot justify a sample size: choose the "
                   "smallest effect that would matter and plan on it (--smallest-effect).")
    else:
        verdict = (f"No sample size reaches {pw} power at the realistic {lab} = "
                   f"{real.effect:.2f}: {real.n_total.reason}.")
    out = [Block("begin", "decision"), Block("h2", "The decision"),
           Block("p", "**" + md_escape(verdict) + "**")]

    grouped = des.unit is not None
    unit = f"per {des.unit}"
    heads = ["scenario", f"planning {lab}"]
    if grouped:
        heads += [f"analysed {unit}", "analysed in total"]
        if plan.attrition:
            heads += [f"recruit {unit}", "recruit in total"]
    else:
        heads += ["N analysed"] + (["N to recruit"] if plan.attrition else [])
    rows = []
    for s in plan.scenarios:
        r = plan.row(s.scenario, first)
        line = [s.scenario, f"{r.effect:.2f}"]
        if not isinstance(r.n_per_group, int):
            line += ["cannot be reached"] + [""] * (len(heads) - 3)
        else:
            for attr in (0.0, plan.attrition) if plan.attrition else (0.0,):
                sizes, total = recruit_sizes(r.n_per_group, des, attr)
                each = " + ".join(f"{x:,}" for x in dict.fromkeys(sizes[:2]))
                line += [each, f"{total:,}"] if grouped else [f"{total:,}"]
        rows.append(tuple(line))
    out.append(Block("p", f"Numbers for {pw} power, {'two' if plan.tails == 2 else 'one'}-"
                          f"tailed alpha = {plan.alpha:g}; {md_escape(des.describe())}:"))
    out.append(Block("table", headers=tuple(heads), rows=tuple(rows)))
    if post is not None and a.pooled.k <= 2:
        out.append(Block("p", f"With only {plural(a.pooled.k, 'study', 'studies')} the "
                              "publication-bias models cannot be told apart: the priors carry "
                              "much of these numbers."))

    fx = plan.fixed_n
    if fx is not None:
        groups, used = sizes_and_total(fx.n_per_group, des)
        inner = "; ".join(x for x in (groups, f"--n {fx.n_total:,} asked for; whole groups "
                                               f"use {used:,}" if used != fx.n_total else "")
                          if x)
        powers = ", ".join(f"{p:.2f} {name}" for name, _, p in fx.power)
        det = next(((t, e) for t, _, e in fx.detectable if t == first), None)
        txt = (f"If that is not feasible: with N = {used:,} analysed"
               + (f" ({inner})" if inner else "") + ", the power is " + powers)
        if det is not None and estimable(det[1]):
            txt += (f"; the smallest effect it detects with {pw} power is {lab} = "
                    f"{det[1]:.2f}")
        out.append(Block("p", txt + "."))
    else:
        out.append(Block("p", "If that is not feasible: rerun with --n and the largest N you "
                              "can recruit; the report then gives the power it buys under "
                              "each scenario and the smallest effect it can detect."))
    out.append(Block("end", "decision"))
    return out


def build_blocks(run) -> list[Block]:
    """The report, as blocks, from a :class:`pooler.pipeline.RunResult`."""
    a, plan = run.analysis, run.plan
    eff, pooled, bias, sc = a.effects, a.pooled, a.bias, a.scenarios
    sym = "g" if pooled.metric == "g" else "z"
    b: list[Block] = []
    b.append(Block("h1", "Sample-size justification from prior studies"))
    b += decision_blocks(run)
    b.append(Block("h2", "What this report is"))
    b.append(Block("p", (
        f"This report turns the statistics reported by {eff.n_used + eff.n_excluded} results "
        f"in {md_escape(a.sheet.name)} into a planning effect and a sample size for a "
        f"{plan.design.describe()} study. It shows the literature as published, what the "
        "bias adjustments make of it, three planning scenarios, and the sample size each "
        "needs.")))
    b.append(Block("h2", "Caution"))
    b.append(Block("p", CAUTION))

    b.append(Block("h2", "Key numbers"))
    b.append(Block("key", headers=("quantity", "value"), rows=tuple(key_numbers(run))))

    b.append(Block("h2", "Inputs"))
    b.append(Block("list", items=(
        f"file: {md_escape(a.sheet.name)}",
        f"SHA-256: `{a.sheet.sha256}`",
        f"rows read: {len(eff.rows):,}; used: {eff.n_used:,}; excluded: {eff.n_excluded:,}; "
        f"independent samples pooled: {eff.k:,}",
    )))
    excluded = [r for r in eff.rows if r.status == "excluded"]
    if excluded:
        b.append(Block("p", "Excluded rows:"))
        b.append(Block("list", items=tuple(
            f"row {r.row}, {md_escape(r.study)}: {md_escape(r.reason)}" for r in excluded)))
    if eff.assumptions:
        b.append(Block("p", "Assumptions made while converting:"))
        b.append(Block("list", items=tuple(md_escape(x) for x in eff.assumptions)))
    if eff.warnings:
        b.append(Block("p", "Warnings:"))
        b.append(Block("list", items=tuple(md_escape(w) for w in eff.warnings)))

    if eff.inconsistencies:
        b.append(Block("h2", "Reported numbers that disagree"))
        b.append(Block("p", (
            "A printed result is several numbers that must agree: the statistic and its "
            "degrees of freedom fix the p-value, the degrees of freedom follow from the sample "
            "sizes, and a confidence interval sits around its estimate. Allowing for the "
            "rounding of every printed number, these rows still disagree (disagreements that "
            "move p across .05 first). Check them against the paper; column 'trust' chooses "
            "whether the statistic (default) or the p is used.")))
        b.append(Block("list", items=tuple(
            f"row {c.row}, {md_escape(c.study)}"
            + (" (changes significance at .05)" if c.changes_significance else "")
            + f": {md_escape(c.message)}" for c in eff.inconsistencies)))

    b.append(Block("h2", "Conversions"))
    from .report import _reported
    recs = {rec.row: rec for rec in a.sheet.records}
    rows = []
    for r in eff.rows:
        rows.append((r.row, md_escape(r.study), md_escape(_reported(r, recs[r.row])), r.design,
                     _num(r.effect) if r.effect is not None else "",
                     _num(r.se) if r.se is not None else "",
                     "" if r.n_total is None else _count(r.n_total),
                     r.status, md_escape(r.reason or "; ".join(r.notes))))
    b.append(Block("table", headers=("row", "study", "reported", "design", sym, "SE", "n",
                                      "status", "note"), rows=tuple(rows)))

    b.append(Block("h2", "Pooled estimate"))
    from .report import pooled_summary
    items = [_safe_md(line) for line in pooled_summary(pooled)]
    items += [md_escape(n) for n in pooled.notes]
    b.append(Block("list", items=tuple(items)))
    b.append(Block("figure", text="Forest plot: each study with its 95% CI (marker area by "
                   "weight), the pooled estimates, the prediction interval, and the realistic "
                   "and pessimistic planning effects.", src="forest"))
    if isinstance(pooled.leave_one_out, tuple):
        b.append(Block("p", "Leave one out:"))
        b.append(Block("table", headers=("analysis", "k", sym, "95% CI", "tau^2"),
                       rows=tuple((md_escape(r.label), r.k, _num(r.estimate),
                                   f"[{r.ci_low:.3f}, {r.ci_high:.3f}]", _num(r.tau2, 4))
                                  for r in pooled.leave_one_out)))
    if pooled.subgroups is not None and estimable(pooled.subgroups):
        s = pooled.subgroups
        b.append(Block("p", f"Subgroups (separate tau^2): Q between = {s.q_between:.2f}, "
                            f"df = {s.df}, {_p(s.p)}"))
        b.append(Block("table", headers=("subgroup", "k", sym, "95% CI"),
                       rows=tuple((md_escape(r.label), r.k, _num(r.estimate),
                                   f"[{r.ci_low:.3f}, {r.ci_high:.3f}]") for r in s.rows)))

    b.append(Block("h2", "Bias sensitivity"))
    rows = []
    for method, est, ci, note in bias.table():
        rows.append((method, "" if est is None else (str(est) if isinstance(est, NotEstimable)
                                                      else _num(est)),
                     _ci(ci) if ci is not None else "",
                     "" if isinstance(est, NotEstimable) else md_escape(note)))
    b.append(Block("table", headers=("method", sym, "95% CI", "note"), rows=tuple(rows)))
    sr = bias.selection_ratio
    if estimable(sr):
        b.append(Block("p", "How much selective publication it would take (the sensitivity "
                       "analysis of Mathur & VanderWeele 2020): if significant results in the "
                       "hypothesised direction were published more often than the rest, the "
                       "estimate would be "
                       + "; ".join(f"{m:.3f} at {e:g} times as often"
                                   for e, m in zip(sr.eta, sr.estimates))
                       + f"; from the studies that were not significantly positive alone, "
                       f"{_num(sr.worst_case)}; the publication advantage that would bring the "
                       f"estimate to 0: {_num(sr.s_value, 2)}."))
    tes = a.audit.excess_significance
    if estimable(tes):
        b.append(Block("p", f"Excess significance (Ioannidis & Trikalinos 2007): {tes.observed} "
                            f"of {plural(tes.k, 'study', 'studies')} significant, "
                            f"{tes.expected:.1f} expected at the realistic effect; chi2(1) = "
                            f"{tes.chi2:.2f}, {_p(tes.p)}."))
    else:
        b.append(Block("p", "Excess significance (Ioannidis & Trikalinos 2007): "
                            + md_escape(tes.reason) + "."))
    b.append(Block("figure", text="Contour-enhanced funnel plot: shaded regions mark "
                   "significance; hollow markers are studies imputed by trim-and-fill.",
                   src="funnel"))
    b.append(Block("figure", text="Every estimate on one axis.", src="ladder"))

    b.append(Block("h2", "Planning scenarios"))
    b.append(Block("table", headers=("scenario", sym, "basis"),
                   rows=tuple((s.name, _num(s.effect), md_escape(s.basis))
                              for s in (sc.optimistic, sc.realistic, sc.pessimistic))))
    iv, ci95 = sc.realistic_interval(), sc.realistic_interval(0.95)
    if getattr(sc, "posterior", None) is not None:
        from .report import model_average_lines
        b.append(Block("p", "Posterior of the model average (the default planning rule); the "
                            "bias-sensitivity table above is its frequentist counterpart:"))
        b.append(Block("list", items=tuple(_safe_md(x) for x in model_average_lines(sc))))
    elif estimable(iv):
        b.append(Block("p", f"Realistic {sym} = {sc.realistic.effect:.3f} (SE "
                            f"{sc.realistic.se:.3f}); {100 * iv.level:g}% safeguard interval "
                            f"{_ci(iv)}, 95% interval {_ci(ci95)}."))
    b.append(Block("p", md_escape(sc.verdict)))
    au = a.audit.literature
    if not estimable(au):
        b.append(Block("p", md_escape(f"Literature audit: {au.reason}.")))
    else:
        b.append(Block("p", f"Literature audit: at the realistic effect the prior studies had a "
                            f"median power of {au.median:.2f}; {100 * au.share_80:.0f}% had 80% "
                            "or more."))

    b.append(Block("h2", "Planning table"))
    from .report import plan_table
    headers, prow = plan_table(plan)
    b.append(Block("table", headers=tuple(headers),
                   rows=tuple(tuple(_cell(c) for c in r) for r in prow)))
    tails = "two-tailed" if plan.tails == 2 else "one-tailed"
    b.append(Block("p", f"{tails.capitalize()} test, alpha = {plan.alpha:g}"
                        + (f", attrition {100 * plan.attrition:g}%" if plan.attrition else "")
                        + f"; design: {plan.design.describe()}."))
    asr = plan.assurance
    if asr is not None:
        if estimable(asr):
            dist = (f"Normal({asr.mean:.3f}, {asr.sd:.3f}^2)"
                    if getattr(asr, "form", "normal") == "normal" else
                    f"the model-averaged posterior predictive (mean {asr.mean:.3f}, "
                    f"SD {asr.sd:.3f})")
            b.append(Block("p", f"Assurance over {dist} (ceiling {asr.ceiling:.3f}):"))
            arows, why = [], []
            for t, n, nt, ach in zip(asr.targets, asr.n, asr.n_total, asr.achieved):
                if isinstance(n, NotEstimable):
                    arows.append((f"{100 * t:g}%", "cannot be reached", "", ""))
                    why.append(n.reason)
                else:
                    arows.append((f"{100 * t:g}%", _cell(n), _cell(nt), _cell(ach)))
            b.append(Block("table", headers=("target assurance", "n", "total", "assurance"),
                           rows=tuple(arows)))
            for w in dict.fromkeys(why):
                b.append(Block("p", md_escape(w[0].upper() + w[1:]) + "."))
        else:
            b.append(Block("p", f"Assurance: {asr}"))
    fx = plan.fixed_n
    if fx is not None:
        from .report import sizes_and_total
        groups, used = sizes_and_total(fx.n_per_group, plan.design)
        b.append(Block("p", f"With a fixed total N = {fx.n_total:,}"
                            + (f" ({groups})" if groups else "")
                            + (f", of which {used:,} are used (whole groups)"
                               if used != fx.n_total else "") + ":"))
        b.append(Block("table", headers=("scenario", "power"),
                       rows=tuple((s, _num(pw)) for s, _, pw in fx.power)))
        b.append(Block("table", headers=("target power", f"smallest {plan.design.effect_label}"),
                       rows=tuple((f"{100 * t:g}%", _cell(de)) for t, de, _ in fx.detectable)))
    for note in getattr(plan, "notes", ()):
        b.append(Block("p", md_escape("Note: " + note + ".")))
    b.append(Block("figure", text="Power against total N for each scenario, with the "
                   "assurance curve.", src="power"))

    b.append(Block("h2", "Methods paragraph"))
    b.append(Block("p", methods_paragraph(run)))

    b.append(Block("h2", "Reproducibility"))
    b.append(Block("p", f"Made with pooler {md_escape(run.version)} from {md_escape(a.sheet.name)} "
                        f"(SHA-256 `{a.sheet.sha256}`). This command, run on the same sheet, "
                        "repeats it; options it does not name were at their defaults, and "
                        "results.json lists every setting:"))
    b.append(Block("code", text=run.command))
    b.append(Block("list", items=tuple(md_escape(x) for x in settings_in_words(run))))
    return b


def settings_in_words(run) -> list[str]:
    """The settings the numbers depend on, in words (not Python values)."""
    a, plan = run.analysis, run.plan
    pooled, sc = a.pooled, a.scenarios
    from .pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
    out = [f"design: {plan.design.describe()}",
           f"test: {'two' if plan.tails == 2 else 'one'}-tailed, alpha = {plan.alpha:g}; "
           "target power " + ", ".join(f"{100 * p:g}%" for p in plan.powers),
           "attrition: " + (f"{100 * plan.attrition:g}%" if plan.attrition else "none assumed"),
           f"pooling: {ESTIMATOR_NAMES[pooled.estimator]} tau^2, "
           f"{INTERVAL_NAMES[pooled.interval]} {100 * pooled.level:g}% interval",
           f"realistic effect chosen by the '{sc.rule}' rule; safeguard level "
           f"{100 * sc.safeguard_level:g}%",
           "smallest effect size of interest: " + ("none given" if sc.sesoi is None
                                                    else f"{sc.sesoi:g}")]
    if plan.fixed_n is not None:
        out.append(f"feasible N examined: {plan.fixed_n.n_total:,}")
    return out


def key_numbers(run) -> list[tuple[str, str]]:
    """Labelled numbers that tests parse back and compare with results.json."""
    a, plan = run.analysis, run.plan
    pooled, sc = a.pooled, a.scenarios
    out = [("k (independent samples)", str(pooled.k))]
    if estimable(pooled.pooled):
        out += [("random-effects estimate", _num(pooled.pooled.estimate)),
                ("random-effects CI low", _num(pooled.pooled.ci.low)),
                ("random-effects CI high", _num(pooled.pooled.ci.high))]
    if estimable(pooled.heterogeneity):
        out += [("tau^2", _num(pooled.heterogeneity.tau2, 4)),
                ("I^2", f"{100 * pooled.heterogeneity.i2:.1f}%")]
    out += [("optimistic effect", _num(sc.optimistic.effect)),
            ("realistic effect", _num(sc.realistic.effect)),
            ("pessimistic effect", _num(sc.pessimistic.effect))]
    for r in plan.rows:
        out.append((f"{r.scenario} n total at {100 * r.power:g}% power", _cell(r.n_total)))
    return out


def _power_basis(design) -> str:
    """How the planning power was computed, in words: the Fisher z test and covariates held
    fixed are approximations; the design description says which covariate model was used.
    Each design's wording is in its registry entry (:mod:`pooler.designs`)."""
    return design.power_basis()


def methods_paragraph(run) -> str:
    """A methods-section paragraph in our own words, every number filled in."""
    a, plan = run.analysis, run.plan
    eff, pooled, bias, sc = a.effects, a.pooled, a.bias, a.scenarios
    from .pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
    metric = "Hedges' g" if pooled.metric == "g" else "Fisher's z-transformed correlations"
    sym = "g" if pooled.metric == "g" else "z"
    txt = [f"To justify the sample size we meta-analysed "
           f"{plural(eff.k, 'independent sample')} "
           f"({plural(eff.n_used, 'reported result')}; {eff.n_excluded:,} excluded with "
           f"reasons) from prior "
           f"studies, converted to {metric} (Hedges, 1981; Borenstein et al., 2009)"
           + (", putting within-subject results on the between-subject scale (Morris & DeShon, "
              "2002)" if any(u.design == "within" for u in eff.units) else "") + "."]
    if estimable(pooled.pooled):
        p = pooled.pooled
        txt.append(f"A random-effects model ({ESTIMATOR_NAMES[pooled.estimator]} estimate of "
                   f"tau^2; {INTERVAL_NAMES[pooled.interval]} confidence interval"
                   + ("; Hartung & Knapp, 2001" if pooled.interval == "hksj" else "")
                   + f") gave {sym} = {p.estimate:.2f}, {100 * pooled.level:g}% CI "
                   f"{_ci(p.ci, 2)}")
        h = pooled.heterogeneity
        if estimable(h):
            txt[-1] += f", with tau^2 = {h.tau2:.3f} and I^2 = {100 * h.i2:.0f}% (Higgins & Thompson, 2002)"
        if estimable(pooled.prediction):
            txt[-1] += (f"; the {100 * pooled.level:g}% prediction interval for the true "
                        f"effect of a new study was {_ci(pooled.prediction, 2)} (Higgins et "
                        "al., 2009)")
        txt[-1] += "."
    methods = bias.cited()
    if methods:
        txt.append("Because published effects are inflated by publication bias and low power, "
                   "we assessed small-study effects and selection with "
                   + _join(methods) + ".")
    r, ps = sc.realistic, sc.pessimistic
    first = plan.powers[0]
    row = plan.row("realistic", first)
    pes = plan.row("pessimistic", first)
    lab = plan.effect_label
    eff_r, eff_p, eff_o = (plan.row(n, first).effect
                           for n in ("realistic", "pessimistic", "optimistic"))
    safeguard = "safeguard" in ps.basis
    post = getattr(sc, "posterior", None)
    if post is not None:
        txt.append(_posterior_methods(sc, post, lab, eff_r, eff_p, eff_o))
    elif sc.supported:
        txt.append(f"We planned on a realistic effect of {lab} = {eff_r:.2f} ({r.basis}) "
                   f"rather than the published estimate of {eff_o:.2f}, and checked a "
                   f"pessimistic value of {eff_p:.2f}, the {ps.basis}"
                   + (" (Perugini et al., 2014)" if safeguard else "") + ".")
    elif sc.sesoi is not None:
        txt.append(f"The literature does not support an effect of at least the smallest effect "
                   f"size of interest, {lab} = {eff_r:.2f}, which we set as the smallest effect "
                   "that would matter (Lakens, Scheel & Isager, 2018); we therefore planned on "
                   "that value rather than on an estimate from the literature (published "
                   f"estimate {eff_o:.2f}).")
    else:
        txt.append(f"The literature does not support a positive effect (realistic estimate "
                   f"{lab} = {eff_r:.2f}, {r.basis}; published estimate {eff_o:.2f}), so it "
                   "cannot justify a sample size; a smallest effect size of interest has to be "
                   "chosen on substantive grounds (Lakens, Scheel & Isager, 2018).")
    tails = "two-tailed" if plan.tails == 2 else "one-tailed"
    if isinstance(row.n_total, int):
        from .report import sizes_and_total
        groups, _ = sizes_and_total(row.n_per_group, plan.design)
        n_txt = f"{groups} ({row.n_total:,} in total)" if groups else f"N = {row.n_total:,}"
        s = (f"For a {tails} test at alpha = {plan.alpha:g} with {100 * first:g}% power, the "
             f"planned {plan.design.describe()} study needs {n_txt}, computed with "
             f"{_power_basis(plan.design)}")
        if plan.attrition:
            rgroups, rtotal = sizes_and_total(row.n_per_group, plan.design, plan.attrition)
            s += (f"; allowing for {100 * plan.attrition:g}% attrition we will recruit "
                  f"{rtotal:,}" + (f" ({rgroups})" if rgroups else ""))
        s += "."
        if isinstance(pes.n_total, int) and (sc.supported or sc.sesoi is None):
            s += f" Under the pessimistic effect, N = {pes.n_total:,} would be needed."
        txt.append(s)
    elif sc.supported:
        txt.append(f"No sample size reaches {100 * first:g}% power for the realistic effect: "
                   f"{row.n_total.reason}.")
    asr = plan.assurance
    if (sc.supported and asr is not None and estimable(asr)
            and isinstance(asr.n[0], int)):
        txt.append(f"Allowing for uncertainty in the true effect, N = {asr.n_total[0]:,} gives an "
                   f"assurance (expected power) of {100 * asr.targets[0]:g}% (O'Hagan et al., "
                   "2005).")
    return " ".join(txt)


def _posterior_methods(sc, post, lab, eff_r, eff_p, eff_o) -> str:
    """The planning-effect sentences of the methods paragraph under the model-average rule."""
    models = (f"a Bayesian model average over {len(post.models)} publication-bias models "
              "(selection models, PET and PEESE, with and without an effect and "
              "heterogeneity; Maier, Bartoš & Wagenmakers, 2023; Bartoš et al., 2023)")
    bf = post.inclusion_bf["effect"]
    bf_txt = f"{bf:.2f}" if isinstance(bf, float) else "beyond the computable range"
    odds = f"P(effect > 0) = {post.p_positive:.2f}; inclusion Bayes factor for an effect {bf_txt}"
    from .scenarios import priors_sentence
    frequentist = (priors_sentence(sc) + " The frequentist adjustments above are reported "
                   "beside it as sensitivity analyses.").lstrip()
    k = post.k
    if k <= 2:
        frequentist += (f" With only {plural(k, 'study', 'studies')} the bias models cannot be "
                        "told apart, so the priors carry much of the planning effect.")
    if sc.supported:
        iv = sc.realistic_interval(0.95)
        ci = f", 95% credible interval {_ci(iv, 2)}" if estimable(iv) else ""
        return (f"The planning effect comes from {models}: we planned on the posterior median "
                f"of the mean effect given a positive effect, {lab} = {eff_r:.2f}{ci} ({odds}), "
                f"rather than the published estimate of {eff_o:.2f}, and checked a pessimistic "
                f"value of {eff_p:.2f}, the {sc.pessimistic.basis}. " + frequentist)
    if sc.sesoi is not None:
        return (f"In {models}, the posterior did not support an effect of at least the "
                f"smallest effect size of interest ({odds}); we therefore planned on that "
                f"smallest effect, {lab} = {eff_r:.2f}, which we set as the smallest effect "
                "that would matter (Lakens, Scheel & Isager, 2018), rather than on an "
                f"estimate from the literature (published estimate {eff_o:.2f}). "
                + frequentist)
    return (f"In {models}, the posterior favoured no positive effect ({odds}; published "
            f"estimate {eff_o:.2f}), so the literature cannot justify a sample size; a "
            "smallest effect size of interest has to be chosen on substantive grounds "
            "(Lakens, Scheel & Isager, 2018). " + frequentist)


def _safe_md(text: str) -> str:
    """Our own summary text for Markdown: only the characters Markdown would misread."""
    return text.replace("|", "\\|").replace("*", "\\*")


def _join(items):
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


# ------------------------------------------------------------------ rendering

def to_markdown(blocks, figure_ext: str) -> str:
    out = []
    for b in blocks:
        if b.kind == "h1":
            out.append(f"# {b.text}\n")
        elif b.kind == "h2":
            out.append(f"## {b.text}\n")
        elif b.kind == "p":
            out.append(b.text + "\n")
        elif b.kind == "list":
            out.append("\n".join(f"- {i}" for i in b.items) + "\n")
        elif b.kind in ("table", "key"):
            out.append("| " + " | ".join(b.headers) + " |")
            out.append("|" + "---|" * len(b.headers))
            out += ["| " + " | ".join(str(c) for c in r) + " |" for r in b.rows]
            out.append("")
        elif b.kind == "figure":
            out.append(f"![{b.text}]({b.src}.{figure_ext})\n")
            out.append(f"*{b.text}*\n")
        elif b.kind == "code":
            out.append("```\n" + b.text + "\n```\n")
    return "\n".join(out)


def to_text(blocks, width: int = 100) -> str:
    """The blocks as plain terminal text (headings underlined, tables aligned, Markdown
    escapes removed)."""
    import textwrap

    from ._results import text_table

    def plain(t):
        t = re.sub(r"(?<!\\)\*\*(.+?)(?<!\\)\*\*", r"\1", str(t))
        t = re.sub(r"`([^`]*)`", r"\1", t)
        t = re.sub(r"\\([\\`*_\[\]|#!])", r"\1", t)
        return html.unescape(t)
    out = []
    for b in blocks:
        if b.kind in ("h1", "h2"):
            out += ["", plain(b.text), ("=" if b.kind == "h1" else "-") * len(plain(b.text))]
        elif b.kind == "p":
            out += (textwrap.wrap(plain(b.text), width) or [""]) + [""]
        elif b.kind == "list":
            for i in b.items:
                out += textwrap.wrap(plain(i), width, initial_indent="  - ",
                                     subsequent_indent="    ")
        elif b.kind in ("table", "key"):
            out += [text_table([plain(h) for h in b.headers],
                               [[plain(c) for c in r] for r in b.rows]), ""]
        elif b.kind == "code":
            out.append(b.text)
    return "\n".join(out).strip("\n")


_CSS = """body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;max-width:58rem;
margin:2rem auto;padding:0 1rem;line-height:1.45;color:#1d1d1d}h1{font-size:1.6rem}
h2{font-size:1.2rem;border-bottom:1px solid #ddd;padding-bottom:.2rem;margin-top:2rem}
table{border-collapse:collapse;font-size:.85rem;margin:.6rem 0}td,th{padding:.2rem .5rem;
border-bottom:1px solid #eee;text-align:left}th{background:#f4f4f4}
figure{margin:1rem 0}figure img{max-width:100%}figcaption{font-size:.85rem;color:#555}
code,pre{background:#f6f6f6;padding:.1rem .3rem}pre{padding:.6rem;overflow-x:auto}
h1{margin:1rem 0 .6rem}section.decision{border-left:4px solid #2a6f97;background:#f3f8fb;
padding:.1rem 1rem .4rem;margin:0 0 1.5rem}section.decision h2{margin-top:.6rem;border:0}
section.decision p{margin:.5rem 0}"""


def _inline_md(text: str) -> str:
    """The few Markdown constructs our blocks use, to HTML (text is already entity-escaped
    by :func:`md_escape` where it is user text)."""
    text = re.sub(r"`([^`]*)`", r"<code>\1</code>", text)
    text = re.sub(r"(?<!\\)\*\*(.+?)(?<!\\)\*\*", r"<strong>\1</strong>", text)
    text = re.sub(r"\\([\\`*_\[\]|#!])", r"\1", text)
    return text


def to_html(blocks, figures_png: dict[str, bytes], title: str) -> str:
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           f"<title>{html.escape(title)}</title>", f"<style>{_CSS}</style></head><body>"]
    for b in blocks:
        if b.kind == "h1":
            out.append(f"<h1>{html.escape(b.text)}</h1>")
        elif b.kind == "h2":
            out.append(f"<h2>{html.escape(b.text)}</h2>")
        elif b.kind == "p":
            out.append(f"<p>{_inline_md(_safe(b.text))}</p>")
        elif b.kind == "list":
            out.append("<ul>" + "".join(f"<li>{_inline_md(_safe(i))}</li>" for i in b.items)
                       + "</ul>")
        elif b.kind in ("table", "key"):
            head = "".join(f"<th>{html.escape(h)}</th>" for h in b.headers)
            body = "".join("<tr>" + "".join(f"<td>{_inline_md(_safe(str(c)))}</td>" for c in r)
                           + "</tr>" for r in b.rows)
            out.append(f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>")
        elif b.kind == "figure":
            data = base64.b64encode(figures_png[b.src]).decode("ascii")
            out.append(f'<figure><img alt="{html.escape(b.text)}" '
                       f'src="data:image/png;base64,{data}"><figcaption>'
                       f"{html.escape(b.text)}</figcaption></figure>")
        elif b.kind == "code":
            out.append(f"<pre><code>{html.escape(b.text)}</code></pre>")
        elif b.kind == "begin":
            out.append(f'<section id="{html.escape(b.text)}" class="{html.escape(b.text)}">')
        elif b.kind == "end":
            out.append("</section>")
    out.append("</body></html>")
    return "\n".join(out)


def _safe(text: str) -> str:
    """User text in blocks is already entity-escaped by :func:`md_escape`; escape the '<' and
    '>' of our own words (as in "p < .001") so that nothing can open a tag."""
    return text.replace("<", "&lt;").replace(">", "&gt;")
