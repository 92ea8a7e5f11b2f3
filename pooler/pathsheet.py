"""Path literatures: pool each path of a mediation model from its own rows of one sheet.

A path sheet is an ordinary sheet (see :mod:`pooler.sheet`) with a ``path`` column naming the
pair of variables each row's result links (``X-M1``, ``M1-Y``, ``X-Y``, ``M1-M2``; simple
mediation: ``X-M``, ``M-Y``, ``X-Y``). Each path's rows go through the ordinary stages on the
correlation metric (:func:`pooler.pipeline.analyse`: convert, pool, bias suite, planning
scenarios), so each path gets its own optimistic / realistic / pessimistic correlation. Pairs
without a literature are given as fixed correlations. One correlation matrix per scenario is
checked (positive definite), and the standardized paths it implies
(:func:`pooler.simdesign.design_from_correlations`, as in meta-analytic path analysis,
Viswesvaran & Ones 1995) define the design that scenario is planned on.

References
----------
.. [VO95] Viswesvaran, C., & Ones, D. S. (1995). Theory testing: Combining psychometric
   meta-analysis and structural equations modeling. *Personnel Psychology*, 48(4), 865-885.
.. [AB12] Aloe, A. M., & Becker, B. J. (2012). An effect size for regression predictors in
   meta-analysis. *Journal of Educational and Behavioral Statistics*, 37(2), 278-297.
"""
from __future__ import annotations

import itertools
import math
import re
from dataclasses import dataclass, replace

from ._results import Interval, estimable, to_jsonable
from .errors import InputError, OptionError

#: Designs a path sheet can feed (they are defined by a correlation matrix).
SHEET_DESIGNS = ("simple-mediation", "parallel-mediation", "serial-mediation")
SCENARIOS = ("optimistic", "realistic", "pessimistic")


@dataclass(frozen=True)
class PathValues:
    """One pair of variables: its pooled literature, or a value given as an option.

    Attributes
    ----------
    path : str
        The pair, written in model order (``X-M1``).
    source : {"sheet", "option"}
    rows : tuple of int
        The sheet rows of this path (header = 1).
    k : int or None
        Independent samples pooled.
    pooled : float or None
        The random-effects estimate as a correlation (common-effect with one study).
    ci : Interval or None
        Its 95 % interval, as correlations.
    values : dict
        Scenario name -> correlation used in that scenario's matrix.
    bases : dict
        Scenario name -> how the value was chosen, in words.
    analysis : pooler.pipeline.Analysis or None
    """

    path: str
    source: str
    rows: tuple
    k: int | None
    pooled: float | None
    ci: Interval | None
    values: dict
    bases: dict
    option: str = ""
    analysis: object = None

    def to_dict(self) -> dict:
        doc = {"path": self.path, "source": self.source, "rows": list(self.rows), "k": self.k,
               "pooled_r": self.pooled,
               "ci_low": self.ci.low if self.ci else None,
               "ci_high": self.ci.high if self.ci else None,
               "scenarios": {s: {"r": self.values[s], "basis": self.bases[s]}
                             for s in self.values}, "option": self.option or None}
        if self.analysis is not None:
            doc["pool"] = self.analysis.pool_document()
        return to_jsonable(doc)


