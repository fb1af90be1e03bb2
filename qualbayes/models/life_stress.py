r"""Life-stress relations and the censored log-location-scale likelihood (numpy or jax; no I/O).

Life :math:`T` at stress :math:`x` follows a log-location-scale law

.. math::

    \log T = \mu(x) + \sigma\,\varepsilon, \qquad
    \mu(x) = \gamma_0 + \sum_j \gamma_j\,\bigl(s_j(x_j) - \bar s_j\bigr)

with :math:`\varepsilon` standard smallest-extreme-value (Weibull life: shape
:math:`\beta = 1/\sigma`, scale :math:`\eta(x) = e^{\mu(x)}`) or standard normal (lognormal
life, median :math:`e^{\mu(x)}`). The shape (or :math:`\sigma`) is common to all stress
levels. Each stress enters through a transform :math:`s_j` chosen by the engineer, signed so
that a positive coefficient means "more stress, shorter life":

=================  ==========================  ==============================  =============
relation           :math:`s(x)`                life proportional to            coefficient
=================  ==========================  ==============================  =============
``arrhenius``      :math:`1/(k_B T)`, T in K   :math:`\exp(E_a/(k_B T))`       :math:`E_a` eV
``inverse-power``  :math:`-\log x`             :math:`x^{-n}`                  :math:`n`
``log-linear``     :math:`-x`                  :math:`\exp(-b x)`              :math:`b`
=================  ==========================  ==============================  =============

:math:`k_B = 8.617333262\times10^{-5}` eV/K (CODATA 2018, exact since the 2019 SI). The
acceleration factor of stress :math:`x` against use :math:`x_u` is
:math:`AF = e^{\mu(x_u) - \mu(x)}` (the same for every quantile, because the shape is common).

Censored contributions, with :math:`z = (\log t - \mu)/\sigma`: failure
:math:`\log f = -\log\sigma - \log t + \log\phi(z)`; suspension :math:`\log S(t)`; interval
:math:`\log(S(a) - S(b))`; left-censored :math:`\log F(b)`. Weibull:
:math:`\log\phi(z) = z - e^z`, :math:`\log S = -e^z`, :math:`\log F = \log(1 - \exp(-e^z))`;
lognormal: :math:`\log\phi` the normal log density, :math:`\log S = \log\Phi(-z)`,
:math:`\log F = \log\Phi(z)`; all evaluated in log space so far tails stay finite.

Parameters (the vector ``theta``): :math:`\log\sigma_g` for each shape group g (one group
for the common-shape model), then :math:`\gamma_0` and the coefficients on *internal*
columns :math:`c_j = (s_j - \bar s_j)/d_j` (scaled by :math:`d_j`, the spread of
:math:`s_j` over the units, so the optimiser and the sampler see numbers of order one); the
engineer's coefficient is :math:`\gamma_j = c_j / d_j`.

Priors (densities on theta): :math:`\log\sigma_g \sim N(-m, s)` from a shape prior
:math:`\log\beta \sim N(m, s)` (default :math:`N(0, 1)`, as for ``life``; ``None`` = flat),
:math:`\gamma_0` flat, each :math:`\gamma_j \sim N(m_j, s_j)` from a stated range or flat
(the default: the answer then rests on the data, and the data must show the effect).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.models.weibull import Z975, log1mexp_from_log, log_expm1, lognormal_from_range

BOLTZMANN_EV = 8.617333262e-5  # eV/K, CODATA 2018 (exact)
KELVIN_OFFSET = 273.15
RELATIONS = ("arrhenius", "inverse-power", "log-linear")
DISTRIBUTIONS = ("weibull", "lognormal")
LOG_2PI = math.log(2.0 * math.pi)
COEF_NAMES = {"arrhenius": "activation energy (eV)", "inverse-power": "stress exponent n",
              "log-linear": "log-linear coefficient b"}


def transform(relation: str, x) -> np.ndarray:
    """s(x) of a relation; temperatures for ``arrhenius`` in kelvin."""
    x = np.asarray(x, float)
    if relation == "arrhenius":
        return 1.0 / (BOLTZMANN_EV * x)
    if relation == "inverse-power":
        return -np.log(x)
    if relation == "log-linear":
        return -x
    raise OptionError(f"unknown relation {relation!r}; choose one of {', '.join(RELATIONS)}")


def normal_from_range(lo: float, hi: float) -> tuple[float, float]:
    """(mean, sd) of the normal whose central 95% interval is (lo, hi)."""
    return 0.5 * (lo + hi), (hi - lo) / (2.0 * Z975)


@dataclass(frozen=True)
class StressTerm:
    """One stress variable: its column, relation, unit label and use value (kelvin for
    temperatures), and the prior on its coefficient ((mean, sd) or None = flat)."""

    column: str
    relation: str
    use: float
    unit: str = ""
    prior: tuple[float, float] | None = None
    prior_range: tuple[float, float] | None = None

    def describe_prior(self) -> str:
        name = COEF_NAMES[self.relation]
        if self.prior is None:
            return (f"{name} of {self.column}: flat (the answer rests on the data; at least "
                    "two stress levels with failures are needed)")
        lo, hi = self.prior_range or (float("nan"), float("nan"))
        return (f"{name} of {self.column}: Normal({self.prior[0]:.4g}, {self.prior[1]:.4g}), "
                f"central 95% {lo:g} to {hi:g}")


@dataclass(frozen=True)
class StressPrior:
    """``shape``: (mean, sd) of log shape (Weibull beta = 1/sigma), or None for flat."""

    shape: tuple[float, float] | None = (0.0, 1.0)
    shape_range: tuple[float, float] | None = None

    def describe(self, distribution: str) -> str:
        what = "Weibull shape" if distribution == "weibull" else "1/sigma of log life"
        if self.shape is None:
            return f"{what}: flat (improper) on its log"
        if self.shape_range is None:
            return (f"{what}: default, log ~ Normal(0, 1) (central 95%: 0.14 to 7.1; weakly "
                    "informative), common to all stress levels")
        lo, hi = self.shape_range
        return f"{what}: lognormal with central 95% {lo:g} to {hi:g}, common to all levels"


def shape_prior_from_range(text_range: tuple[float, float] | None) -> StressPrior:
    if text_range is None:
        return StressPrior()
    return StressPrior(lognormal_from_range(*text_range), tuple(text_range))


@dataclass
class Design:
    """The model's data: per observation kind, log times, design rows, shape-group index and
    weights (identical observations merged with counts, which is exact)."""

    distribution: str
    n_sigma: int
    n_coef: int  # intercept + stresses (or one per level for the level-check model)
    ref: np.ndarray  # centring of each stress transform
    spread: np.ndarray  # scaling of each stress transform
    arrays: dict[str, np.ndarray] = field(default_factory=dict)
    counts: dict[str, int] = field(default_factory=dict)

    @property
    def size(self) -> int:
        return self.n_sigma + self.n_coef


def _merge(*cols: np.ndarray) -> tuple[list[np.ndarray], np.ndarray]:
    if cols[0].shape[0] == 0:
        return list(cols), np.zeros(0)
    stacked = np.column_stack([c.reshape(c.shape[0], -1) for c in cols])
    uniq, counts = np.unique(stacked, axis=0, return_counts=True)
    out, k = [], 0
    for c in cols:
        width = 1 if c.ndim == 1 else c.shape[1]
        part = uniq[:, k:k + width]
        out.append(part[:, 0] if c.ndim == 1 else part)
        k += width
    return out, counts.astype(float)


def build_design(kind: np.ndarray, lower: np.ndarray, upper: np.ndarray, s: np.ndarray,
                 distribution: str = "weibull", levels: np.ndarray | None = None) -> Design:
    """The design of the common-shape model (``levels`` None): columns intercept and
    centred, scaled transforms ``s`` (units x stresses). With ``levels`` (an integer level
    index per unit): the level-check model, one location and one shape per level."""
    if distribution not in DISTRIBUTIONS:
        raise OptionError(f"unknown life distribution {distribution!r}; choose weibull or "
                          "lognormal")
    s = np.asarray(s, float).reshape(len(kind), -1)
    ref = s.mean(axis=0)
    spread = s.std(axis=0)
    spread = np.where(spread > 0, spread, 1.0)
    if levels is None:
        x = np.column_stack([np.ones(len(kind)), (s - ref) / spread])
        grp = np.zeros(len(kind))
        n_sigma = 1
    else:
        n_levels = int(levels.max()) + 1
        x = np.eye(n_levels)[levels]
        grp = levels.astype(float)
        n_sigma = n_levels
    arrays, counts = {}, {}
    for key in ("failure", "suspension", "interval", "left"):
        m = kind == key
        counts[key] = int(m.sum())
        t_main = np.log(upper[m]) if key == "left" else np.log(lower[m])
        t_up = np.log(upper[m]) if key == "interval" else np.zeros(int(m.sum()))
        (xm, gm, y, y2), w = _merge(x[m], grp[m], t_main, t_up)
        arrays[key] = {"x": xm.reshape(-1, x.shape[1]), "g": gm.astype(int), "y": y,
                       "y2": y2, "w": w}
    return Design(distribution, n_sigma, x.shape[1], ref, spread, arrays, counts)


# ----------------------------------------------------------------------------- density

def _log_ndtr(z, xp):
    if xp is np:
        from scipy.special import log_ndtr  # noqa: PLC0415
    else:
        from jax.scipy.special import log_ndtr  # noqa: PLC0415
    return log_ndtr(z)


def _log1mexp(x, xp):
    """log(1 - exp(-x)) for x > 0."""
    return xp.log(-xp.expm1(-x))


def log_likelihood(theta, design: Design, xp=np):
    """Censored log-likelihood at ``theta`` (1-D: log sigma per group, then coefficients)."""
    log_sig = theta[: design.n_sigma]
    coef = theta[design.n_sigma:]
    total = 0.0
    weib = design.distribution == "weibull"
    for key, a in design.arrays.items():
        if a["w"].shape[0] == 0:
            continue
        ls = log_sig[a["g"]]
        sig = xp.exp(ls)
        mu = a["x"] @ coef
        z = (a["y"] - mu) / sig
        if key == "failure":
            core = z - xp.exp(z) if weib else -0.5 * z * z - 0.5 * LOG_2PI
            term = core - ls - a["y"]
        elif key == "suspension":
            term = -xp.exp(z) if weib else _log_ndtr(-z, xp)
        elif key == "left":
            term = log1mexp_from_log(z, xp) if weib else _log_ndtr(z, xp)
        else:
            gap = (a["y2"] - a["y"]) / sig  # z_b - z_a > 0
            if weib:
                term = -xp.exp(z) + log1mexp_from_log(z + log_expm1(gap, xp), xp)
            else:
                zb = z + gap
                flip = z > 0  # both in the upper tail: use the survival side
                hi = xp.where(flip, -z, zb)
                lo = xp.where(flip, -zb, z)
                l_hi, l_lo = _log_ndtr(hi, xp), _log_ndtr(lo, xp)
                term = l_hi + _log1mexp(xp.maximum(l_hi - l_lo, 1e-300), xp)
        total = total + xp.sum(a["w"] * term)
    return total


def _normal_logpdf(x, m, sd):
    z = (x - m) / sd
    return -0.5 * z * z - math.log(sd) - 0.5 * LOG_2PI


def log_prior(theta, design: Design, prior: StressPrior, terms: tuple[StressTerm, ...],
              xp=np):
    """Log prior density on theta (see the module notes); slopes' priors only in the
    common-shape model (the level-check model has flat locations)."""
    out = 0.0 * theta[0]
    if prior.shape is not None:
        m, sd = prior.shape
        for g in range(design.n_sigma):
            out = out + _normal_logpdf(-theta[g], m, sd)
    if design.n_sigma == 1 and design.n_coef == len(terms) + 1:
        for j, term in enumerate(terms):
            if term.prior is not None:
                d = design.spread[j]
                # gamma = c / d, so p(c) = p_gamma(c / d) / d
                out = out + _normal_logpdf(theta[2 + j] / d, *term.prior) - xp.log(d)
    return out


def log_posterior(theta, design: Design, prior: StressPrior, terms, xp=np):
    return log_likelihood(theta, design, xp) + log_prior(theta, design, prior, terms, xp)


# ----------------------------------------------------------------------------- mode

@dataclass
class Laplace:
    """Posterior mode of theta and the inverse Hessian there."""

    center: np.ndarray
    cov: np.ndarray
    converged: bool

    def chol(self) -> np.ndarray:
        return np.linalg.cholesky(self.cov)


def start_point(design: Design) -> np.ndarray:
    """Least squares of log time on the design rows of every unit (a rough start)."""
    xs, ys = [], []
    for key, a in design.arrays.items():
        if a["w"].shape[0]:
            xs.append(np.repeat(a["x"], a["w"].astype(int), axis=0))
            y = a["y"] if key != "interval" else 0.5 * (a["y"] + a["y2"])
            ys.append(np.repeat(y, a["w"].astype(int)))
    x, y = np.vstack(xs), np.concatenate(ys)
    coef = np.linalg.lstsq(x, y, rcond=None)[0]
    coef = coef + 0.5 * (design.distribution == "weibull")
    return np.concatenate([np.full(design.n_sigma, -0.5), coef])


def posterior_mode(design: Design, prior: StressPrior, terms=()) -> Laplace:
    """Mode (scipy BFGS, then Newton polish) and Laplace covariance on theta."""
    from scipy import optimize  # noqa: PLC0415

    def nlp(th):
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            v = log_posterior(th, design, prior, terms)
        return -float(v) if np.isfinite(v) else 1e300

    x = start_point(design)
    res = optimize.minimize(nlp, x, method="BFGS", options={"gtol": 1e-8, "maxiter": 2000})
    x = res.x
    h = hessian(nlp, x)
    for _ in range(5):
        try:
            step = np.linalg.solve(h, gradient(nlp, x))
        except np.linalg.LinAlgError:
            break
        if not np.all(np.isfinite(step)) or np.max(np.abs(step)) > 1.0:
            break
        if nlp(x - step) <= nlp(x) + 1e-12:
            x = x - step
        h = hessian(nlp, x)
    converged = bool(res.fun < 1e299)
    try:
        cov = np.linalg.inv(h)
        np.linalg.cholesky(cov)
        converged = converged and bool(np.all(np.isfinite(cov)))
    except np.linalg.LinAlgError:
        cov = np.eye(design.size) * 0.25
        converged = False
    return Laplace(x, cov, converged)


def gradient(f, x, h=1e-5):
    g = np.zeros(x.size)
    for i in range(x.size):
        e = np.zeros(x.size)
        e[i] = h
        g[i] = (f(x + e) - f(x - e)) / (2 * h)
    return g


def hessian(f, x, h=1e-4):
    n = x.size
    out = np.zeros((n, n))
    f0 = f(x)
    eye = np.eye(n) * h
    for i in range(n):
        out[i, i] = (f(x + eye[i]) - 2 * f0 + f(x - eye[i])) / h**2
        for j in range(i):
            out[i, j] = out[j, i] = (f(x + eye[i] + eye[j]) - f(x + eye[i] - eye[j])
                                     - f(x - eye[i] + eye[j]) + f(x - eye[i] - eye[j])) / (
                4 * h * h)
    return out


# ----------------------------------------------------------------------------- answers

def natural(theta: np.ndarray, design: Design) -> dict[str, np.ndarray]:
    """From internal draws (..., k) of the common-shape model: sigma, gamma0 and the
    engineer's coefficients gamma_j (..., stresses)."""
    theta = np.asarray(theta, float)
    return {"sigma": np.exp(theta[..., 0]), "gamma0": theta[..., 1],
            "coef": theta[..., 2:] / design.spread}


def location(theta: np.ndarray, design: Design, s: np.ndarray) -> np.ndarray:
    """mu at transformed stresses ``s`` (points x stresses) for draws (..., k):
    returns (..., points)."""
    nat = natural(theta, design)
    s = np.asarray(s, float).reshape(-1, design.ref.size)
    return nat["gamma0"][..., None] + np.einsum("...j,pj->...p", nat["coef"], s - design.ref)


def reliability(t, mu, sigma, distribution: str):
    """R(t) for log-location mu and scale sigma (broadcast)."""
    from scipy.special import ndtr  # noqa: PLC0415

    z = (np.log(t) - mu) / sigma
    if distribution == "weibull":
        return np.exp(-np.exp(z))
    return ndtr(-z)


def quantile_life(q: float, mu, sigma, distribution: str):
    """Time by which a fraction q has failed (B-life for q = 0.10)."""
    from scipy.special import ndtri  # noqa: PLC0415

    if distribution == "weibull":
        return np.exp(mu + sigma * math.log(-math.log1p(-q)))
    return np.exp(mu + sigma * ndtri(q))
