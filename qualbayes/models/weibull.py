r"""Two-parameter Weibull with censoring: log density, priors and posterior mode (no jax).

Parameters, sampled on unconstrained scales: :math:`b = \log\beta` (shape) and
:math:`u = \log H(t_{\mathrm{ref}}) = \beta(\log t_{\mathrm{ref}} - \log\eta)`, the log
cumulative hazard at a reference time of the group's data; the scale is reported as
:math:`\log\eta = \log t_{\mathrm{ref}} - u/\beta`. Sampling :math:`u` rather than
:math:`\log\eta` removes the funnel that few-failure data give in :math:`(\log\beta,
\log\eta)` (the spread of :math:`\log\eta` grows as :math:`1/\beta`). With
:math:`d = \log t - \log t_{\mathrm{ref}}` the cumulative hazard is
:math:`H(t) = (t/\eta)^\beta = \exp(\beta d + u)`:

.. math::

    \text{failure at } t:&\quad \log f(t) = \log\beta - \log t + \beta(\log t - \log\eta)
        - H(t) \\
    \text{suspension at } t:&\quad \log S(t) = -H(t) \\
    \text{interval } (a, b]:&\quad \log(S(a) - S(b)) = -H(a) + \log(1 - e^{-(H(b) - H(a))}),
        \quad H(b) - H(a) = H(a)\,\mathrm{expm1}(\beta\log(b/a)) \\
    \text{left-censored at } b:&\quad \log F(b) = \log(1 - e^{-H(b)})

Exact failures and suspensions enter through the sums :math:`n_f`, :math:`\sum\log t_f`,
:math:`\sum (\log t_f - \log t_{\mathrm{ref}})` (constants) and :math:`\sum_{f \cup s}
e^{\beta d_i}` with :math:`d_i = \log t_i - \log t_{\mathrm{ref}} \le 0` (one vectorised
pass per evaluation, no overflow since :math:`\beta > 0`). :math:`\log(1 - e^{-x})` is
evaluated from :math:`\log x` so that tiny and huge :math:`x` both stay finite.

Priors (densities on :math:`(b, u)`, Jacobians included):

* shape: :math:`\log\beta \sim N(m, \sigma)`; the default is :math:`N(0, 1)` (95% of the
  mass on :math:`0.14 < \beta < 7.1`); a range "LO,HI" becomes the lognormal with that central
  95%; ``flat`` is the improper uniform on :math:`\log\beta` (tests only).
* scale, default (``hazard``): uniform on the cumulative hazard at the reference time,
  :math:`\lambda = H(t_{\mathrm{ref}}) = e^{u}`, i.e. :math:`p(u \mid \beta) \propto e^u`.
  With :math:`t_{\mathrm{ref}}` the largest exact, suspension or interval-start time, the
  posterior is proper whenever the group has such a unit. Given the shape, exact and
  right-censored data give :math:`\lambda \mid \text{data} \sim \mathrm{Gamma}(n_f + 1,
  \sum (t_i/t_{\mathrm{ref}})^\beta)`; with zero failures this reproduces the zero-failure
  (success-run / extended-test) demonstration formula, see docs/life.md.
* scale, ``blife``: :math:`\log B_q = \log\eta + \log(-\log(1-q))/\beta \sim N(m, \sigma)`;
  Jacobian :math:`|\partial\log\eta/\partial u| = 1/\beta`.
* scale, ``reliability``: :math:`\log H(T) = \beta(\log T - \log t_{\mathrm{ref}}) + u \sim
  N(m, \sigma)`, a range on :math:`R(T) = e^{-H(T)}`; Jacobian 1.
* scale, ``flat``: improper uniform on :math:`\log\eta` (tests only); Jacobian
  :math:`1/\beta`.
* scale, ``jeffreys`` (with a flat shape): uniform on :math:`(b, u)`, i.e. density
  :math:`\propto 1/\eta` on :math:`(\beta, \eta)`, the Jeffreys rule prior of the complete-sample
  Weibull model (the Fisher information has determinant :math:`\pi^2/(6\eta^2)`).
* earlier data (power prior, Ibrahim & Chen 2000, Statistical Science 15:46): each term
  ``(w, stats, label)`` of ``LifePrior.earlier`` multiplies the prior by the earlier data's
  likelihood to the power :math:`w \in [0, 1]`; its log-likelihood is evaluated at the same
  :math:`(\beta, \eta)`, i.e. at
  :math:`u_0 = u + \beta(\log t_{\mathrm{ref},0} - \log t_{\mathrm{ref}})`.

The same functions serve numpy (posterior mode, quadrature, tests) and jax (the sampler):
the array module is passed as ``xp``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from qualbayes.errors import OptionError

LOG_2PI = math.log(2.0 * math.pi)
LN2 = math.log(2.0)
Z975 = 1.959963984540054  # standard normal 97.5% point

SHAPE_DEFAULT = (0.0, 1.0)  # log beta ~ N(0, 1)


# ----------------------------------------------------------------------------- priors

@dataclass(frozen=True)
class LifePrior:
    """The prior of every group. ``shape`` is (mean, sd) of log beta, or None for flat.

    ``scale_kind`` is ``hazard`` (default), ``blife``, ``reliability`` or ``flat``;
    ``scale_args`` holds (q, mean, sd) of log B_q, or (T, mean, sd) of log H(T).
    """

    shape: tuple[float, float] | None = SHAPE_DEFAULT
    shape_given: bool = False  # from engineering knowledge (True) or the default (False)
    shape_range: tuple[float, float] | None = None
    scale_kind: str = "hazard"
    scale_args: tuple[float, float, float] = (0.0, 0.0, 1.0)
    scale_text: str = ""
    #: power-prior terms (weight, GroupStats of earlier data, label); see the module notes
    earlier: tuple = field(default=(), compare=False, repr=False)

    def describe(self, units: str = "") -> list[str]:
        u = f" {units}" if units else ""
        if self.shape is None:
            shape = "shape: flat (improper) on log(shape)"
        elif self.shape_given:
            lo, hi = self.shape_range or (0.0, 0.0)
            shape = (f"shape: lognormal with central 95% {lo:g} to {hi:g} (log shape ~ "
                     f"Normal({self.shape[0]:.4g}, {self.shape[1]:.4g}))")
        else:
            shape = ("shape: default, log shape ~ Normal(0, 1) (central 95%: 0.14 to 7.1; "
                     "weakly informative)")
        if self.scale_kind == "hazard":
            scale = ("scale: default, uniform on the cumulative hazard (t_ref/scale)^shape at "
                     "t_ref = the group's largest exact, suspension or interval-start time "
                     "(scale-free; weakly informative)")
        elif self.scale_kind == "flat":
            scale = "scale: flat (improper) on log(scale)"
        elif self.scale_kind == "blife":
            scale = f"scale: stated on a B-life, {self.scale_text}{u}"
        elif self.scale_kind == "jeffreys":
            scale = ("scale: Jeffreys rule prior, density proportional to 1/scale (with the "
                     "flat shape: uniform on log shape and log cumulative hazard; improper)")
        else:
            scale = f"scale: stated on reliability, {self.scale_text}"
        earlier = [f"earlier data (power prior): {label}, weight {w:g} - the prior is "
                   f"multiplied by their likelihood to the power {w:g}"
                   for w, _, label in self.earlier]
        return [shape, scale, *earlier]


def lognormal_from_range(lo: float, hi: float) -> tuple[float, float]:
    """(mean, sd) of log X for which (lo, hi) is the central 95% interval of X."""
    m = 0.5 * (math.log(lo) + math.log(hi))
    return m, (math.log(hi) - math.log(lo)) / (2.0 * Z975)


def _two_numbers(text: str, option: str, example: str) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in str(text).replace(" ", "").split(","))
    except ValueError:
        raise OptionError(f"{option} {text!r}: write two numbers LO,HI, e.g. {example}") from None
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise OptionError(f"{option} {text!r}: the numbers must be finite")
    if not lo < hi:
        raise OptionError(f"{option} {text!r}: LO must be smaller than HI")
    return lo, hi


def parse_shape_prior(text: str | None) -> tuple[tuple[float, float], tuple[float, float]] | None:
    """``1.5,4`` -> ((mean, sd) of log beta, (1.5, 4)); None when not given."""
    if text is None:
        return None
    lo, hi = _two_numbers(text, "--shape-prior", "1.5,4")
    if lo <= 0:
        raise OptionError(f"--shape-prior {text!r}: the shape is positive; LO must be > 0")
    if hi / lo > 1e4:
        raise OptionError(f"--shape-prior {text!r}: a range wider than a factor 10,000 says "
                          "nothing; leave the option out for the default")
    return lognormal_from_range(lo, hi), (lo, hi)


def parse_blife_prior(text: str) -> tuple[float, float, float, str]:
    """``10:2000,8000`` (B10 life between 2000 and 8000 with 95%) -> (q, mean, sd, text)."""
    if ":" not in str(text):
        raise OptionError(f"--blife-prior {text!r}: write Q:LO,HI, e.g. 10:2000,8000 for "
                          "'B10 life between 2000 and 8000'")
    q_text, rng = str(text).split(":", 1)
    try:
        pct = float(q_text.strip().lstrip("Bb"))
    except ValueError:
        raise OptionError(f"--blife-prior {text!r}: {q_text!r} is not a percentage") from None
    if not 0 < pct < 100:
        raise OptionError(f"--blife-prior {text!r}: the B-life percentage must be in (0, 100)")
    lo, hi = _two_numbers(rng, "--blife-prior", "10:2000,8000")
    if lo <= 0:
        raise OptionError(f"--blife-prior {text!r}: lives are positive; LO must be > 0")
    m, sd = lognormal_from_range(lo, hi)
    return pct / 100.0, m, sd, f"B{pct:g} life between {lo:g} and {hi:g} (central 95%)"


def parse_reliability_prior(text: str) -> tuple[float, float, float, str]:
    """``5000:0.8,0.99`` (R(5000) between 0.8 and 0.99 with 95%) -> (T, mean, sd, text)
    where mean, sd describe u = log(-log R(T))."""
    if ":" not in str(text):
        raise OptionError(f"--reliability-prior {text!r}: write T:LO,HI, e.g. 5000:0.8,0.99 for "
                          "'R(5000) between 0.8 and 0.99'")
    t_text, rng = str(text).split(":", 1)
    try:
        t = float(t_text)
    except ValueError:
        raise OptionError(f"--reliability-prior {text!r}: {t_text!r} is not a time") from None
    if not (t > 0 and math.isfinite(t)):
        raise OptionError(f"--reliability-prior {text!r}: the time must be positive")
    lo, hi = _two_numbers(rng, "--reliability-prior", "5000:0.8,0.99")
    if not 0 < lo < hi < 1:
        raise OptionError(f"--reliability-prior {text!r}: reliabilities must lie strictly "
                          "between 0 and 1")
    u_lo, u_hi = math.log(-math.log(hi)), math.log(-math.log(lo))
    m = 0.5 * (u_lo + u_hi)
    sd = (u_hi - u_lo) / (2.0 * Z975)
    return t, m, sd, f"R({t:g}) between {lo:g} and {hi:g} (central 95%)"


def make_prior(shape: str | None = None, blife: str | None = None,
               reliability: str | None = None) -> LifePrior:
    """The prior from the command-line texts (each None when not given)."""
    if blife is not None and reliability is not None:
        raise OptionError("give at most one of --blife-prior and --reliability-prior")
    parsed = parse_shape_prior(shape)
    kwargs: dict = {}
    if parsed is not None:
        kwargs.update(shape=parsed[0], shape_given=True, shape_range=parsed[1])
    if blife is not None:
        q, m, sd, txt = parse_blife_prior(blife)
        kwargs.update(scale_kind="blife", scale_args=(q, m, sd), scale_text=txt)
    if reliability is not None:
        t, m, sd, txt = parse_reliability_prior(reliability)
        kwargs.update(scale_kind="reliability", scale_args=(t, m, sd), scale_text=txt)
    return LifePrior(**kwargs)


FLAT = LifePrior(shape=None, scale_kind="flat")


# ----------------------------------------------------------------------------- data

@dataclass
class GroupStats:
    """One group's data in the form the log density uses (times relative to t_ref).

    Identical observations are merged into one entry with a count (``w_*``), which is exact.
    """

    log_tref: float
    n_f: int
    sum_log_tf: float  # sum of log t over exact failures
    sum_d_f: float  # sum of (log t - log t_ref) over exact failures
    d_exposed: np.ndarray  # log t - log t_ref of exact failures and suspensions (distinct)
    w_exposed: np.ndarray  # how many units share each value
    d_int_a: np.ndarray  # interval starts (distinct intervals)
    log_ratio_int: np.ndarray  # log(b / a) of the intervals (> 0)
    w_int: np.ndarray
    d_left: np.ndarray  # left-censored inspection times (distinct)
    w_left: np.ndarray
    counts: dict[str, int] = field(default_factory=dict)

    @property
    def anchored(self) -> bool:
        """True when some unit was seen working at a known time (exact, suspension or
        interval start): only then does the default scale prior give a proper posterior."""
        return self.counts["failure"] + self.counts["suspension"] + self.counts["interval"] > 0

    @property
    def failures(self) -> int:
        """Units known to have failed (exact, interval and left-censored)."""
        return self.counts["failure"] + self.counts["interval"] + self.counts["left"]

    @property
    def units(self) -> int:
        return sum(self.counts.values())


def group_stats(failures, suspensions, interval_lower=(), interval_upper=(),
                left=()) -> GroupStats:
    """Sufficient statistics of one group's times (arrays of positive times)."""
    tf = np.asarray(failures, float)
    ts = np.asarray(suspensions, float)
    ia = np.asarray(interval_lower, float)
    ib = np.asarray(interval_upper, float)
    tl = np.asarray(left, float)
    anchors = np.concatenate([tf, ts, ia])
    if anchors.size == 0 and tl.size == 0:
        raise ValueError("no units")
    # all left-censored: the data bound the life only from above (see ``anchored``)
    log_tref = float(np.log(anchors.max() if anchors.size else tl.max()))
    d_exp, w_exp = np.unique(np.concatenate([np.log(tf), np.log(ts)]) - log_tref,
                             return_counts=True)
    if ia.size:
        pairs, w_int = np.unique(np.column_stack([ia, ib]), axis=0, return_counts=True)
    else:
        pairs, w_int = np.zeros((0, 2)), np.zeros(0, int)
    d_left, w_left = np.unique(np.log(tl) - log_tref, return_counts=True)
    return GroupStats(
        log_tref=log_tref,
        n_f=int(tf.size),
        sum_log_tf=float(np.log(tf).sum()),
        sum_d_f=float((np.log(tf) - log_tref).sum()),
        d_exposed=d_exp, w_exposed=w_exp.astype(float),
        d_int_a=np.log(pairs[:, 0]) - log_tref,
        log_ratio_int=np.log(pairs[:, 1]) - np.log(pairs[:, 0]),
        w_int=w_int.astype(float),
        d_left=d_left, w_left=w_left.astype(float),
        counts={"failure": int(tf.size), "suspension": int(ts.size),
                "interval": int(ia.size), "left": int(tl.size)},
    )


