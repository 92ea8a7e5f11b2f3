"""Stage 6: power, sample size, smallest detectable effect and assurance.

Only numpy and ``scipy.special`` are imported at module level, so that a quick
``pooler plan --effect 0.3`` starts fast. Everything is vectorised over numpy arrays:
a whole planning grid (effects × powers × alphas) costs about one call per search step.

Designs and the test each is planned for (λ is the noncentrality); each design's power
function, units, labels and description are its entry in the registry
:mod:`pooler.planning.designs`, which :class:`Design` and the functions below read:

============================  ====================================================  ==========
design                        test                                                   effect
============================  ====================================================  ==========
``two-group``                 t, df = n1 + n2 - 2, λ = d √(n1 n2 / (n1 + n2))         d
``paired``                    t, df = n - 1, λ = d_z √n, d_z = d / √(2 (1 - ρ))        d → d_z
``one-sample``                t, df = n - 1, λ = d √n                                  d
``correlation``               Fisher z: z_r √(n - 3) (or the exact distribution of r) r
``ancova``                    t, df = n1 + n2 - 3, λ = λ₀ √B, averaged over B          d
                              λ₀ = d √(n1 n2/(n1 + n2)) / √(1 - ρ²), B ~ Beta((N-2)/2, ½)
``interaction-2x2``           contrast t, df = 4m - 4, λ = d a √m / 2 (m per cell)    d, a
``regression-increment``      F(u, N - p - 1), λ = f² K, averaged over               r → f²
                              K ~ χ²(N - p + u - 1), f² = r² / (1 - r²)
============================  ====================================================  ==========

Every figure is exact (noncentral t, F or the exact distribution of r) except the Fisher z
test of a correlation, which is the usual normal approximation (``exact_r`` gives the exact
one). For ``ancova`` and ``regression-increment`` the covariate or predictors are taken to be
sampled from a normal distribution, and the power is averaged over them by quadrature (see
:mod:`pooler.planning._random_predictors`); ``fixed_covariates=True`` gives instead the power with the
values held fixed — Borm et al.'s λ₀ (the groups exactly balanced on the covariate) and
Cohen's λ = f² N — which overstates the power of a study that samples them.

References
----------
.. [C88] Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
   (2nd ed.). Erlbaum. Ch. 2 (t), ch. 3 (r), ch. 9 (F for multiple regression, λ = f² N
   in the convention used by most software).
.. [C92] Cohen, J. (1992). A power primer. *Psychological Bulletin*, 112(1), 155-159.
.. [BFL] Borm, G. F., Fransen, J., & Lemmens, W. A. J. G. (2007). A simple sample size
   formula for analysis of covariance in randomized clinical trials. *Journal of Clinical
   Epidemiology*, 60(12), 1234-1238.
.. [MD] Morris, S. B., & DeShon, R. P. (2002). *Psychological Methods*, 7(1), 105-125.
.. [OH] O'Hagan, A., Stevens, J. W., & Campbell, M. J. (2005). Assurance in clinical
   trial design. *Pharmaceutical Statistics*, 4(3), 187-201.
.. [GS] Gatsonis, C., & Sampson, A. R. (1989). Multiple correlation: exact power and sample
   size calculations. *Psychological Bulletin*, 106(3), 516-524.
.. [HK] Hotelling, H. (1953). New light on the correlation coefficient and its
   transforms. *JRSS B*, 15(2), 193-232 (density of r).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special as sp

from pooler._results import NotEstimable, to_jsonable
from pooler.planning.design_choices import PLANNED_DESIGNS
from pooler.errors import OptionError

#: The built-in planned designs; each is an entry of the registry :mod:`pooler.planning.designs`,
#: which holds everything a design needs (its test, units, labels and description).
DESIGNS = PLANNED_DESIGNS
ALTERNATIVES = ("two-sided", "greater")
N_MAX = 10_000_000  # per group (or total): beyond this we say "cannot be reached"


@dataclass(frozen=True)
class Design:
    """The planned study.

    Parameters
    ----------
    name : str
        A design registered in :mod:`pooler.planning.designs` (the built-in ones: :data:`DESIGNS`).
    ratio : float
        Allocation n2 / n1 for ``two-group`` and ``ancova`` (default 1).
    planned_r : float
        Planned correlation between the repeated measures (``paired``), used to turn the
        raw-score d into d_z (Morris & DeShon 2002, eq. 11).
    covariate_r : float
        Correlation between covariate (e.g. pre-test) and outcome (``ancova``): the error
        variance shrinks by 1 - ρ² and one df is lost (Borm, Fransen & Lemmens 2007).
    attenuation : float
        ``interaction-2x2``: how much of the simple effect d disappears at the other level
        of the moderator: 1 = it vanishes, 0.5 = it halves, 2 = full crossover.
    predictors_added, predictors_total : int
        ``regression-increment``: u predictors tested, p predictors in the full model.
    exact_r : bool
        ``correlation``: use the exact distribution of r instead of Fisher's z.
    fixed_covariates : bool
        ``ancova``, ``regression-increment``: hold the covariate / predictor values fixed
        (Borm et al. 2007; Cohen 1988, λ = f² N) instead of averaging the power over
        normally distributed ones (the default, exact when they are sampled). The fixed
        figure is the exact power only when the values are set by the design; for sampled
        ones it is a little too high.
    """

    name: str = "two-group"
    ratio: float = 1.0
    planned_r: float = 0.5
    covariate_r: float = 0.5
    attenuation: float = 0.5
    predictors_added: int = 1
    predictors_total: int = 1
    exact_r: bool = False
    fixed_covariates: bool = False

    def __post_init__(self):
        # validation
        self.spec   # an unknown name raises OptionError, listing the registered ones
        if not (0 < self.ratio < math.inf):
            raise OptionError(f"`ratio` (n2/n1) must be a positive number, not {self.ratio!r}")
        if not -1 < self.planned_r < 1:
            raise OptionError(f"`planned_r` must lie strictly between -1 and 1, not {self.planned_r!r}")
        if not -1 < self.covariate_r < 1:
            raise OptionError(f"`covariate_r` must lie strictly between -1 and 1, not {self.covariate_r!r}")
        if not 0 < self.attenuation <= 2:
            raise OptionError(f"`attenuation` must be in (0, 2], not {self.attenuation!r}")
        if not (1 <= self.predictors_added <= self.predictors_total):
            raise OptionError("`predictors_added` must be at least 1 and at most "
                              f"`predictors_total`, not {self.predictors_added!r} of "
                              f"{self.predictors_total!r}")

    @property
    def spec(self):
        """This design's entry in the registry (:class:`pooler.planning.designs.PlannedDesign`)."""
        from pooler.planning.designs import get
        return get(self.name)

    @property
    def grouped(self) -> bool:
        """True when n is counted per group (or per cell), False when it is the total."""
        return self.spec.unit is not None

    @property
    def unit(self) -> str | None:
        """What n counts: "group", "cell", or None when n is the total."""
        return self.spec.unit

    @property
    def metric(self) -> str:
        """The literature metric the design plans on by default: "r" when its test is on a
        correlation, else "d"."""
        return self.spec.metric

    @property
    def n_min(self) -> int:
        return self.spec.n_min(self)

    @property
    def effect_label(self) -> str:
        return self.spec.effect_label

    def n2(self, n1):
        """Size of the second group for ``n1`` in the first (``two-group``, ``ancova``).

        The rounding rule: n2 = ⌈ratio × n1⌉, the smallest whole group keeping the allocation
        at least ``ratio`` (a 1e-9 slack absorbs floating-point error, so ratio 1 gives
        n2 = n1). Power and sample size are computed at these integer sizes.
        """
        n1 = np.asarray(n1)
        return np.ceil(self.ratio * n1 - 1e-9).astype(n1.dtype)

    def n_total(self, n):
        """Total participants for n per group (per cell for the 2x2)."""
        return self.spec.total(self, np.asarray(n))

    def per_unit(self, n_total: int) -> int:
        """n per group (per cell) that a total N allows, rounding down (the total itself
        for designs counted in all)."""
        return self.spec.per_unit(self, n_total)

    def describe(self) -> str:
        extra = self.spec.details(self)
        return self.name + (f" ({extra})" if extra else "")

    def power_basis(self) -> str:
        """How the power is computed, in words, saying whether it is exact."""
        return self.spec.power_basis(self)

    def to_dict(self) -> dict:
        return {"name": self.name, "ratio": self.ratio, "planned_r": self.planned_r,
                "covariate_r": self.covariate_r, "attenuation": self.attenuation,
                "predictors_added": self.predictors_added,
                "predictors_total": self.predictors_total, "exact_r": self.exact_r,
                "fixed_covariates": self.fixed_covariates}