@dataclass(frozen=True)
class PathSheet:
    """Every path of the model with its scenario values, and the design of each scenario.

    Attributes
    ----------
    file, sha256 : str
    design_name : str
    variables : tuple of str
    paths : tuple of PathValues
    matrices : dict
        Scenario -> correlation matrix (list of lists, in ``variables`` order).
    designs : dict
        Scenario -> the design (e.g. :class:`pooler.simdesign.ParallelMediation`).
    notes : tuple of str
    """

    file: str
    sha256: str
    design_name: str
    variables: tuple
    paths: tuple
    matrices: dict
    designs: dict
    notes: tuple = ()

    @property
    def warnings(self) -> tuple:
        """The conversion warnings of every path's rows (duplicates, disagreeing numbers)."""
        return tuple(w for p in self.paths if p.analysis is not None
                     for w in p.analysis.effects.warnings)

    def __getitem__(self, path: str) -> PathValues:
        for p in self.paths:
            if p.path == path:
                return p
        raise KeyError(path)

    def to_dict(self) -> dict:
        return to_jsonable({
            "file": self.file, "sha256": self.sha256, "design": self.design_name,
            "variables": list(self.variables), "paths": [p.to_dict() for p in self.paths],
            "matrices": self.matrices,
            "designs": {s: {"description": d.describe(), "true_values": d.true_values()}
                        for s, d in self.designs.items()},
            "notes": list(self.notes)})

    def to_frame(self):
        import pandas as pd
        rows = []
        for p in self.paths:
            rows.append({"path": p.path, "source": p.source, "k": p.k, "pooled_r": p.pooled,
                         **{s: p.values[s] for s in SCENARIOS}})
        return pd.DataFrame(rows)


# --------------------------------------------------------------------------- names

def design_variables(design_name: str, mediators: int = 2) -> tuple:
    """The variables of a mediation design, in model order.

    Examples
    --------
    >>> design_variables("parallel-mediation", 3)
    ('X', 'M1', 'M2', 'M3', 'Y')
    """
    if design_name == "simple-mediation":
        return ("X", "M", "Y")
    if design_name == "serial-mediation":
        return ("X", "M1", "M2", "Y")
    return ("X",) + tuple(f"M{i}" for i in range(1, mediators + 1)) + ("Y",)


_SEP = re.compile(r"\s*(?:->|→|<->|–|—|-|>)\s*")


def split_path(text: str) -> tuple | None:
    """The two variable names of a path written like ``X-M1`` (also ``X -> M1``), upper-cased,
    or None if it is not two names."""
    parts = [p for p in _SEP.split(text.strip().upper()) if p]
    if len(parts) != 2 or not all(re.fullmatch(r"[A-Z][A-Z0-9]*", p) for p in parts):
        return None
    return parts[0], parts[1]


def _canonical(a: str, b: str, order: tuple) -> str:
    i, j = sorted((order.index(a), order.index(b)))
    return f"{order[i]}-{order[j]}"


def all_pairs(variables: tuple) -> list:
    return [f"{a}-{b}" for a, b in itertools.combinations(variables, 2)]


# --------------------------------------------------------------------------- the stage