# ----------------------------------------------------------------------------- fast sums

TAYLOR_ORDER = 24
SHAPE_CAP_SD = 12.0  # the shape is capped this many Laplace sd above its mode


def binned_moments(d: np.ndarray, w: np.ndarray, beta_cap: float,
                   order: int = TAYLOR_ORDER) -> tuple[np.ndarray, np.ndarray]:
    r"""Bins of :math:`d` with centres :math:`c_j` and coefficients :math:`a_{jk} =
    \sum_{i \in j} w_i (d_i - c_j)^k / k!`, so that for :math:`\beta \le 2\beta_{cap}`

    .. math:: \sum_i w_i e^{\beta d_i} = \sum_j e^{\beta c_j} \sum_{k \le K} a_{jk}\beta^k

    up to a relative error below :math:`2^{K+1} e^2/(K+1)!` (about :math:`10^{-17}` for
    K = 24): bins are :math:`2/\beta_{cap}` wide, so :math:`|\beta(d_i - c_j)| \le 2`.
    """
    from math import factorial  # noqa: PLC0415

    half = 1.0 / beta_cap
    lo = float(d.min())
    idx = np.floor((d - lo) / (2 * half)).astype(int)
    nbins = int(idx.max()) + 1
    centres = lo + (np.arange(nbins) + 0.5) * 2 * half
    dev = d - centres[idx]
    coef = np.zeros((nbins, order + 1))
    power = w.astype(float).copy()
    for k in range(order + 1):
        coef[:, k] = np.bincount(idx, weights=power, minlength=nbins) / factorial(k)
        power = power * dev
    return centres, coef


