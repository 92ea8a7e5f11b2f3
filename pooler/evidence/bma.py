"""Stage 4b: a Bayesian model average over publication-bias models, by deterministic quadrature.

The literature is explained by twenty competing models: five bias components (none; selection
on one-sided p-values with one step at .025; with two steps at .025 and .5; PET; PEESE), each
with and without an effect (μ = 0 or free) and with and without heterogeneity (τ = 0 or free).
Each model's marginal likelihood is an integral over at most four continuous parameters; we
compute it by product quadrature, so the answer is identical on every run. The model average
weighs the models by how well each predicted the literature (Hoeting et al. 1999), following
the robust Bayesian meta-analysis of Maier, Bartoš & Wagenmakers (2023) extended to selection
and small-study-effect models together by Bartoš et al. (2023).

Models (y_i the effect, v_i its sampling variance, s_i = √v_i)
----------------------------------------------------------------
- no bias: y_i ~ N(μ, v_i + τ²) (the random-effects model with the true effects integrated
  out; Hedges & Vevea 1998).
- PET: y_i ~ N(μ + β x_i, v_i + τ²); PEESE: y_i ~ N(μ + β x_i², v_i + τ²), β ≥ 0
  (Stanley & Doucouliagos 2014, eqs. 4 and 5; the Bayesian form of Bartoš et al. 2023). The
  predictor x_i is the study's standard error at a zero effect, which depends on its size
  alone (Pustejovsky & Rodgers 2019; :func:`pooler.evidence.bias.size_variances`), when the
  caller gives it (``size_v``; the planning rule does); otherwise s_i as published. A
  standardised mean difference's own SE contains the effect, so with equal group sizes PET's
  slope would find "small-study effects" where studies merely differ in effect. When every
  study has the same size the slope is not identified: PET and PEESE are left out and their
  prior share goes to the selection models (P(no bias) keeps its prior).
- step-function selection (Vevea & Hedges 1995, eq. 8): study i is published with relative
  probability ω_j when its one-sided p-value falls in interval j, so its density is
  ω_{j(i)} φ((y_i - μ)/σ_i)/σ_i / A_i with σ_i² = v_i + τ² and the normalising constant in
  closed form A_i = Σ_j ω_j P(y in interval j | μ, σ_i), a sum of normal-CDF differences.
  The cutpoints on y are p = .025 ↔ y = 1.96 s_i and p = .5 ↔ y = 0; ω = 1 for the
  significant interval.

Priors (published defaults on Cohen's d; Bartoš et al. 2023, Table 1, from memory)
------------------------------------------------------------------------------------
μ ~ N(0, 1); τ ~ InvGamma(1, 0.15); the weights ~ cumulative Dirichlet(1, ...) (ω for the
significant interval is 1 and ω_j = η_j + ... + η_J with η ~ Dirichlet, so the weights never
rise with the p-value); PET β ~ half-Cauchy(0, 1); PEESE β ~ half-Cauchy(0, 5). Prior model
probabilities: ½ for an effect, ½ for heterogeneity, ½ for no bias; the bias half is split as
in Bartoš et al. (2023) between selection and PET-PEESE (¼ each), and within each of those
equally (1/8 per bias model here, because we fit two weight functions where the paper fits
six).

Fisher z. For correlations the effects are Fisher z. Near r = 0, d = 2r/√(1 - r²) ≈ 2r and
z = atanh(r) ≈ r, so z ≈ d/2 (Borenstein et al. 2009, ch. 7, for the d-r relation): scale
parameters of μ and τ are halved; the PET slope multiplies s_i, which is halved with y, so it
is unchanged; the PEESE slope multiplies v_i, which scales by ¼ while y scales by ½, so its
scale doubles (5 → 10).

Quadrature
----------
Every parameter but μ is integrated on its prior-CDF scale u = F(θ) ∈ (0, 1), where the prior
is uniform: τ = b / Q⁻¹(a, u) for InvGamma(a, b) (Q the regularised upper incomplete gamma),
β = c tan(πu/2) for half-Cauchy(0, c), and for the two-step weights ω₂ ~ Beta(α₂+α₃, α₁)
and ω₃/ω₂ ~ Beta(α₃, α₂) independently (the neutrality of the Dirichlet; Connor & Mosimann
1969). μ is integrated on its own scale with the normal prior density as a weight. A coarse
pass on midpoint grids shrinks, in turn, a box to where the log-posterior is within 30 of its
largest value (plus one cell on each side); the final pass uses Gauss-Legendre nodes on the
box for u-scale parameters and the trapezoidal rule on a uniform μ grid (exponentially
accurate for a smooth integrand that vanishes at the box ends). Refining every grid moves the
posterior median of μ by less than 0.002 (tests/test_bma.py). Quantiles of μ are read from
each model's μ density at its nodes, interpolated on the log scale between them and
integrated on sub-cells (:func:`_smooth_cdf`): the nodes can lie a posterior SD apart, and a
CDF read linearly between them put the 97.5th percentile 0.004 too high.

Work that grows with k. The normal part of every likelihood is summed over the studies once
per τ node (weighted least squares: every (μ, slope) node then costs O(1); exact). The
selection models' normalising constant depends on a study only through its standard error:
above :data:`GROUP_ABOVE_K` studies, studies whose SEs agree within 1 % share one evaluation
(moves the quantiles of μ by < 0.002; tests/test_bma.py). Other priors (the sensitivity line's
:data:`WIDE_PRIORS`) re-weight the fitted nodes instead of fitting again
(:func:`reweighted`).

References
----------
.. [MBW23] Maier, M., Bartoš, F., & Wagenmakers, E.-J. (2023). Robust Bayesian meta-analysis:
   Addressing publication bias with model-averaging. *Psychological Methods*, 28(1), 107-122.
.. [BMWDS23] Bartoš, F., Maier, M., Wagenmakers, E.-J., Doucouliagos, H., & Stanley, T. D.
   (2023). Robust Bayesian meta-analysis: Model-averaging across complementary publication
   bias adjustment methods. *Research Synthesis Methods*, 14(1), 99-116.
.. [VH95] Vevea, J. L., & Hedges, L. V. (1995). A general linear model for estimating effect
   size in the presence of publication bias. *Psychometrika*, 60(3), 419-435.
.. [SD14] Stanley, T. D., & Doucouliagos, H. (2014). Meta-regression approximations to reduce
   publication selection bias. *Research Synthesis Methods*, 5(1), 60-78.
.. [PR19] Pustejovsky, J. E., & Rodgers, M. A. (2019). Testing for funnel plot asymmetry of
   standardized mean differences. *Research Synthesis Methods*, 10(1), 57-71.
.. [HMRV99] Hoeting, J. A., Madigan, D., Raftery, A. E., & Volinsky, C. T. (1999). Bayesian
   model averaging: a tutorial. *Statistical Science*, 14(4), 382-417.
.. [CM69] Connor, R. J., & Mosimann, J. E. (1969). Concepts of independence for proportions
   with a generalization of the Dirichlet distribution. *JASA*, 64(325), 194-206.
"""
from __future__ import annotations

import functools
import math
import numbers
from dataclasses import dataclass, field, replace

import numpy as np

from pooler._results import Interval, NotEstimable, ShowsAsTable, to_jsonable
from pooler.errors import InputError, OptionError

Z975 = 1.959963984540054
_LOG2PI = math.log(2 * math.pi)


# ------------------------------------------------------------------ priors

@dataclass(frozen=True)
class Priors:
    """Priors of the model average, stated on Cohen's d (converted for Fisher z).

    Attributes
    ----------
    effect_sd : float
        μ ~ Normal(0, effect_sd²) in the models with an effect.
    tau_shape, tau_scale : float
        τ ~ InvGamma(tau_shape, tau_scale) in the models with heterogeneity.
    pet_scale, peese_scale : float
        PET and PEESE slopes ~ half-Cauchy(0, scale).
    one_step_alpha, two_step_alpha : tuple of float
        Cumulative Dirichlet parameters of the selection weights, most significant interval
        first.
    p_effect, p_heterogeneity, p_no_bias : float
        Prior probabilities of an effect, of heterogeneity and of no publication bias.
    bias_shares : tuple of (name, share)
        How the bias probability 1 - p_no_bias is split between the bias models.
    """

    effect_sd: float = 1.0
    tau_shape: float = 1.0
    tau_scale: float = 0.15
    pet_scale: float = 1.0
    peese_scale: float = 5.0
    one_step_alpha: tuple = (1.0, 1.0)
    two_step_alpha: tuple = (1.0, 1.0, 1.0)
    p_effect: float = 0.5
    p_heterogeneity: float = 0.5
    p_no_bias: float = 0.5
    bias_shares: tuple = (("one-step selection", 0.25), ("two-step selection", 0.25),
                          ("PET", 0.25), ("PEESE", 0.25))

    def on_metric(self, metric: str) -> "Priors":
        """The priors for the literature's metric: unchanged for g/d; for Fisher z the μ and
        τ scales halved and the PEESE scale doubled (z ≈ d/2 near 0; module docstring)."""
        if metric in ("g", "d"):
            return self
        return replace(self, effect_sd=self.effect_sd / 2, tau_scale=self.tau_scale / 2,
                       peese_scale=self.peese_scale * 2)

    def to_dict(self) -> dict:
        return to_jsonable({"effect": f"normal(0, {self.effect_sd:g})",
                            "heterogeneity": f"inverse-gamma({self.tau_shape:g}, "
                                             f"{self.tau_scale:g}) on tau",
                            "pet": f"half-Cauchy(0, {self.pet_scale:g})",
                            "peese": f"half-Cauchy(0, {self.peese_scale:g})",
                            "one_step_weights": list(self.one_step_alpha),
                            "two_step_weights": list(self.two_step_alpha),
                            "p_effect": self.p_effect, "p_heterogeneity": self.p_heterogeneity,
                            "p_no_bias": self.p_no_bias,
                            "bias_shares": {k: v for k, v in self.bias_shares}})