def pool_paths(sheet_path, design_name: str, given: dict | None = None, *, option_names=None,
               estimator: str = "reml", interval: str = "hksj", adjuster: str = "default",
               safeguard_level: float = 0.6, sample_r: float = 0.5) -> PathSheet:
    """Pool each path of ``design_name`` from its rows of the sheet and build one design per
    scenario.

    Parameters
    ----------
    sheet_path : str or Path
        A sheet with a ``path`` column.
    design_name : {"simple-mediation", "parallel-mediation", "serial-mediation"}
    given : dict, optional
        Pair -> correlation for pairs without a literature (the same in every scenario).
    option_names : dict, optional
        Pair -> the option it was given with (for messages).
    estimator, interval, adjuster, safeguard_level, sample_r
        As for :func:`pooler.pipeline.analyse`; the metric is always r (Fisher z).

    Returns
    -------
    PathSheet

    Raises
    ------
    InputError
        With file, row and column: a row without a path, a path that is not a pair of the
        design's variables, a pair with no rows and no option, a pair given twice, or
        correlations that cannot occur together (naming the pairs).
    """
    from .pipeline import analyse
    from .sheet import column_label, read_sheet
    from .simdesign import design_from_correlations
    # validation
    if design_name not in SHEET_DESIGNS:
        raise OptionError(f"a path sheet feeds the mediation designs ({', '.join(SHEET_DESIGNS)})"
                          f", not {design_name!r}; give a moderation's paths as options")
    given = dict(given or {})
    option_names = dict(option_names or {})
    sheet = read_sheet(sheet_path)
    file = sheet.path
    if "path" not in [c.strip().lower() for c in sheet.columns]:
        raise InputError("a path sheet needs a 'path' column naming the pair of variables each "
                         "row links (e.g. X-M1, M1-Y, X-Y, M1-M2); the header has: "
                         + ", ".join(sheet.columns), file=file, row=1)
    col = column_label(sheet, "path")

    # the rows of each path
    parsed = []
    problems = []
    notes = []
    for rec in sheet.records:
        text = rec.get("path")
        if text is None:
            if rec.get("exclude"):
                notes.append(f"row {rec.row} is excluded and names no path; left out")
                continue
            problems.append(InputError("'path' is empty; name the pair of variables this "
                                       "row's result links, e.g. X-M1", file=file,
                                       row=rec.row, column=col))
            continue
        pair = split_path(text)
        if pair is None or pair[0] == pair[1]:
            problems.append(InputError(f"'{text}' is not a pair of two variables; write it "
                                       "like X-M1", file=file, row=rec.row, column=col))
            continue
        parsed.append((rec, pair))
    names = {v for _, pr in parsed for v in pr}
    names |= {v for key in given for v in key.split("-")}
    k_med = 2
    if design_name == "parallel-mediation":
        idx = sorted(int(v[1:]) for v in names if re.fullmatch(r"M[1-9]", v))
        k_med = max(idx + [2])
        if k_med > 4:
            raise InputError(f"parallel mediation takes 2 to 4 mediators; the paths name "
                             f"M{k_med}", file=file, column=col)
    variables = design_variables(design_name, k_med)
    by_pair: dict = {}
    for rec, (a, b) in parsed:
        if a not in variables or b not in variables:
            bad = a if a not in variables else b
            problems.append(InputError(
                f"'{rec.get('path')}' names {bad}, which is not a variable of {design_name} "
                f"(its variables are {', '.join(variables)})", file=file, row=rec.row,
                column=col))
            continue
        by_pair.setdefault(_canonical(a, b, variables), []).append(rec)
    if problems:
        from .errors import InputErrors
        raise InputErrors(problems)

    # each pair: pooled from its rows, or given
    pairs = all_pairs(variables)
    canon_given = {}
    for key, v in given.items():
        a, b = key.split("-")
        canon_given[_canonical(a, b, variables)] = (v, option_names.get(key, key))
    out = []
    for pair in pairs:
        recs = by_pair.get(pair, [])
        if recs and pair in canon_given:
            raise InputError(f"the path {pair} has rows in the sheet (rows "
                             f"{', '.join(str(r.row) for r in recs)}) and is also given as "
                             f"{canon_given[pair][1]}; give it once", file=file, column=col)
        if pair in canon_given:
            v, how = canon_given[pair]
            if not -1 < v < 1:
                raise OptionError(f"{how} = {v:g} is read as the correlation {pair}; it must "
                                  "lie strictly between -1 and 1")
            out.append(PathValues(pair, "option", (), None, None, None,
                                  {s: float(v) for s in SCENARIOS},
                                  {s: f"given as {how} (no literature)" for s in SCENARIOS},
                                  option=how))
            continue
        if not recs or all(r.get("exclude") for r in recs):
            hint = option_hint(design_name, pair)
            raise InputError(f"the path {pair} has no rows to pool"
                             + (" (only excluded ones)" if recs else "")
                             + "; add rows for it"
                             + f" or give its correlation with "
                             + (f"{hint} or " if hint else "") + f"--pair {pair}=R",
                             file=file, column=col)
        sub = replace(sheet, records=tuple(recs))
        a = analyse(sub, metric="r", sample_r=sample_r, estimator=estimator, interval=interval,
                    adjuster=adjuster, safeguard_level=safeguard_level)
        est = a.pooled.pooled if estimable(a.pooled.pooled) else a.pooled.fixed
        pe = {e.scenario: e for e in a.scenarios.planning_effects()}
        missing = [s for s in SCENARIOS if s not in pe]
        if missing:  # pragma: no cover - the scenarios stage always returns all three
            raise OptionError(f"the scenarios stage gave no {', '.join(missing)} value")
        out.append(PathValues(
            pair, "sheet", tuple(r.row for r in recs), a.pooled.k, math.tanh(est.estimate),
            Interval(math.tanh(est.ci.low), math.tanh(est.ci.high), est.ci.level),
            {s: float(pe[s].effect) for s in SCENARIOS},
            {s: pe[s].basis for s in SCENARIOS}, analysis=a))
        if est.estimate < 0:
            notes.append(f"the pooled correlation {pair} is negative; the scenarios move a "
                         "path towards smaller (more negative) values, so reverse-score one of "
                         "its variables if a weaker negative path is the cautious case")

    matrices, designs = {}, {}
    for s in SCENARIOS:
        values = {p.path: p.values[s] for p in out}
        check_positive_definite(values, variables, s, file=file)
        matrices[s] = correlation_matrix(values, variables).tolist()
        designs[s] = design_from_correlations(design_name, values)
    base = designs["optimistic"].true_values()
    for s in SCENARIOS[1:]:
        flips = [k for k, v in designs[s].true_values().items()
                 if k.count("-") == 1 and base[k] * v < 0 and abs(v) > 0.01]
        if flips:
            notes.append(f"in the {s} scenario the standardized path(s) {', '.join(flips)} "
                         "change sign against the optimistic one: the paths are partial "
                         "coefficients, so lowering the correlations together can reverse or "
                         "even raise a path; read each scenario's paths before its n")
    return PathSheet(file, sheet.sha256, design_name, variables, tuple(out), matrices,
                     designs, tuple(notes))


