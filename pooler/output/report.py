"""Every section of pooler's output, written once as blocks from the stage results.

Each ``*_blocks`` function turns a result object into :class:`pooler.output.blocks.Block` values
(headings, paragraphs, notes, tables of formatted cells); the terminal, ``report.md``,
``report.html`` and a notebook's ``_repr_html_`` all render these same blocks
(:mod:`pooler.output.blocks`), so a section is never worded twice. The ``*_text`` functions are what
the single-stage commands print. No statistics are computed here.
"""
from __future__ import annotations

import math

from pooler._results import NotEstimable, csv_safe, estimable, fmt, p_text, plural
from pooler.output.blocks import Block, md_escape, safe_md, to_markdown, to_text

#: Above this many rows the per-study tables (studies, leave one out, cumulative, the
#: audit) show TEXT_SHOWN_ROWS chosen rows and say so; every row stays in the JSON output.
#: Thousands of printed lines are unreadable and cost more than the analysis.
TEXT_MAX_ROWS = 100
TEXT_SHOWN_ROWS = 20
_ALL_ROWS = "every row is in the JSON output"


def _json_rows(k: int) -> str:
    """Where the rest of a summarised table of ``k`` rows is
    (pooler.pipeline.JSON_ALL_ROWS_MAX_K)."""
    from pooler.pipeline import JSON_ALL_ROWS_MAX_K, JSON_SHOWN_ROWS
    return _ALL_ROWS if k <= JSON_ALL_ROWS_MAX_K else \
        f"{JSON_SHOWN_ROWS} chosen the same way are in the --json output"


def ci_text(low: float, high: float, digits: int = 3) -> str:
    """An interval as every output prints it: "[0.251, 0.498]"."""
    return f"[{low:.{digits}f}, {high:.{digits}f}]"


def interval_text(ci, digits: int = 3) -> str:
    """An :class:`~pooler._results.Interval` (or None / not estimable: empty)."""
    return ci_text(ci.low, ci.high, digits) if ci is not None and estimable(ci) else ""


def _pct(p: float) -> str:
    return f"{100 * p:g}%"


def _count(x: float) -> str:
    """A sample size: whole numbers with separators, a fractional one to one decimal."""
    return f"{int(x):,}" if float(x).is_integer() else f"{x:.1f}"


def _sym(metric: str) -> str:
    return "g" if metric == "g" else "z"


def _file_name(eff) -> str:
    """The sheet's file name without its folder."""
    from pathlib import Path
    return Path(eff.file).name


def _sentence(text: str) -> str:
    """A reason as a sentence of its own: capital first, full stop last."""
    text = str(text).rstrip(".")
    return text[:1].upper() + text[1:] + "."


# ------------------------------------------------------------------ conversions

def _row_note(r) -> str:
    """The note cell of a converted row: an excluded row's reason; a used row's reason
    (a sample it was combined into) followed by its conversion notes, which are kept."""
    if r.status == "used" and r.reason:
        return "; ".join((r.reason, *r.notes))
    return r.reason or "; ".join(r.notes)


def _reported(row, sheet_rec) -> str:
    """A short description of what the sheet row reported, e.g. 't = 2.10'."""
    v = sheet_rec.values
    if v.get("reported"):
        return " ".join(v["reported"].split())
    stat = row.stat or "?"
    if stat == "means":
        return f"means {v['mean1']:g} vs {v['mean2']:g}" if v.get("mean1") is not None else "means"
    if stat == "counts":
        if v.get("events1") is not None and v.get("n1") is not None:
            return f"{v['events1']:g}/{v['n1']:g} vs {v['events2']:g}/{v['n2']:g}"
        return "counts"
    val = v.get("value")
    if val is None:
        return stat
    label = {"chi2": "chi2", "odds_ratio": "OR", "p": "p"}.get(stat, stat)
    text = f"{label} = {val:g}"
    if v.get("direction") and stat in ("F", "chi2", "p"):
        text += f" ({v['direction'].strip()})"
    return text


