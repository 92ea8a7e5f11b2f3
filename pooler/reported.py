"""Read a result the way a paper prints it, and check that its numbers agree.

The sheet column ``reported`` takes a result string pasted from a paper, for example
``t(58) = 2.41, p = .019`` or ``OR = 2.30, 95% CI [1.10, 4.80]``. :func:`parse_reported`
turns it into the sheet's own columns (``stat``, ``value``, ``df``, ``df1``, ``n``,
``n1``, ``n2``, ``ci_low``, ``ci_high``, means and SDs) plus what the converters do not
need but the check does: the reported p, the number of decimals of every number, and
the χ² degrees of freedom. Nothing is guessed: a string with a part that cannot be read,
or with too little to convert, raises an :class:`~pooler.errors.InputError` saying what
is missing.

:func:`check_reported` is the **reporting consistency check**. A printed result is
several numbers that must agree with each other: the test statistic and its degrees of
freedom fix the p-value; the degrees of freedom follow from the sample sizes; a
confidence interval sits around its point estimate (symmetrically on the scale the
interval was built on). Every printed number is rounded, so each stands for an interval
(2.41 for [2.405, 2.415]); the check recomputes p over the whole interval of the
statistic and calls the result inconsistent only when no value in it gives a p that
rounds to the printed one. Disagreements of this kind are common in published
psychology (Nuijten, Hartgerink, van Assen, Epskamp & Wicherts 2016, *Behavior Research
Methods* 48, 1205-1226); the ones that move p across .05 matter most.

References
----------
.. [N] Nuijten, M. B., Hartgerink, C. H. J., van Assen, M. A. L. M., Epskamp, S., &
   Wicherts, J. M. (2016). The prevalence of statistical reporting errors in psychology
   (1985-2013). *Behavior Research Methods*, 48(4), 1205-1226.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from .errors import InputError

#: The sheet column that holds a pasted result string.
COLUMN = "reported"
#: The sheet column that says which number to trust when a result is inconsistent.
TRUST_COLUMN = "trust"
TRUST_VALUES = ("statistic", "p")
ALPHA = 0.05

# ------------------------------------------------------------------ normalising

_DASHES = "\u2212\u2013\u2014\u2010\u2011\u2012\ufe63\uff0d"
_SPACES = "\u00a0\u2009\u202f\u2007\u200a\u2002\u2003\t\r\n"


def normalise(text: str) -> str:
    """Plain ASCII-ish form of a pasted result: one kind of minus, one kind of space,
    no doubled signs or equals, Greek chi and superscript two spelled out.

    Examples
    --------
    >>> normalise("t(23)\u2009=\u2009\u22123.10")
    't(23) = -3.10'
    >>> normalise("\u03c7\u00b2(1,  N = 80) == 5.21")
    'chi2(1, N = 80) = 5.21'
    """
    s = text
    for ch in _DASHES:
        s = s.replace(ch, "-")
    for ch in _SPACES:
        s = s.replace(ch, " ")
    s = (s.replace("\u03c7", "chi").replace("\u03a7", "chi").replace("\u00b2", "2")
         .replace("\u03b7", "eta").replace("\u03c9", "omega").replace("\u03c6", "phi")
         .replace("\u03d5", "phi").replace("\u00e9", "e")
         .replace("\u2264", "<=").replace("\u2265", ">=").replace("\uff1d", "=")
         .replace("\u201c", "").replace("\u201d", "").replace("\u2019", "'"))
    s = re.sub(r"\s+", " ", s).strip()
    s = re.sub(r"=(\s*=)+", "=", s)            # doubled equals
    s = re.sub(r"-(\s*-)+(?=\s*[\d.,])", "-", s)  # doubled minus before a number
    s = re.sub(r"\+(\s*\+)+(?=\s*[\d.,])", "+", s)
    return s


# ------------------------------------------------------------------ the parsed result

@dataclass(frozen=True)
class Number:
    """A printed number: its value and how many decimals it was printed with."""

    value: float
    decimals: int

    @property
    def half_step(self) -> float:
        """Half the last printed digit: 2.41 stands for [2.405, 2.415]."""
        return 0.5 * 10.0 ** -self.decimals

    def bounds(self) -> tuple[float, float]:
        return self.value - self.half_step, self.value + self.half_step


@dataclass(frozen=True)
class ReportedP:
    """A printed p: relation ("=", "<", "<=", ">", ">=") and the number."""

    relation: str
    number: Number

    @property
    def exact(self) -> bool:
        return self.relation == "=" and self.number.value > 0

    def bounds(self) -> tuple[float, float]:
        """The interval of true p the printed p allows (rounding included)."""
        p, h = self.number.value, self.number.half_step
        if self.relation == "=":
            return max(p - h, 0.0), min(p + h, 1.0)
        if self.relation in ("<", "<="):
            return 0.0, p
        return p, 1.0

    @property
    def significant(self) -> bool:
        """Does the printed p claim significance at .05?"""
        p = self.number.value
        if self.relation in ("<", "<="):
            return p <= ALPHA
        if self.relation == "=":
            return p < ALPHA
        return False

    def text(self) -> str:
        v = f"{self.number.value:.{self.number.decimals}f}"
        return f"p {self.relation} {v[1:] if v.startswith('0.') else v}"


@dataclass(frozen=True)
class Parsed:
    """A result string read into sheet columns.

    Attributes
    ----------
    text : str
        The string as the user pasted it.
    values : dict
        Sheet columns it fills (``stat``, ``value``, ``df``, ``df1``, ``n``, ``n1``,
        ``n2``, ``ci_low``, ``ci_high``, ``mean1``, ``sd1``, ``mean2``, ``sd2``).
    numbers : dict
        The same numbers with their printed decimals (for the rounding intervals).
    p : ReportedP or None
        The printed p, if any.
    ci_level : float or None
        The level of a printed confidence interval (0.95).
    also_printed : str or None
        A d or g printed beside a test statistic ("d = 0.63"); the test statistic is
        what gets converted.
    """

    text: str
    values: dict
    numbers: dict = field(default_factory=dict)
    p: ReportedP | None = None
    ci_level: float | None = None
    also_printed: str | None = None  # a d or g printed beside the test statistic

    @property
    def stat(self) -> str:
        return self.values["stat"]


# ------------------------------------------------------------------ grammar

_REAL = r"(?:\d+(?:[.,]\d+)?|[.,]\d+)"
_SREAL = r"[-+]?\s?" + _REAL
_INTK = r"(?:\d{1,3}(?:[,.]\d{3})+(?![.,]?\d)|\d+(?:\.\d+)?)"  # thousands separators allowed
_STAT_NAMES = (
    (r"t", "t"),
    (r"F", "F"),
    (r"r", "r"),
    (r"(?:chi\s?-?\s?(?:square[d]?|sq|2|\^2)|x\s?\^?2|X\s?\^?2)", "chi2"),
    (r"(?:Cohen'?s\s)?d", "d"),
    (r"(?:Hedges'?s?\s)?g", "g"),
    (r"(?:OR|odds\sratio)", "odds_ratio"),
)
_NAME = "|".join(f"(?P<s_{canon}>{pat})" for pat, canon in _STAT_NAMES)
_STAT_RE = re.compile(
    r"(?<![A-Za-z])(?:" + _NAME + r")\s?(?:[(\[]\s?(?P<dfs>[^)\]]*)[)\]])?\s?=\s?(?P<val>"
    + _SREAL + r")(?![\d])", re.IGNORECASE)
_P_RE = re.compile(r"(?<![A-Za-z])p(?:\s?-?\s?value)?\s?(?P<rel><=|>=|=|<|>)\s?(?P<val>"
                   + _REAL + r")(?![\d])", re.IGNORECASE)
_N_RE = re.compile(r"(?<![A-Za-z])n\s?_?(?P<g>[12])?\s?=\s?(?P<val>" + _INTK + r")(?![\d])",
                   re.IGNORECASE)
_PER_GROUP_RE = re.compile(r"(?<![A-Za-z])n\s?=\s?(?P<val>" + _INTK + r")\s?(?:per|in each|each)"
                           r"\s?(?:group|condition|arm)", re.IGNORECASE)
_DF_RE = re.compile(r"(?<![A-Za-z])df\s?=\s?(?P<val>" + _INTK + r")", re.IGNORECASE)
_CI_RE = re.compile(
    r"(?:(?P<lvl>\d{2}(?:[.,]\d+)?)\s?%\s?)?(?:CI|confidence interval)\s?(?:(?P<lvl2>\d{2})\s?%?)?"
    r"\s?[:=]?\s?[\[(]?\s?(?P<lo>" + _SREAL + r")\s?(?:,|;|\bto\b|-(?=\s?[-+]?[\d.]))\s?(?P<hi>"
    + _SREAL + r")\s?[\])]?", re.IGNORECASE)
_BARE_CI_RE = re.compile(r"[\[]\s?(?P<lo>" + _SREAL + r")\s?[,;]\s?(?P<hi>" + _SREAL + r")\s?\]")
_MSD_RE = re.compile(
    r"(?<![A-Za-z])M\s?=\s?(?P<m>" + _SREAL + r")\s?[,;(]?\s?SD\s?=\s?(?P<sd>" + _REAL + r")"
    r"\)?(?:\s?[,;]?\s?n\s?=\s?(?P<n>" + _INTK + r"))?(?![\d])")
#: Printed extras that do not enter the conversion: eta/omega squared, MSE.
_ANNOTATION_RE = re.compile(
    r"(?i)(?<![A-Za-z])(?:partial\s)?(?:eta|omega)\s?(?:_?p)?\s?\^?2?\s?(?:_?p)?\s?=\s?"
    + _REAL + r"|(?<![A-Za-z])(?:MSE|phi|Cramer'?s\sV)\s?=\s?" + _REAL)
#: Words that may stand between the parts of a result without carrying a number.
_FILLER = re.compile(r"(?i)\b(?:and|vs|versus|respectively|two-tailed|two-sided|group\s?[12]|"
                     r"control|treatment|experimental|time\s?[12]|pre|post)\b\.?")


def _num(text: str) -> Number:
    s = text.replace(" ", "")
    dec = 0
    m = re.search(r"[.,](\d+)$", s)
    if m:
        dec = len(m.group(1))
    return Number(float(s.replace(",", ".")), dec)


def _count(text: str, err, what: str) -> float:
    s = text.replace(" ", "")
    if re.fullmatch(r"\d{1,3}(?:[,.]\d{3})+", s):
        return float(re.sub(r"[,.]", "", s))
    v = float(s)
    if not v.is_integer():
        raise err(f"{what} = {s} is not a whole number")
    return v


def _intish(text: str, err, what: str, *, fractional_ok: bool = False) -> float:
    s = text.strip().replace(" ", "")
    if re.fullmatch(r"\d{1,3}(?:,\d{3})+", s):
        return float(s.replace(",", ""))
    if not re.fullmatch(r"\d+(?:[.,]\d+)?", s):
        raise err(f"{what} '{text.strip()}' is not a number")
    v = float(s.replace(",", "."))
    if not fractional_ok and not v.is_integer():
        raise err(f"{what} = {s} is not a whole number")
    return v


def parse_reported(text: str, *, file: str | None = None, row: int | None = None,
                   column: str = COLUMN) -> Parsed:
    """Read one pasted result string.

    Parameters
    ----------
    text : str
        As printed, e.g. ``"t(58) = 2.41, p = .019"``.
    file, row, column : optional
        Where the string is, for messages.

    Returns
    -------
    Parsed

    Raises
    ------
    InputError
        When part of the string cannot be read, or it does not say enough to be
        converted (an inequality p alone, an omnibus F, a lone mean...).

    Examples
    --------
    >>> r = parse_reported("F(1, 212) = 4.12, p = .043")
    >>> r.values["stat"], r.values["value"], r.values["df1"], r.values["df"], r.p.text()
    ('F', 4.12, 1.0, 212.0, 'p = .043')
    >>> parse_reported("r = \u2212.24, n = 97").values
    {'stat': 'r', 'value': -0.24, 'n': 97.0}
    """
    def err(msg: str) -> InputError:
        return InputError(f"'{text.strip()}': {msg}", file=file, row=row, column=column)

    s = normalise(text)
    if not s:
        raise err("the result string is empty")
    low = s.lower()
    if re.fullmatch(r"n\.?\s?s\.?|not significant|non-?significant|\(?ns\)?", low.strip(" .;,")):
        raise err(_NS_HINT)
    used = [False] * len(s)

    def take(m: re.Match) -> None:
        for i in range(m.start(), m.end()):
            used[i] = True

    values: dict = {}
    numbers: dict = {}
    ci_level = None
    # test statistics
    for m in _ANNOTATION_RE.finditer(s):  # eta squared, MSE...: printed, not needed
        take(m)
    stats = [m for m in _STAT_RE.finditer(s) if not _inside_used(m, used)]
    msd = list(_MSD_RE.finditer(s))
    also = None
    tests = [m for m in stats if _canon(m) in ("t", "F", "r", "chi2")]
    if len(tests) == 1 and len(stats) == 2 and _canon(next(m for m in stats if m is not tests[0]
                                                            )) in ("d", "g"):
        # "t(58) = 2.41, p = .019, d = 0.63": the test statistic is converted; the printed
        # d is kept for the record (with its CI, if any)
        also = next(m for m in stats if m is not tests[0])
        take(also)
        stats = tests
    if len(stats) > 1:
        names = ", ".join(m.group(0) for m in stats)
        raise err(f"it holds more than one statistic ({names}); paste one result per row")
    if stats and msd:
        raise err("it holds both a test statistic and means; paste one result per row "
                  "(the statistic, or the two means with their SDs)")
    if stats:
        m = stats[0]
        take(m)
        canon = _canon(m)
        val = _num(m.group("val"))
        values["stat"], values["value"] = canon, val.value
        numbers["value"] = val
        _read_dfs(canon, m.group("dfs"), values, numbers, err)
    elif msd:
        if len(msd) != 2:
            raise err(f"it gives {len(msd)} mean(s) with SD; two groups (or two time points) "
                      "need two 'M = ..., SD = ...' pairs")
        values["stat"] = "means"
        for i, m in enumerate(msd, start=1):
            take(m)
            mm, sd = _num(m.group("m")), _num(m.group("sd"))
            values[f"mean{i}"], values[f"sd{i}"] = mm.value, sd.value
            numbers[f"mean{i}"], numbers[f"sd{i}"] = mm, sd
            if m.group("n"):
                values[f"n{i}"] = _count(m.group("n"), err, f"n{i}")
    # p
    ps = list(_P_RE.finditer(s))
    p = None
    if len(ps) > 1:
        raise err("it holds more than one p-value; paste one result per row")
    if ps:
        take(ps[0])
        rel = ps[0].group("rel")
        p = ReportedP(rel, _num(ps[0].group("val")))
        if p.number.value > 1:
            raise err(f"p = {p.number.value:g} is impossible; a p-value lies between 0 and 1")
    # sample sizes and df written out
    for m in _PER_GROUP_RE.finditer(s):
        take(m)
        v = _count(m.group("val"), err, "n per group")
        for key in ("n1", "n2"):
            if key in values and values[key] != v:
                raise err(f"{key} is given twice with different values")
            values[key] = v
    for m in _N_RE.finditer(s):
        if used[m.start()]:
            continue
        take(m)
        key = f"n{m.group('g')}" if m.group("g") else "n"
        v = _count(m.group("val"), err, key)
        if key in values and values[key] != v:
            raise err(f"{key} is given twice with different values")
        values[key] = v
    for m in _DF_RE.finditer(s):
        take(m)
        v = _intish(m.group("val"), err, "df", fractional_ok=True)
        if "df" in values and values["df"] != v:
            raise err(f"df = {v:g} disagrees with the df in parentheses ({values['df']:g})")
        values["df"] = v
    # confidence interval
    cis = [m for m in _CI_RE.finditer(s) if not _inside_used(m, used)]
    if not cis:
        cis = [m for m in _BARE_CI_RE.finditer(s) if not _inside_used(m, used)]
    if len(cis) > 1:
        raise err("it holds more than one confidence interval; paste one result per row")
    if cis:
        m = cis[0]
        take(m)
        lvl = (m.groupdict().get("lvl") or m.groupdict().get("lvl2") or "95").replace(",", ".")
        ci_level = float(lvl) / 100
        lo, hi = _num(m.group("lo")), _num(m.group("hi"))
        if lo.value > hi.value:
            raise err(f"the interval [{lo.value:g}, {hi.value:g}] has its limits in the wrong "
                      "order")
        if values.get("stat") in ("d", "g", "odds_ratio", None):
            values["ci_low"], values["ci_high"] = lo.value, hi.value
        numbers["ci_low"], numbers["ci_high"] = lo, hi
    # nothing may be left over that carries a number or a word we did not read
    rest = "".join(" " if used[i] else ch for i, ch in enumerate(s))
    rest = _FILLER.sub(" ", rest)
    ns = re.search(r"(?i)(?<![A-Za-z])n\.?\s?s\.?(?![A-Za-z])", rest)
    if ns and "stat" in values and values["stat"] != "means":
        if p is None:
            p = ReportedP(">", Number(ALPHA, 2))
        rest = rest[:ns.start()] + " " + rest[ns.end():]
    rest_clean = re.sub(r"[\s,;:()\[\]./*†‡]+", " ", rest).strip()
    if rest_clean:
        if "stat" not in values and re.search(r"(?i)\bn\.?\s?s\b", rest):
            raise err(_NS_HINT)
        if re.search(r"(?<![A-Za-z])[tFr]\s?[(\[]", rest):
            raise err(f"the part '{rest_clean}' has a statistic without '= value'; "
                      "paste it as printed, e.g. t(58) = 2.41")
        raise err(f"the part '{rest_clean}' cannot be read; pooler reads t, F, r, chi2, d, g, "
                  "OR, p, n, df, a 95% CI and 'M = ..., SD = ...' pairs")
    # is there enough to convert?
    if "stat" not in values:
        if p is None:
            raise err("no statistic found; pooler reads t(df) = ..., F(df1, df2) = ..., "
                      "r(df) = ..., chi2(1, N = ...) = ..., d = ..., g = ..., OR = ... with its "
                      "95% CI, two 'M = ..., SD = ...' pairs, or an exact p")
        if not p.exact:
            zero = (" (p = .000 is a p rounded down: it means p < .0005)"
                    if p.relation == "=" else "")
            raise err(f"'{p.text()}' is an inequality{zero}, not an exact p, and no statistic is "
                      "given: it cannot be converted without guessing. Give the test statistic "
                      "(e.g. t(58) = 2.41), or exclude the row with a reason")
        values["stat"], values["value"] = "p", p.number.value
        numbers["value"] = p.number
    if p is not None and p.relation == "=" and p.number.value == 0:
        p = ReportedP("<", Number(p.number.half_step, p.number.decimals + 1))
    if ci_level is not None and values["stat"] in ("odds_ratio",) and abs(ci_level - 0.95) > 1e-9:
        raise err(f"a {ci_level:.0%} CI is given; pooler reads the odds ratio's precision "
                  "from a 95% CI only")
    if values["stat"] == "odds_ratio" and "ci_low" not in values:
        raise err("an odds ratio needs its 95% CI to know its precision, e.g. "
                  "OR = 2.30, 95% CI [1.10, 4.80]")
    also_text = None if also is None else f"{_canon(also)} = {also.group('val').strip()}"
    return Parsed(text=text, values=values, numbers=numbers, p=p, ci_level=ci_level,
                  also_printed=also_text)


def _canon(m: re.Match) -> str:
    return next(k[2:] for k, v in m.groupdict().items() if k.startswith("s_") and v)


_NS_HINT = ("'n.s.' (not significant) without a statistic cannot be converted: it says only "
            "that p was above the threshold, not how large the effect was. Enter the exact "
            "statistic or the exact p if the paper gives it (e.g. t(40) = 1.10), or put the "
            "reason in 'exclude' (e.g. 'no statistic reported')")


def _inside_used(m: re.Match, used: list[bool]) -> bool:
    return any(used[m.start():m.end()])


def _read_dfs(canon: str, dfs: str | None, values: dict, numbers: dict, err) -> None:
    if dfs is None:
        if canon == "chi2":
            values["_chi2_df"] = None
        return
    parts = [x.strip() for x in re.split(r"\s?[;,]\s|;|,(?=\s?[Nn]\s?=)", dfs.strip())
             if x.strip()]
    if len(parts) == 1 and canon == "F" and re.fullmatch(r"\d+,\d+", parts[0].replace(" ", "")):
        parts = parts[0].replace(" ", "").split(",")
    if canon in ("t", "r"):
        if len(parts) != 1:
            raise err(f"{canon} has one df, but the parentheses hold '{dfs}'")
        values["df"] = _intish(parts[0], err, "df", fractional_ok=(canon == "t"))
        return
    if canon == "F":
        if len(parts) != 2:
            raise err(f"F needs two df, F(df1, df2); the parentheses hold '{dfs}'")
        df1 = _intish(parts[0], err, "df1")
        df2 = _intish(parts[1], err, "df2", fractional_ok=True)
        if df1 != 1:
            raise err(f"F has df1 = {df1:g}: an omnibus F compares several groups at once and "
                      "cannot become one d; paste the focal two-group contrast instead "
                      "(t or F(1, df))")
        values["df1"], values["df"] = df1, df2
        return
    if canon == "chi2":
        n = None
        df = None
        for part in parts:
            mm = re.fullmatch(r"[Nn]\s?=\s?(" + _INTK + ")", part)
            if mm:
                n = _count(mm.group(1), err, "N")
            else:
                df = _intish(part, err, "chi2 df")
        if df is not None and df != 1:
            raise err(f"chi2 has {df:g} df: only a 1-df chi-square (a 2x2 table) can become one "
                      "effect size")
        values["_chi2_df"] = df
        if n is not None:
            values["n"] = n
        return
    raise err(f"{canon} takes no degrees of freedom in parentheses")


# ------------------------------------------------------------------ the consistency check

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
    msg = (f"the printed {p.text()} does not match {name}, which gives p = {point:.4f} "
           f"(between {lo:.4f} and {hi:.4f} allowing for the rounding of the statistic)")
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
    from .sheet import _WITHIN_WORDS
    d = (rec.get("design") or "between").strip().lower()
    return "within" if d in _WITHIN_WORDS else "between"


def check_record(rec, column_of) -> tuple[list[Inconsistency], object, list[str]]:
    """Run the reporting consistency check on one sheet record.

    Parameters
    ----------
    rec : pooler.sheet.Record
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
                mag = statistic_from_p(stat, parsed.p.number.value, df_use, n_r)
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
    # a CI around its estimate
    if parsed is not None:
        msg = check_ci(parsed)
        if msg is not None:
            out.append(Inconsistency(rec.row, rec.study, column_of(COLUMN), "ci", msg))
    return out, new_rec, notes