def option_hint(design_name: str, pair: str) -> str:
    """The ``pooler paths`` option that gives ``pair`` as a correlation, or ''."""
    a, b = pair.split("-")
    if a == "X" and b == "Y":
        return "--direct"
    if a == "X" and b.startswith("M"):
        return "--a (once per mediator, in order)"
    if b == "Y" and a.startswith("M"):
        return "--b (once per mediator, in order)"
    if pair == "M1-M2":
        return "--m1-m2"
    return ""


def correlation_matrix(values: dict, variables: tuple):
    """The correlation matrix of ``variables`` from pair -> correlation."""
    import numpy as np
    k = len(variables)
    mat = np.eye(k)
    for key, v in values.items():
        a, b = key.split("-")
        i, j = variables.index(a), variables.index(b)
        mat[i, j] = mat[j, i] = v
    return mat


def check_positive_definite(values: dict, variables: tuple, scenario: str = "",
                            *, file: str | None = None) -> None:
    """Raise an :class:`InputError` naming the pairs when the correlations cannot occur
    together (the matrix is not positive definite). The smallest sets of variables whose
    correlations already conflict are named (every failing 3 x 3 block, else larger).

    Examples
    --------
    >>> check_positive_definite({"X-M": 0.9, "M-Y": 0.9, "X-Y": -0.5},
    ...                         ("X", "M", "Y"))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    pooler.errors.InputError: the correlations X-M = 0.900, X-Y = -0.500, M-Y = 0.900 cannot...
    """
    import numpy as np
    mat = correlation_matrix(values, variables)
    if np.linalg.eigvalsh(mat).min() > 1e-10:
        return
    k = len(variables)
    bad = []
    for size in range(3, k + 1):
        for sub in itertools.combinations(range(k), size):
            if np.linalg.eigvalsh(mat[np.ix_(sub, sub)]).min() <= 1e-10:
                bad.append(sub)
        if bad:
            break
    groups = []
    for sub in bad:
        groups.append(", ".join(f"{variables[i]}-{variables[j]} = {mat[i, j]:.3f}"
                                for i, j in itertools.combinations(sub, 2)))
    lead = f"{scenario} scenario: " if scenario else ""
    raise InputError(f"{lead}the correlations {'; and '.join(groups)} cannot occur together "
                     "(their matrix is not positive definite); pooled values of separate "
                     "literatures can conflict like this: check those paths' rows, or plan "
                     "on other values for them", file=file)