def conversion_blocks(eff, sheet=None) -> list[Block]:
    """The conversions: what each row reported and the effect it gave, and the assumptions
    made while converting. Without ``sheet`` the 'reported' column shows the pasted result
    string (or the statistic's name)."""
    recs = {r.row: r for r in sheet.records} if sheet is not None else {}
    metric = eff.metric_label
    name = sheet.name if sheet is not None else _file_name(eff)
    rows = []
    for r in eff.rows:
        ci = r.ci()
        said = (_reported(r, recs[r.row]) if r.row in recs
                else " ".join((r.reported or r.stat or "").split()))
        rows.append((str(r.row), md_escape(r.study), md_escape(said), r.design, fmt(r.effect),
                     fmt(r.se), interval_text(ci), "" if r.n_total is None else _count(r.n_total),
                     r.status, md_escape(_row_note(r))))
    out = [Block("h2", "Conversions"),
           Block("p", f"{md_escape(name)}: {plural(len(eff.rows), 'row')} read, "
                      f"{eff.n_used:,} used, {eff.n_excluded:,} excluded; "
                      f"{plural(eff.k, 'independent sample')} to pool (metric: {metric})."),
           Block("table", headers=("row", "study", "reported", "design", safe_md(metric), "SE",
                                   "95% CI", "n", "status", "note"), rows=tuple(rows))]
    if eff.assumptions:
        out += [Block("p", "Assumptions:"),
                Block("list", items=tuple(md_escape(a) for a in eff.assumptions))]
    if sheet is not None and sheet.notes:
        out += [Block("p", "Reading notes:"),
                Block("list", items=tuple(md_escape(n) for n in sheet.notes))]
    return out


def effects_text(eff, sheet) -> str:
    """The table that ``pooler convert`` prints."""
    return to_text(conversion_blocks(eff, sheet))


# ------------------------------------------------------------------ planning table

def group_sizes_text(design, sizes) -> str:
    """Whole groups in words: "512 per group", "40 in group 1 and 80 in group 2",
    "30 per cell (4 cells)"; empty for a design counted in total."""
    unit = design.unit
    if unit is None:
        return ""
    if len(set(sizes)) > 1:
        return " and ".join(f"{x:,} in {unit} {i + 1}" for i, x in enumerate(sizes))
    if len(sizes) == 2:
        return f"{sizes[0]:,} per {unit}"
    return f"{sizes[0]:,} per {unit} ({len(sizes)} {unit}s)"


def sizes_and_total(n, design, attrition: float = 0.0) -> tuple[str, int]:
    """``n`` per group (per cell, or in total) as whole groups in words and their total,
    after inflating each group for ``attrition``."""
    from pooler.planning.sample_size import recruit_sizes
    sizes, total = recruit_sizes(n, design, attrition)
    return group_sizes_text(design, sizes), total


def plan_table(plan) -> tuple[list[str], list[list]]:
    """Headers and rows of the planning table: one row per scenario, and per target power
    the n per group (per cell) and total, and the total to recruit when attrition is set."""
    des = plan.design
    headers = ["scenario", f"planning {plan.effect_label}", f"design {des.effect_label}"]
    for p in plan.powers:
        if des.grouped:
            headers += [f"n/{des.unit} @{_pct(p)}", f"total @{_pct(p)}"]
        else:
            headers += [f"N @{_pct(p)}"]
        if plan.attrition:
            headers += [f"recruit @{_pct(p)}"]
    rows = []
    for s in plan.scenarios:
        line = [s.scenario, s.effect, None]
        for p in plan.powers:
            r = plan.row(s.scenario, p)
            line[2] = r.design_effect
            cells = [r.n_per_group, r.n_total] if des.grouped else [r.n_total]
            if plan.attrition:
                cells.append(r.n_total_recruit)
            line += [c if isinstance(c, int) else "cannot be reached" for c in cells]
        rows.append(line)
    return headers, rows


def _plan_table_block(plan) -> Block:
    headers, rows = plan_table(plan)
    return Block("table", headers=tuple(safe_md(h) for h in headers),
                 rows=tuple(tuple(safe_md(fmt(c)) for c in r) for r in rows))


#: How the assurance section names each form of predictive density
#: (:class:`pooler.planning.power.EffectDensity`).
_DENSITY_WORDS = {
    "normal": lambda a: f"Normal({a.mean:.3f}, {a.sd:.3f}^2)",
    "grid": lambda a: f"the model-averaged posterior predictive (mean {a.mean:.3f}, SD {a.sd:.3f})",
    "pdf": lambda a: f"the given predictive density (mean {a.mean:.3f}, SD {a.sd:.3f})",
}


