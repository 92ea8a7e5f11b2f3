"""The whole run as one document of blocks: the written report (``report.md``,
``report.html``) and the terminal summary of ``pooler run`` / ``pooler demo``.

The sections come from :mod:`pooler.output.report` (each written once from the result objects);
this module adds the parts only a whole run has (the decision, key numbers, inputs, methods
paragraph, reproducibility) and chooses which blocks each output shows: the report shows
every block, the terminal summary the ones not marked ``detail``. The renderers are in
:mod:`pooler.output.blocks`. No statistics are computed here.
"""
from __future__ import annotations

from pooler._results import estimable, fmt, plural
from pooler.output.blocks import (Block, brief, md_escape, to_html,  # noqa: F401 (outputs.py)
                                  to_markdown)
from pooler.output.report import (bias_blocks, conversion_blocks, interval_text, plan_blocks,
                                  pooled_blocks, scenario_blocks, sizes_and_total)

#: The caution, first as the two sentences every output shows, then the rest (report only).
CAUTION = (
    "These numbers are a planning aid. They do not replace a statistician, an ethics board, "
    "or the regulations that apply where the study will run; for clinical or "
    "safety-relevant studies have the sample size reviewed by a qualified statistician "
    "before recruitment.",
    "The power calculations assume the planned analysis and its assumptions hold: normally "
    "distributed outcomes without floor or ceiling effects, the stated correlations, "
    "independent observations and no missing data beyond the stated attrition. Real data "
    "usually fall short of these, so real needs are higher. The bias adjustments are "
    "sensitivity analyses, not corrections that recover the truth: each assumes a particular "
    "way in which studies went missing.",
)


# ------------------------------------------------------------------ building

def _leans_null(bf) -> bool:
    """The data favour no effect (inclusion Bayes factor below 1), but not strongly enough
    for the refusal rule (pooler.evidence.bma.NULL_BF)."""
    return isinstance(bf, float) and bf < 1.0


def decision_blocks(run) -> list[Block]:
    """The decision, first in the terminal summary, ``report.md`` and ``report.html``: the
    verdict in one sentence; for each scenario the planning effect and the whole people to
    recruit (per group and in total, after attrition) at the first target power; and what a
    feasible N buys when that is too many. Written once, rendered by every output."""
    from pooler.planning.sample_size import recruit_sizes
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
    bf = post.inclusion_bf.get("effect") if post is not None else None
    if who is not None and sc.supported and post is not None and _leans_null(bf):
        # between the refusal threshold and even odds: plan, but say first that the data
        # favour no effect, so that the n reads as the price of testing whether it exists
        verdict = (f"The literature leans towards no effect (Bayes factor {bf:.2f} for an "
                   f"effect; P(effect > 0) = {post.p_positive:.2f}; published estimate "
                   f"{lab} = {opt.effect:.2f}), so recruiting {who} for {pw} power at "
                   f"{lab} = {real.effect:.2f}, its most likely size if it exists, tests whether "
                   "it exists at all; if an effect that small would not matter, plan on the "
                   "smallest effect that would (--smallest-effect).")
    elif who is not None and sc.supported and post is not None:
        verdict = (f"Recruit {who} for {pw} power at the realistic {lab} = {real.effect:.2f}, "
                   "the model-averaged estimate once publication bias is allowed for, given "
                   f"a positive effect (P(effect > 0) = {post.p_positive:.2f}; published "
                   f"estimate {lab} = {opt.effect:.2f}).")
    elif who is not None and sc.supported:
        verdict = (f"Recruit {who} for {pw} power at the realistic {lab} = "
                   f"{real.effect:.2f}, the effect the literature supports once publication "
                   f"bias is allowed for (published estimate {lab} = {opt.effect:.2f}).")
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


def caution_blocks() -> list[Block]:
    """The caution: its first two sentences in every output, the rest in the report."""
    return [Block("h2", "Caution"), Block("p", CAUTION[0]),
            Block("p", CAUTION[1], detail=True)]


def build_blocks(run) -> list[Block]:
    """The report, as blocks, from a :class:`pooler.pipeline.RunResult`."""
    a, plan = run.analysis, run.plan
    eff = a.effects
    b: list[Block] = [Block("h1", "Sample-size justification from prior studies")]
    b += decision_blocks(run)
    b.append(Block("h2", "What this report is"))
    b.append(Block("p", (
        f"This report turns the statistics reported by {eff.n_used + eff.n_excluded} results "
        f"in {md_escape(a.sheet.name)} into a planning effect and a sample size for a "
        f"{md_escape(plan.design.describe())} study. It shows the literature as published, "
        "what the bias adjustments make of it, three planning scenarios, and the sample size "
        "each needs.")))
    b += caution_blocks()

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

    b += conversion_blocks(eff, a.sheet)
    b += pooled_blocks(a.pooled, eff)
    b += bias_blocks(a.bias, a.audit)
    b += scenario_blocks(a.scenarios, a.audit)
    b += plan_blocks(plan)

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


def summary_blocks(run, paths=()) -> list[Block]:
    """What ``pooler run`` and ``pooler demo`` print: the decision, then the same sections
    as the report without their ``detail`` blocks, the files written and the caution."""
    a = run.analysis
    out = decision_blocks(run) + [Block("h1", "How it was reached")]
    out += brief(pooled_blocks(a.pooled, a.effects) + bias_blocks(a.bias, a.audit)
                 + scenario_blocks(a.scenarios, a.audit) + plan_blocks(run.plan))
    if paths:
        out.append(Block("p", md_escape(f"Written to {paths[0].parent}/: "
                                        + ", ".join(p.name for p in paths))))
    return out + brief(caution_blocks())