#: The published defaults (Bartoš et al. 2023; scales from memory, see the module docstring).
DEFAULT_PRIORS = Priors()
#: A wider set for the sensitivity line: every scale doubled (our choice).
WIDE_PRIORS = Priors(effect_sd=2.0, tau_scale=0.3, pet_scale=2.0, peese_scale=10.0)


# ------------------------------------------------------------------ parameters and models

@dataclass(frozen=True)
class _Dim:
    """One integrated parameter: ``kind`` "mu" (own scale, normal prior weight) or "u"
    (prior-CDF scale, uniform prior); ``log_pdf`` is its prior log density on its own scale
    (for re-weighting a fit to other priors, :func:`reweighted`)."""

    name: str
    kind: str
    to_value: object = None  # u -> parameter value (kind "u")
    log_pdf: object = None   # parameter value -> log prior density


def _mu_dim(pr: Priors) -> _Dim:
    return _Dim("mu", "mu", None, lambda x: _log_prior_mu(x, pr.effect_sd))


def _tau_dim(pr: Priors) -> _Dim:
    from scipy.special import gammainccinv, gammaln
    a, b = pr.tau_shape, pr.tau_scale
    return _Dim("tau", "u", lambda u: b / gammainccinv(a, u),
                lambda t: a * math.log(b) - gammaln(a) - (a + 1) * np.log(t) - b / t)


def _half_cauchy_dim(name, scale) -> _Dim:
    return _Dim(name, "u", lambda u: scale * np.tan(0.5 * math.pi * u),
                lambda x: math.log(2 / (math.pi * scale)) - np.log1p((x / scale) ** 2))


def _beta_dim(name, a, b) -> _Dim:
    from scipy.special import betaincinv, betaln
    return _Dim(name, "u", lambda u: betaincinv(a, b, u),
                lambda x: (a - 1) * np.log(x) + (b - 1) * np.log1p(-x) - betaln(a, b))


def _normal_part(d, mu, tau, x=None, slope=None):
    """Σ_i log N(y_i; μ + β x_i, v_i + τ²) over the studies (the last axis of ``tau``,
    ``mu`` and ``slope`` has length 1); ``x`` is "se" (PET), "v" (PEESE) or None.

    With w_i = 1/(v_i + τ²) and the w-weighted means ȳ, x̄, the sum of squares splits exactly
    into Σ w (y_c - β x_c)² + W (ȳ - μ - β x̄)² (y_c, x_c centred; W = Σ w), so the studies
    are summed once per τ node (one matrix product with the columns y, y², x, xy, x²,
    shifted by their plain means against cancellation) and every (μ, β) node costs O(1):
    the weighted least-squares decomposition (e.g. Draper & Smith 1998, ch. 9).
    """
    cols, y0, x0 = d.moments[x]
    key = (x, tau.shape, tau.tobytes())
    hit = d.sums.get(key)
    if hit is None:
        s2 = d.v + tau * tau                  # τ nodes × studies
        w = 1.0 / s2
        big_w = w.sum(axis=-1)
        base = d.y.size * _LOG2PI + np.log(s2).sum(axis=-1)
        mom = (w @ cols) / big_w[..., None]   # weighted means of the shifted columns
        if len(d.sums) < 256:  # the τ nodes recur (always, in the models with τ = 0)
            d.sums[key] = (big_w, base, mom)
    else:
        big_w, base, mom = hit
    yb = mom[..., 0]
    syy = big_w * (mom[..., 1] - yb * yb)
    m = mu[..., 0]
    if x is None:
        q = syy + big_w * (y0 + yb - m) ** 2
    else:
        b = slope[..., 0]
        xb = mom[..., 2]
        sxy = big_w * (mom[..., 3] - xb * yb)
        sxx = big_w * (mom[..., 4] - xb * xb)
        q = (syy - 2 * b * sxy + b * b * sxx
             + big_w * (y0 + yb - m - b * (x0 + xb)) ** 2)
    return -0.5 * (base + q)


def _moments(y, x=None):
    """The columns y', y'² (and x', x'y', x'²) of :func:`_normal_part`, with y' = y - ȳ₀ and
    x' = x - x̄₀ shifted by their plain means; returns (columns, ȳ₀, x̄₀)."""
    y0 = float(np.mean(y))
    yd = y - y0
    if x is None:
        return np.column_stack([yd, yd * yd]), y0, 0.0
    x0 = float(np.mean(x))
    xd = x - x0
    return np.column_stack([yd, yd * yd, xd, xd * yd, xd * xd]), y0, x0


def _ll_none(d, mu, tau, p):
    return _normal_part(d, mu, tau)


def _ll_pet(d, mu, tau, p):
    return _normal_part(d, mu, tau, "se", p[0])


def _ll_peese(d, mu, tau, p):
    return _normal_part(d, mu, tau, "v", p[0])


def _ll_step1(d, mu, tau, p):
    """One step at one-sided p = .025 (Vevea & Hedges 1995, eq. 8): weight 1 above
    c_i = 1.96 s_i, ω below; A_i = Φ((μ - c_i)/σ_i) + ω Φ((c_i - μ)/σ_i)."""
    from scipy.special import ndtr
    w = p[0]
    s = np.sqrt(d.vb + tau * tau)
    below = ndtr((d.cb - mu) / s)
    a = 1.0 + (w - 1.0) * below
    return (_normal_part(d, mu, tau) + d.n_mid_low * np.log(w)[..., 0]
            - _sum_studies(d, np.log(a)))


def _ll_step2(d, mu, tau, p):
    """Steps at one-sided p = .025 and .5: weights 1, ω₂, ω₃ for y > c_i, 0 < y ≤ c_i,
    y ≤ 0; A_i = P₁ + ω₂ P₂ + ω₃ P₃ from normal CDFs (Vevea & Hedges 1995, eq. 8)."""
    from scipy.special import ndtr
    w2 = p[0]
    ratio = p[1]
    s = np.sqrt(d.vb + tau * tau)
    below_c = ndtr((d.cb - mu) / s)
    below_0 = ndtr(-mu / s)
    # A = P1 + ω₂ (P2 + (ω₃/ω₂) P3): the inner sum has no ω₂ axis, which halves the work
    a = (1.0 - below_c) + w2 * ((below_c - below_0) + ratio * below_0)
    return (_normal_part(d, mu, tau) + (d.n_mid + d.n_low) * np.log(w2)[..., 0]
            + d.n_low * np.log(ratio)[..., 0] - _sum_studies(d, np.log(a)))


def _sum_studies(d, x):
    """Σ over the studies (last axis) of a term that depends on a study only through its
    standard error: over the standard-error groups, each counted as often as it has studies,
    when the literature is grouped (:func:`_data`)."""
    return np.sum(x, axis=-1) if d.nb is None else x @ d.nb


@dataclass(frozen=True)
class BiasModel:
    """A bias component: its label, its extra parameters and its log-likelihood."""

    name: str
    dims: object          # Priors -> tuple of _Dim
    loglik: object        # (data, mu, tau, params) -> log-likelihood over the last axis
    family: str           # "none", "selection" or "regression"


def _pet_peese_dims(attr):
    return lambda pr: (_half_cauchy_dim("slope", getattr(pr, attr)),)


def _two_step_dims(pr):
    a1, a2, a3 = pr.two_step_alpha
    return (_beta_dim("omega_mid", a2 + a3, a1), _beta_dim("omega_ratio", a3, a2))


#: The bias components, in display order (a registry: add a model by adding an entry).
BIAS_MODELS = {
    "no bias": BiasModel("no bias", lambda pr: (), _ll_none, "none"),
    "one-step selection": BiasModel(
        "one-step selection",
        lambda pr: (_beta_dim("omega", pr.one_step_alpha[1], pr.one_step_alpha[0]),),
        _ll_step1, "selection"),
    "two-step selection": BiasModel("two-step selection", _two_step_dims, _ll_step2,
                                    "selection"),
    "PET": BiasModel("PET", _pet_peese_dims("pet_scale"), _ll_pet, "regression"),
    "PEESE": BiasModel("PEESE", _pet_peese_dims("peese_scale"), _ll_peese, "regression"),
}


@dataclass(frozen=True)
class _Data:
    y: np.ndarray
    v: np.ndarray
    se: np.ndarray
    c: np.ndarray
    n_mid_low: int   # studies with one-sided p > .025
    n_mid: int       # .025 < p ≤ .5
    n_low: int       # p > .5
    # the selection models' normalising constants depend on a study only through its SE:
    # vb, cb at each SE group's mean SE, nb the group sizes (None: one group per study)
    vb: np.ndarray = None
    cb: np.ndarray = None
    nb: np.ndarray = None
    moments: dict = None  # None / "se" / "v" -> the columns of _normal_part (_moments)
    sums: dict = field(default_factory=dict)  # per-τ sums of _normal_part, reused


