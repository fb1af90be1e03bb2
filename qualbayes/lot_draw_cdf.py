r"""Each draw's beta-binomial CDF, for one lot or for many lots of one (x, n) at once.

For a draw (alpha, beta) of a lot's conditional posterior and R units not inspected, the
lot is within the limit when its defectives among them, D ~ BetaBinomial(R, alpha, beta),
are at most k. P(D <= k) is summed from pmf(0) = B(alpha, beta + R) / B(alpha, beta) by
the ratio of successive probabilities, pmf(j + 1) / pmf(j) = (R - j)(alpha + j) / ((j +
1)(beta + R - j - 1)), by Horner's rule from the innermost term,
:math:`1 + r_0 (1 + r_1 (1 + \dots r_{k-1}))`: a few vector operations per count over the
draws, no logarithm. A draw whose pmf(0) is below e^-600 (or whose sum overflows) is summed
in logarithms instead, on its own, so that each draw's number depends on that draw only:
the same draw gives the same number whatever other draws or lots are summed with it (the
close-call rounds rely on it to reuse earlier draws' numbers, tested).

:func:`lot_cdfs` does the same for many lots sharing (x, n), hence alpha and beta, with
different R and k (a plant's lots of one sample plan, each of its own lot size): one pass
of array operations over lots x draws per count instead of one per lot, each element
computed by the same operations in the same order as :func:`betabinom_cdf` (the same
numbers, bit for bit, tested).

>>> import numpy as np
>>> from scipy import stats
>>> a, b = np.array([2.0, 3.5]), np.array([300.0, 420.0])
>>> got = betabinom_cdf(12, 900, a, b)
>>> bool(np.allclose(got, stats.betabinom.cdf(12, 900, a, b), rtol=1e-12))
True
>>> bool((lot_cdfs([12, 3], [900, 150], a, b)[0] == got).all())
True
"""

from __future__ import annotations

import numpy as np
from scipy import special

#: lots x draws alive at once in the callers' blocks (16 MB per array; memory bound)
BLOCK_VALUES = 1 << 21
#: lots x draws summed in one pass of :func:`lot_cdfs` at most (1 MB per array): the four
#: arrays of a pass stay in the processor's cache through its five operations per count.
#: Measured (500 lots of their own sizes, about 28 counts each, 16,000 draws, AMD EPYC, 512
#: KB L2 per core): 1.1-1.0 s a call against 2.0-2.1 s in blocks of 2^21; the same numbers,
#: since each element gets the same operations in the same order (docs/speed.md)
PASS_VALUES = 1 << 17


def betabinom_cdf(k: int, remaining: int, alpha, beta) -> np.ndarray:
    """P(D <= k) per draw for D ~ BetaBinomial(remaining, alpha_d, beta_d) (module
    docstring; checked against scipy.stats.betabinom in the tests)."""
    return lot_cdfs([k], [remaining], alpha, beta)[0]


def lot_cdfs(ks, remainings, alpha, beta, log_norm=None) -> np.ndarray:
    """P(D_c <= k_c) per lot c and draw d, D_c ~ BetaBinomial(R_c, alpha_d, beta_d): an
    array (lots, draws), each row the numbers of :func:`betabinom_cdf` for that lot.
    ``log_norm``: log B(alpha, beta) when the caller has it (several blocks of one (x, n))."""
    a = np.asarray(alpha, float)
    b = np.asarray(beta, float)
    ks = np.asarray(ks, int)
    rems = np.asarray(remainings, float)
    norm = special.betaln(a, b) if log_norm is None else log_norm
    out = np.empty((len(ks), a.size))
    order = np.argsort(-ks, kind="stable")  # the most counts first: the live rows a prefix
    step = max(1, PASS_VALUES // max(a.size, 1))
    for start in range(0, len(ks), step):
        rows = order[start:start + step]
        out[rows] = _block(ks[rows], rems[rows], a, b, norm)
    return out


def _block(ks: np.ndarray, rems: np.ndarray, a: np.ndarray, b: np.ndarray,
           norm: np.ndarray) -> np.ndarray:
    """:func:`lot_cdfs` of lots sorted by k, largest first."""
    log0 = special.betaln(a[None, :], b[None, :] + rems[:, None]) - norm[None, :]
    total = np.ones(log0.shape)
    ratio = np.empty(log0.shape)
    below = b[None, :] + (rems[:, None] - 1.0)
    with np.errstate(over="ignore", invalid="ignore"):
        for j in range(int(ks[0]) - 1, -1, -1):
            live = int(np.count_nonzero(ks > j))  # rows still summing at this count
            r, t = ratio[:live], total[:live]
            np.add(a[None, :], j, out=r)
            r /= below[:live] - j
            r *= ((rems[:live] - j) / (j + 1.0))[:, None]
            t *= r
            t += 1.0
        out = np.exp(log0) * total
    logs = ~((log0 > -600.0) & np.isfinite(out))
    for row in np.flatnonzero(logs.any(axis=1)):
        bad = logs[row]
        out[row, bad] = _log_cdf(int(ks[row]), rems[row], a[bad], b[bad], log0[row, bad])
    return out


def _log_cdf(k: int, remaining: float, a: np.ndarray, b: np.ndarray,
             log0: np.ndarray) -> np.ndarray:
    """The same sum in logarithms, draw by draw (pmf(0) near or below underflow)."""
    j = np.arange(k, dtype=float)[None, :]
    a1, b1 = a[:, None], b[:, None]
    with np.errstate(divide="ignore"):
        ratio = ((remaining - j) / (j + 1.0)) * ((a1 + j) / (b1 + remaining - j - 1.0))
        logpmf = log0[:, None] + np.cumsum(np.log(ratio), axis=1)
    return np.exp(log0) + np.exp(logpmf).sum(axis=1)