def _assurance_blocks(plan) -> list[Block]:
    a = plan.assurance
    if a is None:
        return []
    head = "Assurance (expected power over the predictive distribution of the true effect)"
    if isinstance(a, NotEstimable):
        return [Block("p", f"{head}: {md_escape(a.reason)}.")]
    scale = "Fisher z" if a.metric in ("r", "z") else "d"
    dist = _DENSITY_WORDS[getattr(a, "form", "normal")](a)
    out = [Block("p", f"{head}: the true effect ~ {dist} on the {scale} scale; ceiling "
                      f"P(new study's true effect > 0) = {a.ceiling:.3f} (a new study's true "
                      "effect varies around the mean effect, so this differs from "
                      "P(effect > 0) of the mean effect).")]
    rows, why = [], []
    for t, n, nt, got in zip(a.targets, a.n, a.n_total, a.achieved):
        if isinstance(n, NotEstimable):
            rows.append((_pct(t), "cannot be reached", "", ""))
            why.append(n.reason)
        else:
            rows.append((_pct(t), fmt(n), fmt(nt), fmt(got)))
    first = f"n/{plan.design.unit}" if plan.design.grouped else "N"
    out.append(Block("table", headers=("target assurance", first, "total", "assurance"),
                     rows=tuple(rows)))
    out += [Block("p", md_escape(_sentence(w))) for w in dict.fromkeys(why)]
    return out


def _fixed_n_blocks(plan) -> list[Block]:
    f, des = plan.fixed_n, plan.design
    if f is None:
        return []
    groups, used = sizes_and_total(f.n_per_group, des)
    lab = plan.effect_label
    return [Block("p", f"With a fixed total N = {f.n_total:,}"
                       + (f" ({groups})" if groups else f" ({used:,} in all)")
                       + (f", of which {used:,} are used (whole groups)" if used != f.n_total
                          else "") + ":"),
            Block("table", headers=("scenario", f"planning {lab}", "power"),
                  rows=tuple((s, fmt(e), fmt(p)) for s, e, p in f.power)),
            Block("table", headers=("target power", f"smallest design {des.effect_label}",
                                    f"as planning {lab}"),
                  rows=tuple((_pct(t), fmt(de), fmt(e)) for t, de, e in f.detectable))]


def plan_blocks(plan) -> list[Block]:
    """The planning table with why a cell cannot be reached, the plan's notes, the assurance
    and the fixed-N view (``--n``)."""
    des = plan.design
    tails = "two-tailed" if plan.tails == 2 else "one-tailed"
    out = [Block("h2", f"Planning table: {md_escape(des.describe())}, {tails} alpha = "
                       f"{plan.alpha:g}"
                       + (f", attrition {_pct(plan.attrition)}" if plan.attrition else "")),
           _plan_table_block(plan)]
    reasons = {r.n_total.reason for r in plan.rows if isinstance(r.n_total, NotEstimable)}
    out += [Block("p", md_escape(f"Cannot be reached: {why}.")) for why in sorted(reasons)]
    out += [Block("note", md_escape(n)) for n in getattr(plan, "notes", ())]
    out += _assurance_blocks(plan) + _fixed_n_blocks(plan)
    out.append(Block("figure", text="Power against total N for each scenario, with the "
                     "assurance curve.", src="power", detail=True))
    return out


def plan_text(plan) -> str:
    """What ``pooler plan`` prints."""
    return to_text(plan_blocks(plan))


def plan_markdown(plan) -> str:
    """The planning table as a Markdown table."""
    return to_markdown([_plan_table_block(plan)]).rstrip("\n")


def plan_csv(plan) -> str:
    """The planning table as CSV text (one row per scenario × target power). Numeric
    columns hold only numbers: a value that cannot be reached is left empty and the reason is
    in the last column."""
    import csv
    import io
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["scenario", "effect", "design_effect", "target_power", "n_per_group", "n_total",
                "achieved_power", "n_total_recruit", "not_reached_because"])
    for r in plan.rows:
        cells = (r.n_per_group, r.n_total, r.achieved_power, r.n_total_recruit)
        why = next((v.reason for v in cells if isinstance(v, NotEstimable)), "")
        w.writerow([csv_safe(r.scenario), repr(r.effect), repr(r.design_effect), r.power,
                    *["" if isinstance(v, NotEstimable) else v for v in cells],
                    csv_safe(why)])
    return buf.getvalue()


