"""Readable text for the terminal (and later Markdown/HTML) from the stage results.

Text formatting only; no statistics are computed here.
"""
from __future__ import annotations

import math

from ._results import NotEstimable, csv_safe, p_text, plural, text_table


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


def effects_text(eff, sheet) -> str:
    """The table that ``pooler convert`` prints."""
    recs = {r.row: r for r in sheet.records}
    metric = eff.metric_label
    headers = ["row", "study", "reported", "design", metric, "SE", "95% CI", "n", "status",
               "note"]
    rows = []
    for r in eff.rows:
        ci = r.ci()
        rows.append([r.row, r.study, _reported(r, recs[r.row]), r.design,
                     r.effect, r.se,
                     f"[{ci.low:.3f}, {ci.high:.3f}]" if ci else "",
                     None if r.n_total is None else _n(r.n_total),
                     r.status, r.reason or "; ".join(r.notes)])
    out = [f"{sheet.name}: {plural(len(eff.rows), 'row')} read, {eff.n_used:,} used, "
           f"{eff.n_excluded:,} excluded; {plural(eff.k, 'independent sample')} to pool "
           f"(metric: {metric})", "", text_table(headers, rows)]
    if eff.assumptions:
        out += ["", "Assumptions:"] + [f"  - {a}" for a in eff.assumptions]
    if sheet.notes:
        out += ["", "Reading notes:"] + [f"  - {n}" for n in sheet.notes]
    return "\n".join(out)


def _n(x: float):
    return int(x) if float(x).is_integer() else round(x, 1)


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
    from .planning import recruit_sizes
    sizes, total = recruit_sizes(n, design, attrition)
    return group_sizes_text(design, sizes), total


def people(total: int, groups: str) -> str:
    """ "1,024 participants (512 per group)" """
    return plural(total, "participant") + (f" ({groups})" if groups else "")


def _pct(p: float) -> str:
    return f"{100 * p:g}%"


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


def plan_text(plan) -> str:
    """What ``pooler plan`` prints."""
    from ._results import NotEstimable
    des = plan.design
    tails = "two-tailed" if plan.tails == 2 else "one-tailed"
    out = [f"Planning table: {des.describe()}, {tails} alpha = {plan.alpha:g}"
           + (f", attrition {_pct(plan.attrition)}" if plan.attrition else "")]
    headers, rows = plan_table(plan)
    out += ["", text_table(headers, rows)]
    reasons = {str(r.n_total) for r in plan.rows if isinstance(r.n_total, NotEstimable)}
    for why in sorted(reasons):
        out.append(f"  cannot be reached: {why.removeprefix('not estimable: ')}")
    for note in getattr(plan, "notes", ()):
        out.append(f"  note: {note}")
    a = plan.assurance
    if a is not None:
        out += ["", "Assurance (expected power over the predictive distribution of the true effect):"]
        if isinstance(a, NotEstimable):
            out.append(f"  {a}")
        else:
            scale = "Fisher z" if a.metric in ("r", "z") else "d"
            dist = (f"Normal({a.mean:.3f}, {a.sd:.3f}^2)" if getattr(a, "form", "normal") == "normal"
                    else f"the tabulated predictive (mean {a.mean:.3f}, SD {a.sd:.3f})")
            out.append(f"  true effect ~ {dist} on the {scale} scale; "
                       f"ceiling P(effect > 0) = {a.ceiling:.3f}")
            arows, why = [], []
            for t, n, nt, got in zip(a.targets, a.n, a.n_total, a.achieved):
                if isinstance(n, NotEstimable):
                    arows.append([_pct(t), "cannot be reached", None, None])
                    why.append(n.reason)
                else:
                    arows.append([_pct(t), n, nt, got])
            first = "n/group" if des.grouped else "N"
            out.append(text_table(["target assurance", first, "total", "assurance"], arows))
            for w in dict.fromkeys(why):
                out.append(f"  {w}")
    f = plan.fixed_n
    if f is not None:
        groups, used = sizes_and_total(f.n_per_group, des)
        out += ["", f"With a fixed total N = {f.n_total:,}"
                    + (f" ({groups})" if groups else f" ({used:,} in all)")
                    + (f", of which {used:,} are used (whole groups)" if used != f.n_total else "")
                    + ":"]
        out.append(text_table(["scenario", f"planning {plan.effect_label}", "power"],
                              [[s, e, p] for s, e, p in f.power]))
        out.append("")
        out.append(text_table(["target power", f"smallest design {des.effect_label}",
                               f"as planning {plan.effect_label}"],
                              [[_pct(t), de, e] for t, de, e in f.detectable]))
    return "\n".join(out)


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


