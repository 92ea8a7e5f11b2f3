"""Format the calibration run as the README's Markdown table.

    pooler stress --calibration --reps 100 --out calibration
    python tests/benchmarks/calibration_table.py calibration/stress.json
"""
from __future__ import annotations

import json
import sys

RULES = ("random effects", "median of adjusters", "realistic", "pessimistic")


def main(path):
    doc = json.load(open(path))
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
          + " | no plan, δ ≥ 0.2 (mean / worst cell) |")
    print("|---|---|---|---|")
    for r in RULES:
        strong, free = [], []
        for k in ks:
            cs = [c for c in doc["cells"] if c["cell"]["k"] == k]
            st = [c["rules"][r]["median_power"] for c in cs if c["cell"]["pi"] <= 0.2
                  and c["rules"][r]["median_power"] is not None]
            fr = [c["rules"][r]["median_power"] for c in cs if c["cell"]["pi"] == 1
                  and c["rules"][r]["median_power"] is not None]
            strong.append(f"{statistics.median(st):.2f}" if st else "–")
            free.append(f"{statistics.median(fr):.2f}" if fr else "–")
        nop = [c["rules"][r]["share_no_positive_effect"] for c in doc["cells"]
               if c["cell"]["delta"] >= 0.2]
        print(f"| {r} | {' / '.join(strong)} | {' / '.join(free)} | "
              f"{100 * statistics.mean(nop):.0f} % / {100 * max(nop):.0f} % |")


if __name__ == "__main__":
    main(sys.argv[1])
    summary(json.load(open(sys.argv[1])))