# ------------------------------------------------------------------ pooling

def pooled_summary(res) -> list[str]:
    """The headline lines of a pooling result (random effects, common effect, heterogeneity,
    prediction interval), in plain text."""
    from pooler.evidence.pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
    sym = _sym(res.metric)
    lvl = f"{100 * res.level:g}%"

    def rr(est):
        if res.metric != "z":
            return ""
        return (f" (r = {math.tanh(est.estimate):.3f} "
                f"{ci_text(math.tanh(est.ci.low), math.tanh(est.ci.high))})")
    out = []
    if estimable(res.pooled):
        p = res.pooled
        out.append(f"Random effects ({ESTIMATOR_NAMES[res.estimator]} tau^2, "
                   f"{INTERVAL_NAMES[res.interval]} {lvl} CI): {sym} = {p.estimate:.3f} "
                   f"{ci_text(p.ci.low, p.ci.high)}{rr(p)}, SE {p.se:.3f}, {p_text(p.p)}")
    else:
        out.append(f"Random effects: {res.pooled}")
    f = res.fixed
    out.append(f"Common effect (inverse variance, {lvl} CI): {sym} = {f.estimate:.3f} "
               f"{ci_text(f.ci.low, f.ci.high)}{rr(f)}, SE {f.se:.3f}, {p_text(f.p)}")
    h = res.heterogeneity
    if estimable(h):
        out.append(f"Heterogeneity: tau^2 = {h.tau2:.4f} "
                   f"{ci_text(h.tau2_ci.low, h.tau2_ci.high, 4)} (Q-profile), tau = "
                   f"{h.tau:.3f}, I^2 = {100 * h.i2:.1f}% "
                   f"[{100 * h.i2_ci.low:.1f}%, {100 * h.i2_ci.high:.1f}%], H^2 = {h.h2:.2f}, "
                   f"Q({h.q_df}) = {h.q:.2f}, {p_text(h.q_p)}")
    else:
        out.append(f"Heterogeneity: {h}")
    pi = res.prediction
    out.append(f"Prediction interval ({lvl}) for the true effect in a new study: "
               + (ci_text(pi.low, pi.high)
                  + (f" (r {ci_text(math.tanh(pi.low), math.tanh(pi.high))})"
                     if res.metric == "z" else "")
                  if estimable(pi) else str(pi)))
    return out


def _influence_block(rows, sym, first="analysis") -> Block:
    return Block("table", headers=(first, "k", sym, "95% CI", "tau^2", "I^2"),
                 rows=tuple((md_escape(r.label), fmt(r.k), fmt(r.estimate),
                             ci_text(r.ci_low, r.ci_high),
                             "" if isinstance(r.tau2, NotEstimable) else fmt(r.tau2, 4),
                             "" if isinstance(r.i2, NotEstimable) else f"{100 * r.i2:.1f}%")
                            for r in rows), detail=True)