def _design(design) -> Design:
    return design if isinstance(design, Design) else Design(str(design))


def _alt(alternative: str) -> str:
    if alternative not in ALTERNATIVES:
        raise OptionError(f"`alternative` must be 'two-sided' or 'greater', not {alternative!r}")
    return alternative


# ------------------------------------------------------------------ effect scales

def to_design_effect(effect, metric: str, design) -> np.ndarray:
    """The planning effect on the literature's metric (d or r) in the design's own metric.

    d ↔ r use a = 4 (equal groups; Borenstein et al. 2009 eqs. 7.5, 7.7); the paired
    design divides by √(2 (1 - ρ)) (Morris & DeShon 2002, eq. 11); the regression
    increment uses f² = r² / (1 - r²) (Cohen 1988, eq. 9.2.1 for one predictor's
    squared partial correlation).
    """
    des = _design(design)
    e = np.asarray(effect, dtype=float)
    if metric not in ("d", "g", "r", "z"):
        raise OptionError(f"`metric` must be 'd' or 'r', not {metric!r}")
    if metric == "z":
        e, metric = np.tanh(e), "r"
    if des.metric == "r":
        r = e if metric == "r" else e / np.sqrt(e * e + 4)
        return des.spec.to_own(des, r)
    d = e if metric in ("d", "g") else 2 * e / np.sqrt(1 - e * e)
    return des.spec.to_own(des, d)


def from_design_effect(x, metric: str, design) -> np.ndarray:
    """Inverse of :func:`to_design_effect`."""
    des = _design(design)
    x = np.asarray(x, dtype=float)
    if des.metric == "r":
        r = des.spec.from_own(des, x)
        return r if metric in ("r", "z") else 2 * r / np.sqrt(1 - r * r)
    d = des.spec.from_own(des, x)
    return d if metric in ("d", "g") else d / np.sqrt(d * d + 4)


# ------------------------------------------------------------------ power

