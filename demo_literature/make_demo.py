"""Regenerate the invented demo literature: ``python demo_literature/make_demo.py``.

Scenario (invented): "Does a five-minute movement break improve proofreading accuracy?"
No real study, person or data set is behind any row. Each study is simulated as raw
data (true mean effect 0.25, between-study SD 0.10), tested, and "published" always when
significant in the expected direction and with probability 0.25 otherwise, so the
literature has the small-study / selection pattern that the bias adjusters are for.
The statistic each study "reports" is then computed from its own simulated data.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
from scipy import stats

SEED = 20261201
TRUE_DELTA, TAU, P_PUBLISH_NS = 0.25, 0.10, 0.25
PLACES = ["Alder", "Birchwood", "Cobble", "Dunmore", "Elmstead", "Fernhill", "Glenrock",
          "Harrowgate", "Ivybridge", "Juniper", "Kestrel", "Larchmont", "Millbrook", "Northcliff",
          "Oakhurst", "Pinecrest", "Quarry", "Rowan", "Stonebridge", "Thornbury", "Underwood",
          "Valemont", "Willowmere", "Yarrow"]
FORMATS = ["t", "means", "F", "p", "d", "g", "r", "counts", "means", "chi2", "t", "odds_ratio"]


def main(out: Path) -> None:
    rng = np.random.default_rng(SEED)
    rows = []
    year = 2008
    while len(rows) < len(PLACES):
        within = rng.random() < 0.2
        delta = rng.normal(TRUE_DELTA, TAU)
        if within:
            n = int(rng.integers(14, 44))
            r = 0.6
            cov = [[1, r], [r, 1]]
            xy = rng.multivariate_normal([0, 0], cov, size=n)
            # mean difference delta on the raw-score scale
            after, before = xy[:, 0] + delta, xy[:, 1]
            t, p = stats.ttest_rel(after, before)
        else:
            n1 = int(rng.integers(12, 60)) if rng.random() < 0.7 else int(rng.integers(60, 95))
            n2 = n1 + int(rng.integers(-3, 4))
            g1, g2 = rng.normal(delta, 1, n1), rng.normal(0, 1, n2)
            t, p = stats.ttest_ind(g1, g2)
        significant = p < 0.05 and t > 0
        if not significant and rng.random() > P_PUBLISH_NS:
            continue
        year += int(rng.integers(0, 2))
        place = PLACES[len(rows)]
        label = f"{place} {year}"
        # setting of the (invented) study, for the subgroup analysis; fixed by the label so the
        # random stream, and so every number, stays as it was
        setting = "online" if len(place) % 2 else "lab"
        base = {"study": label, "year": year, "subgroup": setting, "note": "invented"}
        if within:
            kind = "within_t" if rng.random() < 0.6 else "within_d"
            if kind == "within_t":
                rows.append({**base, "stat": "t", "value": f"{t:.2f}", "n": n, "design": "within",
                             "within_r": f"{np.corrcoef(after, before)[0, 1]:.2f}"})
            else:
                dz = np.mean(after - before) / np.std(after - before, ddof=1)
                rows.append({**base, "stat": "d", "value": f"{dz:.2f}", "n": n,
                             "design": "within", "note": "invented; d_z reported"})
            continue
        kind = FORMATS[len(rows) % len(FORMATS)]
        if kind == "t":
            rows.append({**base, "stat": "t", "value": f"{t:.2f}", "n1": n1, "n2": n2})
        elif kind == "means":
            s = 8.0  # errors found, out of 60 planted typos
            rows.append({**base, "stat": "means", "mean1": f"{40 + s * g1.mean():.1f}",
                         "sd1": f"{s * g1.std(ddof=1):.1f}", "mean2": f"{40 + s * g2.mean():.1f}",
                         "sd2": f"{s * g2.std(ddof=1):.1f}", "n1": n1, "n2": n2})
        elif kind == "F":
            rows.append({**base, "stat": "F", "value": f"{t * t:.2f}", "df1": 1,
                         "df": n1 + n2 - 2, "direction": "+" if t > 0 else "-",
                         "note": "invented; only the error df reported"})
        elif kind == "p":
            rows.append({**base, "stat": "p", "value": f"{p:.3f}", "tails": 2,
                         "direction": "+" if t > 0 else "-", "n1": n1, "n2": n2})
        elif kind in ("d", "g"):
            sp = math.sqrt(((n1 - 1) * g1.var(ddof=1) + (n2 - 1) * g2.var(ddof=1)) / (n1 + n2 - 2))
            d = (g1.mean() - g2.mean()) / sp
            if kind == "g":
                d *= 1 - 3 / (4 * (n1 + n2) - 9)
            rows.append({**base, "stat": kind, "value": f"{d:.2f}", "n1": n1, "n2": n2})
        elif kind == "r":
            y = np.r_[g1, g2]
            x = np.r_[np.ones(n1), np.zeros(n2)]
            rows.append({**base, "stat": "r", "value": f"{np.corrcoef(x, y)[0, 1]:.3f}",
                         "n": n1 + n2, "note": "invented; point-biserial r"})
        else:
            e1, e2 = int((g1 > 0).sum()), int((g2 > 0).sum())
            if kind == "odds_ratio":
                a, b, c, d = e1 + 0.0, n1 - e1 + 0.0, e2 + 0.0, n2 - e2 + 0.0
                lor, se = math.log(a * d / (b * c)), math.sqrt(1 / a + 1 / b + 1 / c + 1 / d)
                rows.append({**base, "stat": "odds_ratio", "value": f"{math.exp(lor):.2f}",
                             "ci_low": f"{math.exp(lor - 1.96 * se):.2f}",
                             "ci_high": f"{math.exp(lor + 1.96 * se):.2f}", "n1": n1, "n2": n2,
                             "note": "invented; odds of scoring above the accuracy norm"})
            elif kind == "counts":
                rows.append({**base, "stat": "counts", "events1": e1, "n1": n1, "events2": e2,
                             "n2": n2, "note": "invented; participants above the accuracy norm"})
            else:
                table = np.array([[e1, n1 - e1], [e2, n2 - e2]])
                chi2 = stats.chi2_contingency(table, correction=False)[0]
                rows.append({**base, "stat": "chi2", "value": f"{chi2:.2f}", "n": n1 + n2,
                             "direction": "+" if e1 / n1 >= e2 / n2 else "-",
                             "note": "invented; above vs below the accuracy norm"})
    # one sample reporting two outcomes, and one duplicate report that is excluded
    first_means = next(r for r in rows if r["stat"] == "means")
    first_means["sample"] = "S-" + first_means["study"].split()[0]
    second = {**first_means, "stat": "d", "value": "0.31", "note": "invented; second outcome "
              "(speed-adjusted accuracy) from the same participants"}
    for k in ("mean1", "sd1", "mean2", "sd2"):
        second.pop(k)
    rows.insert(rows.index(first_means) + 1, second)
    dup = {**rows[3], "study": rows[3]["study"] + " (conference abstract)",
           "exclude": "same participants as " + rows[3]["study"]}
    dup.pop("sample", None)
    rows.append(dup)
    cols = ["study", "sample", "stat", "value", "n1", "n2", "n", "df", "df1", "mean1", "sd1",
            "mean2", "sd2", "events1", "events2", "ci_low", "ci_high", "direction", "design", "within_r", "tails",
            "year", "subgroup", "exclude", "note"]
    with open(out, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=cols)
        w.writeheader()
        for r in rows:
            w.writerow(r)


if __name__ == "__main__":
    main(Path(__file__).with_name("break_and_proofreading.csv"))
