"""The reporting consistency check: do the numbers of a printed result agree?

A printed result is several numbers that must agree with each other: the test statistic
and its degrees of freedom fix the p-value; the degrees of freedom follow from the sample
sizes; a confidence interval sits around its point estimate (symmetrically on the scale
the interval was built on). Every printed number is rounded, so each stands for an
interval (2.41 for [2.405, 2.415]); the check recomputes p over the whole interval of the
statistic and calls the result inconsistent only when no value in it gives a p that
rounds to the printed one. Disagreements of this kind are common in published psychology
(Nuijten, Hartgerink, van Assen, Epskamp & Wicherts 2016); the ones that move p across
.05 matter most.

References
----------
.. [N] Nuijten, M. B., Hartgerink, C. H. J., van Assen, M. A. L. M., Epskamp, S., &
   Wicherts, J. M. (2016). The prevalence of statistical reporting errors in psychology
   (1985-2013). *Behavior Research Methods*, 48(4), 1205-1226.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from pooler.errors import InputError
from pooler.reading.reported import ALPHA, COLUMN, TRUST_COLUMN, Number, Parsed


@dataclass(frozen=True)
class Inconsistency:
    """One disagreement between the numbers of a reported result.

    Attributes
    ----------
    row : int
        Sheet row (header = 1).
    study : str
    column : str
        The column that holds the numbers (``reported``, or ``df``/``n``...).
    kind : {"p", "df", "ci"}
        What disagrees: p with the statistic, df with n, or a CI with its estimate.
    message : str
        The disagreement in words, with the numbers.
    changes_significance : bool
        Whether the recomputed p and the printed p fall on different sides of .05.
    used : str
        Which value the effect uses ("statistic" or "p"), as chosen in ``trust``.
    """

    row: int
    study: str
    column: str
    kind: str
    message: str
    changes_significance: bool = False
    used: str = "statistic"

    def to_dict(self) -> dict:
        return {"row": self.row, "study": self.study, "column": self.column,
                "kind": self.kind, "message": self.message,
                "changes_significance": self.changes_significance, "used": self.used}


def p_from_statistic(stat: str, value: float, df: float | None, df1: float | None = None,
                     n: float | None = None) -> float:
    """Two-sided p of a printed statistic (Student t, F upper tail, r via
    t = r sqrt(df / (1 - r^2)) with df = n - 2, chi-square upper tail).

    Examples
    --------
    >>> round(p_from_statistic("t", 2.41, 58), 4)
    0.0191
    """
    from scipy.special import chdtrc, fdtrc, stdtr
    if stat == "t":
        return float(2 * stdtr(df, -abs(value)))
    if stat == "F":
        return float(fdtrc(df1 or 1, df, max(value, 0.0)))
    if stat == "r":
        df_r = df if df is not None else n - 2
        if abs(value) >= 1:
            return 0.0
        t = abs(value) * math.sqrt(df_r / (1 - value * value))
        return float(2 * stdtr(df_r, -t))
    if stat == "chi2":
        return float(chdtrc(1, max(value, 0.0)))
    raise ValueError(stat)


def statistic_from_p(stat: str, p: float, df: float | None, n: float | None = None) -> float:
    """Inverse of :func:`p_from_statistic` (magnitude only), for ``trust = p``."""
    from scipy.special import chdtri, stdtrit
    if stat == "t":
        return float(stdtrit(df, 1 - p / 2))
    if stat == "F":
        return float(stdtrit(df, 1 - p / 2)) ** 2
    if stat == "r":
        df_r = df if df is not None else n - 2
        t = float(stdtrit(df_r, 1 - p / 2))
        return t / math.sqrt(t * t + df_r)
    if stat == "chi2":
        return float(chdtri(1, p))
    raise ValueError(stat)


def p_interval(stat: str, value: Number, df: float | None, df1: float | None = None,
               n: float | None = None) -> tuple[float, float]:
    """The p-values a rounded statistic allows: p at the two ends of its rounding
    interval (p falls as |statistic| grows)."""
    lo, hi = abs(value.value) - value.half_step, abs(value.value) + value.half_step
    lo = max(lo, 0.0)
    if stat == "r":
        hi = min(hi, 1 - 1e-12)
    return (p_from_statistic(stat, hi, df, df1, n), p_from_statistic(stat, lo, df, df1, n))


def check_p(parsed: Parsed, df: float | None, df1: float | None, n: float | None,
            tails: float = 2.0):
    """Recomputed p vs printed p. Returns None when consistent or not checkable, else
    ``(message, changes_significance, p_recomputed)``."""
    stat = parsed.values.get("stat")
    p = parsed.p
    if p is None or stat not in ("t", "F", "r", "chi2") or "value" not in parsed.numbers:
        return None
    if stat in ("t", "F") and df is None:
        return None
    if stat == "r" and df is None and (n is None or n <= 2):
        return None
    val = parsed.numbers["value"]
    lo, hi = p_interval(stat, val, df, df1, n)
    point = p_from_statistic(stat, val.value, df, df1, n)
    if tails == 1:
        lo, hi, point = lo / 2, hi / 2, point / 2
    plo, phi = p.bounds()
    if hi >= plo and lo <= phi:
        return None
    sig_printed = p.significant
    sig_recomputed = point < ALPHA
    name = _stat_text(parsed, df, df1, n)
    # the end of the recomputed interval nearest the printed p, rounded as the p was printed
    near, end = (lo, "smallest") if lo > phi else (hi, "largest")
    msg = (f"the printed {p.text()} does not match {name}, which gives p = {point:.4f}; "
           f"allowing for the rounding of the statistic, its {end} p is {near:.6f}, which "
           f"rounds to {near:.{p.number.decimals}f}")
    if sig_printed != sig_recomputed:
        msg += ("; the difference moves the result across .05 "
                f"({'significant' if sig_printed else 'not significant'} as printed, "
                f"{'significant' if sig_recomputed else 'not significant'} as recomputed)")
    return msg, sig_printed != sig_recomputed, point


def _stat_text(parsed: Parsed, df, df1, n) -> str:
    stat = parsed.values["stat"]
    v = parsed.numbers["value"]
    val = f"{v.value:.{v.decimals}f}"
    if stat == "t":
        return f"t({df:g}) = {val}"
    if stat == "F":
        return f"F({df1 or 1:g}, {df:g}) = {val}"
    if stat == "r":
        return f"r({(df if df is not None else n - 2):g}) = {val}"
    return f"chi2(1) = {val}"


def check_ci(parsed: Parsed):
    """Is the printed estimate the centre of its CI, within rounding? On the log scale
    for an odds ratio, on the raw scale for d and g. Returns a message or None."""
    stat = parsed.values.get("stat")
    nums = parsed.numbers
    if stat not in ("odds_ratio", "d", "g") or "ci_low" not in nums or "value" not in nums:
        return None
    est, lo, hi = nums["value"], nums["ci_low"], nums["ci_high"]
    if stat == "odds_ratio":
        f = math.log
        e_lo, e_hi = est.bounds()
        l_lo, l_hi = lo.bounds()
        h_lo, h_hi = hi.bounds()
        if min(e_lo, l_lo, h_lo) <= 0:
            return None
        mid_lo, mid_hi = (f(l_lo) + f(h_lo)) / 2, (f(l_hi) + f(h_hi)) / 2
        c_lo, c_hi = f(e_lo), f(e_hi)
        scale = "log"
    else:
        l_lo, l_hi = lo.bounds()
        h_lo, h_hi = hi.bounds()
        mid_lo, mid_hi = (l_lo + h_lo) / 2, (l_hi + h_hi) / 2
        c_lo, c_hi = est.bounds()
        scale = "raw"
    if c_hi >= mid_lo and c_lo <= mid_hi:
        return None
    centre = math.exp((mid_lo + mid_hi) / 2) if stat == "odds_ratio" else (mid_lo + mid_hi) / 2
    label = "OR" if stat == "odds_ratio" else stat
    return (f"{label} = {est.value:g} is not the centre of its CI [{lo.value:g}, {hi.value:g}] "
            f"on the {scale} scale (the centre is {centre:.3g}); check the estimate and the "
            "limits")


def expected_df(stat: str, design: str, n1, n2, n) -> tuple[float, str] | None:
    """The df a statistic must have for the given sample sizes, with the rule in words:
    two-group t and F error df = n1 + n2 - 2; paired t and within F = n - 1; r = n - 2."""
    if stat in ("t", "F"):
        if design == "within":
            return (n - 1, "n - 1") if n is not None else None
        if n1 is not None and n2 is not None:
            return n1 + n2 - 2, "n1 + n2 - 2"
        if n is not None:
            return n - 2, "n - 2"
        return None
    if stat == "r":
        if n is None and n1 is not None and n2 is not None:
            n = n1 + n2
        return (n - 2, "n - 2") if n is not None else None
    return None


def _design_of(rec) -> str:
    from pooler.reading.sheet import _WITHIN_WORDS
    d = (rec.get("design") or "between").strip().lower()
    return "within" if d in _WITHIN_WORDS else "between"


def check_record(rec, column_of) -> tuple[list[Inconsistency], object, list[str]]:
    """Run the reporting consistency check on one sheet record.

    Parameters
    ----------
    rec : pooler.reading.sheet.Record
    column_of : callable
        Maps a column key to the sheet's own spelling (for messages).

    Returns
    -------
    (inconsistencies, record to convert, notes)
        The record is ``rec`` itself unless ``trust`` is ``p`` and the printed p
        disagrees with the statistic: then the statistic is recomputed from the
        exact p and its df (magnitude from p, sign from the printed statistic).

    Raises
    ------
    InputError
        ``trust = p`` on a row whose p is an inequality (there is no exact p to use).
    """
    from dataclasses import replace
    out: list[Inconsistency] = []
    notes: list[str] = []
    stat = rec.stat
    design = _design_of(rec)
    df, df1, n = rec.get("df"), rec.get("df1"), rec.get("n")
    n1, n2 = rec.get("n1"), rec.get("n2")
    trust = rec.get("trust") or "statistic"
    parsed = rec.parsed
    new_rec = rec
    if parsed is not None and parsed.also_printed:
        notes.append(f"the string also prints {parsed.also_printed}; the effect is computed "
                     f"from the {stat} statistic")
    # p against the statistic
    if parsed is not None and parsed.p is not None and stat in ("t", "F", "r", "chi2"):
        n_r = n if n is not None else (n1 + n2 if n1 is not None and n2 is not None else None)
        if stat == "r" and df is None and n_r is not None:
            df_use = n_r - 2
        else:
            df_use = df
        found = check_p(parsed, df_use, df1, n_r, tails=rec.get("tails") or 2.0)
        if found is not None:
            msg, flips, _ = found
            col = column_of(COLUMN)
            if trust == "p":
                if not parsed.p.exact:
                    raise InputError(
                        f"'trust' is 'p' but the printed p ({parsed.p.text()}) is an inequality; "
                        "there is no exact p to convert, so trust the statistic or give the "
                        "exact p", file=None, row=rec.row, column=column_of(TRUST_COLUMN))
                # a one-tailed printed p is half the two-sided p the inversion expects
                p_two = parsed.p.number.value * (2.0 if (rec.get("tails") or 2.0) == 1 else 1.0)
                mag = statistic_from_p(stat, min(p_two, 1.0), df_use, n_r)
                sign = -1.0 if (rec.get("value") or 0) < 0 else 1.0
                new_rec = replace(rec, values={**rec.values, "value": sign * mag})
                notes.append(f"statistic recomputed from the printed p ({parsed.p.text()}) "
                             f"as {mag:.3f}, as 'trust' asks")
                msg += "; the effect uses the p, as column 'trust' asks"
            else:
                msg += ("; the effect uses the statistic (put 'p' in column 'trust' to use "
                        "the p instead)")
            out.append(Inconsistency(rec.row, rec.study, col, "p", msg, flips, trust))
    elif rec.get("trust") == "p" and parsed is None:
        raise InputError("'trust' is 'p' but the row has no 'reported' string with a p to use",
                         row=rec.row, column=column_of(TRUST_COLUMN))
    # df against the sample sizes
    if stat in ("t", "F", "r") and df is not None:
        exp = expected_df(stat, design, n1, n2, n)
        if exp is not None:
            want, rule = exp
            welch = stat in ("t", "F") and design == "between" and not float(df).is_integer()
            bad = (df > want + 1e-9) if welch else abs(df - want) > 1e-9
            if bad:
                where = COLUMN if "df" in rec.from_reported else "df"
                msg = (f"df = {df:g} but the sample sizes give {rule} = {want:g}"
                       + ("; a Welch df cannot exceed it" if welch else
                          "; check the sample sizes and the df (the effect uses the sample "
                          "sizes)"))
                out.append(Inconsistency(rec.row, rec.study, column_of(where), "df", msg))
    # a CI around its estimate (typed columns: each number as rounded at its last digit)
    if parsed is not None:
        msg = check_ci(parsed)
        if msg is not None:
            out.append(Inconsistency(rec.row, rec.study, column_of(COLUMN), "ci", msg))
    elif stat == "odds_ratio":
        typed = {k: rec.get(k) for k in ("value", "ci_low", "ci_high")}
        if all(v is not None and v > 0 for v in typed.values()):
            msg = check_ci(Parsed(text="", values={"stat": stat},
                                  numbers={k: _typed_number(v) for k, v in typed.items()}))
            if msg is not None:
                out.append(Inconsistency(rec.row, rec.study, column_of("ci_low"), "ci", msg))
    return out, new_rec, notes


def _typed_number(v: float) -> Number:
    """A typed number with the decimals it shows (4.2 -> 1; a spreadsheet drops trailing
    zeros, so this is never stricter than the printed number).

    Examples
    --------
    >>> _typed_number(4.2).decimals, _typed_number(1.05).decimals, _typed_number(3.0).decimals
    (1, 2, 0)
    """
    text = repr(float(v))
    if "e" in text or "E" in text:
        text = f"{v:.12f}".rstrip("0")
    decimals = len(text.split(".")[1].rstrip("0")) if "." in text else 0
    return Number(float(v), decimals)