def plan_markdown(plan) -> str:
    """The planning table as a Markdown table."""
    headers, rows = plan_table(plan)
    from ._results import fmt
    def esc(x):
        return fmt(x).replace("|", "\\|")
    lines = ["| " + " | ".join(headers) + " |", "|" + "---|" * len(headers)]
    lines += ["| " + " | ".join(esc(c) for c in r) + " |" for r in rows]
    return "\n".join(lines)


# ------------------------------------------------------------------ pooling

def _p(p: float) -> str:
    return p_text(p)


def _ci(lo, hi, digits=3) -> str:
    return f"[{lo:.{digits}f}, {hi:.{digits}f}]"


def pooled_summary(res) -> list[str]:
    """The headline lines of a pooling result (random effects, common effect, heterogeneity,
    prediction interval); shared by the terminal summary and the report."""
    from ._results import estimable
    from .pooling import ESTIMATOR_NAMES, INTERVAL_NAMES
    sym = "g" if res.metric == "g" else "z"
    lvl = f"{100 * res.level:g}%"

    def rr(est):
        if res.metric != "z":
            return ""
        return (f" (r = {math.tanh(est.estimate):.3f} "
                f"{_ci(math.tanh(est.ci.low), math.tanh(est.ci.high))})")
    out = []
    if estimable(res.pooled):
        p = res.pooled
        out.append(f"Random effects ({ESTIMATOR_NAMES[res.estimator]} tau^2, "
                   f"{INTERVAL_NAMES[res.interval]} {lvl} CI): {sym} = {p.estimate:.3f} "
                   f"{_ci(p.ci.low, p.ci.high)}{rr(p)}, SE {p.se:.3f}, {_p(p.p)}")
    else:
        out.append(f"Random effects: {res.pooled}")
    f = res.fixed
    out.append(f"Common effect (inverse variance, {lvl} CI): {sym} = {f.estimate:.3f} "
               f"{_ci(f.ci.low, f.ci.high)}{rr(f)}, SE {f.se:.3f}, {_p(f.p)}")
    h = res.heterogeneity
    if estimable(h):
        out.append(f"Heterogeneity: tau^2 = {h.tau2:.4f} {_ci(h.tau2_ci.low, h.tau2_ci.high, 4)} "
                   f"(Q-profile), tau = {h.tau:.3f}, I^2 = {100 * h.i2:.1f}% "
                   f"[{100 * h.i2_ci.low:.1f}%, {100 * h.i2_ci.high:.1f}%], H^2 = {h.h2:.2f}, "
                   f"Q({h.q_df}) = {h.q:.2f}, {_p(h.q_p)}")
    else:
        out.append(f"Heterogeneity: {h}")
    pi = res.prediction
    out.append(f"Prediction interval ({lvl}) for the true effect in a new study: "
               + (f"{_ci(pi.low, pi.high)}" + (f" (r {_ci(math.tanh(pi.low), math.tanh(pi.high))})"
                                               if res.metric == "z" else "")
                  if estimable(pi) else str(pi)))
    return out


#: Above this many rows the per-study text tables of ``pooler pool`` (studies, leave one
#: out, cumulative) print TEXT_SHOWN_ROWS chosen rows and say so; every row stays in the
#: JSON output. Thousands of printed lines are unreadable and cost more than the analysis.
TEXT_MAX_ROWS = 100
TEXT_SHOWN_ROWS = 20
_ALL_ROWS = "every row is in the --json output"


def _json_rows(k: int) -> str:
    """Where the rest of a summarised text table is (pooler.pipeline.JSON_ALL_ROWS_MAX_K)."""
    from .pipeline import JSON_ALL_ROWS_MAX_K, JSON_SHOWN_ROWS
    return _ALL_ROWS if k <= JSON_ALL_ROWS_MAX_K else \
        f"{JSON_SHOWN_ROWS} chosen the same way are in the --json output"