def pooled_blocks(res, eff=None) -> list[Block]:
    """The pooled estimate: the headline lines and notes, then (``detail``) the studies
    with their weights, leave one out, cumulative by year and subgroups. Per-study tables
    above :data:`TEXT_MAX_ROWS` rows show :data:`TEXT_SHOWN_ROWS` chosen rows and say so."""
    import numpy as np
    sym = _sym(res.metric)
    out = [Block("h2", "Pooled estimate")]
    if eff is not None:
        out.append(Block("p", f"{md_escape(_file_name(eff))}: k = {plural(res.k, 'independent sample')} "
                              f"({plural(eff.n_used, 'row')} used, {eff.n_excluded:,} "
                              f"excluded); metric {eff.metric_label}."))
    if res.metric == "z":
        out.append(Block("p", "Estimates on the Fisher z scale; r = tanh(z) in brackets."))
    out.append(Block("list", items=tuple(safe_md(x) for x in pooled_summary(res))))
    out += [Block("note", md_escape(n)) for n in res.notes]
    out.append(Block("figure", text="Forest plot: each study with its 95% CI (marker area by "
                     "weight), the pooled estimates, the prediction interval, and the realistic "
                     "and pessimistic planning effects.", src="forest", detail=True))

    k = len(res.labels)
    shown = range(k) if k <= TEXT_MAX_ROWS else \
        sorted(np.argsort(-np.asarray(res.weights), kind="stable")[:TEXT_SHOWN_ROWS])
    out.append(Block("h3", "Studies", detail=True))
    if k > TEXT_MAX_ROWS:
        out.append(Block("p", f"Showing the {TEXT_SHOWN_ROWS} of {k:,} with the largest "
                              f"weight ({_json_rows(k)}).", detail=True))
    rows = []
    for i in shown:
        y, se = res.effects[i], math.sqrt(res.variances[i])
        rows.append((md_escape(res.labels[i]), fmt(y), ci_text(y - 1.96 * se, y + 1.96 * se),
                     f"{100 * res.weights[i]:.1f}"))
    out.append(Block("table", headers=("sample", sym, "95% CI", "weight %"), rows=tuple(rows),
                     detail=True))

    for title, tab in (("Leave one out", res.leave_one_out),
                       ("Cumulative, by year", res.cumulative)):
        if not isinstance(tab, tuple):
            out.append(Block("p", f"{title}: {md_escape(tab)}.", detail=True))
            continue
        out.append(Block("h3", title, detail=True))
        if len(tab) > TEXT_MAX_ROWS and title == "Leave one out":
            est = getattr(res.pooled, "estimate", res.fixed.estimate)
            pick = np.argsort(-np.abs(np.array([r.estimate for r in tab]) - est),
                              kind="stable")[:TEXT_SHOWN_ROWS]
            tab = tuple(tab[i] for i in sorted(pick))
            out.append(Block("p", f"Showing the {TEXT_SHOWN_ROWS} of {k:,} omissions that "
                                  f"move the estimate most ({_json_rows(k)}).", detail=True))
        elif len(tab) > TEXT_MAX_ROWS:
            pick = np.unique(np.linspace(0, len(tab) - 1, TEXT_SHOWN_ROWS).round().astype(int))
            out.append(Block("p", f"Showing {len(pick)} of {len(tab):,} steps, evenly spaced "
                                  f"({_json_rows(k)}).", detail=True))
            tab = tuple(tab[i] for i in pick)
        out.append(_influence_block(tab, sym))
    for title, s, first in (("Subgroups (separate tau^2)", res.subgroups, "subgroup"),
                            ("Published against unpublished studies (separate tau^2)",
                             res.by_publication, "status")):
        if s is not None and estimable(s):
            out += [Block("h3", title, detail=True),
                    Block("p", f"Q between = {s.q_between:.2f}, df = {s.df}, {p_text(s.p)}.",
                          detail=True),
                    _influence_block(s.rows, sym, first=first)]
        elif s is not None:
            out.append(Block("p", f"{title.split(' (')[0]}: {md_escape(s)}.", detail=True))
    return out


def pooled_text(res, eff) -> str:
    """The pooling summary that ``pooler pool`` prints."""
    return to_text(pooled_blocks(res, eff))


# ------------------------------------------------------------------ bias and scenarios

def _excess_significance_block(tes) -> Block:
    head = "Excess significance (Ioannidis & Trikalinos 2007)"
    if not estimable(tes):
        return Block("p", f"{head}: {md_escape(tes.reason)}.")
    return Block("p", f"{head}: {tes.observed} of {plural(tes.k, 'study', 'studies')} "
                      f"significant, {tes.expected:.1f} expected at the realistic effect; "
                      f"chi2(1) = {tes.chi2:.2f}, {p_text(tes.p)}.")


