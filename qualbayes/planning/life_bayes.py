r"""Bayesian demonstration with the test time scaled by an assumed Weibull shape: what a test
of n units, each run L mission times
with c failing, says about the reliability R = R(t) at the mission time t.

Prior on the failure probability :math:`p = 1 - R \sim \frac1D\sum_d \mathrm{Beta}(a_d, b_d)`,
independent of the shape (known :math:`\beta`, or :math:`\ln\beta \sim N(m, s^2)` summed over
Gauss-Hermite nodes with weights :math:`w_i`). Over the test a unit fails with probability
:math:`q = 1 - (1 - p)^k`, :math:`k = L^\beta`, so c failures among n have likelihood
:math:`q^c (1 - q)^{n - c}`. Expanding :math:`(1 - (1 - p)^k)^c` binomially,

.. math::

    E_{\mathrm{Beta}(a, b)}\left[q^c (1 - q)^{n-c}\, 1\{p \le p^*\}\right]
      = \sum_{j=0}^{c} \binom{c}{j} (-1)^j\, \frac{B(a, b_j)}{B(a, b)}\, I_{p^*}(a, b_j),
      \qquad b_j = b + k\,(n - c + j),

and without the indicator the same sum without :math:`I_{p^*}`; the posterior probability
:math:`\Pr(R \ge R^* \mid \text{data})` is the ratio of the first (at :math:`p^* = 1 - R^*`)
to the second, each summed over components and shape nodes. Zero failures: one term, the
posterior is :math:`\mathrm{Beta}(a, b + kn)`. A known shape and L = 1: k = 1 and the sum is
the attribute plan's :math:`\mathrm{Beta}(a + c, b + n - c)`.

The signed sum loses digits when c is large and :math:`k (n - c)` small; when it keeps fewer
than six significant digits the two integrals are done by adaptive quadrature instead.

The least test time. For :math:`R_1 > R_2` the likelihood ratio
:math:`[(1 - R_1^k) / (1 - R_2^k)]^c (R_1 / R_2)^{k (n - c)}` rises with k (its log-derivative
is :math:`c\,[g(R_1) - g(R_2)] + (n - c) \ln(R_1/R_2) > 0` with
:math:`g(R) = -R^k \ln R / (1 - R^k)`, which falls as R falls), so the posterior of R rises
stochastically with L and :math:`\Pr(R \ge R^* \mid \text{data})` is increasing in L for a
known shape: the plan is the root in :math:`\ln L` of :math:`\Pr = C`.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy import integrate, optimize, special

from qualbayes.planning import weibull
from qualbayes.planning.inputs import count, positive, probability
from qualbayes.planning.rate_prior import RatePrior

KEEP_DIGITS = 1e-6  # the signed sum must keep this fraction of its largest term
LOG_K_LIMIT = 690.0  # k = L^beta kept inside floating point
LOG_RATIO_LOW, LOG_RATIO_HIGH = -15.0, 60.0  # the search range of ln L


def _log_k(log_ratio: float, betas: np.ndarray) -> np.ndarray:
    return np.clip(betas * log_ratio, -LOG_K_LIMIT, LOG_K_LIMIT)


def _quadrature(a: float, b: float, k: float, n: int, c: int, p_star: float
                ) -> tuple[float, float]:
    """(log D, N / D) by adaptive quadrature over p, the integrand scaled at its peak."""

    def log_f(p: float) -> float:
        if p <= 0.0 or p >= 1.0:
            return -math.inf
        log_surv = k * math.log1p(-p)  # ln (1 - q)
        log_q = math.log(-math.expm1(log_surv)) if log_surv < 0 else -math.inf
        return ((a - 1.0) * math.log(p) + (b - 1.0) * math.log1p(-p) + c * log_q
                + (n - c) * log_surv)

    mode = -math.expm1(math.log1p(-c / n) / k)  # where q = c / n: the likelihood's peak
    inner = [v for v in (mode, p_star) if 1e-12 < v < 1.0 - 1e-9]
    top = max(log_f(v) for v in [*inner, 0.5])
    cuts = sorted({0.0, *inner, p_star, 1.0})
    opts = {"epsabs": 0.0, "epsrel": 1e-10, "limit": 400}
    below = total = 0.0
    for lo, hi in zip(cuts[:-1], cuts[1:], strict=True):
        with warnings.catch_warnings():  # QUADPACK's roundoff notes near 1e-10 are harmless
            warnings.simplefilter("ignore", integrate.IntegrationWarning)  # (tests check)
            part = integrate.quad(lambda p: math.exp(log_f(p) - top), lo, hi, **opts)[0]
        total += part
        below += part if hi <= p_star else 0.0
    return top - special.betaln(a, b) + math.log(total), below / total


def _node_terms(a: float, b: float, log_k: np.ndarray, n: int, c: int, p_star: float
                ) -> tuple[np.ndarray, np.ndarray]:
    """(log D_i, P_i) for each k_i: D the prior expectation of the likelihood, P the
    posterior probability that p <= p*."""
    j = np.arange(c + 1)
    k = np.exp(log_k)[:, None]
    bj = b + k * (n - c + j)
    logmag = (special.gammaln(c + 1) - special.gammaln(j + 1) - special.gammaln(c - j + 1)
              + special.betaln(a, bj) - special.betaln(a, b))
    top = logmag.max(axis=1, keepdims=True)
    t = np.where(j % 2 == 0, 1.0, -1.0) * np.exp(logmag - top)
    d = t.sum(axis=1)
    below = (t * special.betainc(a, bj, p_star)).sum(axis=1)
    log_d = top[:, 0] + np.log(np.where(d > 0, d, 1.0))
    prob = np.clip(below / np.where(d > 0, d, 1.0), 0.0, 1.0)
    for i in np.flatnonzero(~(d > KEEP_DIGITS * np.abs(t).sum(axis=1))):
        log_d[i], prob[i] = _quadrature(a, b, float(k[i, 0]), n, c, p_star)
    return log_d, prob


def _prob(prior: RatePrior, p_star: float, n: int, log_ratio: float, c: int,
          shape: weibull.Shape) -> float:
    betas, w = weibull.shape_nodes(shape)
    log_k = _log_k(log_ratio, betas)
    logs, probs = [], []
    for a, b in zip(prior.a, prior.b, strict=True):
        log_d, prob = _node_terms(float(a), float(b), log_k, n, c, p_star)
        logs.append(np.log(w) + log_d)
        probs.append(prob)
    logs, probs = np.concatenate(logs), np.concatenate(probs)
    weights = np.exp(logs - logs.max())
    return float(np.clip(np.dot(weights, probs) / weights.sum(), 0.0, 1.0))


def prob_demonstrated(prior: RatePrior, reliability: float, units: int, ratio: float,
                      failures: int, shape: weibull.Shape) -> float:
    """P(R(t) >= R* | ``failures`` of ``units`` failed, each tested ``ratio`` x t)."""
    r = probability(reliability, "reliability")
    n = count(units, "units", least=1)
    c = count(failures, "allowed failures")
    if c > n:
        raise ValueError(f"{c} failures among {n} units")
    ratio = positive(ratio, "test-time ratio")
    return _prob(prior, 1.0 - r, n, math.log(ratio), c, shape)


def time_ratio(prior: RatePrior, reliability: float, confidence: float, units: int,
               shape: weibull.Shape, failures: int = 0) -> float | None:
    """The least L (test time per unit / mission time) with P(R(t) >= R* | c of n) >= C.
    0 when the prior alone shows the goal (a test of no length sees no failure); None when
    no test up to e^60 mission times does."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    n = count(units, "units", least=1)
    c = count(failures, "allowed failures")
    if c >= n:
        return None

    def f(log_ratio: float) -> float:
        return _prob(prior, 1.0 - r, n, log_ratio, c, shape) - conf

    if prior.prob_at_most(1.0 - r) >= conf:
        return 0.0  # the prior alone: a test of no length (which sees no failure) passes
    if f(LOG_RATIO_LOW) >= 0:
        return math.exp(LOG_RATIO_LOW)
    lo, hi = LOG_RATIO_LOW, 5.0
    while f(hi) < 0:
        lo, hi = hi, hi + 5.0
        if hi > LOG_RATIO_HIGH:
            return None
    return math.exp(optimize.brentq(f, lo, hi, xtol=1e-12, rtol=1e-12))


def life_plan(prior: RatePrior, reliability: float, confidence: float, mission: float,
              units: int, shape: weibull.Shape, failures: int = 0) -> dict:
    """The Bayesian plan for n units and c allowed failures, with the classical one beside."""
    mission = positive(mission, "mission time")
    ratio = time_ratio(prior, reliability, confidence, units, shape, failures)
    classical = weibull.time_ratio(reliability, confidence, units, shape, failures)
    out = {"units": int(units), "failures": int(failures), "ratio": ratio,
           "test_time": None if ratio is None else ratio * mission,
           "total_time": None if ratio is None else ratio * mission * units,
           "classical_time": classical * mission,
           "prob_demonstrated": None, "risk_at_goal": None}
    if ratio:
        out["prob_demonstrated"] = prob_demonstrated(prior, reliability, units, ratio,
                                                     failures, shape)
        out["risk_at_goal"] = weibull.consumer_risk(units, ratio, failures, reliability, shape)
    elif ratio == 0.0:  # the prior alone
        out["prob_demonstrated"] = prior.prob_at_most(1.0 - reliability)
        out["risk_at_goal"] = 1.0
    return out