def _nct_cdf(df, ncp, x):
    """CDF of the noncentral t, ``scipy.special.nctdtr``, made safe and quick at the extremes.

    - Where a rigorous bound puts the answer within 1e-16 of 0 or 1 it is set to 0 or 1
      (identical in double precision once added to a power) instead of calling nctdtr, which
      slows down as |λ| grows (4-9 µs per value for |λ| of 5-40 against 1.2 µs near 0, and
      seconds per value far out, seen with scipy 1.17.1). With T = (Z + λ)/S and
      S² ~ χ²(df)/df, for λ > 0: P(T ≤ x) ≤ Φ(-λ) when x ≤ 0, and for x > 0, for any s₀ > 0,
      P(T ≤ x) ≤ Φ(x s₀ - λ) + P(χ²(df) ≥ df s₀²), taken at s₀ = λ/(2x) and at
      s₀ = (λ - 8.5)/x (where Φ is about 1e-17), whichever is smaller; the mirror image
      holds for λ < 0. Checked against scipy.stats.nct (tests/test_power.py).
    - NaNs that nctdtr returns for some far-tail values (tiny probabilities, df in the
      millions) are replaced by the normal limit, Normal(λ, 1).
    """
    df, ncp, x = np.broadcast_arrays(np.asarray(df, float), np.asarray(ncp, float),
                                     np.asarray(x, float))
    out = np.full(ncp.shape, np.nan)
    big = np.abs(ncp) >= 5     # below this no bound reaches 1e-16
    if big.any():
        a = np.abs(ncp[big])
        f = df[big]
        xs = np.where(ncp[big] > 0, x[big], -x[big])  # mirror λ < 0 onto λ > 0
        with np.errstate(divide="ignore", invalid="ignore"):
            half = np.where(xs > 0, sp.ndtr(-a / 2) + sp.chdtrc(f, f * (a / (2 * xs)) ** 2), 1.0)
            s0 = (a - 8.5) / xs
            tight = np.where((xs > 0) & (s0 > 0), sp.ndtr(-8.5) + sp.chdtrc(f, f * s0 * s0), 1.0)
        bound = np.where(xs <= 0, sp.ndtr(-a), np.minimum(half, tight))
        tiny = bound < 1e-16
        vals = np.where(ncp[big] > 0, 0.0, 1.0)
        sub = out[big]
        sub[tiny] = vals[tiny]
        out[big] = sub
    todo = np.isnan(out)
    if todo.any():
        out[todo] = sp.nctdtr(df[todo], ncp[todo], x[todo])
    bad = np.isnan(out)
    if bad.any():
        out[bad] = sp.ndtr(x[bad] - ncp[bad])
    return out if out.ndim else float(out)


def _t_power(ncp, df, alpha, alternative, upper_only=False):
    """Power of a t-test from the noncentral t (CDF: ``scipy.special.nctdtr``)."""
    if alternative == "two-sided":
        c = sp.stdtrit(df, 1 - alpha / 2)
        upper = 1 - _nct_cdf(df, ncp, c)
        return upper if upper_only else upper + _nct_cdf(df, ncp, -c)
    c = sp.stdtrit(df, 1 - alpha)
    return 1 - _nct_cdf(df, ncp, c)


def _f_power(lam, df1, df2, alpha):
    """Power of an F test from the noncentral F (``scipy.special.ncfdtr``; central F
    when λ = 0, see the scipy pitfall noted in DEVELOPERS.md)."""
    c = sp.fdtri(df1, df2, 1 - alpha)
    lam = np.asarray(lam, dtype=float)
    central = 1 - sp.fdtr(df1, df2, c)
    lam_pos = np.where(lam > 0, lam, 1.0)
    cdf = sp.ncfdtr(df1, df2, lam_pos, c)
    # NaN for very large λ (seen with scipy 1.17.1): use the df2 → ∞ limit, the noncentral
    # chi-square of df1 · F, and failing that the limit the probability stands for
    cdf = np.where(np.isnan(cdf), sp.chndtr(df1 * c, df1, lam_pos), cdf)
    cdf = np.where(np.isnan(cdf), np.where(lam_pos > df1 * c, 0.0, 1.0), cdf)
    return np.where(lam > 0, 1 - cdf, central)


def _r_exact_power(rho, n, alpha, alternative, upper_only=False):
    """Power from the exact density of r (Hotelling 1953, eq. for f(r; ρ, n))."""
    from scipy.integrate import quad
    rho, n, alpha = np.broadcast_arrays(np.asarray(rho, float), np.asarray(n, float),
                                        np.asarray(alpha, float))
    out = np.empty(rho.shape)
    for idx in np.ndindex(rho.shape):
        p, m, a = float(rho[idx]), float(n[idx]), float(alpha[idx])
        df = m - 2
        tc = float(sp.stdtrit(df, 1 - (a / 2 if alternative == "two-sided" else a)))
        rc = tc / math.sqrt(tc * tc + df)
        logc = (math.log(m - 2) + sp.gammaln(m - 1) - sp.gammaln(m - 0.5)
                - 0.5 * math.log(2 * math.pi) + (m - 1) / 2 * math.log1p(-p * p))

        def dens(r):
            return math.exp(logc + (m - 4) / 2 * math.log1p(-r * r)
                            - (m - 1.5) * math.log1p(-p * r)) * \
                sp.hyp2f1(0.5, 0.5, m - 0.5, (1 + p * r) / 2)
        up = quad(dens, rc, 1, points=[p] if rc < p < 1 else None, limit=200)[0]
        lo = 0.0
        if alternative == "two-sided" and not upper_only:
            lo = quad(dens, -1, -rc, points=[p] if -1 < p < -rc else None, limit=200)[0]
        out[idx] = up + lo
    return out


