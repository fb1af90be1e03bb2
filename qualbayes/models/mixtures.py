r"""Summaries of a mixture of Beta distributions (scipy only).

A lot's rate under the history model is :math:`p \mid \text{data} \sim \frac1D\sum_d
\mathrm{Beta}(\alpha_d, \beta_d)` over D posterior draws. Its CDF is the average of the
regularised incomplete beta functions, its quantiles the roots of that average.
"""

from __future__ import annotations

import numpy as np
from scipy import optimize, special, stats


def cdf(p: float, alpha: np.ndarray, beta: np.ndarray, weights: np.ndarray | None = None):
    values = special.betainc(alpha, beta, p)
    return float(np.average(values, weights=weights))


def ppf(q: float, alpha: np.ndarray, beta: np.ndarray) -> float:
    """The q-quantile of the equal-weight mixture, by bracketing root search."""
    lo = float(np.min(stats.beta.ppf(q, alpha, beta)))
    hi = float(np.max(stats.beta.ppf(q, alpha, beta)))
    if hi - lo < 1e-15:
        return lo

    def f(p):
        return cdf(p, alpha, beta) - q

    return float(optimize.brentq(f, lo, hi, xtol=1e-12, rtol=1e-10))


def mean(alpha: np.ndarray, beta: np.ndarray) -> float:
    return float(np.mean(alpha / (alpha + beta)))


def betabinom_ppf(q: float, remaining: int, alpha: np.ndarray, beta: np.ndarray) -> int:
    """The q-quantile of the number of defectives among ``remaining`` units, mixed over draws."""
    if remaining <= 0:
        return 0

    def mcdf(k: int) -> float:
        return float(np.mean(stats.betabinom.cdf(k, remaining, alpha, beta)))

    lo, hi = -1, remaining  # mcdf(remaining) == 1 >= q
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if mcdf(mid) >= q:
            hi = mid
        else:
            lo = mid
    return hi
