r"""Single-lot defect rate, closed form.

Model: :math:`x \mid p \sim \mathrm{Binomial}(n, p)`, :math:`p \sim \mathrm{Beta}(a, b)`, so
:math:`p \mid x \sim \mathrm{Beta}(a + x,\; b + n - x)` (conjugacy; Hamada, Wilson, Reese &
Martz, Bayesian Reliability, 2008, ch. 2).

For a finite lot of N units of which n were inspected, the number D of defectives among the
N - n units not inspected is, under the posterior, beta-binomial:
:math:`D \sim \mathrm{BetaBinomial}(N - n,\; a + x,\; b + n - x)`.

All functions are vectorised over lots (numpy arrays in, arrays out). They use the
regularised incomplete beta function and its inverse from scipy.special directly (the same
functions scipy.stats.beta evaluates, which the tests use as the reference); importing
scipy.stats would cost more than the whole computation.
"""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.models.mixtures import betabinom_quantile
from qualbayes.search import smallest_int

MAX_EXTRA_UNITS = 10**9


def posterior(x, n, a: float, b: float) -> tuple[np.ndarray, np.ndarray]:
    """Posterior Beta parameters (a + x, b + n - x)."""
    x = np.asarray(x, dtype=float)
    n = np.asarray(n, dtype=float)
    return a + x, b + (n - x)  # (n - x) first, so a tiny b is not lost when x = n


def summarise(a_post, b_post, spec: float, confidence: float) -> dict[str, np.ndarray]:
    """Posterior mean, central credible interval at ``confidence``, one-sided upper bound
    at ``confidence`` and P(p <= spec)."""
    a = np.asarray(a_post, dtype=float)
    b = np.asarray(b_post, dtype=float)
    tail = (1.0 - confidence) / 2.0
    return {
        "posterior_mean": a / (a + b),
        "interval_low": special.betaincinv(a, b, tail),
        "interval_high": special.betaincinv(a, b, 1.0 - tail),
        "upper_bound": special.betaincinv(a, b, confidence),
        "prob_within_spec": special.betainc(a, b, spec),
    }


def extra_clean_units(a_post: float, b_post: float, spec: float, confidence: float) -> int | None:
    """Smallest m >= 0 such that P(p <= spec) >= confidence after m more defect-free units,
    i.e. ``betainc(a_post, b_post + m, spec) >= confidence``.

    The regularised incomplete beta I_spec(a, b + m) increases with m (towards 1), so an
    exponential search then bisection over whole m finds it exactly. None if more than
    MAX_EXTRA_UNITS would be needed.
    """

    def ok(m: float) -> bool:
        return bool(special.betainc(a_post, b_post + m, spec) >= confidence)

    return smallest_int(ok, 0, MAX_EXTRA_UNITS)


def remaining_defectives(a_post, b_post, remaining, confidence: float) -> dict[str, np.ndarray]:
    """Median and one-sided upper bound at ``confidence`` of the defectives among the
    ``remaining`` = N - n units not inspected (beta-binomial predictive); ``exact`` is False
    where the lot is so large that the continuous limit was used
    (:func:`qualbayes.models.mixtures.betabinom_quantile`)."""
    a = np.atleast_1d(np.asarray(a_post, dtype=float))
    b = np.atleast_1d(np.asarray(b_post, dtype=float))
    r = np.atleast_1d(np.asarray(remaining, dtype=np.int64))
    med, up, exact = [], [], []
    for ai, bi, ri in zip(a, b, r, strict=True):
        m, m_exact = betabinom_quantile(0.5, int(ri), ai[None], bi[None])
        u, u_exact = betabinom_quantile(confidence, int(ri), ai[None], bi[None])
        med.append(m)
        up.append(u)
        exact.append(m_exact and u_exact)
    return {"median": np.array(med, dtype=np.int64), "upper_bound": np.array(up, dtype=np.int64),
            "exact": np.array(exact, dtype=bool)}
