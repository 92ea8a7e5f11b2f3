"""Path literatures: pool each path of a mediation or moderation model from its own rows of
one sheet.

A path sheet is an ordinary sheet (see :mod:`pooler.reading.sheet`) with a ``path`` column naming the
pair of variables each row's result links (``X-M1``, ``M1-Y``, ``X-Y``, ``M1-M2``; simple
mediation: ``X-M``, ``M-Y``, ``X-Y``; moderation: ``X-Y``, ``Z-Y``, ``X-Z`` and the
interaction ``XZ-Y`` (also written ``X*Z-Y``), or the simple slopes ``X-Y at high Z`` and
``X-Y at low Z``). Each path's rows go through the ordinary stages on the correlation metric (:func:`pooler.pipeline.analyse`: convert, pool, bias suite, planning
scenarios), so each path gets its own optimistic / realistic / pessimistic correlation. Pairs
without a literature are given as fixed correlations. One correlation matrix per scenario is
checked (positive definite), and the standardized paths it implies
(:func:`pooler.planning.simdesign.design_from_correlations`, as in meta-analytic path analysis,
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

from pooler._results import Interval, estimable, to_jsonable
from pooler.errors import InputError, OptionError

#: Designs a path sheet can feed (they are defined by a correlation matrix).
SHEET_DESIGNS = ("simple-mediation", "parallel-mediation", "serial-mediation", "moderation")
#: Moderation's variables in model order (XZ is the product of X and Z).
MODERATION_VARIABLES = ("X", "Z", "XZ", "Y")
#: The two simple-slope "paths" of a moderation sheet (X-Y within each level of Z).
SLOPES = ("X-Y at high Z", "X-Y at low Z")
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
        Scenario -> the design (e.g. :class:`pooler.planning.simdesign.ParallelMediation`).
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
    if design_name == "moderation":
        return MODERATION_VARIABLES
    if design_name == "simple-mediation":
        return ("X", "M", "Y")
    if design_name == "serial-mediation":
        return ("X", "M1", "M2", "Y")
    return ("X",) + tuple(f"M{i}" for i in range(1, mediators + 1)) + ("Y",)


_SEP = re.compile(r"\s*(?:->|→|<->|–|—|-|>)\s*")


_PRODUCT = re.compile(r"(?<=[A-Z0-9])\s*[*×:]\s*(?=[A-Z])")
_SLOPE = re.compile(r"(.+?)\s+AT\s+(HIGH|LOW)\s+Z", re.IGNORECASE)


def split_path(text: str) -> tuple | None:
    """The two variable names of a path written like ``X-M1`` (also ``X -> M1``), upper-cased,
    or None if it is not two names. A product is one name: ``X*Z-Y`` gives ``('XZ', 'Y')``.

    Examples
    --------
    >>> split_path("x*z -> y"), split_path("M1-M2"), split_path("X")
    (('XZ', 'Y'), ('M1', 'M2'), None)
    """
    parts = [p for p in _SEP.split(_PRODUCT.sub("", text.strip().upper())) if p]
    if len(parts) != 2 or not all(re.fullmatch(r"[A-Z][A-Z0-9]*", p) for p in parts):
        return None
    return parts[0], parts[1]


def slope_level(text: str) -> str | None:
    """``'high'`` or ``'low'`` for a simple-slope path (``X-Y at high Z``), else None.

    Examples
    --------
    >>> slope_level("X-Y at high Z"), slope_level("x -> y AT LOW z"), slope_level("X-Y")
    ('high', 'low', None)
    """
    m = _SLOPE.fullmatch(text.strip())
    if m is None or split_path(m.group(1)) not in (("X", "Y"), ("Y", "X")):
        return None
    return m.group(2).lower()


def _canonical(a: str, b: str, order: tuple) -> str:
    i, j = sorted((order.index(a), order.index(b)))
    return f"{order[i]}-{order[j]}"


def all_pairs(variables: tuple) -> list:
    return [f"{a}-{b}" for a, b in itertools.combinations(variables, 2)]


# --------------------------------------------------------------------------- the stage

def pool_paths(sheet_path, design_name: str, given: dict | None = None, *, option_names=None,
               estimator: str = "reml", interval: str = "hksj", adjuster: str = "default",
               safeguard_level: float = 0.6, sample_r: float = 0.5,
               binary_moderator: bool = False, option_hints: bool = True) -> PathSheet:
    """Pool each path of ``design_name`` from its rows of the sheet and build one design per
    scenario.

    Parameters
    ----------
    sheet_path : str or Path
        A sheet with a ``path`` column.
    design_name : {"simple-mediation", "parallel-mediation", "serial-mediation", "moderation"}
    given : dict, optional
        Pair -> correlation for pairs without a literature (the same in every scenario).
    option_names : dict, optional
        Pair -> the option it was given with (for messages).
    estimator, interval, adjuster, safeguard_level, sample_r
        As for :func:`pooler.pipeline.analyse`; the metric is always r (Fisher z).
    binary_moderator : bool
        Moderation: the moderator is two equal groups (simple-slope rows imply it).
    option_hints : bool
        Whether a missing pair's message names ``pooler paths``' own options (``--direct``,
        ...) beside ``--pair``.

    Moderation takes either the pairs ``X-Y``, ``Z-Y``, ``XZ-Y`` (the interaction, read as
    the partial correlation of the product term given X and Z) and ``X-Z`` (0 when it has
    no rows and is not given), planned with :func:`pooler.planning.simdesign.moderation_from_correlations`;
    or the simple slopes ``X-Y at high Z`` / ``X-Y at low Z`` (X-Y correlations within two
    equal groups) and ``Z-Y``, planned with
    :func:`pooler.planning.simdesign.moderation_from_group_correlations`.

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
    from pooler.pipeline import analyse
    from pooler.reading.sheet import column_label, read_sheet
    from pooler.planning.simdesign import design_from_correlations
    # validation
    if design_name not in SHEET_DESIGNS:
        raise OptionError(f"a path sheet feeds the designs {', '.join(SHEET_DESIGNS)}, "
                          f"not {design_name!r}")
    moderation = design_name == "moderation"
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
        level = slope_level(text) if moderation else None
        if level is not None:
            parsed.append((rec, (SLOPES[0] if level == "high" else SLOPES[1], None)))
            continue
        pair = split_path(text)
        if pair is None or pair[0] == pair[1]:
            like = ("X-Y, XZ-Y (the interaction) or X-Y at high Z" if moderation
                    else "X-M1")
            problems.append(InputError(f"'{text}' is not a pair of two variables; write it "
                                       f"like {like}", file=file, row=rec.row, column=col))
            continue
        parsed.append((rec, pair))
    names = {v for _, pr in parsed if pr[1] is not None for v in pr}
    names |= {v for key in given for v in key.split("-")}
    k_med = 2
    if design_name == "parallel-mediation":
        idx = sorted(int(v[1:]) for v in names if re.fullmatch(r"M[1-9]", v))
        k_med = max(idx + [2])
        if k_med > 4:
            for rec, pr in parsed:
                high = [v for v in pr if v and re.fullmatch(r"M[5-9]", v)]
                if high:
                    problems.append(InputError(
                        f"'{rec.get('path')}' names {high[0]}: parallel mediation takes 2 to "
                        "4 mediators (M1 to M4)", file=file, row=rec.row, column=col))
            if not any("mediators (M1 to M4)" in e.message for e in problems):
                raise OptionError("parallel mediation takes 2 to 4 mediators; the pairs given "
                                  f"as options name M{k_med}")
            k_med = 4
    variables = design_variables(design_name, k_med)
    by_pair: dict = {}
    located = {e.row for e in problems}
    for rec, (a, b) in parsed:
        if rec.row in located:
            continue
        if b is None:   # a simple slope of a moderation sheet
            by_pair.setdefault(a, []).append(rec)
            continue
        if a not in variables or b not in variables:
            bad = a if a not in variables else b
            problems.append(InputError(
                f"'{rec.get('path')}' names {bad}, which is not a variable of {design_name} "
                f"(its variables are {', '.join(variables)})", file=file, row=rec.row,
                column=col))
            continue
        if moderation and "XZ" in (a, b) and {a, b} != {"XZ", "Y"}:
            problems.append(InputError(
                f"'{rec.get('path')}': the product XZ of centred X and Z is uncorrelated with "
                "X and with Z by construction, so this pair takes no rows; the interaction "
                "is the path XZ-Y", file=file, row=rec.row, column=col))
            continue
        by_pair.setdefault(_canonical(a, b, variables), []).append(rec)
    parse_failed = bool(problems)   # then a pair without rows may be their doing
    slopes = moderation and any(k in by_pair for k in SLOPES)
    if slopes:
        for k in ("X-Y", "XZ-Y", "X-Z"):
            for rec in by_pair.get(k, []):
                problems.append(InputError(
                    f"'{rec.get('path')}': this sheet gives the interaction by simple slopes "
                    f"(rows {', '.join(str(r.row) for k2 in SLOPES for r in by_pair.get(k2, []))}"
                    f"), which are read as X-Y correlations within two equal groups of Z with X "
                    f"unrelated to Z; give either the slopes with Z-Y, or X-Y, Z-Y and XZ-Y "
                    f"rows, not both", file=file, row=rec.row, column=col))
        one = [k for k in SLOPES if k not in by_pair]
        if one and not parse_failed:
            other = SLOPES[0] if one[0] == SLOPES[1] else SLOPES[1]
            problems.append(InputError(
                f"the simple slope '{other}' has rows but '{one[0]}' has none; the "
                "interaction needs both slopes", file=file, row=by_pair[other][0].row,
                column=col))

    # each pair: pooled from its rows, or given
    pairs = all_pairs(variables)
    if moderation:
        pairs = [SLOPES[0], SLOPES[1], "Z-Y"] if slopes else ["X-Y", "Z-Y", "XZ-Y", "X-Z"]
        if slopes and "X-Z" in given:
            raise OptionError("with simple-slope rows X and the moderator's groups are taken "
                              "as unrelated; the X-Z correlation does not apply")
        if not slopes and "X-Z" not in by_pair and "X-Z" not in given:
            given["X-Z"] = 0.0
            option_names.setdefault("X-Z", "0 by default (X-Z has no rows)")
    canon_given = {}
    for key, v in given.items():
        a, b = key.split("-")
        how = option_names.get(key, key)
        bad = [x for x in (a, b) if x not in variables]
        if bad:
            raise OptionError(f"{how} names {bad[0]}, which is not a variable of {design_name} "
                              f"(its variables are {', '.join(variables)})")
        canon = _canonical(a, b, variables) if a != b else key
        if canon not in pairs:
            raise OptionError(f"{how}: {canon} is not a pair {design_name} takes (its pairs "
                              f"are {', '.join(pairs)})")
        canon_given[canon] = (v, how)
    out = []
    for pair in pairs:
        recs = by_pair.get(pair, [])
        if recs and pair in canon_given:
            problems.append(InputError(
                f"the path {pair} has rows in the sheet (rows "
                f"{', '.join(str(r.row) for r in recs)}) and is also given as "
                f"{canon_given[pair][1]}; give it once", file=file, row=recs[0].row,
                column=col))
            continue
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
            if parse_failed:
                continue
            if pair in SLOPES:   # said above, with the other slope's rows
                continue
            hint = option_hint(design_name, pair) if option_hints else ""
            problems.append(InputError(f"the path {pair} has no rows to pool"
                                       + (" (only excluded ones)" if recs else "")
                                       + "; add rows for it or give its correlation with "
                                       + (f"{hint} or " if hint else "") + f"--pair {pair}=R",
                                       file=file, row=recs[0].row if recs else None,
                                       column=col))
            continue
        sub = replace(sheet, records=tuple(recs))
        try:   # every path's conversion problems are reported together
            a = analyse(sub, metric="r", sample_r=sample_r, estimator=estimator,
                        interval=interval, adjuster=adjuster, safeguard_level=safeguard_level)
        except InputError as exc:
            problems.extend(getattr(exc, "errors", (exc,)))
            continue
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
        if est.estimate < 0 and moderation and pair == "XZ-Y":
            notes.append("the interaction XZ-Y pools negative: its scenarios move it away from "
                         "0, so the pessimistic plan is the least cautious one; code Z the "
                         "other way round (negate the values of the XZ-Y, Z-Y and X-Z rows), "
                         "which leaves the interaction's power unchanged, and plan again")
        elif est.estimate < 0:
            notes.append(f"the pooled correlation {pair} is negative; the scenarios move a "
                         "path towards smaller (more negative) values, so reverse-score one of "
                         "its variables if a weaker negative path is the cautious case")

    if problems:
        from pooler.errors import InputErrors
        raise InputErrors(sorted(problems, key=lambda e: (e.row is None, e.row or 0)))

    matrices, designs = {}, {}
    if moderation:
        notes.append(
            "the simple slopes are read as the X-Y correlations within two equal groups of "
            "the moderator, X unrelated to the groups; the design is planned with a binary "
            "moderator" if slopes else
            "XZ-Y rows are read as the partial correlation of the product term with Y given "
            "X and Z (what the t of the interaction coefficient gives, t / sqrt(t^2 + df)); "
            "the zero-order correlation of the product with Y is smaller by the factor "
            "sqrt(1 - R^2 of X and Z)")
    for s in SCENARIOS:
        values = {p.path: p.values[s] for p in out}
        if moderation:
            designs[s] = _moderation_design(values, slopes, binary_moderator, s, file)
            matrices[s] = moderation_matrix(designs[s]).tolist()
            continue
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


