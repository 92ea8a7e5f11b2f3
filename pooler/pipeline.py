"""The stages chained: sheet → effects → pooled → bias → scenarios → audit (→ plan).

A convenience for the CLI and for users who want everything at once; each stage is still
its own pure function (see the modules named in the fields).
"""
from __future__ import annotations

from dataclasses import dataclass

from pooler._results import to_jsonable
from pooler._threads import single_threaded

#: Above this many studies the JSON document keeps :data:`JSON_SHOWN_ROWS` chosen entries of
#: the per-study tables other than ``rows`` (units, leave one out, cumulative, the audit's
#: powers) and says which under ``summarised``; ``rows`` keeps every row (the contract), and
#: effects.csv too. At k = 10,000 those tables were 7 of the 14 MB of results.json, and no
#: reader uses 10,000 leave-one-out fits that each move the estimate by about 1/k.
JSON_ALL_ROWS_MAX_K = 1000
JSON_SHOWN_ROWS = 100


def _summarise_tables(doc: dict, pooled) -> None:
    """Cut the per-study tables of a large literature's document to JSON_SHOWN_ROWS chosen
    entries each, in their original order (the rule of the text tables, pooler.output.report)."""
    import numpy as np
    k, n = pooled.k, JSON_SHOWN_ROWS
    notes = {}

    def keep(key, table, idx, how):
        idx = sorted(int(i) for i in idx)
        table[key] = [table[key][i] for i in idx]
        return f"the {len(idx)} of {k:,} {how}"

    def spaced(m):
        return np.unique(np.linspace(0, m - 1, n).round().astype(int))

    def numbers(entries, key):  # a value that could not be computed sorts as NaN
        return np.array([e[key] if isinstance(e[key], (int, float)) else np.nan
                         for e in entries], float)

    if isinstance(doc.get("units"), list) and len(doc["units"]) > n:
        w = np.nan_to_num(numbers(doc["units"], "weight"), nan=-np.inf)
        notes["units"] = keep("units", doc, np.argsort(-w, kind="stable")[:n],
                              "independent samples with the largest weight (every row is in "
                              "rows)")
    if isinstance(doc.get("leave_one_out"), list) and len(doc["leave_one_out"]) > n:
        move = np.nan_to_num(np.abs(numbers(doc["leave_one_out"], "estimate") - pooled.mu),
                             nan=-np.inf)
        notes["leave_one_out"] = keep("leave_one_out", doc,
                                      np.argsort(-move, kind="stable")[:n],
                                      "omissions that move the estimate most (largest move "
                                      f"{float(move.max()):.3g})")
    if isinstance(doc.get("cumulative"), list) and len(doc["cumulative"]) > n:
        notes["cumulative"] = keep("cumulative", doc, spaced(len(doc["cumulative"])),
                                   "cumulative steps, evenly spaced (the first and the last "
                                   "included)")
    lit = doc["scenarios"].get("audit")
    if isinstance(lit, dict) and isinstance(lit.get("rows"), list) and len(lit["rows"]) > n:
        order = np.argsort(numbers(lit["rows"], "power"), kind="stable")
        notes["scenarios.audit.rows"] = keep("rows", lit, order[spaced(len(order))],
                                             "studies at evenly spaced ranks of power")
    if notes:
        doc["summarised"] = notes


@dataclass(frozen=True)
class Analysis:
    """Everything from one sheet, stage by stage."""

    sheet: object      # pooler.reading.sheet.Sheet
    effects: object    # pooler.evidence.effects.Effects
    pooled: object     # pooler.evidence.pooling.PooledResult
    bias: object       # pooler.evidence.bias.BiasResult
    scenarios: object  # pooler.planning.scenarios.Scenarios
    audit: object      # pooler.evidence.audit.Audit, at the realistic effect

    def pool_document(self) -> dict:
        """The ``pooler.pool/1`` JSON document (per-study tables other than ``rows``
        summarised above :data:`JSON_ALL_ROWS_MAX_K` studies)."""
        doc = {"schema": "pooler.pool/1", **self.pooled.to_dict()}
        bias = self.bias.to_dict()
        # the JSON contract keeps the audit's two results where they have always been
        bias["excess_significance"] = to_jsonable(self.audit.excess_significance)
        doc["bias"] = bias
        doc["scenarios"] = {**self.scenarios.to_dict(),
                            "audit": to_jsonable(self.audit.literature)}
        if "model_average" in doc["scenarios"]:
            doc["model_average"] = doc["scenarios"].pop("model_average")
        # a row's weight is its share of the pooled estimate: a sample of m rows is their
        # mean (Borenstein et al. 2009 ch. 24), so each row carries 1/m of the sample's
        # weight and the rows' weights add up to 1 as the samples' do
        weight, sample_weight = {}, {}
        for u, w in zip(self.effects.units, self.pooled.weights):
            for r in u.rows:
                weight[r] = w / len(u.rows)
                sample_weight[r] = w
        eff = self.effects.to_dict()
        rows = eff["rows"]
        for r in rows:
            r["weight"] = weight.get(r["row"])
            r["sample_weight"] = sample_weight.get(r["row"])
        doc["rows"] = rows
        doc["inconsistent_reports"] = eff["inconsistent_reports"]
        if self.pooled.k > JSON_ALL_ROWS_MAX_K:
            _summarise_tables(doc, self.pooled)
        return doc

    def to_dict(self) -> dict:
        return self.pool_document()