def exposure_sum_binned(beta, centres, coef, xp=np):
    """The sum of w_i exp(beta d_i) from :func:`binned_moments`: one vectorised pass over
    bins x powers (|a_jk beta^k| <= n_j 2^k / k!, so no term is large and the sum loses
    nothing to cancellation)."""
    bb = beta[..., None]
    powers = bb[..., None] ** xp.arange(coef.shape[-1])
    poly = xp.sum(coef * powers, axis=-1)
    return xp.sum(xp.exp(bb * centres) * poly, axis=-1)


# ----------------------------------------------------------------------------- density

def log1mexp_from_log(lx, xp=np):
    """log(1 - exp(-x)) from lx = log x, for any x > 0, finite in value and gradient."""
    x = xp.exp(lx)
    tiny = lx < -10.0
    mid = (~tiny) & (x < LN2)
    series = lx - 0.5 * x + x * x / 24.0
    x_mid = xp.where(mid, x, 0.5)
    x_big = xp.where(tiny | mid, 1.0, x)
    return xp.where(tiny, series,
                    xp.where(mid, xp.log(-xp.expm1(-x_mid)), xp.log1p(-xp.exp(-x_big))))


def log_expm1(y, xp=np):
    """log(exp(y) - 1) for y > 0, stable for small and large y."""
    return y + xp.log(-xp.expm1(-y))