def power_at(effect, n, design="two-group", alpha=0.05, alternative="two-sided", *,
             upper_only=False) -> np.ndarray:
    """Power of the planned test (exact except the Fisher z correlation test; see the
    module docstring).

    Parameters
    ----------
    effect : array_like
        The effect in the design's own metric (see :func:`to_design_effect`): d, d_z, r or f².
    n : array_like
        n per group (per cell for ``interaction-2x2``) or, for designs without groups, the
        total N. For ``two-group`` and ``ancova`` n is the first group; the second has
        ⌈ratio × n⌉ (:meth:`Design.n2`).
    design : str or Design
    alpha : array_like
    alternative : {"two-sided", "greater"}
        ``"greater"`` is the one-tailed test in the hypothesised direction.
    upper_only : bool
        Count only rejections in the hypothesised direction (used by assurance).

    Returns
    -------
    ndarray of power values in [0, 1].

    Examples
    --------
    >>> round(float(power_at(0.5, 64)), 3)   # Cohen (1992): d = .5 needs 64 per group
    0.801
    """
    des = _design(design)
    alternative = _alt(alternative)
    e = np.asarray(effect, dtype=float)
    n = np.asarray(n, dtype=float)
    alpha = np.asarray(alpha, dtype=float)
    return des.spec.power(des, e, n, alpha, alternative, upper_only)


# ------------------------------------------------------------------ sample size

@dataclass(frozen=True)
class SampleSize:
    """Smallest n reaching a target power, cell by cell (arrays of one shape).

    ``n`` is 0 where the target cannot be reached; ``reason`` then says why.
    """

    n: np.ndarray
    n_total: np.ndarray
    power: np.ndarray
    reachable: np.ndarray
    reason: np.ndarray

    def to_dict(self) -> dict:
        return to_jsonable({"n": self.n.tolist(), "n_total": self.n_total.tolist(),
                            "power": self.power.tolist(), "reachable": self.reachable.tolist(),
                            "reason": self.reason.tolist()})


def _int_search(fn, target, n_min, valid, n_max=N_MAX, guess=None):
    """Smallest integer n ≥ n_min with fn(n) ≥ target, for every cell at once.

    ``fn(n, cells)`` gives the values at ``n[cells]`` for the cells picked by the boolean
    mask ``cells`` (a 1-D array), and must be non-decreasing in n. With a ``guess`` (e.g.
    the normal approximation, usually within one of the answer) the search evaluates
    a = ⌈guess⌉ and then a - 1 or a + 1, which settles most cells in two calls; the others
    fall back to doubling and bisection. Every step evaluates only the cells still searching.
    Returns n (0 where not reached), whether it was reached, and fn at that n (NaN where
    not reached).
    """
    shape = np.shape(target)
    lo = np.full(shape, n_min - 1, dtype=np.int64)        # fn(lo) < target (by convention)
    hi = np.full(shape, n_min, dtype=np.int64)
    at_hi = np.full(shape, np.nan)                        # fn(hi) where known to reach
    known = np.zeros(shape, bool)                         # fn(hi) ≥ target has been seen

    def below_target(n, cells):
        """fn < target at n on ``cells`` (a mask), as a full-shape mask, and the values."""
        vals = np.full(shape, np.nan)
        if cells.any():
            vals[cells] = fn(n, cells)
        return cells & (vals < target), vals

    def reached(cells, n, vals):
        nonlocal hi, at_hi, known
        hi = np.where(cells, n, hi)
        at_hi = np.where(cells, vals, at_hi)
        known = known | cells

    if guess is not None:
        g = np.where(valid & np.isfinite(guess), guess, n_min)
        a = np.clip(np.ceil(g), n_min, n_max).astype(np.int64)
        short, vals = below_target(a, valid)
        reached(valid & ~short, a, vals)
        lo = np.where(short, a, lo)
        # one step from a: down where a reaches the target, up where it falls short
        b = np.where(short, a + 1, a - 1)
        probe = valid & (b >= n_min) & (b <= n_max)
        low, vals = below_target(b, probe)
        lo = np.where(low, b, lo)
        reached(probe & ~low, b, vals)
        # still short after a + 1: look further up, from the wider bracket of the guess
        far = short & low
        hi = np.where(far, np.clip(np.ceil(1.01 * g + 3), b + 1, n_max + 1).astype(np.int64),
                      hi)
        hi = np.where(short & ~probe, n_max + 1, hi)      # a = n_max already falls short
    active = valid & ~known & (lo < n_max)
    while active.any():
        grow, vals = below_target(hi, active)
        reached(active & ~grow, hi, vals)
        lo = np.where(grow, hi, lo)
        hi = np.where(grow, np.minimum(hi * 2, n_max + 1), hi)
        active = grow & (lo < n_max)
    reach = valid & known
    while True:
        gap = reach & (hi - lo > 1)
        if not gap.any():
            break
        mid = (lo + hi) // 2
        low, vals = below_target(mid, gap)
        reached(gap & ~low, mid, vals)
        lo = np.where(low, mid, lo)
    return np.where(reach, hi, 0), reach, np.where(reach, at_hi, np.nan)