def pooled_text(res, eff) -> str:
    """The pooling summary that ``pooler pool`` prints (per-study tables summarised above
    :data:`TEXT_MAX_ROWS` rows)."""
    from pathlib import Path

    import numpy as np
    from ._results import estimable
    sym = "g" if res.metric == "g" else "z"
    out = [f"{Path(eff.file).name}: k = {plural(res.k, 'independent sample')} "
           f"({plural(eff.n_used, 'row')} used, {eff.n_excluded:,} excluded); "
           f"metric {eff.metric_label}"]
    if res.metric == "z":
        out.append("  estimates on the Fisher z scale; r = tanh(z) in brackets")
    out += pooled_summary(res)
    out += [f"  note: {n}" for n in res.notes]
    k = len(res.labels)
    shown = range(k) if k <= TEXT_MAX_ROWS else \
        sorted(np.argsort(-np.asarray(res.weights), kind="stable")[:TEXT_SHOWN_ROWS])
    rows = []
    for i in shown:
        y, se = res.effects[i], math.sqrt(res.variances[i])
        rows.append([res.labels[i], y, _ci(y - 1.96 * se, y + 1.96 * se),
                     f"{100 * res.weights[i]:.1f}"])
    title = "Studies:" if k <= TEXT_MAX_ROWS else (
        f"Studies: the {TEXT_SHOWN_ROWS} of {k:,} with the largest weight ({_ALL_ROWS}):")
    out += ["", title, text_table(["sample", sym, "95% CI", "weight %"], rows)]
    for title, tab in (("Leave one out:", res.leave_one_out),
                       ("Cumulative, by year:", res.cumulative)):
        out.append("")
        if isinstance(tab, tuple):
            if len(tab) > TEXT_MAX_ROWS and title.startswith("Leave"):
                est = getattr(res.pooled, "estimate", res.fixed.estimate)
                pick = np.argsort(-np.abs(np.array([r.estimate for r in tab]) - est),
                                  kind="stable")[:TEXT_SHOWN_ROWS]
                tab = tuple(tab[i] for i in sorted(pick))
                title = (f"Leave one out: the {TEXT_SHOWN_ROWS} of {k:,} omissions that move "
                         f"the estimate most ({_json_rows(k)}):")
            elif len(tab) > TEXT_MAX_ROWS:
                pick = np.unique(np.linspace(0, len(tab) - 1, TEXT_SHOWN_ROWS).round()
                                 .astype(int))
                title = (f"Cumulative, by year: {len(pick)} of {len(tab):,} steps, evenly "
                         f"spaced ({_json_rows(k)}):")
                tab = tuple(tab[i] for i in pick)
            out.append(title)
            out.append(_influence_table(tab, sym))
        else:
            out.append(f"{title[:-1]}: {tab}")
    if res.subgroups is not None:
        out.append("")
        s = res.subgroups
        if estimable(s):
            out.append("Subgroups (separate tau^2):")
            out.append(_influence_table(s.rows, sym, first="subgroup"))
            out.append(f"  Q between = {s.q_between:.2f}, df = {s.df}, {_p(s.p)}")
        else:
            out.append(f"Subgroups: {s}")
    return "\n".join(out)


def _influence_table(rows, sym, first="analysis") -> str:
    from ._results import NotEstimable
    return text_table([first, "k", sym, "95% CI", "tau^2", "I^2"],
                      [[r.label, r.k, r.estimate, _ci(r.ci_low, r.ci_high), r.tau2,
                        None if isinstance(r.i2, NotEstimable) else f"{100 * r.i2:.1f}%"]
                       for r in rows])


# ------------------------------------------------------------------ bias and scenarios

