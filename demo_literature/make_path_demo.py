"""Regenerate the invented path literature: ``python demo_literature/make_path_demo.py``.

Scenario (invented): "Does joining a community garden (X) lift wellbeing (Y) through more
time outdoors (M1) and through new friendships (M2)?" — a two-mediator model for
``pooler paths SHEET --design parallel-mediation``. No real study, person or data set is
behind any row; the labels are made up. Every study is simulated as raw data from one true
correlation matrix of (X, M1, M2, Y) with a little between-study variation, and reports one
pair's result: the pair's correlation (stat r), the t of the coefficient of the pair's
predictor in a regression with one predictor or with X as a control (stat coef_t, with its
df and the number of predictors), or a standardized coefficient of a one-predictor model
(stat std_coef). Results are "published" always when significant and with probability 0.6
otherwise, so each path's literature shows some selection. One row is excluded.
"""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
from scipy import stats

SEED = 20261202
VARS = ("X", "M1", "M2", "Y")
#: The invented true correlations.
TRUE_R = {"X-M1": 0.30, "X-M2": 0.25, "M1-M2": 0.30, "M1-Y": 0.35, "M2-Y": 0.30, "X-Y": 0.22}
#: Studies per path.
K = {"X-M1": 9, "X-M2": 7, "M1-Y": 8, "M2-Y": 6, "M1-M2": 4, "X-Y": 6}
TAU_R, P_PUBLISH_NS = 0.04, 0.6
PLACES = ["Ashby", "Brackenfield", "Coldwater", "Dapplemoor", "Eastwick", "Foxholme",
          "Greyfriars", "Hollins", "Inchmere", "Jessop", "Kingsmoor", "Lowther", "Marden",
          "Netherby", "Orchardleigh", "Pellow", "Quenby", "Redmire", "Saltash", "Tarn",
          "Upwood", "Varley", "Wendover", "Yeadon", "Zennor", "Abbotsley", "Broomhill",
          "Castlerigg", "Dunholme", "Elsworth", "Fairlight", "Gosforth", "Hawksmoor",
          "Ickleton", "Kelsall", "Linton", "Mapleton", "Norbury", "Ottery", "Pendle"]


def _matrix(jitter):
    mat = np.eye(4)
    for key, r in TRUE_R.items():
        a, b = key.split("-")
        i, j = VARS.index(a), VARS.index(b)
        mat[i, j] = mat[j, i] = r + jitter.get(key, 0.0)
    return mat


def _study(rng, path):
    """One simulated study of ``path``: (stat, value, n, df, predictors, p)."""
    jitter = {key: rng.normal(0, TAU_R) for key in TRUE_R}
    n = int(rng.integers(40, 260))
    data = rng.multivariate_normal(np.zeros(4), _matrix(jitter), size=n)
    a, b = path.split("-")
    x, y = data[:, VARS.index(a)], data[:, VARS.index(b)]
    kind = rng.choice(["r", "r", "coef_t", "std_coef"])
    controlled = kind == "coef_t" and a != "X" and rng.random() < 0.6
    preds = np.column_stack([x, data[:, 0]]) if controlled else x[:, None]
    design = np.column_stack([np.ones(n), preds])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    df = n - design.shape[1]
    cov = resid @ resid / df * np.linalg.inv(design.T @ design)
    t = coef[1] / np.sqrt(cov[1, 1])
    p = 2 * stats.t.sf(abs(t), df)
    r = float(np.corrcoef(x, y)[0, 1])
    if kind == "r":
        return "r", round(r, 2), n, "", "", p
    if kind == "std_coef":
        return "std_coef", round(r, 2), n, "", 1, p
    return "coef_t", round(float(t), 2), "", df, design.shape[1] - 1, p


def main(out: Path) -> None:
    rng = np.random.default_rng(SEED)
    rows = []
    places = iter(PLACES)
    for path, k in K.items():
        found = 0
        while found < k:
            stat, value, n, df, preds, p = _study(rng, path)
            if p >= 0.05 and rng.random() > P_PUBLISH_NS:
                continue
            found += 1
            place = next(places)
            rows.append({"study": f"{place} garden study", "path": path, "stat": stat,
                         "value": value, "n": n, "df": df, "predictors": preds,
                         "year": int(rng.integers(2009, 2026)), "exclude": "",
                         "note": "invented"})
    rows.append({"study": "Pendle garden study (conference abstract)", "path": "X-M1",
                 "stat": "r", "value": 0.41, "n": 36, "df": "", "predictors": "",
                 "year": 2019, "exclude": "same sample as a later full report",
                 "note": "invented"})
    write_path_sheet(rows, out)


#: The columns of an invented path sheet.
PATH_COLUMNS = ["study", "path", "stat", "value", "n", "df", "predictors", "year", "exclude",
                "note"]


def write_path_sheet(rows, out) -> None:
    """Write invented path rows as a CSV sheet (also used by make_moderation_demo.py)."""
    with open(out, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=PATH_COLUMNS)
        w.writeheader()
        w.writerows(rows)


if __name__ == "__main__":
    main(Path(__file__).resolve().parent / "garden_paths.csv")