def _normal_guess(e, target, alpha, alternative, des):
    """Normal-approximation n, only to bracket the exact search (Cohen 1988, ch. 2-3), with
    Guenther's (1981) t correction (+ z²/4 per group, + z²/2 for one sample)."""
    za = sp.ndtri(1 - (alpha / 2 if alternative == "two-sided" else alpha))
    z = (za + sp.ndtri(target)) ** 2
    return des.spec.normal_start(des, e, z, za)


def n_for_power(effect, target=0.8, design="two-group", alpha=0.05,
                alternative="two-sided") -> SampleSize:
    """Smallest integer n with power ≥ ``target`` (vectorised over broadcast inputs).

    ``effect`` is in the design's own metric. n is per group (per cell) or total, as in
    :func:`power_at`. With an allocation ratio the search runs over whole groups: n is the
    smallest integer n1 whose design (n1, n2 = ⌈ratio × n1⌉) reaches the target, and the
    power reported is that of those integer sizes. n2 never decreases as n1 grows, so power
    is non-decreasing in n1 and the integer search is exact.

    Examples
    --------
    >>> int(n_for_power(0.5, 0.8).n)    # Cohen (1992) Table 2: 64 per group
    64
    """
    des = _design(design)
    alternative = _alt(alternative)
    e, target, alpha = np.broadcast_arrays(*(np.asarray(x, float) for x in (effect, target, alpha)))
    if np.any((target <= 0) | (target >= 1)):
        raise OptionError("target power must lie strictly between 0 and 1")
    if np.any((alpha <= 0) | (alpha >= 0.5)):
        raise OptionError("`alpha` must lie in (0, 0.5)")
    if des.spec.check_effect is not None:
        des.spec.check_effect(des, e)
    finite = np.isfinite(e)
    positive = finite & (e > 0)
    valid = positive & (target > alpha)

    def fn(n, cells):
        return power_at(e[cells], n[cells], des, alpha[cells], alternative)
    # the guess only brackets the search: an effect near 0 may give inf (or overflow, for a
    # subnormal effect such as one from F = 1e-311), which the search caps at N_MAX
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        guess = _normal_guess(e, target, alpha, alternative, des)
    n, reach, power = _int_search(fn, target, des.n_min, valid, guess=guess)
    reason = np.full(e.shape, "", dtype=object)
    reason[~positive] = "the effect is zero or goes against the hypothesis: no n reaches the power"
    reason[positive & ~reach] = f"needs more than {N_MAX:,} participants"
    return SampleSize(n=n, n_total=np.where(reach, des.n_total(n), 0), power=power,
                      reachable=reach, reason=reason)


def detectable_effect(n, target=0.8, design="two-group", alpha=0.05,
                      alternative="two-sided") -> np.ndarray:
    """Smallest effect (design metric) detectable with power ``target`` at n (sensitivity).

    Solved with ``scipy.optimize.brentq`` on the exact power function.
    """
    from scipy.optimize import brentq
    des = _design(design)
    n, target, alpha = np.broadcast_arrays(*(np.asarray(x, float) for x in (n, target, alpha)))
    cap = des.spec.effect_cap
    out = np.full(n.shape, np.nan)
    for idx in np.ndindex(n.shape):
        if n[idx] < des.n_min:
            continue
        def f(x):
            return float(power_at(x, n[idx], des, alpha[idx], alternative)) - target[idx]
        hi = min(0.05, cap)
        while f(hi) < 0 and hi < cap:
            hi = min(hi * 2, cap)
        if f(hi) >= 0:
            out[idx] = brentq(f, 1e-12, hi, xtol=1e-12)
    return out


# ------------------------------------------------------------------ assurance

ASSURANCE_TOL = 1e-9   # absolute error allowed in an assurance (sum over all subintervals)