def bias_blocks(bias, audit=None) -> list[Block]:
    """The bias-sensitivity table, the selection-ratio sensitivity and (with the
    :class:`pooler.evidence.audit.Audit`) the excess-significance test."""
    sym = _sym(bias.metric)
    rows = []
    for method, est, ci, note in bias.table():
        if est is None:
            rows.append((method, "", "", md_escape(note)))
        elif isinstance(est, NotEstimable):
            rows.append((method, "not estimable", "", md_escape(est.reason)))
        else:
            rows.append((method, fmt(est), interval_text(ci), md_escape(note)))
    out = [Block("h2", "Bias-sensitivity suite"),
           Block("table", headers=("method", sym, "95% CI", "note"), rows=tuple(rows))]
    sr = bias.selection_ratio
    if estimable(sr):
        out.append(Block("p", "How much selective publication it would take (the sensitivity "
                         "analysis of Mathur & VanderWeele 2020): if significant results in "
                         "the hypothesised direction were published more often than the rest, "
                         "the estimate would be "
                         + "; ".join(f"{m:.3f} at {e:g} times as often"
                                     for e, m in zip(sr.eta, sr.estimates))
                         + "; from the studies that were not significantly positive alone, "
                         f"{md_escape(fmt(sr.worst_case))}; the publication advantage that "
                         f"would bring the estimate to 0: {md_escape(fmt(sr.s_value, 2))}."))
    else:
        out.append(Block("p", f"Selection ratio: {md_escape(sr)}."))
    if audit is not None:
        out.append(_excess_significance_block(audit.excess_significance))
    out += [Block("figure", text="Contour-enhanced funnel plot: shaded regions mark "
                  "significance; hollow markers are studies imputed by trim-and-fill.",
                  src="funnel", detail=True),
            Block("figure", text="Every estimate on one axis.", src="ladder", detail=True)]
    return out


def bias_text(bias, audit) -> str:
    """The bias table, the selection-ratio sensitivity and the excess-significance test."""
    return to_text(bias_blocks(bias, audit))


def model_average_lines(scen) -> list[str]:
    """The posterior summary of the model-average rule, a few plain lines."""
    avg = scen.posterior
    sym = _sym(scen.metric)

    def bf(x):
        return f"{x:.2f}" if isinstance(x, float) else "beyond range"
    comp = {}
    for m in avg.models:
        comp[m.bias] = comp.get(m.bias, 0.0) + m.posterior
    ci = avg.mu.interval
    out = [f"Model average over {len(avg.models)} publication-bias models (deterministic "
           f"quadrature): mean effect {sym} median {avg.mu.median:.3f} {ci_text(ci.low, ci.high)}, "
           f"tau median {avg.tau.median:.3f} "
           f"{ci_text(avg.tau.interval.low, avg.tau.interval.high)}, "
           f"P(effect > 0) = {avg.p_positive:.2f}",
           f"Inclusion Bayes factors: effect {bf(avg.inclusion_bf['effect'])}, heterogeneity "
           f"{bf(avg.inclusion_bf['heterogeneity'])}, publication bias "
           f"{bf(avg.inclusion_bf['bias'])}; posterior probability by bias model: "
           + ", ".join(f"{k} {v:.2f}" for k, v in comp.items())]
    iv = scen.realistic_interval(0.95)
    if estimable(iv) and scen.supported:
        out.append(f"Realistic {sym} = {scen.realistic.effect:.3f}: 95% credible interval "
                   f"{interval_text(iv)} (given a positive effect)")
    sens = scen.sensitivity
    if isinstance(sens, dict):
        out.append(f"With wider priors (every scale doubled): realistic {sens['realistic']:.3f}, "
                   f"pessimistic {sens['pessimistic']:.3f}, P(effect > 0) = "
                   f"{sens['p_positive']:.2f}")
    out += list(avg.warnings)
    return out


def _audit_blocks(a, sym) -> list[Block]:
    if a is None:
        return []
    if not estimable(a):
        return [Block("p", md_escape(_sentence(f"Literature audit: {a.reason}")))]
    out = [Block("p", f"Literature audit: at the realistic {sym} = {a.effect:.3f} (two-sided "
                      f"alpha = .05) the prior studies had a median power of {a.median:.2f}; "
                      f"{100 * a.share_80:.0f}% had 80% or more.")]
    rows = a.rows
    if len(rows) > TEXT_MAX_ROWS:
        import numpy as np
        order = np.argsort([r.power for r in rows], kind="stable")
        pick = order[np.unique(np.linspace(0, len(rows) - 1, TEXT_SHOWN_ROWS).round()
                               .astype(int))]
        out.append(Block("p", f"Showing {len(pick)} of {len(rows):,} studies at evenly spaced "
                              f"ranks of power, lowest first ({_json_rows(len(rows))}).",
                         detail=True))
        rows = [rows[i] for i in pick]
    out.append(Block("table", headers=("study", "power", "how"),
                     rows=tuple((md_escape(r.label), fmt(r.power, 2), md_escape(r.how))
                                for r in rows), detail=True))
    return out


