"""Power for mediation and moderation designs, by simulation.

Each design is a frozen dataclass of standardized paths. It is checked on creation (the paths
must define a valid covariance matrix, every residual variance positive) and knows how to
draw stacked replications ``(reps, n, variables)`` and which regressions analyse them. The
engine fits every regression of a batch of replications at once by closed-form least squares
on sample-centred data (normal equations solved for the whole stack), tests each path with its
t test and each indirect effect with the chosen test, and counts rejections.

Designs (:data:`DESIGNS`)::

    simple-mediation     X -> M -> Y              paths a, b, direct c'
    parallel-mediation   X -> M1..Mk -> Y, k=2-4  a_i, b_i, c', residual correlation of the M_i
    serial-mediation     X -> M1 -> M2 -> Y       a1, a2, d21, b1, b2, c'
    moderation           Y = x X + z Z + xz XZ    corr(X, Z), reliabilities, binary Z

Tests of an indirect effect (:data:`TESTS`): ``joint`` (every component path significant),
``monte-carlo`` (Monte Carlo confidence interval, Preacher & Selig 2012), ``bootstrap``
(percentile bootstrap; slow, fewer replications by default) and ``sobel`` (first-order delta
method, Sobel 1982; for comparison only: it is known to be low-powered, MacKinnon et al. 2002).

Seeds: every work unit (a chunk of replications at one n) draws from
``numpy.random.SeedSequence(seed, spawn_key=(stream, stage, n, chunk))``, so the results do
not depend on the number of worker processes, nor on whether they run locally or on a
dask.distributed cluster.

References
----------
.. [C88] Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences* (2nd ed.).
   Erlbaum. Ch. 9 (F test of a set of predictors, f^2, lambda = f^2 N).
.. [PS12] Preacher, K. J., & Selig, J. P. (2012). Advantages of Monte Carlo confidence
   intervals for indirect effects. *Communication Methods and Measures*, 6(2), 77-98.
.. [FM07] Fritz, M. S., & MacKinnon, D. P. (2007). Required sample size to detect the mediated
   effect. *Psychological Science*, 18(3), 233-239.
.. [S82] Sobel, M. E. (1982). Asymptotic confidence intervals for indirect effects in
   structural equation models. *Sociological Methodology*, 13, 290-312.
.. [M02] MacKinnon, D. P., Lockwood, C. M., Hoffman, J. M., West, S. G., & Sheets, V. (2002).
   A comparison of methods to test mediation and other intervening variable effects.
   *Psychological Methods*, 7(1), 83-104.
.. [BM78] Bohrnstedt, G. W., & Marwell, G. (1978). The reliability of products of two random
   variables. *Sociological Methodology*, 9, 254-273.
.. [BJ83] Busemeyer, J. R., & Jones, L. E. (1983). Analysis of multiplicative combination
   rules when the causal variables are measured with error. *Psychological Bulletin*, 93(3),
   549-562.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy import special as sp

from pooler._results import Interval, NotEstimable, to_jsonable
from pooler._threads import one_blas_thread
from pooler.errors import OptionError
from pooler.planning.parallel import ParallelRunner

#: Replications per work unit (the unit of parallel work and of seeding).
CHUNK = 250
#: Upper bound on the floats of one batch of stacked data (memory stays ~32 MB per worker).
BATCH_FLOATS = 4_000_000
#: Largest n the sample-size search tries.
N_MAX = 100_000


# --------------------------------------------------------------------------------------------
# Covariance of a recursive linear model with standardized variables
# --------------------------------------------------------------------------------------------

def standardized_covariance(coef: np.ndarray, resid_r: np.ndarray, names) -> tuple:
    """Covariance matrix of a recursive path model whose variables all have variance 1.

    ``coef[k, j]`` is the path from variable j to variable k (j < k; strictly lower
    triangular); ``resid_r`` the correlation matrix of the residuals. With T = (I - B)^-1 and
    residual covariance Psi = D R D, Var(V) = T Psi T'. The residual SDs D are solved in order
    so that every diagonal element is 1: for variable k,
    D_k^2 + 2 D_k c_k + q_k = 1 with c_k = sum_{j<k} T_kj D_j R_kj and q_k the part of the
    variance that flows in from earlier variables; a positive root exists only if q_k < 1.

    Returns ``(sigma, residual_variances)``; raises :class:`OptionError` naming the variable
    whose paths explain all of its variance or more.

    Examples
    --------
    >>> B = np.array([[0, 0, 0], [0.5, 0, 0], [0.2, 0.4, 0]])
    >>> s, psi = standardized_covariance(B, np.eye(3), "XMY")
    >>> np.round(np.diag(s), 12).tolist(), round(float(psi[2]), 3)
    ([1.0, 1.0, 1.0], 0.72)
    """
    v = coef.shape[0]
    t = np.linalg.inv(np.eye(v) - coef)
    d = np.zeros(v)
    for k in range(v):
        c = float(np.sum(t[k, :k] * d[:k] * resid_r[k, :k]))
        tk = t[k, :k] * d[:k]
        q = float(tk @ resid_r[:k, :k] @ tk)
        if q >= 1 - 1e-9:
            raise OptionError(
                f"impossible paths: the paths into {names[k]} explain {q:.3f} of its variance "
                f"(standardized paths must leave a positive residual variance); make the "
                f"paths into {names[k]} smaller")
        d[k] = -c + math.sqrt(c * c + 1 - q)
    sigma = t @ (np.outer(d, d) * resid_r) @ t.T
    return sigma, d ** 2


def product_reliability(rel_x: float, rel_z: float, r_xz: float = 0.0) -> float:
    """Reliability of the product of two centred, jointly normal measured variables.

    (rel_x rel_z + r^2) / (1 + r^2), r the correlation of the observed scores
    (Bohrnstedt & Marwell 1978, eq. for centred variables); with r = 0 it is rel_x rel_z
    (Busemeyer & Jones 1983).

    Examples
    --------
    >>> round(product_reliability(0.8, 0.7), 6)
    0.56
    >>> round(product_reliability(0.8, 0.8, 0.3), 4)
    0.6697
    """
    return (rel_x * rel_z + r_xz ** 2) / (1 + r_xz ** 2)


# --------------------------------------------------------------------------------------------
# Designs
# --------------------------------------------------------------------------------------------

def _check_path(name, value):
    if not isinstance(value, (int, float)) or not math.isfinite(value) or abs(value) >= 1:
        raise OptionError(f"`{name}` must be a standardized path strictly between -1 and 1, "
                          f"not {value!r}")


class _Linear:
    """Shared machinery of the mediation designs: a recursive model of standardized
    variables, drawn from its implied covariance matrix."""

    has_indirect = True

    def _setup(self, names, coef, resid_r):
        sigma, psi = standardized_covariance(coef, resid_r, names)
        object.__setattr__(self, "_names", tuple(names))
        object.__setattr__(self, "_chol", np.linalg.cholesky(sigma))
        object.__setattr__(self, "_psi", psi)

    @property
    def variables(self) -> tuple:
        return self._names

    def residual_variances(self) -> dict:
        """Residual variance of each variable (1 - R^2 of its equation)."""
        return {n: float(p) for n, p in zip(self._names, self._psi)}

    def simulate(self, rng, reps: int, n: int) -> np.ndarray:
        """``(reps, n, variables)`` draws from the standardized model."""
        z = rng.standard_normal((reps, n, len(self._names)))
        return z @ self._chol.T


@dataclass(frozen=True)
class SimpleMediation(_Linear):
    """X -> M -> Y with standardized paths ``a`` (X-M), ``b`` (M-Y) and ``direct`` (X-Y).

    Examples
    --------
    >>> d = SimpleMediation(a=0.39, b=0.39)
    >>> d.true_values()["X-M-Y"]
    0.1521
    >>> SimpleMediation(a=0.8, b=0.7, direct=0.5)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    pooler.errors.OptionError: impossible paths: the paths into Y explain 1.300 of its variance...
    """

    a: float
    b: float
    direct: float = 0.0
    name = "simple-mediation"

    def __post_init__(self):
        for k in ("a", "b", "direct"):
            _check_path(k, getattr(self, k))
        coef = np.zeros((3, 3))
        coef[1, 0], coef[2, 0], coef[2, 1] = self.a, self.direct, self.b
        self._setup(("X", "M", "Y"), coef, np.eye(3))

    regressions = ((("M",), ("X",)), (("Y",), ("X", "M")))
    paths = {"X-M": ("M", "X"), "M-Y": ("Y", "M"), "X-Y": ("Y", "X")}
    indirect = {"X-M-Y": ("X-M", "M-Y")}

    def true_values(self) -> dict:
        return {"X-M": self.a, "M-Y": self.b, "X-Y": self.direct,
                "X-M-Y": round(self.a * self.b, 12)}

    def describe(self) -> str:
        return f"simple mediation: a = {self.a:.3g}, b = {self.b:.3g}, direct = {self.direct:.3g}"


@dataclass(frozen=True)
class ParallelMediation(_Linear):
    """X -> M1..Mk -> Y (k = 2-4 mediators) with paths ``a`` (X-Mi), ``b`` (Mi-Y),
    ``direct`` (X-Y) and ``mediator_r``, the correlation of the mediators' residuals.

    Examples
    --------
    >>> d = ParallelMediation(a=(0.3, 0.25), b=(0.3, 0.2), direct=0.1)
    >>> sorted(d.indirect)
    ['X-M1-Y', 'X-M2-Y']
    >>> ParallelMediation((0.3, 0.3, 0.3), (0.2, 0.2, 0.2), mediator_r=-0.6)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    pooler.errors.OptionError: `mediator_r` = -0.6 with 3 mediators is not a valid correlation...
    """

    a: tuple
    b: tuple
    direct: float = 0.0
    mediator_r: float = 0.0
    name = "parallel-mediation"

    def __post_init__(self):
        a, b = tuple(float(x) for x in self.a), tuple(float(x) for x in self.b)
        object.__setattr__(self, "a", a)
        object.__setattr__(self, "b", b)
        k = len(a)
        if not 2 <= k <= 4 or len(b) != k:
            raise OptionError(f"parallel mediation needs 2 to 4 mediators with one `a` and one "
                              f"`b` path each; got {len(a)} a and {len(b)} b paths")
        for i in range(k):
            _check_path(f"a{i + 1}", a[i])
            _check_path(f"b{i + 1}", b[i])
        _check_path("direct", self.direct)
        r = self.mediator_r
        if not (-1 / (k - 1) < r < 1):
            raise OptionError(f"`mediator_r` = {r:.3g} with {k} mediators is not a valid "
                              f"correlation matrix: it must lie above -1/(k-1) = "
                              f"{-1 / (k - 1):.3g} and below 1")
        names = ("X",) + tuple(f"M{i + 1}" for i in range(k)) + ("Y",)
        coef = np.zeros((k + 2, k + 2))
        coef[1:k + 1, 0] = a
        coef[k + 1, 0] = self.direct
        coef[k + 1, 1:k + 1] = b
        resid = np.eye(k + 2)
        resid[1:k + 1, 1:k + 1] = r
        np.fill_diagonal(resid, 1.0)
        self._setup(names, coef, resid)
        ms = names[1:-1]
        object.__setattr__(self, "regressions", ((ms, ("X",)), (("Y",), ("X",) + ms)))
        paths = {f"X-{m}": (m, "X") for m in ms}
        paths.update({f"{m}-Y": ("Y", m) for m in ms})
        paths["X-Y"] = ("Y", "X")
        object.__setattr__(self, "paths", paths)
        object.__setattr__(self, "indirect", {f"X-{m}-Y": (f"X-{m}", f"{m}-Y") for m in ms})

    regressions: tuple = field(init=False, repr=False, compare=False, default=())
    paths: dict = field(init=False, repr=False, compare=False, default=None)
    indirect: dict = field(init=False, repr=False, compare=False, default=None)

    def true_values(self) -> dict:
        out = {}
        for i, (ai, bi) in enumerate(zip(self.a, self.b), start=1):
            out[f"X-M{i}"], out[f"M{i}-Y"] = ai, bi
            out[f"X-M{i}-Y"] = round(ai * bi, 12)
        out["X-Y"] = self.direct
        return out

    def describe(self) -> str:
        f = ", ".join
        return (f"parallel mediation: a = ({f(f'{x:.3g}' for x in self.a)}), "
                f"b = ({f(f'{x:.3g}' for x in self.b)}), direct = {self.direct:.3g}, "
                f"mediator residual r = {self.mediator_r:.3g}")


@dataclass(frozen=True)
class SerialMediation(_Linear):
    """X -> M1 -> M2 -> Y: ``a1`` (X-M1), ``a2`` (X-M2), ``m1_m2`` (M1-M2, often d21),
    ``b1`` (M1-Y), ``b2`` (M2-Y), ``direct`` (X-Y). Indirect effects: X-M1-Y = a1 b1,
    X-M2-Y = a2 b2 and the serial X-M1-M2-Y = a1 d21 b2.

    Examples
    --------
    >>> d = SerialMediation(a1=0.4, m1_m2=0.4, b2=0.4)
    >>> d.true_values()["X-M1-M2-Y"]
    0.064
    """

    a1: float
    m1_m2: float
    b2: float
    a2: float = 0.0
    b1: float = 0.0
    direct: float = 0.0
    name = "serial-mediation"

    def __post_init__(self):
        for k in ("a1", "m1_m2", "b2", "a2", "b1", "direct"):
            _check_path(k, getattr(self, k))
        coef = np.zeros((4, 4))
        coef[1, 0] = self.a1
        coef[2, 0], coef[2, 1] = self.a2, self.m1_m2
        coef[3, 0], coef[3, 1], coef[3, 2] = self.direct, self.b1, self.b2
        self._setup(("X", "M1", "M2", "Y"), coef, np.eye(4))

    regressions = ((("M1",), ("X",)), (("M2",), ("X", "M1")), (("Y",), ("X", "M1", "M2")))
    paths = {"X-M1": ("M1", "X"), "X-M2": ("M2", "X"), "M1-M2": ("M2", "M1"),
             "M1-Y": ("Y", "M1"), "M2-Y": ("Y", "M2"), "X-Y": ("Y", "X")}
    indirect = {"X-M1-Y": ("X-M1", "M1-Y"), "X-M2-Y": ("X-M2", "M2-Y"),
                "X-M1-M2-Y": ("X-M1", "M1-M2", "M2-Y")}

    def true_values(self) -> dict:
        return {"X-M1": self.a1, "X-M2": self.a2, "M1-M2": self.m1_m2, "M1-Y": self.b1,
                "M2-Y": self.b2, "X-Y": self.direct,
                "X-M1-Y": round(self.a1 * self.b1, 12), "X-M2-Y": round(self.a2 * self.b2, 12),
                "X-M1-M2-Y": round(self.a1 * self.m1_m2 * self.b2, 12)}

    def describe(self) -> str:
        return (f"serial mediation: a1 = {self.a1:.3g}, M1-M2 = {self.m1_m2:.3g}, "
                f"b2 = {self.b2:.3g}, a2 = {self.a2:.3g}, b1 = {self.b1:.3g}, "
                f"direct = {self.direct:.3g}")


@dataclass(frozen=True)
class Moderation:
    """Y = x X + z Z + xz XZ + e with X, Z standardized (true scores).

    ``interaction`` is the coefficient of the product of the standardized X and Z, so the
    slope of X is ``x_effect + interaction`` at Z = +1 SD and ``x_effect - interaction`` at
    -1 SD (:meth:`from_slopes` takes those two slopes instead). ``xz_r`` is corr(X, Z). A
    ``binary_moderator`` is two equal groups coded -1/+1 (so its +-1 SD are the groups).
    Measurement error is simulated directly: observed = true + error with the given
    reliability; the analysis multiplies the sample-centred observed scores.

    Examples
    --------
    >>> m = Moderation.from_slopes(0.3, 0.15)
    >>> round(m.x_effect, 6), round(m.interaction, 6)
    (0.225, 0.075)
    >>> Moderation(0.6, 0.5, 0.4, xz_r=0.5)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    pooler.errors.OptionError: impossible paths: X, Z and their product explain 1.110 of...
    """

    x_effect: float
    z_effect: float
    interaction: float
    xz_r: float = 0.0
    x_reliability: float = 1.0
    z_reliability: float = 1.0
    binary_moderator: bool = False
    name = "moderation"
    has_indirect = False
    variables = ("X", "Z", "XZ", "Y")
    regressions = ((("Y",), ("X", "Z", "XZ")),)
    paths = {"X-Y": ("Y", "X"), "Z-Y": ("Y", "Z"), "XZ-Y": ("Y", "XZ")}
    indirect: dict = field(init=False, repr=False, compare=False, default_factory=dict)

    @classmethod
    def from_slopes(cls, slope_high: float, slope_low: float, z_effect: float = 0.0,
                    **kw) -> "Moderation":
        """The interaction as the slope of X at Z = +1 SD (``slope_high``) and at -1 SD
        (``slope_low``): x_effect = their mean, interaction = half their difference."""
        return cls((slope_high + slope_low) / 2, z_effect, (slope_high - slope_low) / 2, **kw)

    def __post_init__(self):
        for k in ("x_effect", "z_effect", "interaction"):
            _check_path(k, getattr(self, k))
        if not -1 < self.xz_r < 1:
            raise OptionError(f"`xz_r` must lie strictly between -1 and 1, not {self.xz_r!r}")
        for k in ("x_reliability", "z_reliability"):
            v = getattr(self, k)
            if not 0 < v <= 1:
                raise OptionError(f"`{k}` must lie in (0, 1], not {v!r}")
        if self.binary_moderator and self.z_reliability != 1:
            raise OptionError("a binary moderator is taken as measured without error "
                              "(misclassification is not modelled): leave its reliability at 1")
        r = self.xz_r
        explained = (self.x_effect ** 2 + self.z_effect ** 2
                     + 2 * r * self.x_effect * self.z_effect
                     + self.interaction ** 2 * self.product_variance())
        if explained >= 1 - 1e-9:
            raise OptionError(
                f"impossible paths: X, Z and their product explain {explained:.3f} of the "
                f"variance of Y (standardized paths must leave a positive residual "
                f"variance); make the effects smaller")
        object.__setattr__(self, "_resid_sd", math.sqrt(1 - explained))

    def product_variance(self) -> float:
        """Var(XZ) of the true scores: 1 + r^2 for jointly normal X, Z (E X^2 Z^2 = 1 + 2 r^2);
        1 - r^2 for a -1/+1 moderator."""
        return 1 - self.xz_r ** 2 if self.binary_moderator else 1 + self.xz_r ** 2

    def residual_variances(self) -> dict:
        return {"Y": self._resid_sd ** 2}

    def interaction_f2(self) -> float:
        """Cohen's f^2 of the product term with perfectly reliable measures:
        xz^2 Var(XZ) / (1 - R^2) (Cohen 1988, eq. 9.2.3 for a one-predictor increment)."""
        return self.interaction ** 2 * self.product_variance() / self._resid_sd ** 2

    def simulate(self, rng, reps: int, n: int) -> np.ndarray:
        r = self.xz_r
        if self.binary_moderator:
            z = np.where(np.arange(n) < n // 2, -1.0, 1.0)
            z = np.broadcast_to(z, (reps, n))
        else:
            z = rng.standard_normal((reps, n))
        x = r * z + math.sqrt(1 - r * r) * rng.standard_normal((reps, n))
        y = (self.x_effect * x + self.z_effect * z + self.interaction * x * z
             + self._resid_sd * rng.standard_normal((reps, n)))
        if self.x_reliability < 1:
            x = x + math.sqrt((1 - self.x_reliability) / self.x_reliability) * \
                rng.standard_normal((reps, n))
        if self.z_reliability < 1:
            z = z + math.sqrt((1 - self.z_reliability) / self.z_reliability) * \
                rng.standard_normal((reps, n))
        xc = x - x.mean(axis=1, keepdims=True)
        zc = z - z.mean(axis=1, keepdims=True)
        return np.stack([xc, zc, xc * zc, y], axis=-1)

    def true_values(self) -> dict:
        return {"X-Y": self.x_effect, "Z-Y": self.z_effect, "XZ-Y": self.interaction}

    def describe(self) -> str:
        kind = "binary" if self.binary_moderator else "continuous"
        return (f"moderation ({kind} moderator): X = {self.x_effect:.3g}, Z = {self.z_effect:.3g}, "
                f"XZ = {self.interaction:.3g} (slope of X {self.x_effect + self.interaction:.3g} "
                f"at +1 SD of Z, {self.x_effect - self.interaction:.3g} at -1 SD), "
                f"corr(X, Z) = {self.xz_r:.3g}, reliabilities {self.x_reliability:.3g} and "
                f"{self.z_reliability:.3g}")


#: The simulated designs, by the name the command line uses.
DESIGNS = {"simple-mediation": SimpleMediation, "parallel-mediation": ParallelMediation,
           "serial-mediation": SerialMediation, "moderation": Moderation}


@dataclass(frozen=True)
class IndirectTest:
    """A test of an indirect effect."""

    name: str
    label: str
    note: str = ""
    default_reps: int = 2000


#: Tests of an indirect effect, by name.
TESTS = {
    "joint": IndirectTest("joint", "joint significance of every component path"),
    "monte-carlo": IndirectTest("monte-carlo", "Monte Carlo confidence interval "
                                "(Preacher & Selig 2012)"),
    "bootstrap": IndirectTest("bootstrap", "percentile bootstrap confidence interval",
                              "slow: fewer replications by default", 400),
    "sobel": IndirectTest("sobel", "Sobel's first-order z test (Sobel 1982)",
                          "for comparison only: low-powered (MacKinnon et al. 2002)"),
}


# --------------------------------------------------------------------------------------------
# The engine: one chunk of replications at one n
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Plan:
    """What a chunk computes: resolved once per design, shipped to the workers."""

    design: object
    test: str | None
    alpha: float
    draws: int
    resamples: int


def _targets(design, test) -> list:
    """Names of what gets a power estimate, in report order."""
    out = list(design.paths)
    if design.has_indirect and test is not None:
        out += list(design.indirect)
        if len(design.indirect) > 1:
            if test != "joint":
                out.append("total indirect")
            out.append("all indirect")
    return out


def _fit(data, design, with_cov=True):
    """Least-squares fit of every regression of the design on stacked, centred data.

    Returns ``theta`` (batch, q) for the paths in ``design.paths`` order and, with
    ``with_cov``, their covariance ``V`` (batch, q, q) and the residual df of each path.
    Regressions that share their predictors are fitted as one multivariate regression, so the
    covariance of their coefficients is S (x) (X'X)^-1 (S the residual cross-products / df).
    Paths in different regressions of a recursive model are asymptotically independent.
    """
    idx = {v: i for i, v in enumerate(design.variables)}
    n = data.shape[-2]
    groups = []
    for outs, preds in design.regressions:
        p = data[..., [idx[v] for v in preds]]
        o = data[..., [idx[v] for v in outs]]
        pt = np.swapaxes(p, -1, -2)
        inv = np.linalg.inv(pt @ p)
        coef = inv @ (pt @ o)
        s = None
        if with_cov:
            res = o - p @ coef
            s = (np.swapaxes(res, -1, -2) @ res) / (n - len(preds) - 1)
        groups.append((outs, preds, coef, inv, s))
    where = {}
    for g, (outs, preds, *_rest) in enumerate(groups):
        for m, o in enumerate(outs):
            for k, p in enumerate(preds):
                where[(o, p)] = (g, k, m)
    loc = [where[design.paths[name]] for name in design.paths]
    theta = np.stack([groups[g][2][..., k, m] for g, k, m in loc], axis=-1)
    if not with_cov:
        return theta
    q = len(loc)
    cov = np.zeros(theta.shape + (q,))
    for i, (gi, ki, mi) in enumerate(loc):
        for j, (gj, kj, mj) in enumerate(loc):
            if gi == gj:
                _, _, _, inv, s = groups[gi]
                cov[..., i, j] = s[..., mi, mj] * inv[..., ki, kj]
    df = np.array([n - len(groups[g][1]) - 1 for g, _, _ in loc], float)
    return theta, cov, df


def _effects(theta, design):
    """Specific indirect effects (products of their paths) and, with several, their total.

    ``theta`` holds the path values: an array (..., q) in ``design.paths`` order, or a list
    of q arrays (one per path, contiguous, as the Monte Carlo draws are kept).
    """
    names = list(design.paths)
    if isinstance(theta, list):
        get = {name: theta[i] for i, name in enumerate(names)}
    else:
        get = {name: theta[..., i] for i, name in enumerate(names)}
    out = {}
    for name, comp in design.indirect.items():
        v = get[comp[0]]
        for c in comp[1:]:
            v = v * get[c]
        out[name] = v
    if len(out) > 1:
        out["total indirect"] = sum(out.values())
    return out


def _percentile_rejects(draws, alpha, truth):
    """Percentile interval along the last axis of D draws: (excludes 0, covers truth).

    The interval's ends are the order statistics of 0-based rank k_lo = floor(D alpha/2) and
    k_hi = ceil(D (1 - alpha/2)) - 1, so each comparison is a count rather than a sort:
    lower > x exactly when at most k_lo draws are <= x, upper < x exactly when more than k_hi
    draws are < x.
    """
    d = draws.shape[-1]
    k_lo = math.floor(d * alpha / 2)
    k_hi = math.ceil(d * (1 - alpha / 2)) - 1

    def below(x, strict):
        return np.count_nonzero(draws < x if strict else draws <= x, axis=-1)
    excludes = (below(0.0, False) <= k_lo) | (below(0.0, True) > k_hi)
    covers = (below(truth, False) > k_lo) & (below(truth, True) <= k_hi)
    return excludes, covers


def _run_chunk(args):
    """Simulate one chunk; returns {(target, kind): count} with kind 'reject' or 'cover'."""
    plan, n, reps, key = args
    with one_blas_thread():
        return _chunk(plan, n, reps, key)


@dataclass
class _Batch:
    """One batch of fitted replications, as the tests of an indirect effect see it."""

    design: object
    plan: _Plan
    rng: object
    data: np.ndarray   # (b, n, variables), centred
    theta: np.ndarray  # (b, q) path estimates
    cov: np.ndarray    # (b, q, q) their covariance
    sig: np.ndarray    # (b, q) path t test significant
    truth: dict

    @property
    def col(self):
        return {name: i for i, name in enumerate(self.design.paths)}

    def true(self, name):
        return self.truth.get(name, _total(self.truth, self.design))


def _test_joint(bt):
    """Every component path significant (the joint significance test)."""
    col = bt.col
    return {name: np.all(bt.sig[:, [col[c] for c in comp]], axis=1)
            for name, comp in bt.design.indirect.items()}, {}


def _test_sobel(bt):
    """First-order delta-method z test (Sobel 1982): Var(effect) = g' V g, g the gradient of
    the product (or of the sum of products, for the total) with respect to the paths."""
    col, theta = bt.col, bt.theta
    grads = {}
    for name, comp in bt.design.indirect.items():
        g = np.zeros_like(theta)
        for c in comp:
            part = np.ones(theta.shape[0])
            for o in comp:
                if o != c:
                    part = part * theta[:, col[o]]
            g[:, col[c]] += part
        grads[name] = g
    if len(grads) > 1:
        grads["total indirect"] = sum(grads.values())
    z = sp.ndtri(1 - bt.plan.alpha / 2)
    est = _effects(theta, bt.design)
    rej = {}
    for name, g in grads.items():
        var = np.einsum("bi,bij,bj->b", g, bt.cov, g)
        rej[name] = np.abs(est[name]) > z * np.sqrt(var)
    return rej, {}


def _test_monte_carlo(bt):
    """Monte Carlo confidence interval (Preacher & Selig 2012): per replication, ``draws``
    path vectors from Normal(estimates, their covariance), percentile interval of the
    effect."""
    col, design = bt.col, bt.design
    # draw only the paths that enter an indirect effect
    used = sorted({col[c] for comp in design.indirect.values() for c in comp})
    chol = np.linalg.cholesky(bt.cov[:, used][:, :, used]).astype(np.float32)
    # theta + L z in single precision, one contiguous array per path (the draws only place
    # percentiles; float32 halves the memory traffic that dominates here)
    zdraw = bt.rng.standard_normal((len(used), bt.theta.shape[0], bt.plan.draws),
                                   dtype=np.float32)
    sims = []
    for r in range(len(used)):
        acc = bt.theta[:, used[r], None].astype(np.float32) + chol[:, r, 0, None] * zdraw[0]
        for j in range(1, r + 1):
            acc += chol[:, r, j, None] * zdraw[j]
        sims.append(acc)
    rej, cover = {}, {}
    for name, eff in _effects(sims, _SubDesign(design, used)).items():
        rej[name], cover[name] = _percentile_rejects(eff, bt.plan.alpha, bt.true(name))
    return rej, cover


def _test_bootstrap(bt):
    """Percentile bootstrap: ``resamples`` resamples of each replication's rows, the
    regressions refitted on each."""
    b, n = bt.data.shape[:2]
    names = list(_effects(bt.theta, bt.design))
    rej = {name: np.zeros(b, bool) for name in names}
    cover = {name: np.zeros(b, bool) for name in names}
    for i in range(b):
        rows = bt.rng.integers(0, n, (bt.plan.resamples, n))
        boot = bt.data[i][rows]
        boot = boot - boot.mean(axis=1, keepdims=True)
        for name, eff in _effects(_fit(boot, bt.design, with_cov=False), bt.design).items():
            rej[name][i], cover[name][i] = _percentile_rejects(eff, bt.plan.alpha,
                                                               bt.true(name))
    return rej, cover


#: The computation behind each test of :data:`TESTS`.
_TEST_RUNS = {"joint": _test_joint, "sobel": _test_sobel, "monte-carlo": _test_monte_carlo,
              "bootstrap": _test_bootstrap}


def _chunk(plan, n, reps, key):
    design, test, alpha = plan.design, plan.test, plan.alpha
    rng = np.random.default_rng(np.random.SeedSequence(key[0], spawn_key=key[1:]))
    v = len(design.variables)
    q = len(design.paths)
    batch = max(1, min(reps, BATCH_FLOATS // (n * v)))
    if test == "monte-carlo":
        batch = max(1, min(batch, BATCH_FLOATS // (plan.draws * q)))
    truth = design.true_values()
    counts: dict = {}

    def add(name, kind, hits):
        counts[(name, kind)] = counts.get((name, kind), 0) + int(np.count_nonzero(hits))

    done = 0
    while done < reps:
        b = min(batch, reps - done)
        done += b
        data = design.simulate(rng, b, n)
        data = data - data.mean(axis=1, keepdims=True)
        theta, cov, df = _fit(data, design)
        se = np.sqrt(np.diagonal(cov, axis1=-2, axis2=-1))
        crit = sp.stdtrit(df, 1 - alpha / 2)
        sig = np.abs(theta) > crit * se
        for i, name in enumerate(design.paths):
            add(name, "reject", sig[:, i])
        if not design.has_indirect or test is None:
            continue
        rej, cover = _TEST_RUNS[test](_Batch(design, plan, rng, data, theta, cov, sig, truth))
        for name, hits in rej.items():
            add(name, "reject", hits)
        for name, hits in cover.items():
            add(name, "cover", hits)
        specific = [rej[name] for name in design.indirect]
        if len(specific) > 1:
            add("all indirect", "reject", np.all(np.stack(specific), axis=0))
    return counts


class _SubDesign:
    """The indirect effects of ``design`` over a subset of its paths (columns ``used``)."""

    def __init__(self, design, used):
        names = list(design.paths)
        self.paths = {names[i]: design.paths[names[i]] for i in used}
        self.indirect = design.indirect


def _total(truth, design):
    return round(sum(truth[name] for name in design.indirect), 12)


# --------------------------------------------------------------------------------------------
# Work units (run by pooler.planning.parallel.ParallelRunner)
# --------------------------------------------------------------------------------------------

def _tasks(plan, n, reps, seed, stream, stage):
    chunks = math.ceil(reps / CHUNK)
    return [(plan, n, min(CHUNK, reps - j * CHUNK), (seed, stream, stage, n, j))
            for j in range(chunks)]


def _merge(results) -> dict:
    out: dict = {}
    for r in results:
        for k, v in r.items():
            out[k] = out.get(k, 0) + v
    return out


# --------------------------------------------------------------------------------------------
# Results
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class PowerEstimate:
    """Rejections of one target (a path or an indirect effect) in ``reps`` replications."""

    target: str
    n: int
    reps: int
    rejections: int
    coverage: float | None = None  # of the true value by the interval (interval tests)

    @property
    def power(self) -> float:
        return self.rejections / self.reps

    @property
    def mc_se(self) -> float:
        """Monte Carlo standard error of the power, sqrt(p (1 - p) / reps)."""
        p = self.power
        return math.sqrt(p * (1 - p) / self.reps)

    def to_dict(self) -> dict:
        d = {"target": self.target, "n": self.n, "reps": self.reps,
             "rejections": self.rejections, "power": self.power, "mc_se": self.mc_se}
        if self.coverage is not None:
            d["coverage"] = self.coverage
        return d


def _validate(design, test, alpha, reps, draws, resamples, workers):
    if not hasattr(design, "simulate") or not hasattr(design, "paths"):
        raise OptionError(f"`design` must be one of the simulated designs "
                          f"({', '.join(DESIGNS)}), not {design!r}")
    if design.has_indirect:
        test = "monte-carlo" if test is None else test
        if test not in TESTS:
            raise OptionError(f"`test` must be one of {', '.join(TESTS)}, not {test!r}")
    elif test is not None:
        raise OptionError("moderation has no indirect effect: its paths are tested with t "
                          "tests, so leave `test` unset")
    if not 0 < alpha < 1:
        raise OptionError(f"`alpha` must lie strictly between 0 and 1, not {alpha!r}")
    for name, val, low in (("reps", reps, 1), ("draws", draws, 100),
                           ("resamples", resamples, 100), ("workers", workers, 1)):
        if not isinstance(val, (int, np.integer)) or val < low:
            raise OptionError(f"`{name}` must be an integer of at least {low}, not {val!r}")
    return test


@dataclass(frozen=True)
class PowerResult:
    """Simulated power of every path and indirect effect at one n."""

    design: object
    test: str | None
    alpha: float
    n: int
    seed: int
    estimates: tuple

    def __getitem__(self, target) -> PowerEstimate:
        for e in self.estimates:
            if e.target == target:
                return e
        raise KeyError(target)

    def to_dict(self) -> dict:
        return to_jsonable({"schema": "pooler.paths-power/1", "design": self.design.name,
                            "description": self.design.describe(), "test": self.test,
                            "alpha": self.alpha, "n": self.n, "seed": self.seed,
                            "estimates": [e.to_dict() for e in self.estimates]})

    def to_frame(self):
        import pandas as pd
        return pd.DataFrame([e.to_dict() for e in self.estimates])


def simulate_power(design, n: int, *, test: str | None = None, reps: int | None = None,
                   alpha: float = 0.05, seed: int = 2026, draws: int = 1000,
                   resamples: int = 1000, workers: int = 1, scheduler=None,
                   progress: Callable | None = None, stream: int = 0) -> PowerResult:
    """Simulated power at sample size ``n`` of every path's t test and of each indirect
    effect under ``test``, each with its Monte Carlo SE.

    Parameters
    ----------
    design : one of the :data:`DESIGNS` instances
    n : int
        Total sample size.
    test : {'joint', 'monte-carlo', 'bootstrap', 'sobel'}, optional
        Test of the indirect effects (default ``'monte-carlo'``); leave unset for moderation.
    reps : int, optional
        Replications (default 2,000; 400 for the bootstrap).
    draws, resamples : int
        Monte Carlo draws per replication (Monte Carlo CI); bootstrap resamples per
        replication.
    workers : int
        Local processes (1 = this process). Results do not depend on it.
    scheduler : str or dask.distributed.Client, optional
        Run the chunks on a dask.distributed cluster instead (same results).
    progress : callable(done, total), optional

    Examples
    --------
    >>> res = simulate_power(SimpleMediation(0.3, 0.3), 150, test="joint", reps=500, seed=1)
    >>> e = res["X-M-Y"]
    >>> 0.85 < e.power < 0.97, e.mc_se < 0.02
    (True, True)
    """
    # validation
    test = _validate(design, test, alpha, reps if reps is not None else 1, draws, resamples,
                     workers)
    if not isinstance(n, (int, np.integer)):
        raise OptionError(f"`n` must be an integer, not {n!r}")
    nmin = max(len(p) for _, p in design.regressions) + 3
    if n < nmin:
        raise OptionError(f"`n` must be at least {nmin} for this design, not {n}")
    if reps is None:
        reps = TESTS[test].default_reps if test else 2000
    plan = _Plan(design, test, float(alpha), int(draws), int(resamples))
    with ParallelRunner(workers, scheduler) as runner:
        counts = _merge(runner.map(_run_chunk, _tasks(plan, int(n), reps, seed, stream, 0),
                                   progress))
    return PowerResult(design, test, float(alpha), int(n), seed,
                       _estimates(design, test, int(n), reps, counts))


def _estimates(design, test, n, reps, counts) -> tuple:
    out = []
    for t in _targets(design, test):
        cov = counts.get((t, "cover"))
        out.append(PowerEstimate(t, n, reps, counts.get((t, "reject"), 0),
                                 None if cov is None else cov / reps))
    return tuple(out)


# --------------------------------------------------------------------------------------------
# Sample-size search
# --------------------------------------------------------------------------------------------

def _probit_fit(ns, hits, reps):
    """Binomial maximum-likelihood fit of power(n) = Phi(b0 + b1 sqrt(n)).

    For a Wald-type test the noncentrality grows with sqrt(n), so this is the large-sample
    shape of a single test's power curve; it is smooth and monotone whenever b1 > 0. Returns
    (beta, covariance from the inverse Fisher information), or None if the points do not
    determine an increasing curve.
    """
    from scipy.optimize import minimize
    x = np.sqrt(np.asarray(ns, float))
    h, m = np.asarray(hits, float), np.asarray(reps, float)
    if len(np.unique(x)) < 2:
        return None
    p0 = np.clip((h + 0.5) / (m + 1), 1e-3, 1 - 1e-3)
    start = np.polyfit(x, sp.ndtri(p0), 1)[::-1]
    xs = x / x.max()  # scaled for the optimiser

    def nll(beta):
        eta = beta[0] + beta[1] * xs
        lp, lq = sp.log_ndtr(eta), sp.log_ndtr(-eta)
        # d/d eta of log Phi = phi/Phi = exp(log phi - log Phi)
        lphi = -0.5 * eta * eta - 0.5 * math.log(2 * math.pi)
        g = h * np.exp(lphi - lp) - (m - h) * np.exp(lphi - lq)
        return -float(np.sum(h * lp + (m - h) * lq)), -np.array([g.sum(), (g * xs).sum()])
    res = minimize(nll, np.array([start[0], start[1] * x.max()]), jac=True, method="BFGS")
    b0, b1 = res.x[0], res.x[1] / x.max()
    if not np.all(np.isfinite(res.x)) or b1 <= 0:
        return None
    eta = b0 + b1 * x
    w = m * np.exp(2 * (-0.5 * eta * eta - 0.5 * math.log(2 * math.pi))
                   - sp.log_ndtr(eta) - sp.log_ndtr(-eta))
    info = np.array([[w.sum(), (w * x).sum()], [(w * x).sum(), (w * x * x).sum()]])
    try:
        cov = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        return None
    return np.array([b0, b1]), cov


def _curve_fit(ns, hits, reps):
    """Binomial maximum-likelihood fit of power(n) = Phi(b0 + b1 (n / n_max)^g), g > 0, for
    drawing the whole curve: the power g of n (0.5 for a single Wald test) is free, so the
    slower rise of tests of products and of "all significant" fits too. Monotone whenever
    b1 > 0. Returns (b0, b1, g, n_max) or None."""
    from scipy.optimize import minimize
    x = np.asarray(ns, float)
    h, m = np.asarray(hits, float), np.asarray(reps, float)
    if len(np.unique(x)) < 3:
        return None
    xs = x / x.max()

    def nll(p):
        eta = p[0] + p[1] * xs ** math.exp(min(max(p[2], -5.0), 5.0))
        return -float(np.sum(h * sp.log_ndtr(eta) + (m - h) * sp.log_ndtr(-eta)))
    best = None
    for g0 in (0.25, 0.5, 1.0):
        r = minimize(nll, np.array([-2.0, 4.0, math.log(g0)]), method="Nelder-Mead",
                     options={"xatol": 1e-7, "fatol": 1e-9, "maxiter": 4000})
        if best is None or r.fun < best.fun:
            best = r
    b0, b1, lg = best.x
    if not np.all(np.isfinite(best.x)) or b1 <= 0:
        return None
    return float(b0), float(b1), math.exp(min(max(lg, -5.0), 5.0)), float(x.max())


def _n_from_fit(beta, goal):
    """The n at which the fitted curve reaches ``goal``: ((Phi^-1(goal) - b0) / b1)^2."""
    root = (sp.ndtri(goal) - beta[..., 0]) / beta[..., 1]
    return np.where(root > 0, root, 0.0) ** 2


@dataclass(frozen=True)
class NSolution:
    """The n for one target at one power goal.

    ``interval`` is a 95 % Monte Carlo uncertainty interval for n: the 2.5 and 97.5 %
    points of the n the curve gives when its two parameters are redrawn from their
    large-sample normal distribution (parametric bootstrap of the fit). ``confirmed`` is the
    power simulated afresh at ``n`` with more replications.
    """

    target: str
    goal: float
    n: object
    interval: object
    confirmed: object

    def to_dict(self) -> dict:
        return to_jsonable({"target": self.target, "power": self.goal, "n": self.n,
                            "n_interval": self.interval, "confirmed": self.confirmed})


@dataclass(frozen=True)
class SampleSizeResult:
    """Sample sizes for every target and power goal under one set of paths."""

    label: str
    design: object
    test: str | None
    alpha: float
    seed: int
    solutions: tuple
    points: tuple   # PowerEstimate at every simulated n (stages pooled), for the curves
    fits: dict      # target -> (b0, b1, g, scale): power = Phi(b0 + b1 (n / scale)^g)

    def curve(self, target, ns):
        """Fitted power curve at ``ns`` for ``target``, over all simulated points (None if
        none was fitted). For display: each n in ``solutions`` comes from the local fit
        near it and its confirmation."""
        beta = self.fits.get(target)
        if beta is None:
            return None
        b0, b1, g, scale = beta
        return sp.ndtr(b0 + b1 * (np.asarray(ns, float) / scale) ** g)

    def to_dict(self) -> dict:
        return to_jsonable({
            "scenario": self.label, "design": self.design.name,
            "description": self.design.describe(), "test": self.test, "alpha": self.alpha,
            "seed": self.seed, "solutions": [s.to_dict() for s in self.solutions],
            "points": [p.to_dict() for p in self.points],
            "curves": {k: {"intercept": v[0], "slope": v[1], "power_of_n": v[2],
                           "n_scale": v[3]} for k, v in self.fits.items()}})

    def to_frame(self):
        import pandas as pd
        rows = []
        for s in self.solutions:
            ok = isinstance(s.n, int)
            rows.append({"scenario": self.label, "target": s.target, "power": s.goal,
                         "n": s.n if ok else None,
                         "n_low": s.interval.low if ok else None,
                         "n_high": s.interval.high if ok else None,
                         "confirmed_power": s.confirmed.power if ok else None,
                         "confirmed_mc_se": s.confirmed.mc_se if ok else None})
        return pd.DataFrame(rows)


def _default_targets(design, test):
    """What the search plans for: the interaction (moderation); otherwise every indirect
    effect whose true value is not 0, with two or more of them their total (interval tests),
    and "all indirect" when every specific indirect effect is nonzero."""
    if not design.has_indirect:
        return ["XZ-Y"]
    truth = design.true_values()
    out = [name for name in design.indirect if truth[name] != 0]
    every = len(out) == len(design.indirect)
    if len(out) > 1 and test != "joint":
        out.append("total indirect")
    if len(design.indirect) > 1 and every:
        out.append("all indirect")
    if not out:
        raise OptionError("every indirect effect of these paths is 0: there is no indirect "
                          "effect to plan for")
    return out


def find_n(design, *, test: str | None = None, powers=(0.8, 0.9, 0.95), targets=None,
           alpha: float = 0.05, reps: int | None = None, seed: int = 2026, draws: int = 1000,
           resamples: int = 1000, workers: int = 1, scheduler=None,
           progress: Callable | None = None, label: str = "", stream: int = 0,
           n_max: int = N_MAX, _runner=None) -> SampleSizeResult:
    """Smallest n for each power goal of each target, by simulation over an n grid.

    1. Doubling from a small n (a quarter of ``reps`` per point) until every target's
       power exceeds the largest goal;
    2. eight sample sizes spaced on a log scale across the range where power rises,
       ``reps`` replications each;
    3. for each target, a binomial probit fit of power on sqrt(n) (smooth and monotone),
       first over all points, then over the points within a factor 2 of the solution;
       the solution's 95 % uncertainty interval from the fit's parameter uncertainty;
    4. every solution confirmed with twice ``reps`` fresh replications at its n (all in one
       batch); where the confirmed power misses the goal by more than 3 Monte Carlo SE, the
       confirmation points join the fit and the step is repeated (at most twice more).

    Parameters are those of :func:`simulate_power`, plus ``powers`` (goals), ``targets``
    (default: every indirect effect, the total and "all indirect"; the interaction for
    moderation), ``label`` (scenario name), ``stream`` (separates the random numbers of
    scenarios run with one seed) and ``n_max`` (the largest n tried).

    Examples
    --------
    >>> r = find_n(SimpleMediation(0.39, 0.39), test="joint", powers=(0.8,), reps=400, seed=3)
    >>> s = r.solutions[0]
    >>> 55 < s.n < 85, s.interval.low <= s.n <= s.interval.high
    (True, True)
    """
    # validation
    test = _validate(design, test, alpha, reps if reps is not None else 1, draws, resamples,
                     workers)
    powers = tuple(float(p) for p in powers)
    if not powers or not all(0 < p < 1 for p in powers):
        raise OptionError(f"power goals must lie strictly between 0 and 1, not {powers!r}")
    known = _targets(design, test)
    targets = list(targets) if targets else _default_targets(design, test)
    for t in targets:
        if t not in known:
            raise OptionError(f"unknown target {t!r}; choose from {', '.join(known)}")
    if not isinstance(n_max, (int, np.integer)) or n_max < 20:
        raise OptionError(f"`n_max` must be an integer of at least 20, not {n_max!r}")
    if reps is None:
        reps = 200 if test == "bootstrap" else 1000
    plan = _Plan(design, test, float(alpha), int(draws), int(resamples))
    nmin = max(len(p) for _, p in design.regressions) + 3
    counts: dict = {}  # n -> {target: [hits, reps]}

    def run(runner, ns, r, stage):
        tasks = [t for n in ns for t in _tasks(plan, int(n), r, seed, stream, stage)]
        res = runner.map(_run_chunk, tasks, progress)
        fresh: dict = {}
        for t, c in zip(tasks, res):
            for store in (counts.setdefault(t[1], {}), fresh.setdefault(t[1], {})):
                for tg in known:
                    h, m = store.get(tg, (0, 0))
                    store[tg] = (h + c.get((tg, "reject"), 0), m + t[2])
        return fresh

    def power_at(n, tg):
        h, m = counts[n][tg]
        return h / m

    def fit_of(t, ns=None):
        ns = sorted(counts) if ns is None else ns
        return _probit_fit(ns, [counts[m][t][0] for m in ns], [counts[m][t][1] for m in ns])

    def body(runner):
        top = max(powers)
        n, pilot = nmin, max(100, reps // 4)
        ns = []
        while True:
            run(runner, [n], pilot, 0)
            ns.append(n)
            if all(power_at(n, t) >= max(top, 0.97) for t in targets) or n >= n_max:
                break
            n = min(2 * n, n_max)
        low = [m for m in ns if max(power_at(m, t) for t in targets) < 0.3]
        n_lo, n_hi = (low[-1] if low else ns[0]), ns[-1]
        grid = sorted(set(np.unique(np.round(np.geomspace(n_lo, n_hi, 8)).astype(int))
                          .tolist()) - set(ns))
        if grid:
            run(runner, grid, reps, 1)
        sols, fits, todo = {}, {}, {}
        for t in targets:
            reached = power_at(max(counts), t) >= top
            fit = fit_of(t)
            if fit is None or not reached:
                reason = (f"power stays below {top:g} up to n = {max(counts):,}"
                          if not reached else
                          "the simulated powers do not determine a rising curve")
                for g in powers:
                    sols[(t, g)] = NSolution(t, g, NotEstimable(reason), NotEstimable(reason),
                                             None)
                continue
            for g in powers:
                todo[(t, g)] = fit
        # solve every (target, goal), confirm all the solutions in one batch, repeat the
        # misses with the confirmation points added to the fit (at most three rounds)
        for attempt in range(3):
            chosen = {}
            for (t, g), fit in todo.items():
                n_star = float(_n_from_fit(fit[0], g))
                near = [m for m in sorted(counts) if n_star / 2 <= m <= 2 * n_star]
                if len(near) >= 3:
                    local = fit_of(t, near)
                    if local is not None:
                        fit = todo[(t, g)] = local
                        n_star = float(_n_from_fit(fit[0], g))
                if n_star > n_max:
                    reason = f"the fitted curve reaches {g:g} only beyond n = {n_max:,}"
                    sols[(t, g)] = NSolution(t, g, NotEstimable(reason),
                                             NotEstimable(reason), None)
                else:
                    chosen[(t, g)] = max(nmin, math.ceil(n_star))
            fresh = run(runner, sorted(set(chosen.values())), 2 * reps, 2 + attempt)
            left = {}
            for (t, g), n in chosen.items():
                h, m = fresh[n][t]
                conf = PowerEstimate(t, n, m, h)
                fit = todo[(t, g)]
                if abs(conf.power - g) <= 3 * max(conf.mc_se, 1e-3) or attempt == 2:
                    sols[(t, g)] = NSolution(t, g, n, _n_interval(fit, g, seed, n), conf)
                else:
                    left[(t, g)] = fit_of(t) or fit
            todo = left
            if not todo:
                break
        for t in targets:
            ns = sorted(counts)
            curve = _curve_fit(ns, [counts[m][t][0] for m in ns], [counts[m][t][1] for m in ns])
            if curve is not None:
                fits[t] = curve
        return [sols[(t, g)] for t in targets for g in powers], fits

    if _runner is not None:
        sols, fits = body(_runner)
    else:
        with ParallelRunner(workers, scheduler) as runner:
            sols, fits = body(runner)
    points = tuple(PowerEstimate(t, n, counts[n][t][1], counts[n][t][0])
                   for t in known for n in sorted(counts))
    return SampleSizeResult(label, design, test, float(alpha), seed, tuple(sols), points, fits)


def _n_interval(fit, goal, seed, n):
    """95 % interval of the solved n from the fit's parameter uncertainty (parametric
    bootstrap of the two probit parameters, 4,000 draws)."""
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(99, n)))
    betas = rng.multivariate_normal(fit[0], fit[1], size=4000, method="cholesky")
    betas = betas[betas[:, 1] > 0]
    lo, hi = np.quantile(_n_from_fit(betas, goal), [0.025, 0.975])
    return Interval(float(math.floor(lo)), float(math.ceil(hi)))


def plan_paths(scenarios: dict, **options) -> tuple:
    """:func:`find_n` for several named sets of paths (e.g. optimistic / realistic /
    pessimistic), sharing one pool of workers; each scenario its own random stream."""
    workers = options.pop("workers", 1)
    scheduler = options.pop("scheduler", None)
    with ParallelRunner(workers, scheduler) as runner:
        return tuple(find_n(d, label=lab, stream=i, _runner=runner, **options)
                     for i, (lab, d) in enumerate(scenarios.items()))


# --------------------------------------------------------------------------------------------
# Designs from named paths (a paths file, or pooled literatures of each path)
# --------------------------------------------------------------------------------------------

#: For each design, the path names it takes and the design field each sets. Path names are
#: the ones the results use ("X-M1" is the path from X to M1). Parallel mediation takes
#: X-Mi / Mi-Y for i = 1..4.
PATH_FIELDS = {
    "simple-mediation": {"X-M": "a", "M-Y": "b", "X-Y": "direct"},
    "serial-mediation": {"X-M1": "a1", "M1-M2": "m1_m2", "M2-Y": "b2", "X-M2": "a2",
                         "M1-Y": "b1", "X-Y": "direct"},
    "moderation": {"X-Y": "x_effect", "Z-Y": "z_effect", "XZ-Y": "interaction"},
}
_OPTIONAL = {"X-Y", "X-M2", "M1-Y", "Z-Y"}  # default 0 when not given


def design_from_paths(name: str, paths: dict, *, hints: dict | None = None, **settings):
    """Build the design ``name`` from path values keyed by path name.

    ``settings`` are the design's other fields (``mediator_r``, ``xz_r``, reliabilities,
    ``binary_moderator``). The direct path and the secondary paths of a serial model default
    to 0; any other missing path is an error that names it (and, from ``hints``, how to give
    it).

    Examples
    --------
    >>> design_from_paths("parallel-mediation",
    ...                   {"X-M1": 0.3, "X-M2": 0.2, "M1-Y": 0.3, "M2-Y": 0.2}).describe()
    'parallel mediation: a = (0.3, 0.2), b = (0.3, 0.2), direct = 0, mediator residual r = 0'
    >>> design_from_paths("simple-mediation", {"X-M": 0.3})
    Traceback (most recent call last):
    ...
    pooler.errors.OptionError: simple-mediation needs the path M-Y; give it
    """
    # validation
    if name not in DESIGNS:
        raise OptionError(f"unknown design {name!r}; choose from {', '.join(DESIGNS)}")
    if name == "parallel-mediation":
        k = sum(1 for p in paths if p.startswith("X-M"))
        fields = {f"X-M{i}": None for i in range(1, k + 1)}
        fields.update({f"M{i}-Y": None for i in range(1, k + 1)})
        fields["X-Y"] = "direct"
    else:
        fields = PATH_FIELDS[name]
    unknown = sorted(set(paths) - set(fields))
    if unknown:
        raise OptionError(f"{name} has no path {', '.join(unknown)}; its paths are "
                          f"{', '.join(fields)}")
    missing = [p for p in fields if p not in paths and p not in _OPTIONAL]
    if missing:
        how = [hints[p] for p in missing if hints and p in hints]
        raise OptionError(f"{name} needs the path {', '.join(missing)}; give it"
                          + (f" ({', '.join(how)})" if how else ""))
    if name == "parallel-mediation":
        k = sum(1 for p in fields if p.startswith("X-M"))
        return ParallelMediation(tuple(paths[f"X-M{i}"] for i in range(1, k + 1)),
                                 tuple(paths[f"M{i}-Y"] for i in range(1, k + 1)),
                                 paths.get("X-Y", 0.0), **settings)
    kw = {f: float(paths.get(p, 0.0)) for p, f in fields.items()}
    return DESIGNS[name](**kw, **settings)


def read_paths_file(path) -> dict:
    """Scenarios of path values from a CSV file with the columns ``scenario``, ``path`` and
    ``value`` (one row per path and scenario; header names case-insensitive).

    Returns ``{scenario: {path: value}}`` in the file's order. Mistakes raise
    :class:`~pooler.errors.InputError` with the file, row (header = 1) and column.
    """
    import csv
    from pooler.errors import InputError
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except OSError as exc:
        raise InputError(f"cannot read the paths file: {exc.strerror}", file=str(path))
    if not rows:
        raise InputError("the paths file is empty", file=str(path))
    head = [h.strip().lower() for h in rows[0]]
    need = ("scenario", "path", "value")
    for col in need:
        if col not in head:
            raise InputError(f"the paths file needs the columns scenario, path and value; "
                             f"'{col}' is missing", file=str(path), row=1)
    at = {c: head.index(c) for c in need}
    out: dict = {}
    for i, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        cells = {c: (row[j].strip() if j < len(row) else "") for c, j in at.items()}
        for c in need:
            if not cells[c]:
                raise InputError(f"'{c}' is empty", file=str(path), row=i, column=rows[0][at[c]])
        try:
            value = float(cells["value"])
        except ValueError:
            raise InputError(f"'{cells['value']}' is not a number", file=str(path), row=i,
                             column=rows[0][at["value"]]) from None
        scen = out.setdefault(cells["scenario"], {})
        if cells["path"] in scen:
            raise InputError(f"path {cells['path']} is given twice for scenario "
                             f"{cells['scenario']}", file=str(path), row=i,
                             column=rows[0][at["path"]])
        scen[cells["path"]] = value
    if not out:
        raise InputError("the paths file has no rows", file=str(path))
    return out


def design_from_correlations(name: str, r: dict):
    """A mediation design from the correlations among its variables.

    Literatures usually report correlations, not the standardized paths of one model; as in
    meta-analytic path analysis (Viswesvaran & Ones 1995), the paths are the standardized
    regression coefficients implied by the (pooled) correlation matrix: a_i = r(X, Mi) for
    parallel mediators, and each later equation's coefficients are R_PP^-1 r_PY over its
    predictors P. The residual correlation of parallel mediators is their partial correlation
    given X. ``r`` maps variable pairs written ``"X-M1"`` (either order) to correlations; all
    pairs are needed.

    Examples
    --------
    >>> d = design_from_correlations("simple-mediation", {"X-M": 0.4, "M-Y": 0.3, "X-Y": 0.2})
    >>> round(d.a, 4), round(d.b, 4), round(d.direct, 4)
    (0.4, 0.2619, 0.0952)
    """
    # validation
    if name not in ("simple-mediation", "parallel-mediation", "serial-mediation"):
        raise OptionError(f"paths from correlations are defined for the mediation designs, "
                          f"not {name!r}")
    names = sorted({v for key in r for v in key.split("-")},
                   key=lambda v: (v != "X", v == "Y", v))
    if name == "simple-mediation":
        names = ["X", "M", "Y"]
    elif name == "serial-mediation":
        names = ["X", "M1", "M2", "Y"]
    k = len(names)
    idx = {v: i for i, v in enumerate(names)}
    mat = np.eye(k)
    for key, val in r.items():
        parts = key.split("-")
        if len(parts) != 2 or any(p not in idx for p in parts) or parts[0] == parts[1]:
            raise OptionError(f"{key!r} is not a pair of this design's variables "
                              f"({', '.join(names)})")
        if not -1 < val < 1:
            raise OptionError(f"the correlation {key} = {val!r} must lie between -1 and 1")
        i, j = idx[parts[0]], idx[parts[1]]
        mat[i, j] = mat[j, i] = val
    missing = [f"{names[i]}-{names[j]}" for i in range(k) for j in range(i + 1, k)
               if not any(set(key.split("-")) == {names[i], names[j]} for key in r)]
    if missing:
        raise OptionError(f"the correlation of {', '.join(missing)} is needed")
    if np.linalg.eigvalsh(mat).min() <= 0:
        raise OptionError("these correlations cannot occur together (the matrix is not "
                          "positive definite)")

    def reg(outcome, preds):
        p = [idx[v] for v in preds]
        return np.linalg.solve(mat[np.ix_(p, p)], mat[p, idx[outcome]])
    if name == "simple-mediation":
        c, b = reg("Y", ["X", "M"])
        return SimpleMediation(float(mat[0, 1]), float(b), float(c))
    if name == "serial-mediation":
        a2, d21 = reg("M2", ["X", "M1"])
        c, b1, b2 = reg("Y", ["X", "M1", "M2"])
        return SerialMediation(float(mat[0, 1]), float(d21), float(b2), a2=float(a2),
                               b1=float(b1), direct=float(c))
    ms = names[1:-1]
    a = [float(mat[0, idx[m]]) for m in ms]
    coef = reg("Y", ["X"] + ms)
    partial = [(mat[idx[m1], idx[m2]] - a[i] * a[j]) / math.sqrt((1 - a[i] ** 2) * (1 - a[j] ** 2))
               for i, m1 in enumerate(ms) for j, m2 in enumerate(ms) if i < j]
    if max(partial) - min(partial) > 1e-9:
        raise OptionError("the mediators' partial correlations given X differ "
                          f"({', '.join(f'{p:.3f}' for p in partial)}); pooler simulates one "
                          "common residual correlation: make them equal")
    return ParallelMediation(tuple(a), tuple(float(x) for x in coef[1:]), float(coef[0]),
                             mediator_r=float(partial[0]))


def moderation_from_correlations(r: dict, *, binary_moderator: bool = False) -> Moderation:
    """A moderation design from pooled correlations: ``X-Y``, ``Z-Y``, ``X-Z`` and the
    interaction's partial correlation ``XZ-Y`` (the product term's association with Y given
    X and Z, which is what the t of the interaction coefficient gives).

    The main effects are the standardized coefficients the X, Z, Y correlations imply,
    (x, z) = R_XZ^-1 (r_XY, r_ZY), as in meta-analytic path analysis (Viswesvaran & Ones
    1995); the centred product of symmetric X and Z is uncorrelated with both, so adding it
    leaves them unchanged. The interaction coefficient follows from its partial correlation
    r_p: Cohen's f² of one added predictor is r_p² / (1 - r_p²) (Cohen 1988, eq. 9.2.3 with
    the partial R² of the added term), and f² = xz² Var(XZ) / (1 - R²_main - xz² Var(XZ)),
    so xz = r_p sqrt((1 - R²_main) / Var(XZ)), with R²_main = x r_XY + z r_ZY and Var(XZ) =
    1 + r_XZ² (normal X, Z) or 1 - r_XZ² (a -1/+1 moderator in two equal groups).

    Examples
    --------
    >>> m = moderation_from_correlations({"X-Y": 0.3, "Z-Y": 0.2, "X-Z": 0.0, "XZ-Y": 0.15})
    >>> round(m.x_effect, 4), round(m.z_effect, 4), round(m.interaction, 4)
    (0.3, 0.2, 0.1399)
    >>> r_p = 0.15; round(m.interaction_f2(), 6) == round(r_p ** 2 / (1 - r_p ** 2), 6)
    True
    """
    # validation
    need = ("X-Y", "Z-Y", "X-Z", "XZ-Y")
    missing = [k for k in need if k not in r]
    if missing:
        raise OptionError(f"moderation from correlations needs {', '.join(missing)}")
    for k in need:
        if not -1 < r[k] < 1:
            raise OptionError(f"the correlation {k} = {r[k]!r} must lie between -1 and 1")
    rxz, rxy, rzy, rp = (float(r[k]) for k in ("X-Z", "X-Y", "Z-Y", "XZ-Y"))
    mat = np.array([[1, rxz, rxy], [rxz, 1, rzy], [rxy, rzy, 1]])
    if np.linalg.eigvalsh(mat).min() <= 1e-10:
        raise OptionError("the correlations X-Y, Z-Y and X-Z cannot occur together (their "
                          "matrix is not positive definite)")
    x, z = np.linalg.solve(mat[:2, :2], mat[:2, 2])
    r2_main = x * rxy + z * rzy
    var_xz = 1 - rxz ** 2 if binary_moderator else 1 + rxz ** 2
    xz = rp * math.sqrt((1 - r2_main) / var_xz)
    return Moderation(float(x), float(z), float(xz), xz_r=rxz, binary_moderator=binary_moderator)


def moderation_from_group_correlations(r_high: float, r_low: float, z_y: float = 0.0
                                       ) -> Moderation:
    """A moderation design with a binary moderator (two equal groups coded +1 / -1, X
    independent of the group) from the X-Y correlation within each group and the
    correlation of the group with Y.

    With Y = x X + z G + xz X G + e and Var(Y) = 1, the slope of X in group +1 is
    s_h = x + xz and in group -1 is s_l = x - xz; within a group the X-Y correlation is
    r = s / sqrt(s² + σ²), so s = q σ with q = r / sqrt(1 - r²), and Var(Y) = 1 gives
    σ² = (1 - z²) / (1 + (q_h² + q_l²) / 2); corr(G, Y) = z. Then x = (s_h + s_l) / 2 and
    xz = (s_h - s_l) / 2 (the design's :meth:`Moderation.from_slopes`).

    Examples
    --------
    >>> m = moderation_from_group_correlations(0.4, 0.1, 0.2)
    >>> round(m.x_effect + m.interaction, 4), round(m.x_effect - m.interaction, 4)
    (0.4077, 0.0939)
    """
    # validation
    for name, v in (("r_high", r_high), ("r_low", r_low), ("z_y", z_y)):
        if not -1 < v < 1:
            raise OptionError(f"`{name}` must lie strictly between -1 and 1, not {v!r}")
    qh, ql = (v / math.sqrt(1 - v * v) for v in (r_high, r_low))
    sigma = math.sqrt((1 - z_y ** 2) / (1 + (qh * qh + ql * ql) / 2))
    return Moderation.from_slopes(qh * sigma, ql * sigma, z_effect=float(z_y),
                                  binary_moderator=True)
