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
    """The q-quantile of the equal-weight mixture on the logit scale, so that the answer has
    relative precision in whichever of p and 1 - p is small (rates of 1e-12 and below occur:
    a million clean units in every lot). Safeguarded Newton steps from the moment-matched
    Beta's quantile (a few mixture evaluations), with the bracketing search as fallback."""
    alpha = np.asarray(alpha, float)
    beta = np.asarray(beta, float)
    if alpha.size == 1:
        return float(special.betaincinv(alpha, beta, q).ravel()[0])
    t = _newton_ppf(q, alpha, beta)
    return t if t is not None else _bracket_ppf(q, alpha, beta)


def _newton_ppf(q, alpha, beta, steps: int = 40) -> float | None:
    m = alpha / (alpha + beta)
    mean = float(m.mean())
    var = float(np.mean(m * (1 - m) / (alpha + beta + 1)) + m.var())
    if not (0 < mean < 1) or var <= 0 or var >= mean * (1 - mean):
        return None
    common = mean * (1 - mean) / var - 1
    start = float(special.betaincinv(mean * common, (1 - mean) * common, q))
    if not 1e-300 < start < 1 - 1e-16:
        return None
    t = float(special.logit(start))
    lo, hi = -np.inf, np.inf
    log_norm = special.betaln(alpha, beta)
    for left in range(steps - 1, -1, -1):
        p = float(special.expit(t))
        f = cdf(p, alpha, beta) - q
        if abs(f) <= 1e-11:
            return p
        if f > 0:
            hi = t
        else:
            lo = t
        # d F / d t = mixture density at p times p (1 - p); at p rounded to 0 or 1 the log
        # is -inf and the density 0 (the step then bisects): no warning for the user
        with np.errstate(divide="ignore"):
            density = np.exp(alpha * np.log(p) + beta * np.log1p(-p) - log_norm)
        slope = float(np.mean(density))
        step = f / slope if slope > 0 else np.inf
        nxt = t - step
        newton = lo < nxt < hi and np.isfinite(nxt)
        if not newton:
            if not (np.isfinite(lo) and np.isfinite(hi)):
                nxt = t - np.sign(f) * 2.0
            else:
                nxt = 0.5 * (lo + hi)
        if abs(nxt - t) < 1e-13 * max(1.0, abs(t)):
            return float(special.expit(nxt))
        if newton and left and _newton_lands(f, nxt - t, p, float(special.expit(nxt)), alpha,
                                             beta, density):
            return float(special.expit(nxt))  # the next pass would find |f| <= 1e-11 there
        t = nxt
    return None


def _newton_lands(f: float, delta: float, p: float, p_next: float, alpha: np.ndarray,
                  beta: np.ndarray, density: np.ndarray) -> bool:
    r"""Whether the mixture CDF is certainly within 1e-12 of its target after the Newton
    step ``delta`` (logit scale) from p, so that evaluating it there (one betainc per draw)
    can be skipped: the step returns that point either way.

    With :math:`e_d(s)` the draw's term of dF/ds, :math:`\frac{d}{ds}\log e_d = \alpha_d -
    (\alpha_d + \beta_d)\,\mathrm{expit}(s)`, which between the two points lies between its
    end values, so :math:`|e_d(s) - e_d(t)| \le e_d(t)(e^{K_d} - 1)`, :math:`K_d = |\delta|
    \max(|\alpha_d - (\alpha_d + \beta_d) p|, |\alpha_d - (\alpha_d + \beta_d) p'|)`; the
    Newton step cancels f and F'(t) delta, leaving :math:`|f(t + \delta)| \le |\delta|\,
    \overline{e_d (e^{K_d} - 1)}` (tests/test_lot_answers.py checks it against the CDF)."""
    if abs(f) > 1e-7:  # the bound is far above 1e-12 for such steps: not worth computing
        return False
    total = alpha + beta
    k = abs(delta) * np.maximum(np.abs(alpha - total * p), np.abs(alpha - total * p_next))
    return abs(delta) * float(np.mean(density * np.expm1(k))) <= 1e-12


def _bracket_ppf(q: float, alpha: np.ndarray, beta: np.ndarray) -> float:
    from scipy import optimize  # noqa: PLC0415 - only the history path needs it

    quantiles = special.betaincinv(alpha, beta, q)
    lo, hi = float(np.min(quantiles)), float(np.max(quantiles))
    if hi <= lo * (1 + 1e-12):
        return lo
    tiny = 1e-300
    if lo < tiny:
        if cdf(tiny, alpha, beta) >= q:
            return 0.0 if lo <= 0 else lo
        lo = tiny
    if hi >= 1.0:
        if cdf(1.0 - 1e-16, alpha, beta) < q:
            return 1.0
        hi = 1.0 - 1e-16

    def f(t):
        return cdf(float(special.expit(t)), alpha, beta) - q

    t = optimize.brentq(f, float(special.logit(lo)), float(special.logit(hi)), xtol=1e-12,
                        rtol=1e-12)
    return float(special.expit(t))


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


#: The beta-binomial quantile is found by summing probabilities while that takes at most this
#: many terms (draws x counts), in blocks of at most _BLOCK_TERMS (bounded memory). Beyond it
#: the remaining units are so many that the count is taken in the continuous limit.
MAX_PMF_TERMS = 2**24
_BLOCK_TERMS = 2**20


