"""Readable text for the terminal (and later Markdown/HTML) from the stage results.

Text formatting only; no statistics are computed here.
"""
from __future__ import annotations

import math

from ._results import text_table


def _reported(row, sheet_rec) -> str:
    """A short description of what the sheet row reported, e.g. 't = 2.10'."""
    v = sheet_rec.values
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
    out = [f"{sheet.name}: {len(eff.rows)} rows read, {eff.n_used} used, "
           f"{eff.n_excluded} excluded; {eff.k} independent samples to pool "
           f"(metric: {metric})", "", text_table(headers, rows)]
    if eff.assumptions:
        out += ["", "Assumptions:"] + [f"  - {a}" for a in eff.assumptions]
    if sheet.notes:
        out += ["", "Reading notes:"] + [f"  - {n}" for n in sheet.notes]
    return "\n".join(out)


def _n(x: float):
    return int(x) if float(x).is_integer() else round(x, 1)