def log_likelihood(b, u, data: dict, xp=np):
    r"""Log-likelihood at shape exp(b) and log cumulative hazard u at t_ref.

    ``data`` holds arrays whose last axis runs over (distinct) observations with their
    counts as weights; padding has weight 0 (keys: n_f, sum_log_tf, sum_d_f, d_exp, w_exp,
    d_ia, lr_int, w_int, d_left, w_left). With keys ``bin_c``, ``bin_a`` and ``beta_cap``
    the sum over exact failures and suspensions comes from :func:`binned_moments` instead,
    and the shape is capped at 2 * beta_cap. ``b`` and ``u`` broadcast against the leading
    axes.
    """
    beta = xp.exp(b)
    bb, uu = beta[..., None], u[..., None]
    # exact failures and suspensions: the sum of H(t) (d <= 0, so no overflow)
    if "bin_c" in data:
        expo = exposure_sum_binned(beta, data["bin_c"], data["bin_a"], xp)
    else:
        expo = xp.sum(data["w_exp"] * xp.exp(bb * data["d_exp"]), axis=-1)
    ll = data["n_f"] * (b + u) - data["sum_log_tf"] + beta * data["sum_d_f"] - xp.exp(u) * expo
    if data["d_ia"].shape[-1]:
        lh_a = bb * data["d_ia"] + uu
        lgap = lh_a + log_expm1(bb * data["lr_int"], xp)
        term = -xp.exp(lh_a) + log1mexp_from_log(lgap, xp)
        ll = ll + xp.sum(data["w_int"] * term, axis=-1)
    if data["d_left"].shape[-1]:
        term = log1mexp_from_log(bb * data["d_left"] + uu, xp)
        ll = ll + xp.sum(data["w_left"] * term, axis=-1)
    if "bin_c" in data:
        ll = xp.where(beta <= 2.0 * data["beta_cap"], ll, -xp.inf)
    return ll


