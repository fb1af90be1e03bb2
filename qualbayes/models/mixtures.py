r"""Summaries of a mixture of Beta distributions (scipy only).

A lot's rate under the history model is :math:`p \mid \text{data} \sim \frac1D\sum_d
\mathrm{Beta}(\alpha_d, \beta_d)` over D posterior draws. Its CDF is the average of the
regularised incomplete beta functions, its quantiles the roots of that average.
"""

from __future__ import annotations

import numpy as np
from scipy import special


def cdf(p: float, alpha: np.ndarray, beta: np.ndarray, weights: np.ndarray | None = None):
    values = special.betainc(alpha, beta, p)
    return float(np.average(values, weights=weights))


def ppf(q: float, alpha: np.ndarray, beta: np.ndarray) -> float:
    """The q-quantile of the equal-weight mixture, by bracketing root search."""
    from scipy import optimize  # noqa: PLC0415 - only the history path needs it

    lo = float(np.min(special.betaincinv(alpha, beta, q)))
    hi = float(np.max(special.betaincinv(alpha, beta, q)))
    if hi - lo < 1e-15:
        return lo

    def f(p):
        return cdf(p, alpha, beta) - q

    return float(optimize.brentq(f, lo, hi, xtol=1e-12, rtol=1e-10))


def mean(alpha: np.ndarray, beta: np.ndarray) -> float:
    return float(np.mean(alpha / (alpha + beta)))


def betabinom_pmf_matrix(k_max: int, remaining: int, alpha: np.ndarray,
                         beta: np.ndarray) -> np.ndarray:
    """pmf of BetaBinomial(remaining, alpha_d, beta_d) at k = 0..k_max, shape (D, k_max+1):
    C(R, k) B(k + alpha, R - k + beta) / B(alpha, beta), evaluated in logs."""
    k = np.arange(k_max + 1)[None, :]
    a = np.asarray(alpha, float)[:, None]
    b = np.asarray(beta, float)[:, None]
    log_choose = (special.gammaln(remaining + 1) - special.gammaln(k + 1)
                  - special.gammaln(remaining - k + 1))
    return np.exp(log_choose + special.betaln(k + a, remaining - k + b) - special.betaln(a, b))


def betabinom_ppf(q: float, remaining: int, alpha: np.ndarray, beta: np.ndarray) -> int:
    """The q-quantile of the number of defectives among ``remaining`` units, mixed over draws
    (the smallest k whose mixture CDF reaches q)."""
    if remaining <= 0:
        return 0
    k_max = min(15, remaining)
    while True:
        cdf_k = np.cumsum(betabinom_pmf_matrix(k_max, remaining, alpha, beta).mean(axis=0))
        hit = np.flatnonzero(cdf_k >= q - 1e-12)
        if hit.size or k_max == remaining:
            return int(hit[0]) if hit.size else remaining
        k_max = min(4 * k_max, remaining)