@dataclass(frozen=True)
class EffectDensity:
    """A predictive density of the new study's true effect, to integrate power over.

    The effect is on the literature's metric: d, or Fisher z for correlations
    (``metric="z"``). Any smooth density will do; build one with :meth:`normal`,
    :meth:`from_grid` (a density tabulated on a grid, e.g. a posterior predictive) or
    :meth:`from_pdf` (any vectorised callable).

    Attributes
    ----------
    pdf : callable
        Vectorised density, normalised to integrate to 1 over [lower, upper].
    lower, upper : float
        The support integrated over (the mass outside is negligible or zero).
    breaks : tuple of float
        Points where the density changes shape (grid nodes, or the mean ± k SD): the
        integrator never lets a subinterval straddle one.
    metric : {"d", "z"}
    mean, sd : float
        Moments of the density (for the report).
    ceiling : float
        P(effect > 0), the assurance that no sample size can exceed.
    form : str
        "normal", "grid" or "pdf".
    """

    pdf: object
    lower: float
    upper: float
    breaks: tuple
    metric: str
    mean: float
    sd: float
    ceiling: float
    form: str

    @classmethod
    def normal(cls, mean: float, sd: float, metric: str = "d") -> "EffectDensity":
        """Normal(mean, sd²), integrated over mean ± 12 sd (the mass outside is < 1e-32)."""
        mean, sd = float(mean), float(sd)
        if not (math.isfinite(mean) and math.isfinite(sd) and sd > 0):
            raise OptionError("the predictive distribution needs a finite mean and a positive SD")
        c = 1 / (sd * math.sqrt(2 * math.pi))

        def pdf(x):
            return c * np.exp(-0.5 * ((np.asarray(x, float) - mean) / sd) ** 2)
        ks = (-12, -8, -6, -4, -3, -2, -1, 0, 1, 2, 3, 4, 6, 8, 12)
        return cls(pdf, mean - 12 * sd, mean + 12 * sd, tuple(mean + k * sd for k in ks),
                   _metric_of(metric), mean, sd, float(sp.ndtr(mean / sd)), "normal")

    @classmethod
    def from_grid(cls, x, density, metric: str = "d") -> "EffectDensity":
        """A density tabulated at increasing points ``x``, taken as piecewise linear between
        them (and 0 outside) and normalised to integrate to 1."""
        x = np.asarray(x, float)
        f = np.asarray(density, float)
        if x.ndim != 1 or x.shape != f.shape or x.size < 2:
            raise OptionError("a tabulated density needs two 1-D arrays of the same length (>= 2)")
        if not (np.all(np.isfinite(x)) and np.all(np.isfinite(f)) and np.all(np.diff(x) > 0)):
            raise OptionError("a tabulated density needs finite values at increasing points")
        if np.any(f < 0) or not np.any(f > 0):
            raise OptionError("a tabulated density must be non-negative and not all zero")
        f = f / np.sum((f[1:] + f[:-1]) * np.diff(x) / 2)

        def pdf(t):
            return np.interp(np.asarray(t, float), x, f, left=0.0, right=0.0)
        # moments and P(effect > 0) of the piecewise-linear density, exactly (Simpson's rule
        # is exact for the quadratic and cubic integrands on each linear piece)
        xm, fm = (x[1:] + x[:-1]) / 2, (f[1:] + f[:-1]) / 2
        h = np.diff(x)

        def integral(g):
            return float(np.sum(h / 6 * (g(x[:-1]) * f[:-1] + 4 * g(xm) * fm + g(x[1:]) * f[1:])))
        mean = integral(lambda t: t)
        sd = math.sqrt(max(integral(lambda t: (t - mean) ** 2), 0.0))
        xp = np.concatenate([[0.0], x[x > 0]]) if x[0] < 0 < x[-1] else x[x >= 0]
        fp = np.interp(xp, x, f, left=0.0, right=0.0)
        ceiling = float(np.sum((fp[1:] + fp[:-1]) * np.diff(xp) / 2)) if xp.size > 1 else 0.0
        return cls(pdf, float(x[0]), float(x[-1]), tuple(float(v) for v in x),
                   _metric_of(metric), mean, sd, min(ceiling, 1.0), "grid")

    @classmethod
    def from_pdf(cls, pdf, lower: float, upper: float, metric: str = "d",
                 breaks=()) -> "EffectDensity":
        """Any vectorised density on [lower, upper] (normalised here by adaptive quadrature).

        The support is cut into 128 equal pieces before refining, so a feature (a mode, a
        kink) narrower than (upper - lower) / 128 should be marked in ``breaks``, as should
        any point where the density is not smooth."""
        lower, upper = float(lower), float(upper)
        if not (math.isfinite(lower) and math.isfinite(upper) and lower < upper):
            raise OptionError("a density needs a finite support lower < upper")
        br = tuple(sorted({*np.linspace(lower, upper, 129).tolist(),
                           *(float(b) for b in breaks if lower < b < upper)}))
        total = _adaptive_integral(lambda t: np.asarray(pdf(t), float), br, 1e-12)
        if not (total > 0 and math.isfinite(total)):
            raise OptionError("the density does not integrate to a positive number")

        def dens(t):
            return np.asarray(pdf(t), float) / total
        mean = _adaptive_integral(lambda t: t * dens(t), br, 1e-12)
        var = _adaptive_integral(lambda t: (t - mean) ** 2 * dens(t), br, 1e-12)
        pos = tuple(sorted({max(b, 0.0) for b in br}))
        ceiling = _adaptive_integral(dens, pos, 1e-12) if upper > 0 and len(pos) > 1 else 0.0
        return cls(dens, lower, upper, br, _metric_of(metric), mean, math.sqrt(max(var, 0.0)),
                   min(ceiling, 1.0), "pdf")


def _metric_of(metric: str) -> str:
    if metric in ("d", "g"):
        return "d"
    if metric in ("r", "z"):
        return "z"
    raise OptionError(f"`metric` must be 'd' or 'r' (Fisher z), not {metric!r}")


def _gauss_legendre(k=10):
    x, w = np.polynomial.legendre.leggauss(k)
    return x, w


_GL = _gauss_legendre()


def _adaptive_integral(g, breaks, tol, max_rounds=60):
    """∫ g over [breaks[0], breaks[-1]] by adaptive composite Gauss–Legendre quadrature.

    Every subinterval between consecutive ``breaks`` gets the 10-point Gauss–Legendre rule
    on itself and on its two halves; the halves' sum is kept when the two differ by at most
    ``tol`` × (its share of the whole width), otherwise the interval is halved and tried
    again. All pending intervals are evaluated in one vectorised call of ``g`` per round,
    so the sum of the accepted error estimates is below ``tol``. Gauss–Legendre nodes are
    interior, so g is never evaluated at a break (a jump there, as for an F test's power at
    effect 0, is integrated exactly from both sides).
    """
    xg, wg = _GL
    b = np.unique(np.asarray(breaks, float))
    a_, b_ = b[:-1], b[1:]
    keep = b_ > a_
    a_, b_ = a_[keep], b_[keep]
    width = float(b[-1] - b[0])
    if width <= 0 or a_.size == 0:
        return 0.0
    total = 0.0
    for _ in range(max_rounds):
        m = (a_ + b_) / 2
        lo = np.concatenate([a_, a_, m])
        hi = np.concatenate([b_, m, b_])
        half = (hi - lo) / 2
        nodes = (lo + hi)[:, None] / 2 + half[:, None] * xg[None, :]
        vals = np.asarray(g(nodes.ravel()), float).reshape(nodes.shape)
        est = half * (vals @ wg)
        k = a_.size
        whole, halves = est[:k], est[k:2 * k] + est[2 * k:]
        err = np.abs(whole - halves)
        ok = (err <= tol * (b_ - a_) / width) | ((b_ - a_) < 1e-12 * max(width, 1.0))
        total += float(halves[ok].sum())
        if ok.all():
            return total
        a_, b_ = np.concatenate([a_[~ok], m[~ok]]), np.concatenate([m[~ok], b_[~ok]])
    # the round limit is only reached for a non-integrable spike; keep the last estimate
    return total + float(halves[~ok].sum())