def betabinom_quantile(q: float, remaining: int, alpha: np.ndarray,
                       beta: np.ndarray) -> tuple[int, bool]:
    r"""The q-quantile of the number of defectives among ``remaining`` units, mixed over
    draws, and whether it is exact.

    Exact: the smallest k whose mixture CDF reaches q, summing the probabilities
    :math:`\binom{R}{k} B(k+\alpha_d, R-k+\beta_d)/B(\alpha_d, \beta_d)` in blocks, by the
    ratio of successive terms (one pair of log-beta functions per draw, then logarithms).
    When that would take more than MAX_PMF_TERMS terms (a lot of millions of units, or many
    draws), the continuous limit :math:`\lceil R\,p_q \rceil` is returned, :math:`p_q` the
    mixture's q-quantile of the rate: D = R p + O(sqrt(R p)) binomial noise, which shifts
    the quantile by about :math:`\tfrac{z}{2}\sqrt{(\alpha+\beta)\,p(1-p)}` units, a few
    times the square root of the defectives found (checked in the tests).
    """
    return betabinom_quantiles((q,), remaining, alpha, beta)[0]


def betabinom_quantiles(qs, remaining: int, alpha: np.ndarray,
                        beta: np.ndarray) -> list[tuple[int, bool]]:
    """:func:`betabinom_quantile` at several levels ``qs`` from one shared sum of the
    mixture's probabilities (the median and the one-sided bound of a lot in one pass)."""
    if remaining <= 0:
        return [(0, True) for _ in qs]
    a = np.atleast_1d(np.asarray(alpha, float))
    b = np.atleast_1d(np.asarray(beta, float))
    k_limit = max(16, MAX_PMF_TERMS // a.size)
    # Markov's inequality bounds the rate's q-quantile by mean / (1 - q): when even that
    # many defectives fit the exact sum, the continuous value is not needed to decide
    top = max(qs)
    if remaining * mean(a, b) / max(1.0 - top, 1e-300) > 2 * k_limit:
        continuous = [min(int(remaining), int(np.ceil(remaining * ppf(q, a, b) - 1e-9)))
                      for q in qs]
        if any(c > 2 * k_limit for c in continuous):
            if len(qs) > 1:
                return [betabinom_quantile(q, remaining, a, b) for q in qs]
            return [(continuous[0], False)]
    else:
        continuous = None
    out: dict[int, tuple[int, bool]] = {}
    block = min(max(16, _BLOCK_TERMS // a.size), 2 * max(16, int(remaining * mean(a, b)))
                + 16)
    total = 0.0
    k0 = 0
    log_pmf = special.betaln(a, b + remaining) - special.betaln(a, b)  # log pmf(0) per draw
    while k0 <= min(remaining, k_limit):
        k1 = min(k0 + block, remaining + 1)
        logs, log_pmf = _log_pmf_block(k0, k1, remaining, a, b, log_pmf)
        cum = total + np.cumsum(np.exp(logs, out=logs).mean(axis=0))
        for i, q in enumerate(qs):
            if i not in out:
                hit = np.flatnonzero(cum >= q - 1e-12)
                if hit.size:
                    out[i] = (k0 + int(hit[0]), True)
        if len(out) == len(qs):
            return [out[i] for i in range(len(qs))]
        total = float(cum[-1])
        k0 = k1
        block = min(2 * block, max(16, _BLOCK_TERMS // a.size))
    for i, q in enumerate(qs):
        if i not in out:
            if k0 > remaining:
                out[i] = (int(remaining), True)
            else:
                c = (continuous[i] if continuous is not None else
                     min(int(remaining), int(np.ceil(remaining * ppf(q, a, b) - 1e-9))))
                out[i] = (c, False)
    return [out[i] for i in range(len(qs))]


def _log_pmf_block(k0: int, k1: int, remaining: int, a: np.ndarray, b: np.ndarray,
                   log_first: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """log pmf at k = k0..k1-1 per draw, shape (draws, k1 - k0), from log pmf(k0) by
    pmf(k + 1) / pmf(k) = (R - k)(alpha + k) / ((k + 1)(beta + R - k - 1)); also log
    pmf(k1) (the start of the next block; -inf past R). The operations of the sum in logs,
    in order, in one (draws, k1 - k0) buffer (fewer temporaries: the same numbers bit for
    bit, tested)."""
    k = np.arange(k0, k1, dtype=float)[None, :]
    with np.errstate(divide="ignore", invalid="ignore"):
        row = np.log((remaining - k) / (k + 1.0))
        steps = a[:, None] + k
        below = b[:, None] + remaining - k
        below -= 1.0
        np.divide(steps, below, out=steps)
        np.log(steps, out=steps)
        steps += row
    past = k[0] >= remaining
    if past.any():
        steps[:, past] = -np.inf
    np.cumsum(steps, axis=1, out=steps)
    last = log_first + steps[:, -1]
    steps[:, 1:] = steps[:, :-1]  # shifted one place: the log pmf before each step
    steps[:, 0] = 0.0
    steps += log_first[:, None]
    return steps, last


def betabinom_ppf(q: float, remaining: int, alpha: np.ndarray, beta: np.ndarray) -> int:
    """The q-quantile of the number of defectives among ``remaining`` units, mixed over draws
    (the smallest k whose mixture CDF reaches q); see :func:`betabinom_quantile`."""
    return betabinom_quantile(q, remaining, alpha, beta)[0]