#: Above this many studies, studies whose standard errors agree within :data:`SE_GROUP_WIDTH`
#: share one evaluation of the selection models' normalising constant (at the group's mean
#: SE); every other term stays exact. Below it every study is its own group. Checked against
#: the ungrouped fit in tests/test_bma.py (posterior quantiles of μ within 0.002).
GROUP_ABOVE_K = 400
#: Width of an SE group on the log scale (1 %): within a group, log A_i varies by O(1e-4).
SE_GROUP_WIDTH = 0.01


def _data(y, v, group_above=None, size_v=None) -> _Data:
    se = np.sqrt(v)
    c = Z975 * se
    sig = y > c
    low = y <= 0
    counts = (int((~sig).sum()), int((~sig & ~low).sum()), int(low.sum()))
    xv = v if size_v is None else size_v   # PET's and PEESE's predictor (model_average)
    moments = {None: _moments(y), "se": _moments(y, np.sqrt(xv)), "v": _moments(y, xv)}
    limit = GROUP_ABOVE_K if group_above is None else group_above
    if y.size <= limit:
        return _Data(y, v, se, c, *counts, v, c, None, moments)
    ls = np.log(se)
    # group edges every SE_GROUP_WIDTH on the log scale, from the smallest SE
    idx = np.floor((ls - ls.min()) / SE_GROUP_WIDTH).astype(np.int64)
    _, inv, nb = np.unique(idx, return_inverse=True, return_counts=True)
    sb = np.bincount(inv, weights=se) / nb
    return _Data(y, v, se, c, *counts, sb * sb, Z975 * sb, nb.astype(float), moments)


def log_likelihood(bias, y, v, mu, tau, *params, size_v=None) -> np.ndarray:
    """Log-likelihood of one bias model at parameter values (arrays broadcast together).

    ``params`` are the model's own parameters on their natural scale: ω for one-step
    selection; ω₂ and ω₃/ω₂ for two-step selection; the slope for PET and PEESE.
    ``size_v``: PET's and PEESE's predictor variances (:func:`model_average`; default ``v``).

    Examples
    --------
    >>> import numpy as np
    >>> y, v = np.array([0.3, 0.5, 0.1]), np.array([0.04, 0.05, 0.02])
    >>> round(float(log_likelihood("no bias", y, v, 0.3, 0.1)), 4)
    0.901
    """
    if bias not in BIAS_MODELS:
        raise OptionError(f"`bias` must be one of {', '.join(BIAS_MODELS)}, not {bias!r}")
    d = _data(np.asarray(y, float), np.asarray(v, float), group_above=math.inf,
              size_v=None if size_v is None else np.asarray(size_v, float))
    mu = np.asarray(mu, float)[..., None]
    tau = np.asarray(tau, float)[..., None]
    ps = tuple(np.asarray(p, float)[..., None] for p in params)
    return BIAS_MODELS[bias].loglik(d, mu, tau, ps)


# ------------------------------------------------------------------ quadrature

@dataclass(frozen=True)
class _Grid:
    """The final product grid of one model: nodes (values) per dimension and the normalised
    posterior mass of each grid point."""

    names: tuple
    values: tuple      # parameter values per dimension
    mass: np.ndarray   # posterior mass per grid point, sums to 1
    log_ml: float
    mu_step: float     # spacing of the μ grid (0 when μ is fixed)


_BIG = 4e6  # grid points × studies per evaluated chunk
_TAIL = 1e-9  # the box drops at most this share of the pilot's posterior mass in each tail
#: final-pass nodes (μ, each other parameter) by the number of integrated parameters
_FINAL_NODES = {1: (96, 48), 2: (64, 32), 3: (48, 16), 4: (32, 10)}
_NODE_BUDGET = 1.5e6  # final-pass grid points × studies aimed at