def _power_along(density, n, des, alpha, alternative):
    """Upper-tail power as a function of the effect on the density's metric, at one n."""
    def fn(x):
        x = np.asarray(x, float)
        if density.metric == "z":
            r = np.clip(np.tanh(x), -1 + 1e-12, 1 - 1e-12)   # tanh rounds to ±1 for |z| > 19
            eff = to_design_effect(r, "r", des)
        else:
            eff = to_design_effect(x, "d", des)
        return power_at(eff, n, des, alpha, alternative, upper_only=True)
    return fn


_POWER_LEVELS = np.array([1e-10, 1e-7, 1e-4, 1e-2, 0.05, 0.15, 0.3, 0.5, 0.7, 0.85, 0.95, 0.99,
                          1 - 1e-4, 1 - 1e-7, 1 - 1e-10])


def _power_breaks(fn, lower, upper):
    """Effects at which the upper-tail power crosses a ladder of levels, 10⁻⁷ … 1 − 10⁻⁷
    (0.5 is about where the noncentrality crosses the critical value): the power curve is
    steep between them, on both sides of 0. Found by one vectorised bisection over
    [lower, upper]; the upper-tail power never falls as the effect grows (for an F test it
    is 0 up to effect 0 and jumps to α there, where the levels below α collect)."""
    ends = fn(np.array([lower, upper]))
    inside = (_POWER_LEVELS > ends[0]) & (_POWER_LEVELS < ends[1])
    if not inside.any():
        return np.empty(0)
    lev = _POWER_LEVELS[inside]
    lo, hi = np.full(lev.shape, float(lower)), np.full(lev.shape, float(upper))
    # 32 halvings locate each break to (upper - lower) / 4e9, far inside the narrowest
    # power curve (its width is about 1/sqrt(n) on the d scale)
    for _ in range(32):
        mid = (lo + hi) / 2
        below = fn(mid) < lev
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    return (lo + hi) / 2


def assurance_over(density: EffectDensity, n, design="two-group", alpha=0.05,
                   alternative="two-sided", tol: float = ASSURANCE_TOL) -> np.ndarray:
    """Assurance, E[power(δ)] with δ drawn from ``density`` (O'Hagan, Stevens & Campbell
    2005, eq. 1), counting only significant results in the hypothesised direction.

    The integral over δ is split at the density's own breaks, at δ = 0 (where the power of
    an F test with several numerator df jumps from 0 to α), and at the effects where the
    power at this n crosses 10⁻¹⁰, 10⁻⁷, …, 0.5, …, 1 − 10⁻¹⁰ — the steep part of the
    power curve, which narrows as 1/√n, on either side of 0 — and integrated by
    :func:`_adaptive_integral` to an absolute error below ``tol`` (default 1e-9).

    Examples
    --------
    >>> dens = EffectDensity.normal(0.4, 0.1)
    >>> round(float(assurance_over(dens, 100)), 4)
    0.7577
    """
    des = _design(design)
    alternative = _alt(alternative)
    n = np.asarray(n, float)
    out = np.empty(n.shape)
    for idx in np.ndindex(n.shape):
        fn = _power_along(density, n[idx], des, alpha, alternative)
        br = [density.lower, density.upper, *density.breaks,
              *_power_breaks(fn, density.lower, density.upper)]
        if density.lower < 0 < density.upper:
            br.append(0.0)
        br = [b for b in br if density.lower <= b <= density.upper]
        out[idx] = _adaptive_integral(lambda x: fn(x) * density.pdf(x), br, tol)
    return np.clip(out, 0.0, 1.0)


def assurance_curve(density: EffectDensity, n, design="two-group", alpha=0.05,
                    alternative="two-sided", points: int = 6) -> np.ndarray:
    """Assurance at many n at once, for drawing a curve: the same integral as
    :func:`assurance_over`, by composite Gauss-Legendre with ``points`` nodes between
    consecutive breaks of the density (and 0, and where the power is steep at the smallest
    and the largest n), the same nodes for every n.

    A tabulated density is linear between its breaks, so this is far cheaper than one
    adaptive integral per n (0.1 s instead of 1.3 s for the demo's power figure) and agrees
    with :func:`assurance_over` to about 1e-7 (tests/test_assurance.py): well below a pixel.

    Examples
    --------
    >>> dens = EffectDensity.normal(0.4, 0.1)
    >>> round(float(assurance_curve(dens, [100])[0]), 4)
    0.7577
    """
    des = _design(design)
    alternative = _alt(alternative)
    n = np.asarray(n, float)
    br = {density.lower, density.upper, *density.breaks}
    if density.lower < 0 < density.upper:
        br.add(0.0)   # an F test's power jumps at 0
    for m in (n.min(), n.max()):   # where the power curve is steep, at the extreme sizes
        br.update(_power_breaks(_power_along(density, m, des, alpha, alternative),
                                density.lower, density.upper))
    b = np.array(sorted(x for x in br if density.lower <= x <= density.upper))
    gx, gw = np.polynomial.legendre.leggauss(points)
    mid, half = (b[1:] + b[:-1]) / 2, (b[1:] - b[:-1]) / 2
    x = (mid[:, None] + half[:, None] * gx[None, :]).ravel()
    w = (half[:, None] * gw[None, :]).ravel() * density.pdf(x)
    out = np.array([float(np.dot(w, _power_along(density, m, des, alpha, alternative)(x)))
                    for m in n.ravel()])
    return np.clip(out.reshape(n.shape), 0.0, 1.0)