def bias_text(bias, audit) -> str:
    """The bias table, the selection-ratio sensitivity and the excess-significance test."""
    from ._results import NotEstimable, estimable
    sym = "g" if bias.metric == "g" else "z"
    rows = []
    for method, est, ci, note in bias.table():
        if est is None:
            rows.append([method, "", "", note])
        elif isinstance(est, NotEstimable):
            rows.append([method, "not estimable", "", est.reason])
        else:
            rows.append([method, est, _ci(ci.low, ci.high) if ci is not None and estimable(ci)
                         else "", note])
    out = ["Bias-sensitivity suite:", text_table(["method", sym, "95% CI", "note"], rows)]
    sr = bias.selection_ratio
    if estimable(sr):
        parts = ", ".join(f"{e:g}x: {m:.3f}" for e, m in zip(sr.eta, sr.estimates))
        out.append("If significant results in the hypothesised direction were published more "
                   f"often than the rest, the estimate would be: {parts}")
        out.append("  from the studies that were not significantly positive alone: "
                   f"{_or_reason(sr.worst_case)}; how many times more often significant results "
                   f"would have to be published to bring the estimate to 0: "
                   f"{_or_reason(sr.s_value)}")
    else:
        out.append(f"Selection ratio: {sr}")
    tes = audit.excess_significance
    if estimable(tes):
        out.append(f"Excess significance at the realistic effect: {tes.observed} of {tes.k} "
                   f"significant, {tes.expected:.1f} expected; chi2(1) = {tes.chi2:.2f}, "
                   f"{_p(tes.p)}")
    else:
        out.append(f"Excess significance: {tes.reason}")
    return "\n".join(out)


def _or_reason(x) -> str:
    from ._results import NotEstimable
    return str(x) if isinstance(x, NotEstimable) else f"{x:.3f}"


def scenarios_text(scen, audit=None) -> str:
    """The scenarios table, the realistic interval and the verdict; with ``audit`` (a
    :class:`pooler.audit.Audit`) also the literature audit."""
    from ._results import estimable
    sym = "g" if scen.metric == "g" else "z"
    rows = []
    for s in (scen.optimistic, scen.realistic, scen.pessimistic):
        line = [s.name, s.effect]
        if scen.metric == "z":
            line.append(math.tanh(s.effect))
        rows.append(line + [s.basis])
    heads = ["scenario", sym] + (["r"] if scen.metric == "z" else []) + ["basis"]
    out = ["Planning scenarios:", text_table(heads, rows)]
    iv, ci = scen.realistic_interval(), scen.realistic_interval(0.95)
    if getattr(scen, "posterior", None) is not None:
        out += model_average_lines(scen)
    elif estimable(iv):
        out.append(f"Realistic {sym} = {scen.realistic.effect:.3f}, SE {scen.realistic.se:.3f}: "
                   f"{100 * iv.level:g}% safeguard interval {_ci(iv.low, iv.high)}, "
                   f"95% interval {_ci(ci.low, ci.high)}")
    out.append(scen.verdict)
    a = audit.literature if audit is not None else None
    if a is not None and not estimable(a):
        out += ["", f"Literature audit: {a.reason}"]
    if estimable(a):
        out += ["", f"Literature audit: each study's power to detect the realistic {sym} = "
                    f"{a.effect:.3f} (two-sided alpha = .05): median {a.median:.2f}, "
                    f"{100 * a.share_80:.0f}% of studies at 80% or more"]
        rows = a.rows
        if len(rows) > TEXT_MAX_ROWS:
            import numpy as np
            order = np.argsort([r.power for r in rows], kind="stable")
            pick = order[np.unique(np.linspace(0, len(rows) - 1, TEXT_SHOWN_ROWS).round()
                                   .astype(int))]
            out.append(f"  {len(pick)} of {len(rows):,} studies at evenly spaced ranks of "
                       f"power, lowest first ({_json_rows(len(rows))}):")
            rows = [rows[i] for i in pick]
        out.append(text_table(["study", "power", "how"],
                              [[r.label, r.power, r.how] for r in rows], digits=2))
    return "\n".join(out)


