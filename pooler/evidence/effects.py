"""Stage 2: convert every reported statistic to one metric with its sampling variance.

One converter per reported statistic (``CONVERTERS``). Each turns a sheet record
into a standardised mean difference ``d`` on the between-subject (raw-score) scale,
or a correlation ``r``, with its variance. :func:`convert` then puts everything on
the target metric: Hedges' g (default) or Fisher's z, and combines rows that share a
``sample`` into one effect.

References
----------
.. [B] Borenstein, M., Hedges, L. V., Higgins, J. P. T., & Rothstein, H. R. (2009).
   *Introduction to Meta-Analysis*. Wiley. Eqs. 4.18-4.28, ch. 6, ch. 7, ch. 24.
.. [H] Hedges, L. V. (1981). Distribution theory for Glass's estimator of effect size
   and related estimators. *Journal of Educational Statistics*, 6(2), 107-128.
.. [MD] Morris, S. B., & DeShon, R. P. (2002). Combining effect size estimates in
   meta-analysis with repeated measures and independent-groups designs.
   *Psychological Methods*, 7(1), 105-125.
.. [HH] Hasselblad, V., & Hedges, L. V. (1995). Meta-analysis of screening and
   diagnostic tests. *Psychological Bulletin*, 117(1), 167-178.
.. [F] Fisher, R. A. (1921). On the "probable error" of a coefficient of correlation
   deduced from a small sample. *Metron*, 1, 3-32.
.. [F24] Fisher, R. A. (1924). The distribution of the partial correlation coefficient.
   *Metron*, 3, 329-332. (A partial correlation controlling for q variables is distributed
   as a zero-order correlation from n - q cases.)
.. [AB12] Aloe, A. M., & Becker, B. J. (2012). An effect size for regression predictors in
   meta-analysis. *Journal of Educational and Behavioral Statistics*, 37(2), 278-297.
.. [A14] Aloe, A. M. (2014). An empirical investigation of partial effect sizes in
   meta-analysis of correlational data. *Journal of General Psychology*, 141(1), 47-64.
.. [PB05] Peterson, R. A., & Brown, S. P. (2005). On the use of beta coefficients in
   meta-analysis. *Journal of Applied Psychology*, 90(1), 175-181.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable

from pooler._results import Interval, ShowsAsTable, to_jsonable
from pooler.errors import InputError, InputErrors, OptionError
from pooler.reading.consistency import check_record
from pooler.reading.sheet import Record, Sheet, column_label

METRICS = {"d": "g", "g": "g", "r": "z", "z": "z"}
_Z975 = 1.959963984540054  # Phi^-1(0.975)
LARGE_D = 3.0  # |d| above this is plausible but suspicious (common practice)


# ------------------------------------------------------------------ formulas

def hedges_j(df):
    """Exact small-sample correction factor J(df) of Hedges (1981), eq. 6e.

    ``J(df) = Γ(df/2) / (sqrt(df/2) Γ((df-1)/2))``; Borenstein et al. (2009) eq. 4.22
    gives the approximation ``1 - 3/(4 df - 1)``. Works on scalars and arrays.
    """
    from scipy.special import gammaln
    import numpy as np
    df = np.asarray(df, dtype=float)
    out = np.exp(gammaln(df / 2) - 0.5 * np.log(df / 2) - gammaln((df - 1) / 2))
    return out.item() if out.ndim == 0 else out


def d_variance(d: float, n1: float, n2: float) -> float:
    """Variance of d for two independent groups, Borenstein et al. (2009) eq. 4.20."""
    return (n1 + n2) / (n1 * n2) + d * d / (2 * (n1 + n2))


def d_variance_within(d: float, n: float, r: float) -> float:
    """Variance of raw-score d from a within-subject design, Borenstein et al. (2009) eq. 4.28."""
    return (1 / n + d * d / (2 * n)) * 2 * (1 - r)


def dz_to_raw(dz: float, r: float) -> float:
    """d_z (mean difference / SD of differences) to the raw-score scale:
    ``d = d_z * sqrt(2 (1 - r))``, Morris & DeShon (2002) eq. 11."""
    return dz * math.sqrt(2 * (1 - r))


def raw_to_dz(d: float, r: float) -> float:
    """Inverse of :func:`dz_to_raw` (Morris & DeShon 2002, eq. 11)."""
    return d / math.sqrt(2 * (1 - r))


def group_factor(n1, n2):
    """The factor ``a`` linking d and r for two groups of ``n1`` and ``n2``.

    ``a = (n1 + n2)(n1 + n2 - 2) / (n1 n2)``. With it, ``r = d / sqrt(d^2 + a)`` is
    exactly the point-biserial correlation of the sample when d is standardised by the
    pooled SD: d = t sqrt(1/n1 + 1/n2) and r = t / sqrt(t^2 + df) with df = n1 + n2 - 2
    (the identity between the pooled two-group t and the correlation of the outcome with
    the group indicator), so ``d^2 + a = (t^2 + df) (n1 + n2) / (n1 n2)``. The same form
    is given by Aaron, Kromrey & Ferron (1998) as ``(N^2 - 2N) / (n1 n2)`` (from memory).
    Borenstein et al. (2009) eq. 7.5 uses its large-sample form ``(n1 + n2)^2 / (n1 n2)``,
    with which the conversion gives t / sqrt(t^2 + N) instead; both reduce to ``a = 4``
    for equal groups as N grows. Works on scalars and arrays.

    Examples
    --------
    >>> round(group_factor(10, 500), 4)
    51.816
    >>> t, n1, n2 = 3.0, 10, 500
    >>> d = t * (1 / n1 + 1 / n2) ** 0.5
    >>> round(d_to_r(d, 0.1, group_factor(n1, n2))[0], 6) == round(t / (t * t + 508) ** 0.5, 6)
    True
    """
    n = n1 + n2
    return n * (n - 2) / (n1 * n2)


def r_to_d(r: float, var_r: float, a: float = 4.0) -> tuple[float, float]:
    """Correlation to d, Borenstein et al. (2009) eqs. 7.5-7.6 with a general factor
    ``a`` (``a = 4`` for equal groups of unknown size; :func:`group_factor` when the
    group sizes are known): ``d = sqrt(a) r / sqrt(1 - r^2)``, ``V_d = a V_r / (1 - r^2)^3``.
    """
    d = math.sqrt(a) * r / math.sqrt(1 - r * r)
    return d, a * var_r / (1 - r * r) ** 3


def d_to_r(d: float, var_d: float, a: float = 4.0) -> tuple[float, float]:
    """d to a correlation, Borenstein et al. (2009) eqs. 7.7-7.8 with a general factor
    ``a`` (see :func:`r_to_d`): ``r = d / sqrt(d^2 + a)``, ``V_r = a^2 V_d / (d^2 + a)^3``
    (the delta method: dr/dd = a / (d^2 + a)^{3/2})."""
    r = d / math.sqrt(d * d + a)
    return r, a * a * var_d / (d * d + a) ** 3


def r_variance(r: float, n: float) -> float:
    """Large-sample variance of r, Borenstein et al. (2009) eq. 6.1."""
    return (1 - r * r) ** 2 / (n - 1)


def fisher_z(r: float, var_r: float | None = None, n: float | None = None) -> tuple[float, float]:
    """Fisher's (1921) z = atanh(r) with variance 1/(n-3) (Borenstein eq. 6.2-6.3), or,
    for a correlation converted from another statistic, the delta-method variance
    ``var_r / (1 - r^2)^2``."""
    z = math.atanh(r)
    v = 1 / (n - 3) if var_r is None else var_r / (1 - r * r) ** 2
    return z, v


def partial_r_from_t(t: float, df: float) -> float:
    """Partial correlation of a regression coefficient from its t and the residual df:
    ``r_p = t / sqrt(t^2 + df)`` (the partial correlation of the predictor with the outcome,
    controlling for the model's other predictors; used as a meta-analytic effect size by
    Aloe & Becker 2012 and Aloe 2014). With one predictor it is the zero-order correlation.

    Examples
    --------
    >>> round(partial_r_from_t(3.0, 91.0), 4)
    0.3
    """
    return t / math.sqrt(t * t + df)


def log_or_to_d(log_or: float, var: float) -> tuple[float, float]:
    """Logistic conversion of a log odds ratio to d (Hasselblad & Hedges 1995;
    Borenstein et al. 2009 eqs. 7.1-7.2): ``d = ln(OR) sqrt(3)/π``, ``V = V_lnOR 3/π²``."""
    return log_or * math.sqrt(3) / math.pi, var * 3 / math.pi ** 2


# ------------------------------------------------------------------ results

@dataclass(frozen=True)
class EffectRow:
    """One sheet row after conversion.

    ``effect`` and ``variance`` are on the target metric (g or Fisher z); they are
    None for an excluded row that could not be converted.
    """

    row: int
    study: str
    stat: str | None
    design: str
    effect: float | None
    variance: float | None
    n_total: float | None
    n1: float | None
    n2: float | None
    status: str  # "used" | "excluded"
    reason: str
    notes: tuple[str, ...] = ()
    sample: str | None = None
    extra: dict = field(default_factory=dict)
    reported: str | None = None  # the result string as pasted, if the row had one

    @property
    def se(self) -> float | None:
        return None if self.variance is None else math.sqrt(self.variance)

    def ci(self, level: float = 0.95) -> Interval | None:
        if self.effect is None:
            return None
        from scipy.special import ndtri
        z = ndtri(0.5 + level / 2)
        return Interval(self.effect - z * self.se, self.effect + z * self.se, level)

    def to_dict(self) -> dict:
        ci = self.ci()
        return {"row": self.row, "study": self.study, "stat": self.stat,
                "effect": self.effect, "variance": self.variance, "se": self.se,
                "ci_low": ci.low if ci else None, "ci_high": ci.high if ci else None,
                "n_total": self.n_total, "n1": self.n1, "n2": self.n2,
                "design": self.design, "sample": self.sample, "status": self.status,
                "reason": self.reason, "notes": list(self.notes), "extra": dict(self.extra),
                "reported": self.reported}


@dataclass(frozen=True)
class Unit:
    """One independent sample: the thing that is pooled.

    A unit is one used row, or the composite of the used rows that share a ``sample``.
    """

    label: str
    effect: float
    variance: float
    n_total: float | None
    n1: float | None
    n2: float | None
    design: str
    rows: tuple[int, ...]
    year: float | None = None
    subgroup: str | None = None
    published: str | None = None
    within_r: float | None = None

    @property
    def se(self) -> float:
        return math.sqrt(self.variance)

    def to_dict(self) -> dict:
        return {"label": self.label, "effect": self.effect, "variance": self.variance,
                "se": self.se, "n_total": self.n_total, "n1": self.n1, "n2": self.n2,
                "design": self.design, "rows": list(self.rows), "year": self.year,
                "subgroup": self.subgroup, "published": self.published}


@dataclass(frozen=True)
class Effects(ShowsAsTable):
    """Every sheet row converted to one metric, and the independent units to pool.

    Attributes
    ----------
    metric : {"g", "z"}
        Hedges' g or Fisher's z.
    rows : tuple of EffectRow
        One per sheet row, in sheet order, used or excluded.
    units : tuple of Unit
        The independent samples to pool.
    assumptions : tuple of str
        Every assumption made (equal splits, assumed correlations...), in words.
    warnings : tuple of str
        Plausible-but-suspicious values, to show on stderr.
    file, sha256 : str
        Provenance of the sheet.
    """

    metric: str
    rows: tuple[EffectRow, ...]
    units: tuple[Unit, ...]
    assumptions: tuple[str, ...]
    warnings: tuple[str, ...]
    file: str
    sha256: str
    within_r: float
    sample_r: float
    inconsistencies: tuple = ()  # pooler.reading.consistency.Inconsistency, significance changes first

    @property
    def k(self) -> int:
        return len(self.units)

    @property
    def n_used(self) -> int:
        return sum(r.status == "used" for r in self.rows)

    @property
    def n_excluded(self) -> int:
        return sum(r.status == "excluded" for r in self.rows)

    @property
    def metric_label(self) -> str:
        return "Hedges' g" if self.metric == "g" else "Fisher's z"

    def to_frame(self):
        import pandas as pd
        recs = []
        for r in self.rows:
            d = r.to_dict()
            d["notes"] = "; ".join(r.notes)
            extra = d.pop("extra")
            recs.append({**d, **extra})
        return pd.DataFrame(recs)

    def to_dict(self) -> dict:
        """The ``pooler.convert/1`` JSON document."""
        return to_jsonable({
            "schema": "pooler.convert/1", "metric": self.metric,
            "file": self.file, "sha256": self.sha256,
            "rows": [r.to_dict() for r in self.rows],
            "units": [u.to_dict() for u in self.units],
            "assumptions": list(self.assumptions), "warnings": list(self.warnings),
            "rows_used": self.n_used, "rows_excluded": self.n_excluded,
            "inconsistent_reports": [i.to_dict() for i in self.inconsistencies],
        })

    def __repr__(self) -> str:
        return (f"Effects(metric={self.metric!r}, k={self.k} units, "
                f"{self.n_used} rows used, {self.n_excluded} excluded)")


# ------------------------------------------------------------------ converters

@dataclass
class _Raw:
    kind: str  # "d" (raw-score SMD) or "r"
    est: float
    var: float | None  # None for native r: use n
    n_total: float | None
    n1: float | None
    n2: float | None
    df_j: float | None  # df for Hedges' J; None: no correction possible
    design: str
    within_r: float | None = None
    notes: list[str] = field(default_factory=list)
    #: for a partial correlation: the n of the zero-order correlation with the same
    #: sampling distribution, n - q (Fisher 1924); Fisher z's variance is 1/(this - 3)
    n_fisher: float | None = None
    #: the ``published`` column, normalised ("published", "unpublished" or None)
    published: str | None = None
    #: why a readable row cannot be pooled (it is then listed as excluded with this reason)
    unusable: str = ""

    @property
    def a(self) -> float:
        """The d <-> r factor: :func:`group_factor` for two groups of known (or equally
        split) size, else 4 (Borenstein et al. 2009 eq. 7.5, equal groups)."""
        if self.design == "between" and self.n1 and self.n2 and self.n1 + self.n2 > 2:
            return group_factor(self.n1, self.n2)
        return 4.0


class _Ctx:
    """What a converter needs besides the record: file, column spelling, defaults."""

    def __init__(self, sheet: Sheet, within_r: float):
        self.sheet = sheet
        self.within_r = within_r
        self.warnings: list[str] = []

    def err(self, rec: Record, key: str | None, msg: str) -> InputError:
        if key in rec.from_reported:  # the value came from the pasted result string
            key = "reported"
        return InputError(msg, file=self.sheet.path, row=rec.row,
                          column=column_label(self.sheet, key) if key else None)

    def need(self, rec: Record, key: str, why: str) -> float:
        v = rec.get(key)
        if v is None:
            raise self.err(rec, key, f"'{key}' is empty; it is needed {why}")
        return v

    def positive(self, rec: Record, key: str, why: str, *, minimum: float = 0.0) -> float:
        v = self.need(rec, key, why)
        if not v > minimum:
            raise self.err(rec, key, f"{key} = {v:g} is impossible; it must be greater than "
                                     f"{minimum:g}")
        return v

    def warn(self, rec: Record, msg: str) -> None:
        self.warnings.append(f"{self.sheet.name}, row {rec.row} ({rec.study}): {msg}")


def _sign(ctx: _Ctx, rec: Record, value: float, *, required: bool) -> float:
    """Apply ``direction`` to a reported number: returns +1 or -1 to multiply by."""
    d = rec.get("direction")
    if d is None:
        if required:
            raise ctx.err(rec, "direction",
                          f"'direction' is empty; {_a(rec.stat)} carries no sign, so say '+' if the "
                          "result favours the hypothesis and '-' if it goes the other way")
        return 1.0
    d = d.strip().lower()
    if d in ("+", "pos", "positive", "favours", "favors", "1", "+1"):
        s = 1.0
    elif d in ("-", "neg", "negative", "against", "-1", "\u2212"):
        s = -1.0
    else:
        raise ctx.err(rec, "direction", f"direction '{rec.get('direction')}' is not understood; "
                                        "use '+' or '-'")
    if value < 0 and s > 0:
        raise ctx.err(rec, "direction", f"the value {value:g} is negative but direction is '+'; "
                                        "give the value unsigned with direction '-', or fix the sign")
    return s if value >= 0 else 1.0


def _a(stat: str) -> str:
    """'a t', 'an F', 'an r', 'a chi2': the article as the letter (or word) is spoken.

    >>> _a("F"), _a("r"), _a("chi2"), _a("t"), _a("odds_ratio")
    ('an F', 'an r', 'a chi2', 'a t', 'an odds_ratio')
    """
    vowel = "aefhilmnorsx" if len(stat) == 1 else "aeiou"
    return ("an " if stat[:1].lower() in vowel else "a ") + stat


def _design(ctx: _Ctx, rec: Record) -> str:
    d = (rec.get("design") or "between").strip().lower()
    if d in ("between", "b", "independent", "two-group", "between-subject", "between-subjects"):
        return "between"
    if d in ("within", "w", "paired", "repeated", "within-subject", "within-subjects"):
        return "within"
    if d in _CORRELATION_WORDS:
        if rec.stat not in ("t", "F", "p", "r"):
            raise ctx.err(rec, "design", f"design '{rec.get('design')}' is for a t, an F(1, df) "
                                         "or a p that tests a correlation (or an r), not "
                                         f"for stat '{rec.stat}': leave 'design' empty or "
                                         "'between'")
        return "correlation"
    raise ctx.err(rec, "design", f"design '{rec.get('design')}' is not understood; "
                                 "use 'between', 'within' or 'correlation'")


#: Spellings of the design of a t, F(1, df) or p that tests a correlation.
_CORRELATION_WORDS = ("correlation", "correlational", "r")


_PUBLISHED = {"yes": "published", "y": "published", "true": "published", "1": "published",
              "published": "published", "no": "unpublished", "n": "unpublished",
              "false": "unpublished", "0": "unpublished", "unpublished": "unpublished"}


def _published(ctx: _Ctx, rec: Record) -> str | None:
    """The ``published`` column as "published" / "unpublished" (empty: not said)."""
    raw = rec.get("published")
    if raw is None or str(raw).strip() == "":
        return None
    text = str(raw).strip().lower()
    if text.endswith(".0"):   # 1.0 / 0.0 from a spreadsheet
        text = text[:-2]
    if text not in _PUBLISHED:
        raise ctx.err(rec, "published", f"published '{raw}' is not understood; use 'yes' "
                                        "(in a journal or book) or 'no' (thesis, preprint, "
                                        "data shared on request ...)")
    return _PUBLISHED[text]


def _within_r(ctx: _Ctx, rec: Record, raw_notes: list[str]) -> float:
    r = rec.get("within_r")
    if r is None:
        raw_notes.append(f"correlation between repeated measures assumed {ctx.within_r:g}")
        return ctx.within_r
    if not -1 < r < 1:
        raise ctx.err(rec, "within_r", f"within_r = {r:g} is impossible; a correlation between "
                                       "repeated measures must lie strictly between -1 and 1")
    return r


def _n_from_df(df: float, offset: float, notes: list[str]) -> float:
    """Total N from a df when no n is given: df + offset, the next whole number when the df
    is fractional (a Welch test's df is at most n1 + n2 - 2, so N is at least df + 2, and the
    smallest whole N gives the largest, i.e. the cautious, variance).

    Examples
    --------
    >>> notes = []
    >>> _n_from_df(45.3, 2.0, notes), notes[0][:40]
    (48.0, 'df = 45.3 is not a whole number (Welch?)')
    """
    n = df + offset
    if abs(n - round(n)) < 1e-9:
        notes.append(f"total N taken as df + {offset:g} = {n:g}")
        return float(round(n))
    whole = float(math.ceil(n))
    notes.append(f"df = {df:g} is not a whole number (Welch?): the total N is at least df + "
                 f"{offset:g} = {n:g}, taken as {whole:g}, the smallest whole N it allows and "
                 "the cautious choice; give n1 and n2 for the exact sizes")
    return whole


def _groups(ctx: _Ctx, rec: Record, notes: list[str], *, df_offset: float = 2.0,
            allow_df: bool = True) -> tuple[float, float]:
    """Group sizes from n1/n2, else an equal split of n or df + 2 (flagged)."""
    n1, n2 = rec.get("n1"), rec.get("n2")
    if n1 is not None or n2 is not None:
        for key in ("n1", "n2"):
            ctx.positive(rec, key, "with the other group size")
        n1, n2 = rec.get("n1"), rec.get("n2")
        if n1 + n2 <= 2:
            raise ctx.err(rec, "n1", f"n1 + n2 = {n1 + n2:g}; two groups need more than 2 "
                                     "people in all")
        n = rec.get("n")
        if n is not None and abs(n - (n1 + n2)) > 0.5:
            raise ctx.err(rec, "n", f"n = {n:g} but n1 + n2 = {n1 + n2:g}; fix one of them")
        df = rec.get("df")
        if df is not None and df > n1 + n2 - 2 + 1e-9:
            raise ctx.err(rec, "df", f"df = {df:g} is larger than n1 + n2 - 2 = {n1 + n2 - 2:g}; "
                                     "are n and df swapped?")
        return n1, n2
    n = rec.get("n")
    if n is None and allow_df and rec.get("df") is not None:
        n = _n_from_df(ctx.positive(rec, "df", ""), df_offset, notes)
    if n is None:
        raise ctx.err(rec, "n1", "group sizes are missing; give n1 and n2 "
                                 "(or the total n, which is then split equally)")
    if not n > 2:
        raise ctx.err(rec, "n", f"n = {n:g} is impossible for two groups; it must exceed 2")
    notes.append("group sizes not reported: equal split of the total N assumed")
    ctx.warn(rec, f"group sizes not reported; equal split of N = {n:g} assumed")
    return n / 2, n / 2


def _n_within(ctx: _Ctx, rec: Record, notes: list[str]) -> float:
    n = rec.get("n")
    if n is None and rec.get("df") is not None:
        n = ctx.positive(rec, "df", "") + 1
        notes.append(f"N taken as df + 1 = {n:g}")
    if n is None:
        raise ctx.err(rec, "n", "'n' is empty; a within-subject result needs the number of "
                                "participants (or 'df')")
    if not n > 1:
        raise ctx.err(rec, "n", f"n = {n:g} is impossible; a within-subject test needs n > 1")
    df = rec.get("df")
    if df is not None and rec.get("n") is not None and df > n - 1 + 1e-9:
        # a paired t or a within-subject F(1, df) has df = n - 1, never more
        raise ctx.err(rec, "df", f"df = {df:g} is larger than n - 1 = {n - 1:g}, which a "
                                 "within-subject test cannot have; are n and df swapped?")
    return n


def _n_correlation(ctx: _Ctx, rec: Record, notes: list[str]) -> float:
    """N of a test of a correlation: ``n``, ``n1 + n2``, or ``df + 2`` (the t test of r has
    n - 2 df)."""
    n, _, _ = _r_groups(ctx, rec, notes)
    if not n > 3:
        raise ctx.err(rec, "n", f"n = {n:g}; a correlation needs n > 3 for a variance")
    return n


def _from_t_value(ctx: _Ctx, rec: Record, t: float, notes: list[str],
                  groups: tuple[float, float] | None = None, n_within: float | None = None
                  ) -> _Raw:
    """A t statistic to d; ``groups`` (n1, n2) or ``n_within`` are the sizes a caller has
    already read, so that their notes and warnings (an equal split of N, N from the df)
    are not given twice."""
    design = _design(ctx, rec)
    if design == "within":
        n = n_within if n_within is not None else _n_within(ctx, rec, notes)
        r = _within_r(ctx, rec, notes)
        return _within_raw(t / math.sqrt(n), n, r, notes)
    if design == "correlation":
        n = n_within if n_within is not None else _n_correlation(ctx, rec, notes)
        r = t / math.sqrt(t * t + n - 2)
        notes.append(f"t({n - 2:g}) = {t:.3f} of a correlation read as r = t / sqrt(t^2 + n - 2)"
                     f" = {r:.4f}")
        return _r_raw(r, n, None, None, notes)
    n1, n2 = groups if groups is not None else _groups(ctx, rec, notes)
    d = t * math.sqrt(1 / n1 + 1 / n2)
    return _Raw("d", d, d_variance(d, n1, n2), n1 + n2, n1, n2, n1 + n2 - 2, "between",
                notes=notes)


def _within_raw(dz: float, n: float, r: float, notes: list[str]) -> _Raw:
    d = dz_to_raw(dz, r)
    notes.append("d_z put on the raw-score scale")
    return _Raw("d", d, d_variance_within(d, n, r), n, None, None, n - 1, "within",
                within_r=r, notes=notes)


def _from_t(ctx: _Ctx, rec: Record) -> _Raw:
    """Two-group or paired t (Borenstein et al. 2009 eq. 4.18 via d = t sqrt(1/n1 + 1/n2))."""
    t = ctx.need(rec, "value", "for a t statistic")
    t *= _sign(ctx, rec, t, required=False)
    return _from_t_value(ctx, rec, t, [])


def _from_f(ctx: _Ctx, rec: Record) -> _Raw:
    """F(1, df2): t = ±sqrt(F), sign from ``direction``."""
    f = ctx.need(rec, "value", "for an F statistic")
    if f < 0:
        raise ctx.err(rec, "value", f"F = {f:g} is impossible; F cannot be negative")
    notes: list[str] = []
    df1 = rec.get("df1")
    if df1 is None:
        notes.append("numerator df not given: F(1, df) assumed")
        ctx.warn(rec, "df1 not given; F(1, df) assumed")
    elif abs(df1 - 1) > 1e-9:
        raise ctx.err(rec, "df1", f"F has df1 = {df1:g}: an omnibus F with more than one numerator "
                                  "df compares several groups at once and cannot become one d; "
                                  "report the focal two-group contrast instead (t or F(1, df))")
    t = math.sqrt(f) * _sign(ctx, rec, f, required=True)
    return _from_t_value(ctx, rec, t, notes)


def _from_p(ctx: _Ctx, rec: Record) -> _Raw:
    """Exact p to t with its df (inverse Student t), then as a t statistic."""
    from scipy.special import stdtrit
    p = ctx.need(rec, "value", "for an exact p-value")
    if not 0 < p <= 1:
        raise ctx.err(rec, "value", f"p = {p:g} is impossible; an exact p lies in (0, 1]")
    notes: list[str] = []
    tails = rec.get("tails")
    if tails is None:
        tails = 2.0
        notes.append("tails not given: two-tailed p assumed")
    elif tails not in (1.0, 2.0):
        raise ctx.err(rec, "tails", f"tails = {tails:g}; use 1 or 2")
    if tails == 1 and p > 0.5:
        raise ctx.err(rec, "value", f"a one-tailed p of {p:g} > 0.5 means the effect went the "
                                    "other way; give p = 1 - p and direction '-'")
    sign = _sign(ctx, rec, p, required=True)
    groups = n_within = None
    design = _design(ctx, rec)
    if design == "within":
        n_within = _n_within(ctx, rec, notes)
        df = n_within - 1
    elif design == "correlation":
        n_within = _n_correlation(ctx, rec, notes)
        df = n_within - 2
    else:
        groups = _groups(ctx, rec, notes)
        df = groups[0] + groups[1] - 2
    t = float(stdtrit(df, 1 - p / tails)) if p < 1 else 0.0
    notes.append(f"t({df:g}) = {t:.3f} recovered from p")
    return _from_t_value(ctx, rec, sign * t, notes, groups, n_within)


def _from_d(ctx: _Ctx, rec: Record, *, is_g: bool = False) -> _Raw:
    """Reported d (or g, un-corrected with J first). For within rows the value is d_z."""
    v = ctx.need(rec, "value", f"for a reported {rec.stat}")
    v *= _sign(ctx, rec, v, required=False)
    notes: list[str] = []
    if _design(ctx, rec) == "within":
        n = _n_within(ctx, rec, notes)
        dz = v / hedges_j(n - 1) if is_g else v
        notes.append("within-subject d read as d_z")
        return _within_raw(dz, n, _within_r(ctx, rec, notes), notes)
    n1, n2 = _groups(ctx, rec, notes)
    d = v / hedges_j(n1 + n2 - 2) if is_g else v
    return _Raw("d", d, d_variance(d, n1, n2), n1 + n2, n1, n2, n1 + n2 - 2, "between",
                notes=notes)


def _from_means(ctx: _Ctx, rec: Record) -> _Raw:
    """Means and SDs: d = (m1 - m2) / pooled SD (Borenstein et al. 2009 eqs. 4.18-4.19);
    within-subject: standardised by the average SD, variance eq. 4.28."""
    m1 = ctx.need(rec, "mean1", "for means")
    m2 = ctx.need(rec, "mean2", "for means")
    s1 = ctx.positive(rec, "sd1", "for means")
    s2 = ctx.positive(rec, "sd2", "for means")
    notes: list[str] = []
    if _design(ctx, rec) == "within":
        n = _n_within(ctx, rec, notes)
        r = _within_r(ctx, rec, notes)
        d = (m1 - m2) / math.sqrt((s1 * s1 + s2 * s2) / 2)
        notes.append("standardised by the average of the two SDs")
        return _Raw("d", d, d_variance_within(d, n, r), n, None, None, n - 1, "within",
                    within_r=r, notes=notes)
    n1, n2 = _groups(ctx, rec, notes, allow_df=False)
    sp = math.sqrt(((n1 - 1) * s1 * s1 + (n2 - 1) * s2 * s2) / (n1 + n2 - 2))
    d = (m1 - m2) / sp
    return _Raw("d", d, d_variance(d, n1, n2), n1 + n2, n1, n2, n1 + n2 - 2, "between",
                notes=notes)


def _r_groups(ctx: _Ctx, rec: Record, notes: list[str]) -> tuple[float, float | None, float | None]:
    n1, n2 = rec.get("n1"), rec.get("n2")
    if n1 is not None and n2 is not None:
        n1 = ctx.positive(rec, "n1", "")
        n2 = ctx.positive(rec, "n2", "")
        return n1 + n2, n1, n2
    n = rec.get("n")
    if n is None and rec.get("df") is not None:
        n = _n_from_df(ctx.positive(rec, "df", ""), 2.0, notes)
    if n is None:
        raise ctx.err(rec, "n", f"'n' is empty; {_a(rec.stat)} needs the total N (add a column "
                                "'n' if the sheet has none)")
    return n, None, None


def _from_r(ctx: _Ctx, rec: Record) -> _Raw:
    """Correlation; kept as r (to Fisher z) or converted to d with the group-size factor."""
    r = ctx.need(rec, "value", "for a correlation")
    if not -1 < r < 1:
        raise ctx.err(rec, "value", f"r = {r:g} is impossible; a correlation lies strictly "
                                    "between -1 and 1")
    if _design(ctx, rec) == "within":
        raise ctx.err(rec, "design", "a correlation is not a within-subject contrast; "
                                     "leave 'design' empty or 'between'")
    r *= _sign(ctx, rec, r, required=False)
    notes: list[str] = []
    n, n1, n2 = _r_groups(ctx, rec, notes)
    if not n > 3:
        raise ctx.err(rec, "n", f"n = {n:g}; a correlation needs n > 3 for a variance")
    return _r_raw(r, n, n1, n2, notes)


def _r_raw(r, n, n1, n2, notes) -> _Raw:
    return _Raw("r", r, None, n, n1, n2, n - 2, "between", notes=notes)


def _model_df(ctx: _Ctx, rec: Record, what: str, notes: list[str]) -> tuple[float, float | None]:
    """Residual df of the regression a coefficient comes from, and its n when known:
    ``df`` as given, or ``n - predictors - 1``."""
    df, n, p = rec.get("df"), rec.get("n"), rec.get("predictors")
    if df is None:
        if n is None or p is None:
            raise ctx.err(rec, "df" if n is not None else "n",
                          f"{what} needs the residual df of its regression in 'df', or the "
                          "sample size in 'n' and the number of predictors in 'predictors'")
        df = n - p - 1
        if not df > 1:
            raise ctx.err(rec, "n", f"n = {n:g} with {p:g} predictors leaves {df:g} residual "
                                    "df; it needs more than 1")
        notes.append(f"residual df = n - predictors - 1 = {df:g}")
    elif not df > 1:
        raise ctx.err(rec, "df", f"df = {df:g}; the variance needs df > 1")
    elif n is not None and p is not None and abs(n - p - 1 - df) > 1e-9:
        raise ctx.err(rec, "df", f"df = {df:g} but n - predictors - 1 = {n - p - 1:g}; fix one "
                                 "of them or leave one empty")
    if n is None and p is not None:
        n = df + p + 1
    return df, n


def _partial_raw(ctx: _Ctx, rec: Record, r: float, df: float, n: float | None,
                 notes: list[str]) -> _Raw:
    """A partial correlation with residual df: Fisher z variance 1/(df - 1), since with
    q = predictors - 1 controls n - q - 3 = df - 1 (Fisher 1924)."""
    p = rec.get("predictors")
    if p == 1:
        notes.append("one predictor: the partial correlation is the zero-order correlation "
                     "of the pair")
    elif p is None:
        notes.append("ASSUMED: read as the correlation of the pair; it is the association "
                     "controlling for the model's other predictors (if any; say how many in "
                     "'predictors'), which equals the zero-order correlation only when they "
                     "are uncorrelated with the pair (Aloe 2014)")
    else:
        notes.append(f"ASSUMED: read as the correlation of the pair; it controls for the "
                     f"model's {p - 1:g} other predictor(s), so it equals the zero-order "
                     "correlation only when they are uncorrelated with the pair (Aloe 2014)")
    if n is None:
        notes.append(f"n unknown: df + 2 = {df + 2:g} stands for it (the variance needs only "
                     "the df)")
    n_tot = n if n is not None else df + 2
    return _Raw("r", r, None, n_tot, None, None, None, "between", notes=notes,
                n_fisher=df + 2)


def _from_coef_t(ctx: _Ctx, rec: Record) -> _Raw:
    """t of a regression coefficient with its residual df: the partial correlation
    ``r_p = t / sqrt(t^2 + df)`` (Aloe & Becker 2012; Aloe 2014), Fisher z variance
    1/(df - 1) (Fisher 1924)."""
    t = ctx.need(rec, "value", "for the t of a coefficient")
    if _design(ctx, rec) == "within":
        raise ctx.err(rec, "design", "a regression coefficient's t is not a within-subject "
                                     "contrast; leave 'design' empty")
    t *= _sign(ctx, rec, t, required=False)
    notes: list[str] = []
    df, n = _model_df(ctx, rec, "the t of a coefficient", notes)
    r = partial_r_from_t(t, df)
    notes.insert(0, f"coefficient t = {t:g} on {df:g} df read as the partial correlation "
                    f"t / sqrt(t^2 + df) = {r:.4f}")
    return _partial_raw(ctx, rec, r, df, n, notes)


def _from_partial_r(ctx: _Ctx, rec: Record) -> _Raw:
    """A reported partial correlation with its regression's residual df (or n and the
    number of predictors); Fisher z variance 1/(df - 1) (Fisher 1924)."""
    r = ctx.need(rec, "value", "for a partial correlation")
    if not -1 < r < 1:
        raise ctx.err(rec, "value", f"partial r = {r:g} is impossible; it lies strictly "
                                    "between -1 and 1")
    r *= _sign(ctx, rec, r, required=False)
    notes: list[str] = []
    df, n = _model_df(ctx, rec, "a partial correlation", notes)
    return _partial_raw(ctx, rec, r, df, n, notes)


def _from_std_coef(ctx: _Ctx, rec: Record) -> _Raw:
    """A standardized regression coefficient: the pair's correlation only when it is the
    model's sole predictor (then beta = r); otherwise it is refused, because it depends on
    the other predictors (Peterson & Brown 2005 impute r from beta only approximately, and
    pooler does not)."""
    beta = ctx.need(rec, "value", "for a standardized coefficient")
    p = rec.get("predictors")
    if p is None:
        raise ctx.err(rec, "predictors", "a standardized coefficient (std_coef) is the pair's "
                      "correlation only when it is the model's only predictor; say how many "
                      "predictors the model had in 'predictors'")
    if p != 1:
        raise ctx.err(rec, "stat", f"a standardized coefficient from a model with {p:g} "
                      "predictors is not the correlation of the pair (it controls for the "
                      "others); give the pair's zero-order correlation instead (stat r; papers "
                      "often print it in a correlation table), or the coefficient's t with its "
                      "df (stat coef_t, read as a partial correlation)")
    if not -1 < beta < 1:
        raise ctx.err(rec, "value", f"beta = {beta:g} with one predictor is a correlation, so "
                                    "it must lie strictly between -1 and 1")
    beta *= _sign(ctx, rec, beta, required=False)
    notes = ["standardized coefficient of the only predictor: beta = r"]
    n, n1, n2 = _r_groups(ctx, rec, notes)
    if not n > 3:
        raise ctx.err(rec, "n", f"n = {n:g}; a correlation needs n > 3 for a variance")
    return _r_raw(beta, n, None, None, notes)


def _from_chi2(ctx: _Ctx, rec: Record) -> _Raw:
    """χ²(1) with N: phi = sqrt(χ²/N), signed by ``direction``, then as a correlation."""
    x = ctx.need(rec, "value", "for a chi-square")
    if x < 0:
        raise ctx.err(rec, "value", f"chi2 = {x:g} is impossible; it cannot be negative")
    if _design(ctx, rec) == "within":
        raise ctx.err(rec, "design", "a chi-square here must compare independent groups")
    notes = ["chi-square(1) read as phi = sqrt(chi2 / N)"]
    sign = _sign(ctx, rec, x, required=True)
    n, n1, n2 = _r_groups(ctx, rec, notes)
    if not n > 3:
        raise ctx.err(rec, "n", f"n = {n:g}; chi-square needs n > 3")
    if n1 is None:
        notes.append("group sizes not reported: on the d scale phi counts as from two equal "
                     "groups (a = 4, Borenstein et al. 2009 eq. 7.5)")
    if x >= n:
        raise ctx.err(rec, "value", f"chi2 = {x:g} is not below N = {n:g}, so phi would be 1 or "
                                    "more; check that this is a 1-df chi-square and N is right")
    return _r_raw(sign * math.sqrt(x / n), n, n1, n2, notes)


def _log_or_raw(ctx, rec, log_or, var, n1, n2, notes) -> _Raw:
    d, vd = log_or_to_d(log_or, var)
    notes.append("log odds ratio to d by the logistic conversion")
    if n1 is None:
        notes.append("group sizes unknown: no small-sample correction")
        return _Raw("d", d, vd, rec.get("n"), None, None, None, "between", notes=notes)
    return _Raw("d", d, vd, n1 + n2, n1, n2, n1 + n2 - 2, "between", notes=notes)


def _from_counts(ctx: _Ctx, rec: Record) -> _Raw:
    """2×2 counts: log odds ratio and variance (Borenstein et al. 2009 eqs. 5.8-5.10);
    0.5 is added to every cell only when a cell is zero."""
    if _design(ctx, rec) == "within":
        raise ctx.err(rec, "design", "counts here must come from two independent groups")
    n1 = ctx.positive(rec, "n1", "for counts")
    n2 = ctx.positive(rec, "n2", "for counts")
    e1 = ctx.need(rec, "events1", "for counts")
    e2 = ctx.need(rec, "events2", "for counts")
    for key, e, n in (("events1", e1, n1), ("events2", e2, n2)):
        if e < 0 or e > n:
            raise ctx.err(rec, key, f"{key} = {e:g} is impossible with {n:g} in the group; events "
                                    "must lie between 0 and the group size")
    cells = [e1, n1 - e1, e2, n2 - e2]
    notes: list[str] = []
    if min(cells) == 0:
        cells = [c + 0.5 for c in cells]
        notes.append("a cell was zero: 0.5 added to every cell")
    a, b, c, d = cells
    log_or = math.log(a * d / (b * c))
    var = 1 / a + 1 / b + 1 / c + 1 / d
    log_or *= _sign(ctx, rec, 1.0, required=False)
    raw = _log_or_raw(ctx, rec, log_or, var, n1, n2, notes)
    if (e1 == 0 and e2 == 0) or (e1 == n1 and e2 == n2):
        # no events (or only events) in both groups: the odds ratio is not estimable and the
        # 0.5 correction would invent an effect of 0 with an arbitrary variance; such studies
        # are left out of an odds-ratio meta-analysis (Higgins et al. 2023, Cochrane
        # Handbook, section 10.4.4.2; from memory)
        raw.unusable = (f"{'no' if e1 == 0 else 'only'} events in both groups: the odds ratio "
                        "is not estimable, so the row is not pooled")
    return raw


def _from_odds_ratio(ctx: _Ctx, rec: Record) -> _Raw:
    """Odds ratio with its 95 % CI: SE(ln OR) = (ln hi - ln lo) / (2 × 1.96)."""
    o = ctx.positive(rec, "value", "for an odds ratio")
    lo = ctx.positive(rec, "ci_low", "to know the odds ratio's precision")
    hi = ctx.positive(rec, "ci_high", "to know the odds ratio's precision")
    if not lo < o < hi:
        hint = ("the limits look swapped" if hi < lo else
                "check the odds ratio and both limits")
        raise ctx.err(rec, "ci_low", f"the interval [{lo:g}, {hi:g}] does not contain the odds "
                                     f"ratio {o:g}; {hint}")
    if _design(ctx, rec) == "within":
        raise ctx.err(rec, "design", "an odds ratio here must compare independent groups")
    se = (math.log(hi) - math.log(lo)) / (2 * _Z975)
    notes = ["SE of ln(OR) from the 95% CI"]
    log_or = math.log(o) * _sign(ctx, rec, 1.0, required=False)
    n1, n2 = rec.get("n1"), rec.get("n2")
    if (n1 is None) != (n2 is None):
        missing = "n2" if n2 is None else "n1"
        raise ctx.err(rec, missing, f"'{missing}' is empty; give both group sizes or neither")
    return _log_or_raw(ctx, rec, log_or, se * se, n1, n2, notes)


#: stat -> converter; a converter takes (context, record) and returns a _Raw.
CONVERTERS: dict[str, Callable[[_Ctx, Record], _Raw]] = {
    "t": _from_t, "F": _from_f, "p": _from_p, "r": _from_r, "chi2": _from_chi2,
    "d": _from_d, "g": lambda ctx, rec: _from_d(ctx, rec, is_g=True),
    "means": _from_means, "counts": _from_counts, "odds_ratio": _from_odds_ratio,
    "coef_t": _from_coef_t, "partial_r": _from_partial_r, "std_coef": _from_std_coef,
}


def _to_metric(raw: _Raw, metric: str) -> tuple[float, float]:
    """Put a converted value on the target metric (g or Fisher z)."""
    if metric == "g":
        if raw.kind == "r":
            d, vd = r_to_d(raw.est, r_variance(raw.est, raw.n_fisher or raw.n_total), raw.a)
        else:
            d, vd = raw.est, raw.var
        j = hedges_j(raw.df_j) if raw.df_j and raw.df_j > 1 else 1.0
        return j * d, j * j * vd  # Borenstein et al. (2009) eqs. 4.23-4.24
    if raw.kind == "r":
        return fisher_z(raw.est, n=raw.n_fisher or raw.n_total)
    r, vr = d_to_r(raw.est, raw.var, raw.a)
    return fisher_z(r, var_r=vr)


# ------------------------------------------------------------------ the stage

def convert(sheet: Sheet, metric: str = "d", *, within_r: float = 0.5,
            sample_r: float = 0.5) -> Effects:
    """Convert every row of ``sheet`` to one metric and build the units to pool.

    Parameters
    ----------
    sheet : Sheet
        From :func:`pooler.read_sheet`.
    metric : {"d", "r"}
        ``"d"``: Hedges' g (bias-corrected standardised mean difference, raw-score scale);
        ``"r"``: Fisher's z of the correlation. ``"g"`` and ``"z"`` are accepted too.
    within_r : float
        Correlation between repeated measures for within-subject rows without
        ``within_r`` (Morris & DeShon 2002). Reported as an assumption when used.
    sample_r : float
        Assumed correlation between outcomes of rows that share a ``sample``
        (Borenstein et al. 2009 ch. 24).

    Returns
    -------
    Effects

    Raises
    ------
    InputError
        For rows that cannot be converted, with file, row and column: an
        :class:`~pooler.errors.InputErrors` listing every such row.

    Examples
    --------
    >>> from pooler import read_sheet, convert, demo_sheet_path
    >>> eff = convert(read_sheet(demo_sheet_path()))
    >>> eff.metric, eff.n_used + eff.n_excluded == len(read_sheet(demo_sheet_path()))
    ('g', True)
    """
    # validation
    if metric not in METRICS:
        raise OptionError(f"`metric` must be 'd' or 'r', not {metric!r}")
    metric = METRICS[metric]
    for name, val in (("within_r", within_r), ("sample_r", sample_r)):
        if not -1 < val < 1:
            raise OptionError(f"`{name}` must lie strictly between -1 and 1, not {val!r}")

    ctx = _Ctx(sheet, within_r)
    out_rows: list[EffectRow] = []
    pending: list[tuple[Record, _Raw, float, float]] = []
    problems: list[InputError] = []
    found: list = []
    _warn_duplicates(ctx, sheet)
    for rec in sheet.records:
        reason_ex = rec.get("exclude")
        try:
            checks, rec_used, check_notes = check_record(
                rec, lambda key: column_label(sheet, key))
            raw = CONVERTERS[rec.stat](ctx, rec_used) if rec.stat in CONVERTERS else None
            if raw is None:
                raise ctx.err(rec, "stat", f"unknown statistic '{rec.stat}'")
            raw.published = _published(ctx, rec)
            y, v = _to_metric(raw, metric)
            if not (math.isfinite(y) and math.isfinite(v) and v > 0):
                raise ctx.err(rec, "value", "the reported numbers give no finite effect with a "
                                            "positive variance; check them")
        except InputError as exc:
            if reason_ex:
                out_rows.append(EffectRow(rec.row, rec.study, rec.stat,
                                          (rec.get("design") or "between"), None, None, None,
                                          None, None, "excluded", reason_ex,
                                          ("not converted: the row's numbers are incomplete",),
                                          rec.get("sample"), dict(rec.extra),
                                          rec.get("reported")))
                continue
            problems.append(exc.located(file=sheet.path))
            continue
        raw.notes.extend(check_notes)
        if not reason_ex:
            for c in checks:
                ctx.warn(rec, f"column '{c.column}': reported numbers disagree: {c.message}")
            found.extend(checks)
        if raw.kind == "d" and abs(raw.est) > LARGE_D:
            ctx.warn(rec, f"|d| = {abs(raw.est):.2f} is unusually large; check the numbers")
        if reason_ex:
            status, reason = "excluded", reason_ex
        elif raw.unusable:
            status, reason = "excluded", raw.unusable
            ctx.warn(rec, f"not pooled: {raw.unusable}")
        else:
            status, reason = "used", ""
            pending.append((rec, raw, y, v))
        out_rows.append(EffectRow(rec.row, rec.study, rec.stat, raw.design, y, v, raw.n_total,
                                  raw.n1, raw.n2, status, reason, tuple(raw.notes),
                                  rec.get("sample"), dict(rec.extra), rec.get("reported")))
    if problems:
        raise InputErrors(problems)

    units, combined = _units(ctx, pending, sample_r)
    if combined:
        out_rows = [r if r.row not in combined else
                    replace(r, reason=combined[r.row]) for r in out_rows]

    assumptions = _assumptions(out_rows, within_r, sample_r, combined)
    found.sort(key=lambda c: (not c.changes_significance, c.row))
    return Effects(metric=metric, rows=tuple(out_rows), units=tuple(units),
                   assumptions=tuple(assumptions), warnings=tuple(ctx.warnings),
                   file=sheet.path, sha256=sheet.sha256, within_r=within_r, sample_r=sample_r,
                   inconsistencies=tuple(found))


#: Columns of free text that do not make two rows different results.
FREE_TEXT = frozenset({"note"})


def _warn_duplicates(ctx: _Ctx, sheet: Sheet) -> None:
    """Warn about rows that repeat an earlier row cell for cell (they would be pooled
    twice); the copy is excluded only when the user says so in 'exclude'."""
    first: dict = {}
    same_numbers: dict = {}
    for rec in sheet.records:
        if rec.get("exclude"):
            continue
        key = (tuple(sorted((k, v) for k, v in rec.values.items() if v is not None)),
               tuple(sorted(rec.extra.items())))
        # the same study and numbers, differing only in free text (a note, an extra column)
        numbers = tuple(sorted((k, v) for k, v in rec.values.items()
                               if v is not None and k not in FREE_TEXT))
        if key in first:
            ctx.warn(rec, f"row {rec.row} repeats row {first[key]} exactly, so the same result "
                          "would be pooled twice; if it is a copy, put e.g. 'duplicate of row "
                          f"{first[key]}' in 'exclude'")
        elif numbers in same_numbers:
            ctx.warn(rec, f"row {rec.row} repeats the study and every number of row "
                          f"{same_numbers[numbers]} (only free text differs), so the same "
                          "result may be pooled twice; if it is a copy, put e.g. 'duplicate "
                          f"of row {same_numbers[numbers]}' in 'exclude'")
        else:
            first[key] = rec.row
            same_numbers.setdefault(numbers, rec.row)


def _units(ctx: _Ctx, pending, sample_r: float):
    """One unit per used row, or per shared ``sample`` (Borenstein et al. 2009 eq. 24.6:
    mean of m outcomes, variance (1/m)^2 (Σ V_i + Σ_{i≠j} ρ sqrt(V_i V_j)))."""
    groups: dict[str, list] = {}
    order: list = []
    for item in pending:
        key = item[0].get("sample")
        if key is None:
            order.append([item])
        else:
            if key not in groups:
                groups[key] = []
                order.append(groups[key])
            groups[key].append(item)
    units, combined = [], {}
    for items in order:
        rec0, raw0 = items[0][0], items[0][1]
        if len(items) == 1:
            units.append(_unit(rec0.study, items[0], raw0))
            continue
        ns = {it[1].n_total for it in items}
        if len(ns) > 1:
            bad = next(it for it in items if it[1].n_total != raw0.n_total)
            raise ctx.err(bad[0], "n", f"rows of sample '{rec0.get('sample')}' disagree on the "
                                       f"sample size ({raw0.n_total:g} on row {rec0.row}, "
                                       f"{bad[1].n_total:g} here); rows sharing a sample must "
                                       "describe the same people")
        m = len(items)
        ys = [it[2] for it in items]
        vs = [it[3] for it in items]
        y = sum(ys) / m
        cov = sum(sample_r * math.sqrt(vs[i] * vs[j]) for i in range(m) for j in range(m) if i != j)
        v = (sum(vs) + cov) / m ** 2
        label = rec0.get("sample")
        rows = tuple(it[0].row for it in items)
        for it in items:
            combined[it[0].row] = (f"combined with row(s) "
                                   f"{', '.join(str(r) for r in rows if r != it[0].row)} "
                                   f"into sample '{label}'")
        designs = {it[1].design for it in items}
        studies = list(dict.fromkeys(it[0].study for it in items))
        name = (studies[0] if len(studies) == 1 else " / ".join(studies)) + f" [{m} outcomes]"
        u = _unit(name, (rec0, raw0, y, v), raw0)
        units.append(replace(u, rows=rows,
                             design=designs.pop() if len(designs) == 1 else "mixed"))
    return units, combined


def _unit(label, item, raw) -> Unit:
    rec, _, y, v = item
    return Unit(label=label, effect=y, variance=v, n_total=raw.n_total, n1=raw.n1, n2=raw.n2,
                design=raw.design, rows=(rec.row,), year=rec.get("year"),
                subgroup=rec.get("subgroup"), published=raw.published,
                within_r=raw.within_r)


def _assumptions(rows, within_r, sample_r, combined) -> list[str]:
    out = []
    def rows_with(text):
        return [r.row for r in rows if any(text in n for n in r.notes)]
    pairs = [
        ("equal split", "group sizes not reported, equal split of the total N assumed"),
        ("correlation between repeated measures assumed",
         f"correlation between repeated measures assumed to be {within_r:g} "
         "(set per row in 'within_r' or with --within-r)"),
        ("F(1, df) assumed", "F's numerator df not given, taken to be 1"),
        ("two-tailed p assumed", "tails of p not given, two-tailed assumed"),
        ("0.5 added", "zero cells corrected by adding 0.5 to every cell"),
        ("no small-sample correction", "odds ratio without group sizes: no small-sample correction"),
    ]
    for key, text in pairs:
        hit = rows_with(key)
        if hit:
            out.append(f"{text} ({'row' if len(hit) == 1 else 'rows'} "
                       f"{', '.join(map(str, hit))})")
    if combined:
        out.append(f"rows sharing a sample combined with an assumed correlation of {sample_r:g} "
                   "between their outcomes (Borenstein et al. 2009, ch. 24)")
    return out


def back_to_r(z: float) -> float:
    """Fisher's z back to r (tanh)."""
    return math.tanh(z)
