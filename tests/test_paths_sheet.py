"""Path literatures feeding the simulated mediation plans (``pooler paths SHEET``).

Sources named beside each check.
"""
from __future__ import annotations

import math

import numpy as np
import pytest


def _write(path, header, rows):
    path.write_text(",".join(header) + "\n"
                    + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n")
    return path


# ------------------------------------------------------------------ conversions

def test_coefficient_t_gives_the_partial_correlation_from_residuals():
    """r_p = t / sqrt(t^2 + df) (Aloe & Becker 2012; Aloe 2014) equals the correlation of the
    residuals of Y and of X1 after regressing each on the other predictors (the definition
    of the partial correlation), t and df from statsmodels OLS on simulated data."""
    import statsmodels.api as sm
    from pooler.effects import partial_r_from_t
    rng = np.random.default_rng(15)
    for n, q in ((40, 1), (120, 2), (500, 3)):
        z = rng.standard_normal((n, q))
        x = z @ rng.uniform(-0.5, 0.5, q) + rng.standard_normal(n)
        y = 0.3 * x + z @ rng.uniform(-0.5, 0.5, q) + rng.standard_normal(n)
        fit = sm.OLS(y, sm.add_constant(np.column_stack([x, z]))).fit()
        rp = partial_r_from_t(fit.tvalues[1], fit.df_resid)
        zc = sm.add_constant(z)
        ex = sm.OLS(x, zc).fit().resid
        ey = sm.OLS(y, zc).fit().resid
        assert rp == pytest.approx(np.corrcoef(ex, ey)[0, 1], abs=1e-10)
        assert fit.df_resid == n - q - 2


def test_partial_correlation_variance_and_one_predictor_rows(tmp_path):
    """Fisher z of a partial correlation with q controls has variance 1/(n - q - 3) (Fisher
    1924), which is 1/(df - 1) with df = n - q - 2; a coefficient of the only predictor is
    the zero-order correlation, so coef_t with one predictor and r agree (same n)."""
    from pooler.effects import convert
    from pooler.sheet import read_sheet
    t = 0.25 * math.sqrt(98) / math.sqrt(1 - 0.25 ** 2)  # the t of r = .25 with n = 100
    s = _write(tmp_path / "s.csv", ["study", "stat", "value", "n", "df", "predictors"],
               [["A", "coef_t", t, "", 98, 1], ["B", "r", 0.25, 100, "", ""],
                ["C", "partial_r", 0.3, 100, "", 3], ["D", "std_coef", 0.25, 100, "", 1]])
    eff = convert(read_sheet(s), "r")
    a, b, c, d = eff.rows
    assert a.effect == pytest.approx(b.effect, abs=1e-12)
    assert a.variance == pytest.approx(1 / 97, abs=1e-12) == b.variance
    assert c.effect == pytest.approx(math.atanh(0.3))
    assert c.variance == pytest.approx(1 / (100 - 2 - 3))  # q = 2 controls
    assert d.effect == pytest.approx(b.effect) and d.variance == pytest.approx(b.variance)
    assert any("zero-order" in n for n in a.notes)
    assert any("ASSUMED" in n for n in c.notes)


def test_standardized_coefficient_with_other_predictors_is_refused(tmp_path):
    from pooler.effects import convert
    from pooler.errors import InputError
    from pooler.sheet import read_sheet
    s = _write(tmp_path / "s.csv", ["study", "stat", "value", "n", "predictors"],
               [["A", "std_coef", 0.3, 100, 3]])
    with pytest.raises(InputError, match="not the correlation of the pair") as e:
        convert(read_sheet(s), "r")
    assert e.value.row == 2 and e.value.column == "stat"
    s = _write(tmp_path / "t.csv", ["study", "stat", "value", "n"], [["A", "std_coef", 0.3, 100]])
    with pytest.raises(InputError, match="predictors") as e:
        convert(read_sheet(s), "r")
    assert e.value.column == "predictors"
