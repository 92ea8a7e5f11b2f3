"""Format the calibration run as the README's Markdown tables.

    pooler stress --calibration --reps 100 --out calibration
    python tests/benchmarks/calibration_table.py calibration/stress.json

When the current defaults of the model-average rule (pooler/choices.py) differ from the
settings the run used, the rule under the current defaults is read from the run's trade-off
grid (the same literatures, re-weighted) and shown as extra columns "... (now)".
"""
from __future__ import annotations

import json
import sys

RULES = ("random effects", "median of adjusters", "realistic", "pessimistic")


def with_current_rule(doc):
    """Add the current default rule's columns from the trade-off grid when they differ."""
    from pooler.choices import MODEL_AVERAGE_DEFAULTS
    ran = {**MODEL_AVERAGE_DEFAULTS, **(doc.get("rule_options") or {})}
    now = dict(MODEL_AVERAGE_DEFAULTS)
    if all(ran[k] == now[k] for k in ("chance_of_no_bias", "pessimistic_quantile")):
        return RULES
    w, q = now["chance_of_no_bias"], now["pessimistic_quantile"]
    for c in doc["cells"]:
        grid = {(t["p_no_bias"], t["quantile"]): t for t in c["tradeoff"]}
        c["rules"]["realistic (now)"] = grid[(w, 0.5)]
        c["rules"]["pessimistic (now)"] = grid[(w, q)]
    if w == ran["chance_of_no_bias"]:
        for c in doc["cells"]:
            del c["rules"]["realistic (now)"]
        return RULES + ("pessimistic (now)",)
    return RULES + ("realistic (now)", "pessimistic (now)")


def main(doc):
    global RULES
    RULES = with_current_rule(doc)
    print(f"{doc['reps']} literatures per cell, seed {doc['seed']}, {doc['shapes']}; n planned "
          f"for {100 * doc['power']:g}% power; cells: median true power reached "
          "(share of literatures with no positive planning effect, when any)\n")
    print("| k | δ | τ | π | " + " | ".join(RULES) + " |")
    print("|---|---|---|---|" + "---|" * len(RULES))
    worst = {r: 1.0 for r in RULES}
    hits = {r: 0 for r in RULES}
    strong = {r: [] for r in RULES}
    for c in doc["cells"]:
        cell = c["cell"]
        out = []
        for r in RULES:
            v = c["rules"][r]
            med = v["median_power"]
            txt = "–" if med is None else f"{med:.2f}"
            if v["share_no_positive_effect"] >= 0.005:
                txt += f" ({100 * v['share_no_positive_effect']:.0f}%)"
            out.append(txt)
            if med is not None:
                worst[r] = min(worst[r], med)
                hits[r] += med >= 0.75
                if cell["pi"] <= 0.2:
                    strong[r].append(med)
        print(f"| {cell['k']} | {cell['delta']:g} | {cell['tau']:g} | {cell['pi']:g} | "
              + " | ".join(out) + " |")
    n = len(doc["cells"])
    print()
    for r in RULES:
        s = sorted(strong[r])
        print(f"- {r}: median true power ≥ 0.75 in {hits[r]} of {n} cells; lowest "
              f"{worst[r]:.2f}; under selection (π ≤ 0.2) the median over cells is "
              f"{s[len(s) // 2]:.2f}")


def summary(doc):
    """The issue's summary: per k, the median over cells of the median true power under
    strong selection (pi <= 0.2) and without selection (pi = 1), and the share of literatures
    with delta >= 0.2 that got no positive planning effect."""
    import statistics
    ks = sorted({c["cell"]["k"] for c in doc["cells"]})
    print("\n| rule | strong selection (π ≤ 0.2), k = " + " / ".join(map(str, ks))
          + " | no selection (π = 1), k = " + " / ".join(map(str, ks))
          + " | n / oracle n, no selection | no plan, δ ≥ 0.2 (mean / worst cell) |")
    print("|---|---|---|---|---|")
    for r in RULES:
        strong, free, ratio = [], [], []
        for k in ks:
            cs = [c for c in doc["cells"] if c["cell"]["k"] == k]
            st = [c["rules"][r]["median_power"] for c in cs if c["cell"]["pi"] <= 0.2
                  and c["rules"][r]["median_power"] is not None]
            fr = [c["rules"][r]["median_power"] for c in cs if c["cell"]["pi"] == 1
                  and c["rules"][r]["median_power"] is not None]
            strong.append(f"{statistics.median(st):.2f}" if st else "–")
            free.append(f"{statistics.median(fr):.2f}" if fr else "–")
            nr = [c["rules"][r].get("median_n_ratio") for c in cs if c["cell"]["pi"] == 1]
            nr = [x for x in nr if x is not None]
            ratio.append(f"{statistics.median(nr):.2f}" if nr else "–")
        nop = [c["rules"][r]["share_no_positive_effect"] for c in doc["cells"]
               if c["cell"]["delta"] >= 0.2]
        print(f"| {r} | {' / '.join(strong)} | {' / '.join(free)} | {' / '.join(ratio)} | "
              f"{100 * statistics.mean(nop):.0f} % / {100 * max(nop):.0f} % |")


def tradeoff(doc):
    from pooler.planning.tradeoff import choose_default, tradeoff_markdown, tradeoff_table
    from pooler.choices import MODEL_AVERAGE_DEFAULTS as now
    t = tradeoff_table(doc, default=(now["chance_of_no_bias"], now["pessimistic_quantile"]))
    print()
    print(tradeoff_markdown(t))
    c = choose_default(t)
    print(f"\nchoose_default: prior P(no bias) {c.p_no_bias:g}, pessimistic quantile "
          f"{c.pessimistic_quantile:g}: " + "; ".join(c.reasons))


if __name__ == "__main__":
    d = json.load(open(sys.argv[1]))
    main(d)
    summary(d)
    tradeoff(d)