def settings_in_words(run) -> list[str]:
    """The settings the numbers depend on, in words (not Python values)."""
    a, plan = run.analysis, run.plan
    pooled, sc = a.pooled, a.scenarios
    from pooler.evidence.pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
    out = [f"design: {plan.design.describe()}",
           f"test: {'two' if plan.tails == 2 else 'one'}-tailed, alpha = {plan.alpha:g}; "
           "target power " + ", ".join(f"{100 * p:g}%" for p in plan.powers),
           "attrition: " + (f"{100 * plan.attrition:g}%" if plan.attrition else "none assumed"),
           f"pooling: {ESTIMATOR_NAMES[pooled.estimator]} tau^2, "
           f"{INTERVAL_NAMES[pooled.interval]} {100 * pooled.level:g}% interval",
           f"realistic effect chosen by the '{sc.rule}' rule"
           + ("" if getattr(sc, "posterior", None) is not None else
              f"; safeguard level {100 * sc.safeguard_level:g}%"),
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
        out += [("random-effects estimate", fmt(pooled.pooled.estimate)),
                ("random-effects CI low", fmt(pooled.pooled.ci.low)),
                ("random-effects CI high", fmt(pooled.pooled.ci.high))]
    if estimable(pooled.heterogeneity):
        out += [("tau^2", fmt(pooled.heterogeneity.tau2, 4)),
                ("I^2", f"{100 * pooled.heterogeneity.i2:.1f}%")]
    out += [("optimistic effect", fmt(sc.optimistic.effect)),
            ("realistic effect", fmt(sc.realistic.effect)),
            ("pessimistic effect", fmt(sc.pessimistic.effect))]
    for r in plan.rows:
        out.append((f"{r.scenario} n total at {100 * r.power:g}% power", fmt(r.n_total)))
    return out


def _power_basis(design) -> str:
    """How the planning power was computed, in words: the Fisher z test and covariates held
    fixed are approximations; the design description says which covariate model was used.
    Each design's wording is in its registry entry (:mod:`pooler.planning.designs`)."""
    return design.power_basis()


def methods_paragraph(run) -> str:
    """A methods-section paragraph in our own words, every number filled in."""
    a, plan = run.analysis, run.plan
    eff, pooled, bias, sc = a.effects, a.pooled, a.bias, a.scenarios
    from pooler.evidence.pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
    metric = "Hedges' g" if pooled.metric == "g" else "Fisher's z-transformed correlations"
    sym = "g" if pooled.metric == "g" else "z"
    txt = [f"To justify the sample size we meta-analysed "
           f"{plural(eff.k, 'independent sample')} "
           f"({plural(eff.n_used, 'reported result')}"
           + (f"; {eff.n_excluded:,} more excluded with "
              f"{'its reason' if eff.n_excluded == 1 else 'their reasons'}"
              if eff.n_excluded else "")
           + ") from prior studies, converted to "
           + (f"{metric} (Hedges, 1981; Borenstein et al., 2009)" if pooled.metric == "g" else
              f"{metric} (Fisher, 1921; Borenstein et al., 2009)")
           + (", putting within-subject results on the between-subject scale (Morris & DeShon, "
              "2002)" if any(u.design == "within" for u in eff.units) else "") + "."]
    if estimable(pooled.pooled):
        p = pooled.pooled
        txt.append(f"A random-effects model ({ESTIMATOR_NAMES[pooled.estimator]} estimate of "
                   f"tau^2; {INTERVAL_NAMES[pooled.interval]} confidence interval"
                   + ({"hksj": "; Hartung & Knapp, 2001, its variance factor kept at 1 or "
                               "more so that it is never narrower than the Wald interval, "
                               "Knapp & Hartung, 2003",
                       "hksj-plain": "; Hartung & Knapp, 2001"}.get(pooled.interval, ""))
                   + f") gave {sym} = {p.estimate:.2f}, {100 * pooled.level:g}% CI "
                   f"{interval_text(p.ci, 2)}")
        h = pooled.heterogeneity
        if estimable(h):
            txt[-1] += f", with tau^2 = {h.tau2:.3f} and I^2 = {100 * h.i2:.0f}% (Higgins & Thompson, 2002)"
        if estimable(pooled.prediction):
            txt[-1] += (f"; the {100 * pooled.level:g}% prediction interval for the true "
                        f"effect of a new study was {interval_text(pooled.prediction, 2)} "
                        "(Higgins et al., 2009)")
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
    if {m.bias for m in post.models} & {"PET", "PEESE"}:
        kinds = ("selection models, and PET and PEESE on the standard error a study's size "
                 "alone gives (Pustejovsky & Rodgers, 2019), with and without an effect and "
                 "heterogeneity")
    else:
        kinds = ("selection models with and without an effect and heterogeneity; PET and "
                 "PEESE were left out because every study had the same size")
    models = (f"a Bayesian model average over {len(post.models)} publication-bias models "
              f"({kinds}; Maier, Bartoš & Wagenmakers, 2023; Bartoš et al., 2023)")
    bf = post.inclusion_bf["effect"]
    bf_txt = f"{bf:.2f}" if isinstance(bf, float) else "beyond the computable range"
    odds = f"P(effect > 0) = {post.p_positive:.2f}; inclusion Bayes factor for an effect {bf_txt}"
    from pooler.planning.scenarios import priors_sentence
    frequentist = (priors_sentence(sc) + " The frequentist adjustments above are reported "
                   "beside it as sensitivity analyses.").lstrip()
    k = post.k
    if k <= 2:
        frequentist += (f" With only {plural(k, 'study', 'studies')} the bias models cannot be "
                        "told apart, so the priors carry much of the planning effect.")
    if sc.supported:
        iv = sc.realistic_interval(0.95)
        ci = f", 95% credible interval {interval_text(iv, 2)}" if estimable(iv) else ""
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


def _join(items):
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