def model_average_lines(scen) -> list[str]:
    """The posterior summary of the model-average rule, a few plain lines."""
    from ._results import estimable
    avg = scen.posterior
    sym = "g" if scen.metric == "g" else "z"

    def bf(x):
        return f"{x:.2f}" if isinstance(x, float) else "beyond range"
    comp = {}
    for m in avg.models:
        comp[m.bias] = comp.get(m.bias, 0.0) + m.posterior
    ci = avg.mu.interval
    out = [f"Model average over {len(avg.models)} publication-bias models (deterministic quadrature): "
           f"mean effect {sym} median {avg.mu.median:.3f} [{ci.low:.3f}, {ci.high:.3f}], "
           f"tau median {avg.tau.median:.3f} [{avg.tau.interval.low:.3f}, "
           f"{avg.tau.interval.high:.3f}], P(effect > 0) = {avg.p_positive:.2f}",
           f"Inclusion Bayes factors: effect {bf(avg.inclusion_bf['effect'])}, heterogeneity "
           f"{bf(avg.inclusion_bf['heterogeneity'])}, publication bias "
           f"{bf(avg.inclusion_bf['bias'])}; posterior probability by bias model: "
           + ", ".join(f"{k} {v:.2f}" for k, v in comp.items())]
    iv = scen.realistic_interval(0.95)
    if estimable(iv) and scen.supported:
        out.append(f"Realistic {sym} = {scen.realistic.effect:.3f}: 95% credible interval "
                   f"{_ci(iv.low, iv.high)} (given a positive effect)")
    sens = scen.sensitivity
    if isinstance(sens, dict):
        out.append(f"With wider priors (every scale doubled): realistic {sens['realistic']:.3f}, "
                   f"pessimistic {sens['pessimistic']:.3f}, P(effect > 0) = "
                   f"{sens['p_positive']:.2f}")
    out += list(avg.warnings)
    return out


def run_summary_text(run, paths) -> str:
    """The compact summary that ``pooler run`` and ``pooler demo`` print."""
    from .document import decision_blocks, to_text
    a = run.analysis
    decision = to_text(decision_blocks(run))
    head = pooled_text(a.pooled, a.effects).split("\n\nStudies:")[0]
    scen = scenarios_text(a.scenarios, a.audit)
    scen_short, _, audit = scen.partition("\n\nLiterature audit")
    audit_line = ("Literature audit" + audit.split("\n")[0]) if audit else ""
    out = [decision, "", "How it was reached", "-" * 18, head, "", bias_text(a.bias, a.audit),
           "", scen_short]
    if audit_line:
        out.append(audit_line)
    out += ["", plan_text(run.plan)]
    if paths:
        folder = paths[0].parent
        out += ["", f"Written to {folder}/: " + ", ".join(p.name for p in paths)]
    out += ["", "This is a planning aid, not a substitute for a statistician, an ethics board or "
                "local regulations; see the Caution section of the report."]
    return "\n".join(out)


# ------------------------------------------------------------------ stress test

def stress_text(res) -> str:
    """What ``pooler stress`` prints: true power per planning rule, estimator bias and RMSE."""
    rules, estimators = list(res.rules), list(res.estimators)
    out = [f"Stress test: {res.reps} simulated literatures per cell ({res.shapes}); "
           f"n planned for {100 * res.power:g}% power, {res.design}; seed {res.seed}",
           "True power reached by the n each rule recommends: median (10th percentile); "
           "'none' = share of literatures with no positive planning effect", ""]
    heads = ["k", "delta", "tau", "pi"] + rules
    rows = []
    for c in res.cells:
        s = c.summary()
        line = [c.cell.k, c.cell.delta, c.cell.tau, c.cell.pi]
        for r in rules:
            v = s["rules"][r]
            cell = ("-" if v["median_power"] is None else
                    f"{v['median_power']:.2f} ({v['p10_power']:.2f})")
            if v["share_no_positive_effect"]:
                cell += f" none {100 * v['share_no_positive_effect']:.0f}%"
            line.append(cell)
        rows.append(line)
    out.append(text_table(heads, rows, digits=2))
    out += ["", "Bias / RMSE of each estimator against the true mean effect:"]
    rows = []
    for c in res.cells:
        s = c.summary()
        line = [c.cell.k, c.cell.delta, c.cell.tau, c.cell.pi]
        for e in estimators:
            v = s["estimators"][e]
            line.append("-" if v["bias"] is None else f"{v['bias']:+.3f} / {v['rmse']:.3f}")
        rows.append(line)
    out.append(text_table(["k", "delta", "tau", "pi"] + estimators, rows, digits=2))
    return "\n".join(out)
