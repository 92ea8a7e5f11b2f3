"""Regenerate the invented moderation literature (python demo_literature/make_moderation_demo.py).

Scenario (invented): "Does weekly practice time (X) improve sight-reading scores (Y) more for
learners who get more feedback from a teacher (Z)?" — a moderation for ``pooler paths SHEET
--design moderation`` (or ``pooler run SHEET --design moderation``). No real study, person or
data set is behind any row; the labels are made up. Every study is simulated as raw data
from one invented model, Y = 0.30 X + 0.20 Z + 0.12 XZ + e with corr(X, Z) = 0.10 (a little
between-study variation in each coefficient), and reports the t of the interaction
coefficient in the regression of Y on X, Z and XZ (stat coef_t, its df, 3 predictors, path
XZ-Y); most studies also report the correlations X-Y, Z-Y and X-Z (stat r, path X-Y, Z-Y,
X-Z). A study whose interaction is not significant is "published" with probability 0.5, so
the interaction's literature shows some selection. One row is excluded.
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_path_demo import write_path_sheet  # noqa: E402 (the sibling script's writer)

SEED = 20261203
#: The invented true model.
X_EFFECT, Z_EFFECT, INTERACTION, XZ_R = 0.30, 0.20, 0.12, 0.10
TAU, P_PUBLISH_NS, K = 0.03, 0.5, 12
PLACES = ["Amberley", "Bransdale", "Crowhurst", "Dinsford", "Elmstead", "Fennick", "Gallowby",
          "Harwood", "Ivyholm", "Juniper Vale", "Kettlewick", "Larkmoor", "Millbeck",
          "Northam Cross", "Oakenshaw", "Pinfold", "Quarrendon", "Rushmere", "Stonebridge",
          "Thistledon"]


def _study(rng):
    """One simulated study: its n, the interaction's t, df and p, and the three
    correlations."""
    n = int(rng.integers(60, 320))
    x_eff, z_eff, i_eff = (v + rng.normal(0, TAU) for v in (X_EFFECT, Z_EFFECT, INTERACTION))
    z = rng.standard_normal(n)
    x = XZ_R * z + math.sqrt(1 - XZ_R ** 2) * rng.standard_normal(n)
    explained = x_eff ** 2 + z_eff ** 2 + 2 * XZ_R * x_eff * z_eff + i_eff ** 2 * (1 + XZ_R ** 2)
    y = x_eff * x + z_eff * z + i_eff * x * z + math.sqrt(1 - explained) * rng.standard_normal(n)
    xc, zc = x - x.mean(), z - z.mean()
    design = np.column_stack([np.ones(n), xc, zc, xc * zc])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    df = n - 4
    cov = resid @ resid / df * np.linalg.inv(design.T @ design)
    t = coef[3] / math.sqrt(cov[3, 3])
    p = 2 * stats.t.sf(abs(t), df)
    r = np.corrcoef(np.vstack([x, z, y]))
    return n, float(t), df, p, {"X-Y": r[0, 2], "Z-Y": r[1, 2], "X-Z": r[0, 1]}


def main(out: Path) -> None:
    rng = np.random.default_rng(SEED)
    rows = []
    places = iter(PLACES)
    found = 0
    while found < K:
        n, t, df, p, corr = _study(rng)
        if p >= 0.05 and rng.random() > P_PUBLISH_NS:
            continue
        found += 1
        study = f"{next(places)} practice study"
        year = int(rng.integers(2008, 2026))
        rows.append({"study": study, "path": "XZ-Y", "stat": "coef_t", "value": round(t, 2),
                     "n": "", "df": df, "predictors": 3, "year": year, "exclude": "",
                     "note": "invented"})
        for pair, r in corr.items():
            if rng.random() < 0.75:
                rows.append({"study": study, "path": pair, "stat": "r", "value": round(r, 2),
                             "n": n, "df": "", "predictors": "", "year": year, "exclude": "",
                             "note": "invented"})
    rows.append({"study": "Thistledon practice study (thesis version)", "path": "XZ-Y",
                 "stat": "coef_t", "value": 2.9, "n": "", "df": 96, "predictors": 3,
                 "year": 2021, "exclude": "same sample as a later journal article",
                 "note": "invented"})
    write_path_sheet(rows, out)


if __name__ == "__main__":
    main(Path(__file__).resolve().parent / "practice_feedback_moderation.csv")