def _normal_logpdf(x, m, sd, xp=np):
    z = (x - m) / sd
    return -0.5 * z * z - xp.log(sd) - 0.5 * LOG_2PI


def log_prior(b, u, prior: LifePrior, log_tref, xp=np):
    """Log prior density on (b, u) = (log shape, log H(t_ref)), Jacobians included."""
    out = 0.0 * b
    if prior.shape is not None:
        out = out + _normal_logpdf(b, prior.shape[0], prior.shape[1], xp)
    beta = xp.exp(b)
    kind = prior.scale_kind
    if kind == "hazard":
        out = out + u
    elif kind == "blife":
        q, m, sd = prior.scale_args
        log_bq = log_tref + (math.log(-math.log1p(-q)) - u) / beta
        out = out + _normal_logpdf(log_bq, m, sd, xp) - b
    elif kind == "reliability":
        t, m, sd = prior.scale_args
        out = out + _normal_logpdf(beta * (math.log(t) - log_tref) + u, m, sd, xp)
    elif kind == "flat":
        out = out - b
    elif kind == "jeffreys":
        pass  # uniform on (b, u)
    else:
        raise ValueError(f"unknown scale prior {kind!r}")
    for weight, earlier, _ in prior.earlier:
        out = out + weight * earlier_log_likelihood(b, u, log_tref, earlier, xp)
    return out