@single_threaded
def analyse(sheet_path, *, metric="d", within_r=0.5, sample_r=0.5, estimator="reml",
            interval="hksj", adjuster="default", safeguard_level=0.6, sesoi=None,
            effect_prior_sd=1.0, heterogeneity_prior_shape=1.0, heterogeneity_prior_scale=0.15,
            pet_prior_scale=1.0, peese_prior_scale=5.0, chance_of_effect=0.5,
            chance_of_heterogeneity=0.5, chance_of_no_bias=0.5, pessimistic_quantile=0.15,
            progress=None) -> Analysis:
    """Read, convert, pool, run the bias suite and derive the planning scenarios.

    The model-average settings (``effect_prior_sd`` ... ``pessimistic_quantile``; see
    ``pooler.choices.MODEL_AVERAGE_OPTIONS``) apply to the default rule.
    ``progress``, if given, is called with a short message before each slow step.
    """
    from pooler.planning.scenarios import model_average_priors
    priors = model_average_priors(
        effect_prior_sd=effect_prior_sd, heterogeneity_prior_shape=heterogeneity_prior_shape,
        heterogeneity_prior_scale=heterogeneity_prior_scale, pet_prior_scale=pet_prior_scale,
        peese_prior_scale=peese_prior_scale, chance_of_effect=chance_of_effect,
        chance_of_heterogeneity=chance_of_heterogeneity, chance_of_no_bias=chance_of_no_bias)
    say = progress or (lambda msg: None)
    from pooler.evidence.audit import audit_literature
    from pooler.evidence.bias import bias_suite
    from pooler.evidence.effects import convert
    from pooler.evidence.pooling import pool
    from pooler.planning.scenarios import make_scenarios
    from pooler.reading.sheet import Sheet, read_sheet
    # a Sheet already read (e.g. one path's rows of a path sheet) is analysed as it is
    sheet = sheet_path if isinstance(sheet_path, Sheet) else read_sheet(sheet_path)
    effects = convert(sheet, metric, within_r=within_r, sample_r=sample_r)
    say("pooling (with leave-one-out)")
    pooled = pool(effects, estimator, interval)
    say("bias-sensitivity suite (selection model from several starting points)")
    bias = bias_suite(pooled)
    scen = make_scenarios(pooled, bias, adjuster=adjuster,
                          safeguard_level=safeguard_level, sesoi=sesoi, priors=priors,
                          pessimistic_quantile=pessimistic_quantile)
    return Analysis(sheet, effects, pooled, bias, scen,
                    audit_literature(pooled, scen.realistic.effect))


@dataclass(frozen=True)
class RunResult:
    """The whole job: the analysis, the plan, and how it was asked for."""

    analysis: Analysis
    plan: object  # pooler.planning.sample_size.Plan
    options: dict
    command: str
    version: str

    def to_dict(self) -> dict:
        """The ``pooler.run/1`` JSON document."""
        eff = self.analysis.effects
        return to_jsonable({
            "schema": "pooler.run/1", "version": self.version,
            "pool": self.analysis.pool_document(), "plan": self.plan.to_dict(),
            "inputs": {"file": self.analysis.sheet.name, "sha256": self.analysis.sheet.sha256,
                       "rows_read": len(eff.rows), "rows_used": eff.n_used,
                       "rows_excluded": eff.n_excluded,
                       "assumptions": list(eff.assumptions), "warnings": list(eff.warnings)},
            "options": self.options, "command": self.command})


def _planned_r_note(pooled, design) -> str | None:
    """A note when a paired plan assumes a correlation between the repeated measures outside
    the range the literature's within-subject studies were converted with: d_z = d /
    sqrt(2 (1 - r)) (Morris & DeShon 2002, eq. 11), so the n depends on it directly."""
    from pooler.planning.power import _design
    des = _design(design)
    if "planned_r" not in des.spec.parameters:   # every Design carries one; few use it
        return None
    planned = des.planned_r
    used = sorted({u.within_r for u in pooled.studies
                   if u.design == "within" and u.within_r is not None})
    if not used or used[0] - 1e-12 <= planned <= used[-1] + 1e-12:
        return None
    span = f"{used[0]:g}" if len(used) == 1 else f"{used[0]:g} to {used[-1]:g}"
    return (f"the plan assumes a correlation of {planned:g} between your repeated measures, "
            f"but the literature's within-subject studies were converted with {span}: d_z, and "
            "so the n, depends on it (d_z = d / sqrt(2 (1 - r)), Morris & DeShon 2002); plan "
            "with the correlation you expect in your own design")


@single_threaded
def run(sheet_path, *, design, analysis_options, plan_options: dict,
        command: str = "", progress=None) -> RunResult:
    """The whole job on one sheet: analyse, then plan the scenarios for ``design``.

    ``analysis_options`` is a :class:`pooler.choices.AnalysisOptions` (or a dict of the same
    keywords)."""
    from pooler import __version__
    from pooler.planning.sample_size import make_plan
    if hasattr(analysis_options, "to_dict"):
        analysis_options = analysis_options.to_dict()
    a = analyse(sheet_path, progress=progress, **analysis_options)
    sc = a.scenarios
    p = make_plan(sc.planning_effects(), design, metric=sc.planning_metric,
                  predictive=sc.assurance_density(),
                  effect_label="g" if sc.planning_metric == "d" else "r", **plan_options)
    note = _planned_r_note(a.pooled, design)
    if note:
        from dataclasses import replace
        p = replace(p, notes=p.notes + (note,))
    opts = {**analysis_options, **plan_options, "design": design.to_dict()
            if hasattr(design, "to_dict") else design}
    opts = {k: (list(v) if isinstance(v, tuple) else v) for k, v in opts.items()}
    return RunResult(a, p, opts, command, __version__)
