"""Read a result the way a paper prints it.

The sheet column ``reported`` takes a result string pasted from a paper, for example
``t(58) = 2.41, p = .019`` or ``OR = 2.30, 95% CI [1.10, 4.80]``. :func:`parse_reported`
turns it into the sheet's own columns (``stat``, ``value``, ``df``, ``df1``, ``n``,
``n1``, ``n2``, ``ci_low``, ``ci_high``, means and SDs) plus what the converters do not
need but the consistency check (:mod:`pooler.reading.consistency`) does: the printed p, the
number of decimals of every number, and the χ² degrees of freedom. Nothing is guessed: a
string with a part that cannot be read, or with too little to convert, raises an
:class:`~pooler.errors.InputError` saying what is missing.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field

from pooler.errors import InputError

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
    if fractional_ok and re.fullmatch(r"[0-2]\.\d{3}", s):
        # 1.024 is 1,024 with a dot as thousands separator (as n and N are read), or a df of
        # 1.024; a df below 3 is all but impossible (a Welch df such as 37.125 is read as it
        # stands), so a number like this is refused rather than guessed
        raise err(f"{what} '{s}' is ambiguous: {s.replace('.', ',')} written with a dot as "
                  f"thousands separator, or {s}; write it without the separator "
                  f"({s.replace('.', '')}) if that is what it means")
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
        if re.match(r"\s?(?:[eE]\s?[-+]?\s?\d|[x\u00d7*]\s?10)", s[ps[0].end():]):
            raise err("the p-value is printed in scientific notation; write it as a decimal "
                      "(p = .000012) or as an inequality (p < .001)")
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
    # a tag saying how the p was computed: one-tailed / one-sided / 1-tailed (or two-)
    tag = re.search(r"(?i)\b(one|1|two|2)[\s-]?(tailed|sided)\b", rest)
    if tag:
        values["tails"] = 1.0 if tag.group(1).lower() in ("one", "1") else 2.0
        rest = rest[:tag.start()] + " " + rest[tag.end():]
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