def earlier_log_likelihood(b, u, log_tref, earlier: GroupStats, xp=np):
    """Log-likelihood of earlier data at the current (b, u) = (log shape, log H(t_ref)):
    the earlier data's own reference time gives u0 = u + beta (log t_ref0 - log t_ref)."""
    u0 = u + xp.exp(b) * (earlier.log_tref - log_tref)
    return log_likelihood(b, u0, data_arrays(earlier), xp)


def log_scale(b, u, log_tref):
    """log eta from (b, u)."""
    return log_tref - u / np.exp(b)


def data_arrays(st: GroupStats) -> dict[str, np.ndarray]:
    """Unpadded arrays of one group for :func:`log_likelihood` (numpy, exact sums)."""
    return {
        "n_f": np.float64(st.n_f), "sum_log_tf": np.float64(st.sum_log_tf),
        "sum_d_f": np.float64(st.sum_d_f),
        "d_exp": st.d_exposed, "w_exp": st.w_exposed,
        "d_ia": st.d_int_a, "lr_int": st.log_ratio_int, "w_int": st.w_int,
        "d_left": st.d_left, "w_left": st.w_left,
    }


def log_posterior(b, u, st: GroupStats, prior: LifePrior, data: dict | None = None):
    """Unnormalised log posterior density of one group on (b, u), in numpy (for the mode
    and quadrature)."""
    data = data_arrays(st) if data is None else data
    b = np.asarray(b, float)
    u = np.asarray(u, float)
    return log_likelihood(b, u, data) + log_prior(b, u, prior, st.log_tref)


# ----------------------------------------------------------------------------- mode

@dataclass
class Mode:
    """Posterior mode in (log shape, log H(t_ref)) and the Laplace covariance there."""

    b: float
    u: float
    cov: np.ndarray
    converged: bool

    def chol(self) -> np.ndarray:
        return np.linalg.cholesky(self.cov)


