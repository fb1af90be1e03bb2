"""The answering pass as it was before the speed work of issue 18 (commit 133ae50), kept
as the reference that the faster code must reproduce number for number
(tests/test_lot_answers.py): the clean-unit search by doubling and bisection from 0, and
the mixture quantile one level at a time; and each draw's beta-binomial CDF as it was
before d5980c2 (an array of ratios and their running products)."""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.lot_decisions import LOT, MAX_EXTRA_UNITS, MIN_WEIGHT_ESS, draws_g
from qualbayes.search import smallest_int


class _Degenerate(Exception):
    pass


def extra_clean_units(a0, b0, x, n, remaining, lot_size, spec, confidence, basis,
                      calls: list | None = None):
    """The earlier ``lot_decisions.extra_clean_units``, verbatim but for ``calls`` (each
    tested m appended, to count the sums over the draws)."""
    alpha, beta = a0 + x, b0 + (n - x)
    lot = basis == LOT and remaining is not None
    if lot and x > spec * lot_size + 1e-12:
        return None
    base = special.betaln(alpha, beta)
    single = alpha.size == 1

    def ok(m: int) -> bool:
        if calls is not None:
            calls.append(m)
        if single:
            w = np.ones(1)
        else:
            logw = special.betaln(alpha, beta + m) - base
            w = np.exp(logw - logw.max())
            if w.sum() ** 2 / (w**2).sum() < MIN_WEIGHT_ESS:
                raise _Degenerate
        if lot:
            g, _ = draws_g(a0, b0 + m, x, n, remaining - m, spec, LOT, lot_size)
        else:
            g = special.betainc(alpha, beta + m, spec)
        return bool(np.average(g, weights=w) >= confidence)

    try:
        return smallest_int(ok, 0, remaining if lot else MAX_EXTRA_UNITS)
    except _Degenerate:
        return None


def mixture_ppf(q: float, alpha: np.ndarray, beta: np.ndarray) -> float:
    """The earlier ``mixtures.ppf`` (Newton from the moment-matched Beta's quantile, every
    step's CDF evaluated), verbatim."""
    from qualbayes.models.mixtures import _bracket_ppf  # noqa: PLC0415

    alpha = np.asarray(alpha, float)
    beta = np.asarray(beta, float)
    if alpha.size == 1:
        return float(special.betaincinv(alpha, beta, q).ravel()[0])
    m = alpha / (alpha + beta)
    mean = float(m.mean())
    var = float(np.mean(m * (1 - m) / (alpha + beta + 1)) + m.var())
    t = None
    if 0 < mean < 1 and 0 < var < mean * (1 - mean):
        common = mean * (1 - mean) / var - 1
        start = float(special.betaincinv(mean * common, (1 - mean) * common, q))
        if 1e-300 < start < 1 - 1e-16:
            t = _newton(q, alpha, beta, float(special.logit(start)))
    return t if t is not None else _bracket_ppf(q, alpha, beta)


def _newton(q, alpha, beta, t, steps: int = 40):
    from qualbayes.models.mixtures import cdf  # noqa: PLC0415

    lo, hi = -np.inf, np.inf
    log_norm = special.betaln(alpha, beta)
    for _ in range(steps):
        p = float(special.expit(t))
        f = cdf(p, alpha, beta) - q
        if abs(f) <= 1e-11:
            return p
        if f > 0:
            hi = t
        else:
            lo = t
        log_pdf = alpha * np.log(p) + beta * np.log1p(-p) - log_norm
        slope = float(np.mean(np.exp(log_pdf)))
        step = f / slope if slope > 0 else np.inf
        nxt = t - step
        if not (lo < nxt < hi) or not np.isfinite(nxt):
            if not (np.isfinite(lo) and np.isfinite(hi)):
                nxt = t - np.sign(f) * 2.0
            else:
                nxt = 0.5 * (lo + hi)
        if abs(nxt - t) < 1e-13 * max(1.0, abs(t)):
            return float(special.expit(nxt))
        t = nxt
    return None


def log_pmf_block(k0: int, k1: int, remaining: int, a: np.ndarray, b: np.ndarray,
                  log_first: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The earlier ``mixtures._log_pmf_block``, verbatim."""
    k = np.arange(k0, k1, dtype=float)[None, :]
    with np.errstate(divide="ignore", invalid="ignore"):
        steps = (np.log((remaining - k) / (k + 1.0))
                 + np.log((a[:, None] + k) / (b[:, None] + remaining - k - 1.0)))
    steps = np.where(k < remaining, steps, -np.inf)
    cum = log_first[:, None] + np.cumsum(steps, axis=1)
    logs = np.concatenate([log_first[:, None], cum[:, :-1]], axis=1)
    return logs, cum[:, -1]


def betabinom_cdf(k: int, remaining: int, alpha, beta) -> np.ndarray:
    """The earlier ``lot_decisions.betabinom_cdf`` (an array of ratios and their running
    products), verbatim."""
    j = np.arange(k, dtype=float)[None, :]
    a = np.asarray(alpha, float)[:, None]
    b = np.asarray(beta, float)[:, None]
    log0 = special.betaln(a, b + remaining) - special.betaln(a, b)
    ratio = ((remaining - j) / (j + 1.0)) * ((a + j) / (b + remaining - j - 1.0))
    if log0.min() > -600.0:  # products of ratios stay within float range: no logarithms
        return np.exp(log0[:, 0]) * (1.0 + np.cumprod(ratio, axis=1).sum(axis=1))
    logpmf = log0 + np.cumsum(np.log(ratio), axis=1)
    return np.exp(log0[:, 0]) + np.exp(logpmf).sum(axis=1)