def _evaluate(model, d, dims, nodes, fixed_mu, fixed_tau):
    """Log-likelihood on the product of ``nodes`` (one 1-D array per dimension; μ first when
    free, then τ when free, then the bias parameters), in chunks along the first axis."""
    nd = len(nodes)
    shapes = tuple(len(n) for n in nodes)
    vals = []
    for i, (dim, n) in enumerate(zip(dims, nodes)):
        x = n if dim.kind == "mu" else dim.to_value(n)
        shp = [1] * (nd + 1)
        shp[i] = len(n)
        vals.append(np.reshape(x, shp))

    def call(vs):
        vs = list(vs)
        zero = np.zeros([1] * (nd + 1))
        mu = zero if fixed_mu else vs.pop(0)
        tau = zero if fixed_tau else vs.pop(0)
        return model.loglik(d, mu, tau, vs)

    if nd == 0:
        return np.asarray(call(vals)).reshape(())
    k = len(d.vb)  # the widest arrays run over the SE groups (all studies when ungrouped)
    per_first = max(1, int(np.prod(shapes[1:])))
    step = max(1, int(_BIG // (per_first * k)))
    out = np.empty(shapes)
    for a in range(0, shapes[0], step):
        sl = slice(a, a + step)
        r = call([vals[0][sl]] + vals[1:])
        out[sl] = np.broadcast_to(r, (len(range(*sl.indices(shapes[0]))),) + shapes[1:])
    return out


@functools.lru_cache(maxsize=64)
def _gauss_legendre(n):
    return np.polynomial.legendre.leggauss(n)


def _log_prior_mu(x, sd):
    return -0.5 * (x / sd) ** 2 - math.log(sd) - 0.5 * _LOG2PI


def _pilot_nodes(lo, hi, n):
    h = (hi - lo) / n
    return lo + h * (np.arange(n) + 0.5), h


def _fit_model(model, d, dims, fixed_mu, fixed_tau, pr, resolution):
    """Marginal likelihood and posterior grid of one model (box search, then final rule)."""
    nd = len(dims)
    if nd == 0:
        ll = float(_evaluate(model, d, dims, [], fixed_mu, fixed_tau))
        return _Grid((), (), np.ones(()), ll, 0.0)
    sd = pr.effect_sd
    box = [(-8.0 * sd, 8.0 * sd) if dm.kind == "mu" else (0.0, 1.0) for dm in dims]
    init_box = list(box)
    n_pilot = {1: 48, 2: 24, 3: 12, 4: 8}[nd]
    for _ in range(16):
        nodes, hs = zip(*(_pilot_nodes(lo, hi, n_pilot) for lo, hi in box))
        lp = _evaluate(model, d, dims, list(nodes), fixed_mu, fixed_tau)
        for i, dm in enumerate(dims):
            if dm.kind == "mu":
                shp = [1] * nd
                shp[i] = n_pilot
                lp = lp + _log_prior_mu(nodes[i], sd).reshape(shp)
        lp = np.where(np.isfinite(lp), lp, -np.inf)
        p = np.exp(lp - lp.max())
        new = []
        shrunk = False
        for i, (lo, hi) in enumerate(box):
            ax = tuple(a for a in range(nd) if a != i)
            marg = p.sum(axis=ax) if ax else p
            cum = np.cumsum(marg)
            tol = _TAIL * cum[-1]
            i_lo = int(np.searchsorted(cum, tol))
            i_hi = min(int(np.searchsorted(cum, cum[-1] - tol)), len(cum) - 1)
            nlo = max(lo, nodes[i][i_lo] - hs[i])
            nhi = min(hi, nodes[i][i_hi] + hs[i])
            if (nhi - nlo) < 0.8 * (hi - lo):
                shrunk = True
            new.append((nlo, nhi))
        box = new
        if not shrunk:
            break
    # the coarse pass can miss a narrow ridge (μ and ω are strongly correlated in the
    # selection models of large literatures): climb from its best point to the mode and
    # make the box hold the mode ± 8 Laplace standard deviations as well
    best = np.unravel_index(int(np.argmax(lp)), lp.shape)
    start = np.array([nodes[i][best[i]] for i in range(nd)])
    box = _hold_mode(model, d, dims, fixed_mu, fixed_tau, sd, start, box, init_box)
    # final pass; then, if its masses show the posterior occupies much less of the box (or
    # reaches its edge), once more on the box its masses call for
    n_mu, n_u = _FINAL_NODES[nd]
    # small literatures get finer grids (cheap there, and their posteriors are the least
    # regular); large ones keep the floor, where the posterior is close to normal
    room = _NODE_BUDGET / (len(d.vb) * n_mu * n_u ** (nd - 1))
    f = min(2.5, max(1.0, room ** (1 / nd)))
    n_mu, n_u = int(round(n_mu * f * resolution)), int(round(n_u * f * resolution))
    for attempt in range(3):
        grid, new_box = _final_pass(model, d, dims, fixed_mu, fixed_tau, sd, box, init_box,
                                    n_mu, n_u)
        widths = [(b[1] - b[0]) / (a[1] - a[0]) for a, b in zip(box, new_box)]
        if all(0.5 < w <= 1.0 + 1e-12 for w in widths):
            break
        box = new_box
    return grid


def _hold_mode(model, d, dims, fixed_mu, fixed_tau, sd, start, box, init_box):
    """Widen ``box`` to hold the posterior mode ± 8 standard deviations (from the Hessian).

    The mode is found by damped Newton steps whose gradient and Hessian come from central
    differences on a 3 × ... × 3 stencil, evaluated in one vectorised call per step.
    """
    nd = len(dims)
    lo_b = np.array([a if dm.kind == "mu" else a + 1e-9 for (a, _), dm in zip(init_box, dims)])
    hi_b = np.array([b if dm.kind == "mu" else b - 1e-9 for (_, b), dm in zip(init_box, dims)])
    widths = np.array([b - a for a, b in box])
    h = np.maximum(1e-4 * (hi_b - lo_b), 1e-3 * widths)

    def logpost(grid_nodes):
        val = _evaluate(model, d, dims, grid_nodes, fixed_mu, fixed_tau)
        if dims[0].kind == "mu":
            shp = [1] * nd
            shp[0] = len(grid_nodes[0])
            val = val + _log_prior_mu(grid_nodes[0], sd).reshape(shp)
        return np.where(np.isfinite(val), val, -np.inf)

    def point(x):
        return float(logpost([np.array([xi]) for xi in x]).reshape(-1)[0])

    x = np.clip(start, lo_b + h, hi_b - h)
    fx = point(x)
    hess = None
    for _ in range(30):
        x = np.clip(x, lo_b + h, hi_b - h)
        f = logpost([np.array([xi - hi, xi, xi + hi]) for xi, hi in zip(x, h)])
        if not np.all(np.isfinite(f)):
            break
        c = (1,) * nd
        g = np.empty(nd)
        hess = np.empty((nd, nd))
        for i in range(nd):
            up, dn = list(c), list(c)
            up[i], dn[i] = 2, 0
            g[i] = (f[tuple(up)] - f[tuple(dn)]) / (2 * h[i])
            hess[i, i] = (f[tuple(up)] - 2 * f[c] + f[tuple(dn)]) / h[i] ** 2
            for j in range(i + 1, nd):
                pp, pm, mp, mm = list(c), list(c), list(c), list(c)
                pp[i], pp[j], pm[i], pm[j] = 2, 2, 2, 0
                mp[i], mp[j], mm[i], mm[j] = 0, 2, 0, 0
                hess[i, j] = hess[j, i] = (f[tuple(pp)] - f[tuple(pm)] - f[tuple(mp)]
                                           + f[tuple(mm)]) / (4 * h[i] * h[j])
        try:
            if np.any(np.linalg.eigvalsh(hess) >= 0):
                raise np.linalg.LinAlgError
            step = -np.linalg.solve(hess, g)
        except np.linalg.LinAlgError:
            step = g * (0.1 * widths) / max(1e-300, float(np.max(np.abs(g * widths))))
        moved = False
        for _t in range(12):
            xn = np.clip(x + step, lo_b, hi_b)
            fn = point(xn)
            if fn >= fx:
                moved = np.any(np.abs(xn - x) > 1e-7 * widths)
                x, fx = xn, fn
                break
            step = step / 3
        if not moved:
            break
    try:
        if hess is None:
            raise np.linalg.LinAlgError
        cov = np.linalg.inv(-hess)
        if not np.all(np.isfinite(cov)) or np.any(np.diag(cov) <= 0):
            raise np.linalg.LinAlgError
        sds = np.sqrt(np.diag(cov))
    except np.linalg.LinAlgError:
        sds = widths / 2
    return [(max(a, min(lo, x[i] - 8 * sds[i])), min(b, max(hi, x[i] + 8 * sds[i])))
            for i, ((lo, hi), (a, b)) in enumerate(zip(box, init_box))]


def _final_pass(model, d, dims, fixed_mu, fixed_tau, sd, box, init_box, n_mu, n_u):
    nd = len(dims)
    nodes, weights = [], []
    for (lo, hi), dm in zip(box, dims):
        if dm.kind == "mu":
            x = np.linspace(lo, hi, n_mu)
            w = np.full(n_mu, (hi - lo) / (n_mu - 1))
            w[0] *= 0.5
            w[-1] *= 0.5
            w = w * np.exp(_log_prior_mu(x, sd))
        elif lo == 0.0 and dm.name != "tau":
            # a box from u = 0 (a selection weight's or a slope's prior CDF): u = hi s² with
            # Gauss-Legendre in s, so that an integrand like ω₂ = √u, which has a branch
            # point at u = 0 where strong selection puts the posterior, becomes smooth in s
            # (the two-step model's marginal likelihood was 0.7 % off; now to 1e-14 against
            # scipy dblquad, tests/test_review_bma.py)
            t, gw = _gauss_legendre(n_u)
            s = (t + 1) / 2
            x = hi * s * s
            w = gw * hi * s
        else:
            t, gw = _gauss_legendre(n_u)
            x = lo + (hi - lo) * (t + 1) / 2
            w = gw * (hi - lo) / 2
        nodes.append(x)
        weights.append(w)
    ll = _evaluate(model, d, dims, nodes, fixed_mu, fixed_tau)
    logw = sum(np.log(w).reshape([len(w) if a == i else 1 for a in range(nd)])
               for i, w in enumerate(weights))
    lt = np.where(np.isfinite(ll), ll, -np.inf) + logw
    m = lt.max()
    mass = np.exp(lt - m)
    z = mass.sum()
    log_ml = float(m + math.log(z))
    mass = mass / z
    # the box these masses call for: drop at most _TAIL in each tail, one node beyond
    new_box = []
    for i, ((lo, hi), (a, b)) in enumerate(zip(box, init_box)):
        ax = tuple(j for j in range(nd) if j != i)
        marg = mass.sum(axis=ax) if ax else mass
        cum = np.cumsum(marg)
        i_lo = int(np.searchsorted(cum, _TAIL))
        i_hi = min(int(np.searchsorted(cum, 1 - _TAIL)), len(cum) - 1)
        x = nodes[i]
        gap_lo = x[min(i_lo + 1, len(x) - 1)] - x[i_lo] if len(x) > 1 else 0.0
        gap_hi = x[i_hi] - x[max(i_hi - 1, 0)] if len(x) > 1 else 0.0
        nlo = x[i_lo] - 2 * gap_lo if i_lo > 0 else lo - (0.5 * (hi - lo) if lo > a else 0.0)
        nhi = x[i_hi] + 2 * gap_hi if i_hi < len(x) - 1 else hi + (0.5 * (hi - lo)
                                                                     if hi < b else 0.0)
        new_box.append((max(a, nlo), min(b, nhi)))
    values = tuple(x if dm.kind == "mu" else dm.to_value(x) for x, dm in zip(nodes, dims))
    mu_step = float(nodes[0][1] - nodes[0][0]) if dims[0].kind == "mu" else 0.0
    return _Grid(tuple(dm.name for dm in dims), values, mass, log_ml, mu_step), new_box


# ------------------------------------------------------------------ results

@dataclass(frozen=True)
class ModelFit:
    """One model of the average: prior and posterior probability, log marginal likelihood."""

    bias: str
    effect: bool
    heterogeneity: bool
    prior: float
    posterior: float
    log_marginal: float
    grid: _Grid = field(repr=False)

    @property
    def label(self) -> str:
        return (f"{self.bias}, {'effect' if self.effect else 'no effect'}, "
                f"{'heterogeneity' if self.heterogeneity else 'no heterogeneity'}")

    def to_dict(self) -> dict:
        return to_jsonable({"bias": self.bias, "effect": self.effect,
                            "heterogeneity": self.heterogeneity, "prior": self.prior,
                            "posterior": self.posterior, "log_marginal": self.log_marginal})

    def marginal(self, name):
        """(values, masses) of the posterior of parameter ``name`` in this model."""
        g = self.grid
        if name not in g.names:
            return np.zeros(1), np.ones(1)
        i = g.names.index(name)
        ax = tuple(a for a in range(len(g.names)) if a != i)
        return g.values[i], (g.mass.sum(axis=ax) if ax else g.mass)

    def mu_cdf_nodes(self):
        """(points, posterior CDF of μ at the points), dense enough to interpolate linearly
        between (:func:`_smooth_cdf`, from the density at the μ nodes)."""
        x, w = self.marginal("mu")
        dens = w / self.grid.mu_step  # trapezoid masses back to density (the ends carry half)
        dens[0] *= 2
        dens[-1] *= 2
        return _smooth_cdf(x, dens)

    def mu_tau(self):
        """(μ values, τ values, joint masses) with singleton axes for fixed parameters."""
        g = self.grid
        mu_v, tau_v = self.marginal("mu")[0], self.marginal("tau")[0]
        keep = [i for i, n in enumerate(g.names) if n in ("mu", "tau")]
        ax = tuple(a for a in range(len(g.names)) if a not in keep)
        m = g.mass.sum(axis=ax) if ax else g.mass
        return mu_v, tau_v, np.asarray(m).reshape(len(mu_v), len(tau_v))


@dataclass(frozen=True)
class Summary:
    """Median and credible interval of a model-averaged posterior."""

    median: float
    interval: Interval

    def to_dict(self) -> dict:
        return to_jsonable({"median": self.median, "ci_low": self.interval.low,
                            "ci_high": self.interval.high, "level": self.interval.level})


@dataclass(frozen=True)
class ModelAverage(ShowsAsTable):
    """The model-averaged posterior (from :func:`model_average`).

    Attributes
    ----------
    metric : {"g", "z"}
    k : int
    models : tuple of ModelFit
    inclusion_bf : dict
        Inclusion Bayes factors for "effect", "heterogeneity" and "bias" (posterior inclusion
        odds over prior inclusion odds).
    mu, tau : Summary
        Model-averaged posterior median and 95 % credible interval (models without the
        parameter count it as exactly 0).
    p_positive : float
        P(μ > 0 | data).
    predictive_edges, predictive_mass : numpy arrays
        The posterior predictive distribution of a new study's true effect θ = μ + τ ε,
        tabulated: the probability of each cell between consecutive edges (continuous part).
    predictive_atom : float
        Posterior probability that θ = 0 exactly (the no-effect, no-heterogeneity models).
    warnings : tuple of str
    same_sizes : bool
        Every study had the same size: PET and PEESE were left out and their prior share went
        to the selection models (:func:`model_average`); re-weighting keeps that split.
    """

    metric: str
    k: int
    priors: Priors
    models: tuple
    inclusion_bf: dict
    mu: Summary
    tau: Summary
    p_positive: float
    predictive_edges: np.ndarray = field(repr=False)
    predictive_mass: np.ndarray = field(repr=False)
    predictive_atom: float
    warnings: tuple
    _mu_cdf: tuple = field(repr=False)  # (grid, continuous CDF, atom at 0)
    same_sizes: bool = False

    # -- μ distribution
    def mu_cdf(self, x):
        """P(μ ≤ x | data) (right-continuous, with the atom at 0)."""
        g, c, atom = self._mu_cdf
        x = np.asarray(x, float)
        return np.interp(x, g, c, left=0.0) + atom * (x >= 0)

    def mu_quantile(self, q, positive=False) -> float:
        """Posterior quantile of μ; with ``positive=True`` of μ given μ > 0."""
        if not 0 < q < 1:
            raise OptionError(f"`q` must lie in (0, 1), not {q!r}")
        g, c, atom = self._mu_cdf
        c0 = float(np.interp(0.0, g, c, left=0.0))
        if positive:
            pp = c[-1] - c0
            if pp <= 0:
                raise OptionError("the posterior puts no mass on a positive effect")
            return float(_inverse(g, c, c0 + q * pp))
        if c0 >= q:
            return float(_inverse(g, c, q))
        if c0 + atom >= q:
            return 0.0
        return float(_inverse(g, c, q - atom))

    def predictive_points(self):
        """(nodes, probabilities) of the predictive distribution: cell centres plus the atom
        at 0, summing to 1 (for integrating power over it, e.g. assurance)."""
        e = self.predictive_edges
        x = np.concatenate([0.5 * (e[1:] + e[:-1]), [0.0]])
        p = np.concatenate([self.predictive_mass, [self.predictive_atom]])
        return x, p / p.sum()

    def predictive_density(self):
        """(cell centres, density) of the continuous part of the predictive distribution."""
        e = self.predictive_edges
        return 0.5 * (e[1:] + e[:-1]), self.predictive_mass / np.diff(e)

    def posterior_of(self, *, bias=None, effect=None, heterogeneity=None) -> float:
        """Summed posterior probability of the models that match the given components."""
        return float(sum(m.posterior for m in self.models
                         if (bias is None or m.bias == bias)
                         and (effect is None or m.effect == effect)
                         and (heterogeneity is None or m.heterogeneity == heterogeneity)))

    def with_model_prior(self, *, p_no_bias=None, p_effect=None, p_heterogeneity=None,
                         bias_shares=None) -> "ModelAverage":
        """The same model average under other prior model probabilities, without a refit.

        A model's posterior probability is its prior probability times its marginal
        likelihood, normalised over the models (Hoeting et al. 1999, eq. 2), and each model's
        own posterior of μ, τ and its bias parameters does not involve the prior model
        probabilities; so only the weights change. The result equals a full
        :func:`model_average` with those priors to rounding (the same grids are reused;
        tests/test_bma_reweight.py checks 1e-12). Prior scales (``effect_sd``, ``tau_scale``,
        ...) change the models' own posteriors: :func:`reweighted` re-weights the nodes for
        those. Both go through the same function and refuse priors that give weight to a
        model the fit did not include.

        Parameters
        ----------
        p_no_bias, p_effect, p_heterogeneity : float in [0, 1], optional
            New prior probabilities (unchanged when not given).
        bias_shares : tuple of (name, share), optional
            How 1 - p_no_bias is split between the bias models.

        Examples
        --------
        >>> import numpy as np
        >>> y = np.array([0.42, 0.18, 0.55, 0.31, 0.08, 0.47])   # invented
        >>> v = np.array([0.040, 0.031, 0.062, 0.045, 0.028, 0.051])
        >>> avg = model_average(y, v)
        >>> more_bias = avg.with_model_prior(p_no_bias=0.2)
        >>> more_bias.priors.p_no_bias
        0.2
        >>> more_bias.posterior_of(bias="no bias") < avg.posterior_of(bias="no bias")
        True
        """
        # validation
        changes = {name: val for name, val in (("p_no_bias", p_no_bias), ("p_effect", p_effect),
                                               ("p_heterogeneity", p_heterogeneity))
                   if val is not None}
        if bias_shares is not None:
            changes["bias_shares"] = _shares_tuple(bias_shares)
        pr = replace(self.priors, **changes)
        _check_priors(pr)
        return _reweigh(self, pr, self.mu.interval.level)

    def to_dict(self) -> dict:
        comp = {b: {"prior": sum(m.prior for m in self.models if m.bias == b),
                    "posterior": self.posterior_of(bias=b)}
                for b in dict.fromkeys(m.bias for m in self.models)}
        x, dens = self.predictive_density()
        return to_jsonable({
            "k": self.k, "metric": self.metric, "priors": self.priors,
            "inclusion_bf": self.inclusion_bf, "bias_components": comp,
            "mu": self.mu, "tau": self.tau, "p_positive": self.p_positive,
            "mu_given_positive": {"median": self.mu_quantile(0.5, True),
                                  "q25": self.mu_quantile(0.25, True)}
            if self.p_positive > 0 else NotEstimable("no posterior mass above 0"),
            "models": list(self.models),
            "predictive": {"grid": x.tolist(), "density": dens.tolist(),
                           "mass_at_zero": self.predictive_atom},
            "warnings": list(self.warnings)})

    def to_frame(self):
        import pandas as pd
        return pd.DataFrame([{"bias": m.bias, "effect": m.effect,
                              "heterogeneity": m.heterogeneity, "prior": m.prior,
                              "posterior": m.posterior, "log_marginal": m.log_marginal}
                             for m in self.models])


#: Sub-points of the tabulated CDF of μ per unit of the log density's local scale
#: (:func:`_smooth_cdf`), and at most this many per cell between μ nodes.
_SUB_PER_SCALE = 16
_SUB_MOST = 64
_SUB_TINY = 1e-12  # cells holding less of the mass than this get no sub-points


def _smooth_cdf(x, f):
    """(points, CDF) of a smooth density known at uniform nodes ``x`` (values ``f`` ≥ 0).

    The quadrature gets the density at the μ nodes right (the trapezoidal rule, exponentially
    accurate), but the nodes can lie a posterior standard deviation apart: μ's box holds every
    tail the model allows, and a linear CDF between nodes that far apart put the 97.5th
    percentile of μ given μ > 0 0.004 too high (tests/test_review_bma.py). So the log
    density is interpolated between nodes by a cubic Hermite polynomial (e.g. de Boor 2001,
    *A Practical Guide to Splines*, ch. IV) with fourth-order central-difference slopes
    (second order at the ends); both are exact for a quadratic, so a normal density is
    reproduced exactly. Its exponential is integrated by 4-point Gauss-Legendre on sub-cells
    small enough that the log density changes by about 1/16 across one
    (h·(|slope|/2 + √|curvature|)·16 sub-cells per cell, at most 64; one in cells holding less
    than 1e-12 of the mass), and the CDF is returned at the sub-cells' ends, where linear
    interpolation moves a quantile by a few 1e-5 posterior SDs at most.
    """
    n = len(x)
    top = float(f.max())
    if n < 3 or top <= 0:
        c = np.concatenate([[0.0], np.cumsum(0.5 * (f[1:] + f[:-1]))])
        return x, c / c[-1] if c[-1] > 0 else np.linspace(0.0, 1.0, n)
    h = float(x[1] - x[0])
    ell = np.log(np.maximum(f / top, 1e-300))  # log density, 0 at the top, ≥ -690.8
    slope = np.gradient(ell, h, edge_order=2)
    if n >= 5:
        slope[2:-2] = (ell[:-4] - 8 * ell[1:-3] + 8 * ell[3:-1] - ell[4:]) / (12 * h)
    curv = np.empty(n)
    curv[1:-1] = (ell[2:] - 2 * ell[1:-1] + ell[:-2]) / (h * h)
    curv[0], curv[-1] = curv[1], curv[-2]
    rough = 0.5 * (f[1:] + f[:-1])
    scale = (0.5 * np.maximum(np.abs(slope[1:]), np.abs(slope[:-1]))
             + np.sqrt(np.maximum(np.abs(curv[1:]), np.abs(curv[:-1]))))
    per = np.clip(np.ceil(_SUB_PER_SCALE * h * scale), 1, _SUB_MOST).astype(np.int64)
    per[rough <= _SUB_TINY * rough.sum()] = 1
    cell = np.repeat(np.arange(n - 1), per)
    start = np.cumsum(per) - per
    u0 = (np.arange(cell.size) - start[cell]) / per[cell]
    du = 1.0 / per[cell]
    t, gw = _gauss_legendre(4)
    u = u0[:, None] + du[:, None] * (t[None, :] + 1) / 2
    j = cell[:, None]
    u2, u3 = u * u, u * u * u
    logf = ((2 * u3 - 3 * u2 + 1) * ell[j] + (u3 - 2 * u2 + u) * h * slope[j]
            + (3 * u2 - 2 * u3) * ell[j + 1] + (u3 - u2) * h * slope[j + 1])
    # a guard against overshoot where the nodes are far too coarse: never more than e times
    # the larger end value (a normal density exceeds it by e^0.18 at one SD per cell)
    logf = np.minimum(logf, np.maximum(ell[j], ell[j + 1]) + 1.0)
    mass = (np.exp(logf) @ gw) * du * (h / 2)
    c = np.concatenate([[0.0], np.cumsum(mass)])
    pts = np.concatenate([x[cell] + h * u0, x[-1:]])
    return pts, c / c[-1]


def _inverse(g, c, target):
    """x with piecewise-linear CDF c(g) = target (first crossing)."""
    i = int(np.searchsorted(c, target, side="left"))
    if i <= 0:
        return g[0]
    if i >= len(c):
        return g[-1]
    c0, c1 = c[i - 1], c[i]
    t = 0.0 if c1 <= c0 else (target - c0) / (c1 - c0)
    return g[i - 1] + t * (g[i] - g[i - 1])


# ------------------------------------------------------------------ the stage

def _model_list(pr: Priors, models):
    shares = dict(pr.bias_shares)
    out = []
    for b in BIAS_MODELS:
        pb = pr.p_no_bias if b == "no bias" else (1 - pr.p_no_bias) * shares.get(b, 0.0)
        for eff in (False, True):
            for het in (False, True):
                if models is not None and (b, eff, het) not in models:
                    continue
                p = (pb * (pr.p_effect if eff else 1 - pr.p_effect)
                     * (pr.p_heterogeneity if het else 1 - pr.p_heterogeneity))
                if p > 0 or models is not None:
                    out.append((b, eff, het, p))
    return out


def _dims(model, eff, het, pr):
    """The integrated parameters of one model: μ if free, τ if free, then its own."""
    return (((_mu_dim(pr),) if eff else ()) + ((_tau_dim(pr),) if het else ())
            + tuple(model.dims(pr)))


def model_average(y, v, metric="g", priors: Priors = DEFAULT_PRIORS, *, models=None,
                  resolution: float = 1.0, level: float = 0.95, size_v=None) -> ModelAverage:
    """Bayesian model average over the publication-bias models, by quadrature.

    Parameters
    ----------
    y, v : array_like
        Effect sizes (positive = the hypothesised direction) and their sampling variances,
        on the literature's metric.
    metric : {"g", "d", "z"}
        "z" (Fisher z) converts the d-scale priors (:meth:`Priors.on_metric`).
    priors : Priors
        :data:`DEFAULT_PRIORS` or your own; :data:`WIDE_PRIORS` for the sensitivity line.
    models : iterable of (bias, effect, heterogeneity), optional
        Fit only these models (each then gets prior weight in proportion to the defaults,
        or equal weights if its default weight is 0).
    resolution : float
        Multiplies every final-pass node count (2 = a refined grid, for checking).
    level : float
        Credible level of the intervals.
    size_v : array_like, optional
        PET's and PEESE's predictor: each study's sampling variance at a zero effect
        (:func:`pooler.evidence.bias.size_variances`; Pustejovsky & Rodgers 2019). Default
        ``v`` (the published definition). When these are all equal, PET and PEESE are left
        out and their prior share goes to the selection models, with a warning.

    Returns
    -------
    ModelAverage

    Examples
    --------
    >>> import numpy as np
    >>> y = np.array([0.42, 0.18, 0.55, 0.31, 0.08, 0.47])   # invented
    >>> v = np.array([0.040, 0.031, 0.062, 0.045, 0.028, 0.051])
    >>> res = model_average(y, v)
    >>> 0 < res.mu_quantile(0.5, positive=True) < 0.45
    True
    >>> round(sum(m.posterior for m in res.models), 6)
    1.0
    """
    # validation
    y = np.asarray(y, float).ravel()
    v = np.asarray(v, float).ravel()
    if y.size == 0:
        raise InputError("no studies to average over: at least one usable row is needed")
    if y.shape != v.shape:
        raise OptionError("`y` and `v` must have the same length")
    if not (np.all(np.isfinite(y)) and np.all(np.isfinite(v)) and np.all(v > 0)):
        raise OptionError("every effect must be finite and every variance positive")
    if metric not in ("g", "d", "z"):
        raise OptionError(f"`metric` must be 'g', 'd' or 'z', not {metric!r}")
    _check_priors(priors)
    if not resolution >= 0.5:
        raise OptionError(f"`resolution` must be at least 0.5, not {resolution!r}")
    if not 0 < level < 1:
        raise OptionError(f"`level` must lie in (0, 1), not {level!r}")
    if models is not None:
        models = {tuple(m) for m in models}
        bad = [m for m in models if m[0] not in BIAS_MODELS]
        if bad:
            raise OptionError(f"unknown bias model {bad[0][0]!r}; choose from "
                              f"{', '.join(BIAS_MODELS)}")
    if size_v is not None:
        size_v = np.asarray(size_v, float).ravel()
        if size_v.shape != y.shape or not (np.all(np.isfinite(size_v)) and np.all(size_v > 0)):
            raise OptionError("`size_v` must hold one positive, finite variance per study")

    pr = priors.on_metric(metric)
    k = len(y)
    warnings = []
    from pooler.evidence.bias import _same_size   # the bias table's test of the same rule
    same_sizes = k > 1 and _same_size(v if size_v is None else size_v)
    if same_sizes:
        pr = _without_regression(pr)
        if models is not None:
            models = {m for m in models if BIAS_MODELS[m[0]].family != "regression"}
        warnings.append("every study has the same size, so PET and PEESE cannot tell a "
                        "small-study effect from the mean effect: they are left out and their "
                        "prior share goes to the selection models")
    d = _data(y, v, size_v=size_v)
    if k <= 2:
        warnings.append(f"only {k} stud{'y' if k == 1 else 'ies'}: the bias models cannot be "
                        "told apart from each other or from no bias, so the priors carry "
                        "most of the answer")

    fits = []
    spec = _model_list(pr, models)
    if not spec:
        raise OptionError("no model left to average over")
    if models is not None and sum(p for *_, p in spec) <= 0:
        spec = [(b, e, h, 1.0) for b, e, h, _ in spec]
    for b, eff, het, p in spec:
        model = BIAS_MODELS[b]
        dims = _dims(model, eff, het, pr)
        g = _fit_model(model, d, dims, not eff, not het, pr, resolution)
        fits.append((b, eff, het, p, g))
    return _assemble(metric, k, pr, fits, tuple(warnings), level, same_sizes)


def _without_regression(pr: Priors) -> Priors:
    """The priors with the regression models' (PET, PEESE) share moved to the selection
    models in proportion to theirs, so the prior probability of bias stays the same."""
    shares = dict(pr.bias_shares)
    fam = {b: BIAS_MODELS[b].family for b in shares}
    if all(s == 0 for b, s in shares.items() if fam[b] == "regression"):
        return pr   # nothing to move (the priors of a fit that already left them out)
    sel = sum(s for b, s in shares.items() if fam[b] == "selection")
    total = sum(shares.values())
    if sel <= 0:   # no selection model has a share: bias as a whole keeps none
        return replace(pr, bias_shares=tuple((b, 0.0) for b in shares))
    return replace(pr, bias_shares=tuple(
        (b, s * total / sel if fam[b] == "selection" else 0.0) for b, s in shares.items()))


def _assemble(metric, k, pr, fits, warnings, level, same_sizes=False) -> ModelAverage:
    """The model average from fitted models: ``fits`` holds (bias, effect, heterogeneity,
    prior weight, grid) per model. Posterior model probabilities are prior weight × marginal
    likelihood, normalised (Hoeting et al. 1999, eq. 2); everything else is averaged from the
    models' own posteriors, which do not depend on the prior model probabilities."""
    ptot = sum(f[3] for f in fits)
    logs = np.array([math.log(f[3] / ptot) + f[4].log_ml if f[3] > 0 else -np.inf
                     for f in fits])
    post = np.exp(logs - logs.max())
    post /= post.sum()
    mfits = tuple(ModelFit(b, eff, het, p / ptot, float(q), g.log_ml, g)
                  for (b, eff, het, p, g), q in zip(fits, post))

    def incl(pred):
        pi = sum(m.prior for m in mfits if pred(m))
        if pi <= 0 or pi >= 1:
            return NotEstimable("every model (or none) includes it")
        # from the log marginal likelihoods, not from 1 - P(included | data), which loses
        # every digit once the posterior odds pass about 1e16
        inside = np.array([pred(m) for m in mfits])
        log_bf = (np.logaddexp.reduce(logs[inside]) - np.logaddexp.reduce(logs[~inside])
                  - math.log(pi / (1 - pi)))
        if log_bf > 709:
            return NotEstimable("the Bayes factor exceeds the floating-point range")
        return float(math.exp(log_bf))

    bf = {"effect": incl(lambda m: m.effect),
          "heterogeneity": incl(lambda m: m.heterogeneity),
          "bias": incl(lambda m: m.bias != "no bias")}

    # μ: mixture CDF on the union of the models' grids, with the atom at 0
    live = [m for m in mfits if m.posterior > 1e-12]
    atom = sum(m.posterior for m in live if not m.effect)
    grids, cdfs = [], []
    for m in live:
        if not m.effect:
            continue
        x, c = m.mu_cdf_nodes()
        grids.append(x)
        cdfs.append((m.posterior, x, c))
    if grids:
        g_all = np.unique(np.concatenate(grids + [np.zeros(1)]))
        c_all = sum(p * np.interp(g_all, x, c, left=0.0, right=1.0) for p, x, c in cdfs)
    else:
        g_all, c_all = np.array([-1.0, 0.0, 1.0]), np.zeros(3)
    mu_cdf = (g_all, c_all, atom)
    p_pos = float(max(0.0, (1 - atom) - np.interp(0.0, g_all, c_all, left=0.0)))

    res = ModelAverage(metric, k, pr, mfits, bf, None, None, p_pos, None, None, 0.0,
                       warnings, mu_cdf, same_sizes)
    lo_q, hi_q = (1 - level) / 2, (1 + level) / 2
    mu_s = Summary(res.mu_quantile(0.5), Interval(res.mu_quantile(lo_q),
                                                  res.mu_quantile(hi_q), level))
    tau_s = _tau_summary(live, level)
    edges, cells, p_atom = _predictive(live, res, tau_s)
    return replace(res, mu=mu_s, tau=tau_s, predictive_edges=edges, predictive_mass=cells,
                   predictive_atom=p_atom)


def reweighted(avg: ModelAverage, priors: Priors, *, level: float = 0.95) -> ModelAverage:
    """The model average under other priors, from the fit already made: each model's
    quadrature nodes re-weighted by the ratio of the new to the old prior density.

    The likelihood at every node is unchanged by the prior, so the new marginal likelihood is
    the old one times the posterior mean of p_new(θ)/p_old(θ) over the old nodes, and the new
    posterior mass of each node is its old mass times that ratio, renormalised (importance
    re-weighting on the same quadrature rule; Gelman et al. 2013, BDA3, sect. 10.4). It is
    accurate while the new posterior lies inside the old box (which holds all but 1e-9 of the
    old posterior in each tail): for the sensitivity line's :data:`WIDE_PRIORS` it agrees
    with a full fit within 0.002 in every quantile of μ used for planning
    (tests/test_bma.py), at no extra likelihood evaluation.

    The prior model probabilities in ``priors`` apply too (as in
    :meth:`ModelAverage.with_model_prior`, which shares this function's checks): the result
    holds the models a fit with ``priors`` would hold, those with positive prior weight, and
    an OptionError says so when one of them was not fitted (a fit restricted by
    ``models=``). When every study had the same size, PET's and PEESE's share goes to the
    selection models, as in :func:`model_average`.

    Parameters
    ----------
    avg : ModelAverage
        A fit by :func:`model_average`.
    priors : Priors
        The new priors, on Cohen's d as always (converted to the fit's metric).
    level : float
        Credible level of the intervals.

    Examples
    --------
    >>> import numpy as np
    >>> y = np.array([0.42, 0.18, 0.55, 0.31, 0.08, 0.47])   # invented
    >>> v = np.array([0.040, 0.031, 0.062, 0.045, 0.028, 0.051])
    >>> wide = reweighted(model_average(y, v), WIDE_PRIORS)
    >>> wide.priors.effect_sd
    2.0
    """
    # validation
    if not isinstance(avg, ModelAverage):
        raise OptionError("`avg` must be a pooler.evidence.bma.ModelAverage")
    _check_priors(priors)
    if not 0 < level < 1:
        raise OptionError(f"`level` must lie in (0, 1), not {level!r}")

    return _reweigh(avg, priors.on_metric(avg.metric), level)


def _reweigh(avg: ModelAverage, pr: Priors, level: float) -> ModelAverage:
    """The model average ``avg`` under the priors ``pr`` (on the fit's metric), from its
    fitted nodes: :meth:`ModelAverage.with_model_prior` and :func:`reweighted`.

    The models are those a fit with ``pr`` would have, the ones with positive prior weight
    (:func:`_model_list`); each must be in ``avg``, else the answer needs a refit and an
    OptionError says so. When every study had the same size (``avg.same_sizes``) PET's and
    PEESE's share goes to the selection models, as :func:`model_average` does. A model whose
    parameter priors changed has its nodes re-weighted by p_new(θ)/p_old(θ) (the old
    posterior mass times the ratio, renormalised; the marginal likelihood times the ratio's
    posterior mean; :func:`reweighted`); otherwise its fit is reused as it is, so that only
    the posterior model probabilities change (Hoeting et al. 1999, eq. 2).
    """
    old_pr = avg.priors
    if avg.same_sizes:
        pr = _without_regression(pr)
    weight = {(b, e, h): p for b, e, h, p in _model_list(pr, None)}
    fitted = {(m.bias, m.effect, m.heterogeneity) for m in avg.models}
    missing = [key for key in weight if key not in fitted]
    if missing:
        b, e, h = missing[0]
        raise OptionError(
            f"these priors give weight to a model that was not fitted ({b}, "
            f"{'effect' if e else 'no effect'}, "
            f"{'heterogeneity' if h else 'no heterogeneity'}); fit again with "
            "pooler.evidence.bma.model_average")
    same_scales = _scales(old_pr) == _scales(pr)
    fits = []
    for m in avg.models:
        p = weight.get((m.bias, m.effect, m.heterogeneity), 0.0)
        if p <= 0:
            continue   # a fit with these priors leaves the model out
        g = m.grid
        if not same_scales:
            model = BIAS_MODELS[m.bias]
            olds = _dims(model, m.effect, m.heterogeneity, old_pr)
            news = _dims(model, m.effect, m.heterogeneity, pr)
            nd = len(g.names)
            lr = np.zeros([1] * nd) if nd else np.zeros(())
            for i, (do, dn, x) in enumerate(zip(olds, news, g.values)):
                shp = [1] * nd
                shp[i] = len(x)
                lr = lr + (dn.log_pdf(x) - do.log_pdf(x)).reshape(shp)
            top = float(lr.max())
            mass = g.mass * np.exp(lr - top)
            z = float(mass.sum())
            g = replace(g, mass=mass / z, log_ml=g.log_ml + top + math.log(z))
        fits.append((m.bias, m.effect, m.heterogeneity, p, g))
    if not fits:
        raise OptionError("these priors give no model any weight")
    return _assemble(avg.metric, avg.k, pr, fits, avg.warnings, level, avg.same_sizes)


def _scales(pr: Priors) -> tuple:
    """The priors' parts that shape the models' own posteriors (all but the model
    probabilities)."""
    return (pr.effect_sd, pr.tau_shape, pr.tau_scale, pr.pet_scale, pr.peese_scale,
            tuple(pr.one_step_alpha), tuple(pr.two_step_alpha))


def _shares_tuple(bias_shares) -> tuple:
    """``bias_shares`` as a tuple of (name, share) pairs, or an OptionError."""
    try:
        return tuple((str(b), float(sh)) for b, sh in bias_shares)
    except (TypeError, ValueError):
        raise OptionError("`bias_shares` must be pairs of (bias model, share), not "
                          f"{bias_shares!r}") from None


def _check_priors(priors) -> None:
    """The validation block of every public function that takes :class:`Priors`."""
    if not isinstance(priors, Priors):
        raise OptionError("`priors` must be a pooler.evidence.bma.Priors")
    for name in ("p_effect", "p_heterogeneity", "p_no_bias"):
        val = getattr(priors, name)
        if not (isinstance(val, numbers.Real) and 0 <= val <= 1):
            raise OptionError(f"`{name}` must lie in [0, 1], not {val!r}")
    for name in ("effect_sd", "tau_shape", "tau_scale", "pet_scale", "peese_scale"):
        val = getattr(priors, name)
        if not (isinstance(val, numbers.Real) and val > 0 and math.isfinite(val)):
            raise OptionError(f"the prior's `{name}` must be positive, not {val!r}")
    for name, n in (("one_step_alpha", 2), ("two_step_alpha", 3)):
        val = getattr(priors, name)
        if not (isinstance(val, (tuple, list)) and len(val) == n
                and all(isinstance(a, numbers.Real) and a > 0 and math.isfinite(a)
                        for a in val)):
            raise OptionError(f"the prior's `{name}` must be {n} positive numbers, not {val!r}")
    bad = [b for b, sh in _shares_tuple(priors.bias_shares)
           if b not in BIAS_MODELS or BIAS_MODELS[b].family == "none"
           or not (sh >= 0 and math.isfinite(sh))]
    if bad:
        raise OptionError(f"`bias_shares`: {bad[0]!r} is not a bias model with a share >= 0; "
                          f"choose from {', '.join(b for b in BIAS_MODELS if b != 'no bias')}")


def _tau_summary(live, level) -> Summary:
    """Model-averaged τ: each model's τ masses spread over cells around its nodes."""
    atom = sum(m.posterior for m in live if not m.heterogeneity)
    pts, wts = [np.zeros(1)], [np.array([atom])]
    for m in live:
        if m.heterogeneity:
            x, w = m.marginal("tau")
            pts.append(x)
            wts.append(m.posterior * w)
    x = np.concatenate(pts)
    w = np.concatenate(wts)
    o = np.argsort(x, kind="stable")
    x, w = x[o], w[o]
    c = np.cumsum(w) - 0.5 * w
    c[0] = 0.0 if atom == 0 else c[0]

    def q(p):
        if atom >= p:
            return 0.0
        return float(np.interp(p, c, x))
    return Summary(q(0.5), Interval(q((1 - level) / 2), q((1 + level) / 2), level))


def _predictive(live, res, tau_s, n_cells=400):
    """Cell masses of θ = μ + τ ε: Σ mass × [Φ((e_{j+1} - μ)/τ) - Φ((e_j - μ)/τ)], exact per
    grid point; τ = 0 models use their μ posterior's CDF."""
    from scipy.special import ndtr
    lo = min(res.mu_quantile(0.0005), 0.0)
    hi = max(res.mu_quantile(0.9995), 0.0)
    t_hi = max(m.marginal("tau")[0].max() if m.heterogeneity else 0.0 for m in live)
    t_q = max(tau_s.interval.high, 1e-6)
    spread = 6 * min(t_hi, 3 * t_q) if t_hi > 0 else 0.0
    span = max(hi - lo, 1e-6)
    edges = np.linspace(lo - spread - 0.02 * span, hi + spread + 0.02 * span, n_cells + 1)
    cells = np.zeros(n_cells)
    atom = 0.0
    for m in live:
        if not m.heterogeneity:
            if not m.effect:
                atom += m.posterior
                continue
            x, c = m.mu_cdf_nodes()
            ce = np.interp(edges, x, c, left=0.0, right=1.0)
            cells += m.posterior * np.diff(ce)
            continue
        mu_v, tau_v, jm = m.mu_tau()
        mu_v, jm = _coarsen(mu_v, jm, 48)
        tau_v, jm = _coarsen(tau_v, jm.T, 24)
        jm = jm.T
        keep = jm > 1e-9 * jm.sum()
        ii, jj = np.nonzero(keep)
        mus, taus, ws = mu_v[ii], tau_v[jj], jm[ii, jj]
        ce = ndtr((edges[None, :] - mus[:, None]) / taus[:, None])
        cells += m.posterior * (ws @ np.diff(ce, axis=1))
    return edges, cells, atom


def _coarsen(x, m, most):
    """Merge adjacent nodes of ``x`` (masses ``m`` along axis 0) into at most ``most``
    groups at their mass-weighted mean over the group's total (1-D locations): for
    tabulating the predictive distribution only."""
    n = len(x)
    if n <= most:
        return x, m
    f = -(-n // most)
    pad = (-n) % f
    xs = np.concatenate([x, np.repeat(x[-1], pad)]).reshape(-1, f)
    ms = np.concatenate([m, np.zeros((pad,) + m.shape[1:])]).reshape((-1, f) + m.shape[1:])
    w = ms.reshape(ms.shape[0], f, -1).sum(axis=2)
    tot = w.sum(axis=1)
    loc = np.where(tot > 0, (w * xs).sum(axis=1) / np.where(tot > 0, tot, 1.0),
                   xs.mean(axis=1))
    return loc, ms.sum(axis=1)


# ------------------------------------------------------------------ planning scenarios

#: Below this inclusion Bayes factor for an effect the posterior favours no effect: 1/10,
#: "strong" evidence for the null on the conventional scale of Jeffreys (1961) as labelled by
#: Lee & Wagenmakers (2013). Chosen by calibration: at 1/3 ("moderate"), 30 % of 20 simulated
#: unbiased literatures of 10 studies with δ = 0.2 (τ = 0.1, 20-100 per group) were refused
#: (goal ≤ 2 %); at 1/10 none were, while 50 % of literatures with δ = 0 still were (the rest
#: plan on a small realistic effect, i.e. a large study). With prior P(effect) = ½ it means
#: P(effect | data) < 1/11.
NULL_BF = 1 / 10


@dataclass(frozen=True)
class PosteriorScenarios:
    """Planning effects from the model-averaged posterior, on the literature's metric.

    Attributes
    ----------
    realistic : float
        Posterior median of μ given μ > 0.
    pessimistic : float
        The ``pessimistic_quantile`` of μ given μ > 0, raised to the SESOI when one is given,
        never above the realistic effect.
    interval : Interval
        Credible interval of μ given μ > 0 (the realistic effect's interval).
    p_positive, bf_effect : float
        P(μ > 0 | data) and the inclusion Bayes factor for an effect.
    favours_null : bool
        True when the posterior favours no positive effect: the inclusion Bayes factor for
        an effect is below ``null_bf``, or P(μ < 0 | data) > ½ (a negative effect).
    """

    realistic: float
    pessimistic: float
    interval: Interval
    p_positive: float
    bf_effect: float | NotEstimable
    favours_null: bool
    pessimistic_quantile: float
    sesoi: float | None
    basis_realistic: str
    basis_pessimistic: str

    def to_dict(self) -> dict:
        return to_jsonable({"realistic": self.realistic, "pessimistic": self.pessimistic,
                            "interval": self.interval, "p_positive": self.p_positive,
                            "bf_effect": self.bf_effect, "favours_null": self.favours_null,
                            "pessimistic_quantile": self.pessimistic_quantile,
                            "sesoi": self.sesoi})


def _atom(avg) -> float:
    """Posterior probability of μ = 0 exactly (the models without an effect)."""
    return float(avg._mu_cdf[2])


def posterior_scenarios(avg: ModelAverage, *, pessimistic_quantile: float = 0.15,
                        sesoi: float | None = None, level: float = 0.95,
                        null_bf: float = NULL_BF) -> PosteriorScenarios:
    """Realistic and pessimistic planning effects from a :class:`ModelAverage`.

    Parameters
    ----------
    avg : ModelAverage
    pessimistic_quantile : float
        Quantile of μ given μ > 0 used as the pessimistic effect (0.15 by default, chosen by
        calibration; lower is more protective and costs more participants).
    sesoi : float, optional
        Smallest effect size of interest on the literature's metric: the pessimistic effect
        is never below it.
    level : float
        Credible level of the realistic interval.
    null_bf : float
        Inclusion Bayes factor for an effect below which the posterior favours no effect.

    Examples
    --------
    >>> import numpy as np
    >>> y = np.array([0.42, 0.18, 0.55, 0.31, 0.08, 0.47])   # invented
    >>> v = np.array([0.040, 0.031, 0.062, 0.045, 0.028, 0.051])
    >>> sc = posterior_scenarios(model_average(y, v))
    >>> 0 < sc.pessimistic < sc.realistic
    True
    """
    # validation
    if not isinstance(avg, ModelAverage):
        raise OptionError("`avg` must be a pooler.evidence.bma.ModelAverage")
    if not 0 < pessimistic_quantile <= 0.5:
        raise OptionError("`pessimistic_quantile` must lie in (0, 0.5], not "
                          f"{pessimistic_quantile!r}")
    if sesoi is not None and not (sesoi > 0 and math.isfinite(sesoi)):
        raise OptionError(f"`sesoi` must be a positive effect, not {sesoi!r}")
    if not 0 < level < 1:
        raise OptionError(f"`level` must lie in (0, 1), not {level!r}")
    if avg.p_positive <= 0:
        raise OptionError("the posterior puts no mass on a positive effect")
    real = avg.mu_quantile(0.5, positive=True)
    pess = avg.mu_quantile(pessimistic_quantile, positive=True)
    basis_p = (f"{100 * pessimistic_quantile:g}th percentile of the model-averaged posterior "
               "of the mean effect given a positive effect")
    if sesoi is not None and pess < sesoi:
        pess = sesoi
        basis_p += "; raised to the smallest effect size of interest"
    if pess > real:
        pess = real
        basis_p += "; lowered to the realistic effect"
    lo = avg.mu_quantile((1 - level) / 2, positive=True)
    hi = avg.mu_quantile((1 + level) / 2, positive=True)
    bf = avg.inclusion_bf["effect"]
    p_negative = float(avg.mu_cdf(0.0)) - _atom(avg)
    favours_null = (isinstance(bf, float) and bf < null_bf) or p_negative > 0.5
    return PosteriorScenarios(
        real, pess, Interval(lo, hi, level), avg.p_positive, bf, favours_null,
        pessimistic_quantile, sesoi,
        f"posterior median of the mean effect given a positive effect, averaged over "
        f"{len(avg.models)} publication-bias models (P(effect > 0) = {avg.p_positive:.2f})",
        basis_p)