def posterior_mode(st: GroupStats, prior: LifePrior) -> Mode:
    """Mode of the posterior density on the sampled scale (b, u) and the Laplace
    covariance there (scipy BFGS, polished by Newton steps on a finite-difference
    Hessian). This mode preconditions the sampler; see :func:`reported_mode` for the mode
    that is reported."""
    data = data_arrays(st)

    def nlp(x):
        with np.errstate(over="ignore", invalid="ignore"):  # probes far out: inf is handled
            v = log_posterior(x[0], x[1], st, prior, data)
        return -float(v) if np.isfinite(v) else 1e300

    b0 = prior.shape[0] if prior.shape is not None else 0.0
    starts = [np.array([b0, _u_start(st, math.exp(b0))]),
              np.array([0.5, _u_start(st, math.exp(0.5))])]
    x, h, converged = _maximise(nlp, starts)
    try:
        cov = np.linalg.inv(h)
        np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        cov = np.diag([0.25, 1.0])
        converged = False
    if not np.all(np.isfinite(cov)):
        cov = np.diag([0.25, 1.0])
        converged = False
    return Mode(float(x[0]), float(x[1]), cov, converged)


def reported_mode(st: GroupStats, prior: LifePrior, start: Mode | None = None
                  ) -> tuple[float, float]:
    """(shape, scale) at the mode of the posterior density on (log shape, log scale).

    A density's mode depends on the coordinates; on (log beta, log eta) the density is the
    one on (b, u) times the Jacobian beta, so with flat priors on log shape and log scale
    this mode is the maximum-likelihood point.
    """
    data = data_arrays(st)

    def nlp(x):
        b, log_eta = x
        with np.errstate(over="ignore", invalid="ignore"):  # probes far out: inf is handled
            u = math.exp(b) * (st.log_tref - log_eta) if b < 700 else math.inf
            v = log_posterior(b, u, st, prior, data) + b
        return -float(v) if np.isfinite(v) else 1e300

    start = start or posterior_mode(st, prior)
    x0 = np.array([start.b, float(log_scale(start.b, start.u, st.log_tref))])
    x, _, _ = _maximise(nlp, [x0])
    return math.exp(x[0]), math.exp(x[1])


def _maximise(nlp, starts):
    from scipy import optimize  # noqa: PLC0415

    best = None
    for x0 in starts:
        res = optimize.minimize(nlp, x0, method="BFGS", options={"gtol": 1e-9, "maxiter": 500})
        if best is None or res.fun < best.fun:
            best = res
    x = best.x.copy()
    converged = bool(np.isfinite(best.fun) and best.fun < 1e299)
    h = _hessian(nlp, x)
    for _ in range(3):  # Newton polish: the mode tests compare to 1e-5
        g = _gradient(nlp, x)
        try:
            step = np.linalg.solve(h, g)
        except np.linalg.LinAlgError:
            break
        if not np.all(np.isfinite(step)) or np.max(np.abs(step)) > 0.5:
            break
        if nlp(x - step) <= nlp(x) + 1e-12:
            x = x - step
        h = _hessian(nlp, x)
    return x, h, converged


def _u_start(st: GroupStats, beta: float) -> float:
    """log H(t_ref) maximising the exact/right-censored likelihood at this shape."""
    expo = float(np.sum(st.w_exposed * np.exp(beta * st.d_exposed)))
    expo += float(np.sum(st.w_int * np.exp(beta * st.d_int_a)))
    events = max(st.failures, 1)
    if expo <= 0:
        return 0.0
    return float(np.log(events / expo))


def _gradient(f, x, h=1e-5):
    g = np.zeros(2)
    for i in range(2):
        e = np.zeros(2)
        e[i] = h
        g[i] = (f(x + e) - f(x - e)) / (2 * h)
    return g


def _hessian(f, x, h=1e-4):
    hess = np.zeros((2, 2))
    f0 = f(x)
    for i in range(2):
        ei = np.zeros(2)
        ei[i] = h
        hess[i, i] = (f(x + ei) - 2 * f0 + f(x - ei)) / h**2
    e0, e1 = np.array([h, 0.0]), np.array([0.0, h])
    hess[0, 1] = hess[1, 0] = (f(x + e0 + e1) - f(x + e0 - e1) - f(x - e0 + e1)
                               + f(x - e0 - e1)) / (4 * h * h)
    return hess