def scenario_blocks(scen, audit=None) -> list[Block]:
    """The planning scenarios with their bases, the realistic interval (or the model
    average's posterior), the verdict; with ``audit`` (a :class:`pooler.evidence.audit.Audit`) also
    the literature audit."""
    sym = _sym(scen.metric)
    z = scen.metric == "z"
    rows = []
    for s in (scen.optimistic, scen.realistic, scen.pessimistic):
        rows.append((s.name, fmt(s.effect)) + ((fmt(math.tanh(s.effect)),) if z else ())
                    + (md_escape(s.basis),))
    out = [Block("h2", "Planning scenarios"),
           Block("table", headers=("scenario", sym) + (("r",) if z else ()) + ("basis",),
                 rows=tuple(rows))]
    iv, ci = scen.realistic_interval(), scen.realistic_interval(0.95)
    if getattr(scen, "posterior", None) is not None:
        out += [Block("p", "Posterior of the model average (the default planning rule); the "
                           "bias-sensitivity table is its frequentist counterpart:"),
                Block("list", items=tuple(safe_md(x) for x in model_average_lines(scen)))]
    elif estimable(iv):
        out.append(Block("p", f"Realistic {sym} = {scen.realistic.effect:.3f} (SE "
                              f"{scen.realistic.se:.3f}); {100 * iv.level:g}% safeguard "
                              f"interval {interval_text(iv)}, 95% interval {interval_text(ci)}."))
    out.append(Block("p", md_escape(scen.verdict)))
    out += _audit_blocks(audit.literature if audit is not None else None, sym)
    return out


def scenarios_text(scen, audit=None) -> str:
    """The scenarios table, the realistic interval and the verdict; with ``audit`` (a
    :class:`pooler.evidence.audit.Audit`) also the literature audit."""
    return to_text(scenario_blocks(scen, audit))


def run_summary_text(run, paths) -> str:
    """The compact summary that ``pooler run`` and ``pooler demo`` print."""
    from pooler.output.document import summary_blocks
    return to_text(summary_blocks(run, paths))


# ------------------------------------------------------------------ stress test

def stress_blocks(res) -> list[Block]:
    """The stress test: true power per planning rule, estimator bias and RMSE."""
    rules, estimators = list(res.rules), list(res.estimators)
    cells = [(c, c.summary()) for c in res.cells]

    def where(c):
        return (fmt(c.cell.k), fmt(c.cell.delta, 2), fmt(c.cell.tau, 2), fmt(c.cell.pi, 2))

    def rule_cell(v):
        cell = ("-" if v["median_power"] is None else
                f"{v['median_power']:.2f} ({v['p10_power']:.2f})")
        if v["share_no_positive_effect"]:
            cell += f" none {100 * v['share_no_positive_effect']:.0f}%"
        return cell

    def est_cell(v):
        return "-" if v["bias"] is None else f"{v['bias']:+.3f} / {v['rmse']:.3f}"
    heads = ("k", "delta", "tau", "pi")
    return [Block("p", f"Stress test: {res.reps} simulated literatures per cell ({res.shapes}); "
                       f"n planned for {100 * res.power:g}% power, {res.design}; seed {res.seed}."),
            Block("p", "True power reached by the n each rule recommends: median (10th "
                       "percentile); 'none' = share of literatures with no positive planning "
                       "effect."),
            Block("table", headers=heads + tuple(rules),
                  rows=tuple(where(c) + tuple(rule_cell(s["rules"][r]) for r in rules)
                             for c, s in cells)),
            Block("p", "Bias / RMSE of each estimator against the true mean effect:"),
            Block("table", headers=heads + tuple(estimators),
                  rows=tuple(where(c) + tuple(est_cell(s["estimators"][e]) for e in estimators)
                             for c, s in cells))]


def stress_text(res) -> str:
    """What ``pooler stress`` prints."""
    return to_text(stress_blocks(res))


# ------------------------------------------------------------------ notebooks

#: The section each stage result shows in a notebook (``_repr_html_``), by class name, so
#: that this module imports no stage. A result not listed shows its ``to_frame()`` table.
NOTEBOOK_SECTIONS = {
    "Effects": lambda r: conversion_blocks(r),
    "PooledResult": lambda r: pooled_blocks(r),
    "BiasResult": lambda r: bias_blocks(r),
    "Scenarios": lambda r: scenario_blocks(r),
    "Plan": lambda r: plan_blocks(r),
}