def assurance(mean, sd, n, design="two-group", alpha=0.05, alternative="two-sided",
              metric="d") -> np.ndarray:
    """Expected power over a Normal(mean, sd²) predictive distribution of the true effect
    (O'Hagan, Stevens & Campbell 2005) on the literature's metric (d, or Fisher z for
    correlations with ``metric="r"``); see :func:`assurance_over` for the integration.

    Examples
    --------
    >>> round(float(assurance(0.2, 0.2, 7922)), 4)    # 80 % of a 0.841 ceiling
    0.8
    """
    return assurance_over(EffectDensity.normal(mean, sd, metric), n, design, alpha, alternative)


def assurance_ceiling(mean: float, sd: float) -> float:
    """P(δ > 0) under Normal(mean, sd²): the assurance that no sample size can exceed."""
    return float(sp.ndtr(mean / sd)) if sd > 0 else float(mean > 0)


@dataclass(frozen=True)
class AssuranceResult:
    """n for each target assurance, with the predictive distribution it integrates over."""

    mean: float
    sd: float
    metric: str
    ceiling: float
    targets: tuple[float, ...]
    n: tuple  # int or NotEstimable per target
    n_total: tuple
    achieved: tuple
    form: str = "normal"

    def to_dict(self) -> dict:
        return to_jsonable({
            "predictive_mean": self.mean, "predictive_sd": self.sd, "metric": self.metric,
            "predictive_form": self.form, "ceiling": self.ceiling,
            "tolerance": ASSURANCE_TOL,
            "rows": [{"target": t, "n_per_group": n if not isinstance(n, NotEstimable) else n,
                      "n_total": nt, "assurance": a}
                     for t, n, nt, a in zip(self.targets, self.n, self.n_total, self.achieved)]})


#: A target assurance within this distance of its ceiling is reported as not useful.
NEAR_CEILING = 0.01


def n_for_assurance(mean, sd, targets=(0.8,), design="two-group", alpha=0.05,
                    alternative="two-sided", metric="d", *, density=None) -> AssuranceResult:
    """Smallest n whose assurance reaches each target, or why it cannot.

    The predictive distribution is Normal(mean, sd²) on ``metric`` (d, or Fisher z with
    ``metric="r"``), or any :class:`EffectDensity` given as ``density`` (then ``mean`` and
    ``sd`` are ignored). The search brackets by doubling and bisects over integers; it
    relies on assurance rising with n, which holds for a predictive mass concentrated on
    the hypothesised side until the ceiling P(δ > 0) is approached. The n returned always
    satisfies assurance(n) ≥ target > assurance(n - 1) as computed (to ±1e-9).

    Examples
    --------
    >>> n_for_assurance(0.4, 0.1, (0.8,)).n
    (115,)
    """
    des = _design(design)
    if density is None:
        density = EffectDensity.normal(mean, sd, metric)
    ceiling = density.ceiling
    ns, nts, ach = [], [], []
    for t in targets:
        if t >= ceiling - 1e-9:
            reason = NotEstimable(f"cannot be reached: even an unlimited sample gives at most "
                                  f"{ceiling:.3f}, the chance that the new study's true effect "
                                  "is positive")
            ns.append(reason), nts.append(reason), ach.append(reason)
            continue
        def fn(n, cells):
            return assurance_over(density, np.asarray(n)[cells], des, alpha, alternative)
        n, reach, achieved = _int_search(fn, np.asarray(t), des.n_min, np.asarray(True))
        if not reach:
            reason = NotEstimable(f"needs more than {N_MAX:,} participants")
            ns.append(reason), nts.append(reason), ach.append(reason)
            continue
        ni = int(n)
        if t > ceiling - NEAR_CEILING:
            # pooler's own threshold: the n needed grows without bound as the target nears
            # the ceiling, so a target this close buys almost nothing for its cost
            reason = NotEstimable(
                f"not a useful target: {t:g} lies within {NEAR_CEILING:g} of the ceiling "
                f"{ceiling:.3f} (the chance that the new study's true effect is positive), "
                f"where the n needed ({ni:,} per group) grows without bound")
            ns.append(reason), nts.append(reason), ach.append(reason)
            continue
        ns.append(ni)
        nts.append(int(des.n_total(ni)))
        ach.append(float(achieved))
    return AssuranceResult(mean=density.mean, sd=density.sd,
                           metric="r" if density.metric == "z" else "d", ceiling=ceiling,
                           targets=tuple(targets), n=tuple(ns), n_total=tuple(nts),
                           achieved=tuple(ach), form=density.form)