def _moderation_design(values: dict, slopes: bool, binary: bool, scenario: str, file):
    from pooler.planning.simdesign import (moderation_from_correlations,
                                           moderation_from_group_correlations)
    if slopes:
        return moderation_from_group_correlations(values[SLOPES[0]], values[SLOPES[1]],
                                                  values["Z-Y"])
    check_positive_definite({k: values[k] for k in ("X-Z", "X-Y", "Z-Y")}, ("X", "Z", "Y"),
                            scenario, file=file)
    return moderation_from_correlations(values, binary_moderator=binary)


def moderation_matrix(design):
    """The correlation matrix of X, Z, XZ and Y a moderation design implies (true scores):
    corr(X, Y) = x + r z, corr(Z, Y) = z + r x, corr(XZ, Y) = xz sqrt(Var(XZ)), and the
    centred product uncorrelated with X and Z.

    Examples
    --------
    >>> from pooler.planning.simdesign import Moderation
    >>> moderation_matrix(Moderation(0.3, 0.2, 0.1)).round(3)[3].tolist()
    [0.3, 0.2, 0.1, 1.0]
    """
    import numpy as np
    r, x, z, i = design.xz_r, design.x_effect, design.z_effect, design.interaction
    rxy, rzy, rpy = x + r * z, z + r * x, i * np.sqrt(design.product_variance())
    return np.array([[1, r, 0, rxy], [r, 1, 0, rzy], [0, 0, 1, rpy], [rxy, rzy, rpy, 1]])


def option_hint(design_name: str, pair: str) -> str:
    """The ``pooler paths`` option that gives ``pair`` as a correlation, or ''."""
    if design_name == "moderation":
        return "--xz-r" if pair == "X-Z" else ""
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
