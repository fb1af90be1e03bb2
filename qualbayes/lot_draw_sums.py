r"""One lot's beta-binomial mixture over the posterior draws, summed once for every answer.

For draws d = 1..D of the lot-rate prior Beta(a_d, b_d) and a lot of size N with x
defectives among n inspected (R = N - n units not inspected), the defectives D among the R
units have the mixture probabilities

.. math::

    P(D = k) = \binom{R}{k}\, U(x + k), \qquad
    U(T) = \frac1D \sum_d \frac{B(a_d + T,\ b_d + N - T)}{B(a_d + x,\ b_d + n - x)},

(:mod:`qualbayes.lot_grid_sums`, with the draws as equal-weight nodes). The same U serves

* the lot's defectives not inspected: their median and bound are quantiles of these
  probabilities (:func:`lot_sums`);
* its clean units to accept: after m further defect-free units the draws are reweighted by
  :math:`B(\alpha_d, \beta_d + m)/B(\alpha_d, \beta_d)` (:math:`\alpha = a + x`,
  :math:`\beta = b + n - x`) and R - m units are left, and the reweighted probability that
  the lot is within the limit is

  .. math::

      P(m) = \frac{\sum_{k \le k^*} \binom{R - m}{k} U(x + k)}{Z(m)}, \qquad
      Z(m) = \frac1D \sum_d \frac{B(\alpha_d, \beta_d + m)}{B(\alpha_d, \beta_d)},

  :math:`k^* = \lfloor sN \rfloor - x` (:func:`reweighted_prob`): U does not depend on m,
  so each count the search tries costs one log-beta per draw (Z, shared by every lot size
  of the same (x, n)) instead of a beta-binomial sum per draw.

The same numbers as summing each draw's probabilities
(:func:`qualbayes.lot_decisions.betabinom_cdf`, :func:`qualbayes.models.mixtures.
betabinom_quantiles`) up to rounding (tested against both and against
scipy.stats.betabinom). With it, the full answers of 1,000 lots of their own sizes took
2.4-3.1 s on one thread against 6.0-6.5 s (docs/speed.md).

>>> import numpy as np
>>> from scipy import stats
>>> a, b = np.array([2.0, 3.0, 2.5]), np.array([200.0, 250.0, 300.0])
>>> lu, q = lot_sums(a, b, 1, 50, 400, need=4, qs=(0.5, 0.95))
>>> mix = np.mean(stats.betabinom.cdf(np.arange(351)[:, None], 350, a + 1, b + 49), axis=1)
>>> q == [(int(np.argmax(mix >= 0.5)), True), (int(np.argmax(mix >= 0.95)), True)]
True
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from qualbayes import lot_grid_sums as sums

#: counts of defectives not inspected summed this way at most; past it (a lot of hundreds
#: of thousands of units) the caller sums draw by draw, or takes the continuous limit
MAX_COUNTS = 4096


def lot_sums(a0, b0, x: float, n: float, size: int, *, need: int,
             qs: tuple[float, ...], rate_high: float | None = None):
    """(log U(x + k) for k = 0..K, the ``qs`` quantiles of the defectives not inspected as
    [(count, True), ...]) of one lot under the draws (a0, b0); K at least ``need`` (the
    clean-unit search's k*; or K = R) and enough for the quantiles. Either is None when it
    cannot be had this way: a scaled term could overflow, or more than MAX_COUNTS counts
    would be needed. ``rate_high``: an upper bound of the lot's rate, to start with about as many
    counts as the quantiles need (the numbers do not depend on it beyond rounding)."""
    alpha = np.asarray(a0, float) + x
    beta = np.asarray(b0, float) + (n - x)
    remaining = int(size) - int(n)
    k_max = max(64, min(int(need), MAX_COUNTS))
    known = rate_high is not None and math.isfinite(rate_high)
    mean = remaining * rate_high if known else 0.0
    hopeless = mean > 4 * MAX_COUNTS  # the quantiles lie past MAX_COUNTS: not summed for
    if known and not hopeless:
        k_max = max(k_max, min(MAX_COUNTS, int(mean + 2.5 * math.sqrt(max(mean, 0.0)) + 3)))
    log_f = special.betaln(alpha, beta + remaining) - special.betaln(alpha, beta)
    while True:
        lu = log_u(alpha, beta, remaining, log_f, min(k_max, remaining))
        if lu is None:
            return None, None
        whole = lu.size > remaining  # every count up to R summed
        covering = lu if lu.size > need or whole else None
        cdf = np.cumsum(np.exp(sums.log_choose(remaining, np.arange(lu.size)) + lu))
        found = [int(np.argmax(hit)) if (hit := cdf >= q - 1e-12).any() else -1 for q in qs]
        if min(found) >= 0 or whole:
            return covering, [(k if k >= 0 else remaining, True) for k in found]
        if k_max >= MAX_COUNTS or hopeless:
            return covering, None
        k_max = min(2 * k_max, MAX_COUNTS)


def log_u(alpha, beta, remaining: int, log_f, k_max: int) -> np.ndarray | None:
    r"""log U(x + k) for k = 0..k_max: :math:`U(x + k) = \frac1D\sum_d F_d E_d(k)`,
    :math:`F_d = B(\alpha_d, \beta_d + R)/B(\alpha_d, \beta_d)` (``log_f``) and
    :math:`E_d(k) = \prod_{i<k} (\alpha_d + i)/(\beta_d + R - 1 - i)`, the products taken
    relative to the first draw's (so they stay near 1 for draws alike; that draw's own
    product in logarithms) and summed over the draws by one matrix product. None when a
    relative product could overflow (draws far apart)."""
    k = np.arange(k_max, dtype=float)
    ratio = np.add.outer(alpha, k)  # draws x counts, the counts contiguous
    ratio /= np.add.outer(beta, (remaining - 1.0) - k)
    ref = ratio[0].copy()
    ratio /= ref
    rel = np.empty((alpha.size, k_max + 1))
    rel[:, 0] = 1.0
    with np.errstate(over="ignore"):
        np.cumprod(ratio, axis=1, out=rel[:, 1:])
    top = float(rel.max())
    if not (math.isfinite(top) and top < 1e300 and rel.min() >= 0.0):
        return None
    shift = float(log_f.max())
    with np.errstate(divide="ignore"):
        lg = np.log(np.exp(log_f - shift) @ rel / alpha.size) + shift
    lg[1:] += np.cumsum(np.log(ref))
    return lg


def reweighted_prob(lu: np.ndarray, k_star: int, left: int, log_z: float) -> float:
    """P(m) of the module docstring: ``left`` = R - m units not inspected (more than
    k_star >= 0), ``log_z`` = log Z(m), ``lu`` = log U(x + k) for k = 0..k_star at least."""
    k = np.arange(k_star + 1)
    terms = sums.log_choose(left, k) + lu[:k_star + 1]
    top = float(terms.max())
    return min(1.0, math.exp(top + math.log(float(np.exp(terms - top).sum())) - log_z))
