"""One lot's beta-binomial mixture over the draws, summed once (qualbayes.lot_draw_sums).

References: scipy.stats.betabinom (reference library, docs/references.md) for every
probability; the draw-by-draw code (qualbayes.lot_decisions.betabinom_cdf,
qualbayes.models.mixtures.betabinom_quantiles) for the answers the sums replace.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from qualbayes import lot_decisions as ld
from qualbayes.lot_draw_sums import MAX_COUNTS, lot_sums, reweighted_prob
from qualbayes.models import mixtures


def _draws(seed: int, d: int = 1000, mu: float = 0.01, kappa: float = 300.0,
           spread: float = 0.5):
    """(a0, b0): draws of a history-like posterior of (mu, kappa)."""
    rng = np.random.default_rng(seed)
    m = rng.beta(mu * 400, (1 - mu) * 400, d)
    k = np.exp(rng.normal(np.log(kappa), spread, d))
    return m * k, (1 - m) * k


def _mixture_cdf(k, remaining, alpha, beta):
    return np.mean(stats.betabinom.cdf(np.atleast_1d(k)[None, :], remaining, alpha[:, None],
                                       beta[:, None]), axis=0)


CASES = [  # (x, n, lot size, seed, rate_high): small, typical and large lots
    (0, 50, 80, 1, None), (1, 125, 800, 2, 0.03), (3, 200, 5000, 3, 0.04),
    (0, 315, 20_000, 4, None), (7, 500, 60_000, 5, 0.05), (2, 80, 81, 6, 0.05),
]


@pytest.mark.parametrize(("x", "n", "size", "seed", "rate_high"), CASES)
def test_mixture_probabilities_and_quantiles_against_scipy(x, n, size, seed, rate_high):
    # reference: scipy.stats.betabinom, averaged over the draws (docs/references.md)
    a0, b0 = _draws(seed, d=300)
    alpha, beta = a0 + x, b0 + (n - x)
    remaining = size - n
    lu, quantiles = lot_sums(a0, b0, x, n, size, need=0, qs=(0.5, 0.95), rate_high=rate_high)
    assert lu is not None and quantiles is not None
    k = np.arange(min(lu.size, remaining + 1))
    pmf = np.exp(special.gammaln(remaining + 1) - special.gammaln(k + 1)
                 - special.gammaln(remaining - k + 1) + lu[k])
    expected = np.mean(stats.betabinom.pmf(k[None, :], remaining, alpha[:, None],
                                           beta[:, None]), axis=0)
    big = expected > 1e-250
    np.testing.assert_allclose(pmf[big], expected[big], rtol=1e-9)
    for q, (count, exact) in zip((0.5, 0.95), quantiles, strict=True):
        cdf = _mixture_cdf([count, count - 1], remaining, alpha, beta)
        assert exact and cdf[0] >= q - 1e-12 > cdf[1]
        # the draw-by-draw sum gives the same count
        assert mixtures.betabinom_quantile(q, remaining, alpha, beta) == (count, True)


def test_counts_past_the_first_guess_are_summed_in_larger_blocks():
    # no rate bound given: 64 counts first, then 128, 256, ... until the 95% point is
    # reached (about 700 defectives among 70,000 units at 1%)
    a0, b0 = _draws(7, d=200)
    lu, quantiles = lot_sums(a0, b0, 1, 125, 70_125, need=0, qs=(0.95,))
    assert lu.size - 1 >= quantiles[0][0] > 256
    cdf = _mixture_cdf([quantiles[0][0], quantiles[0][0] - 1], 70_000, a0 + 1, b0 + 124)
    assert cdf[0] >= 0.95 - 1e-12 > cdf[1]


def test_what_the_sums_cannot_take_is_left_to_the_caller():
    # draws far apart (a rate of 1e-4 and one of 0.5): their ratios relative to the first
    # draw overflow within 64 counts, so no sums are given
    a0, b0 = np.array([0.01, 500.0, 0.02]), np.array([100.0, 500.0, 150.0])
    assert lot_sums(a0, b0, 0, 50, 5000, need=10, qs=(0.5, 0.95)) == (None, None)
    # a quantile past MAX_COUNTS (a million units at about 1%): no quantiles; the sums up
    # to the clean-unit search's k* are still given
    a0, b0 = _draws(8, d=100)
    lu, quantiles = lot_sums(a0, b0, 0, 125, 10**6, need=3000, qs=(0.5, 0.95))
    assert quantiles is None and lu is not None and lu.size == MAX_COUNTS + 1
    lu, quantiles = lot_sums(a0, b0, 0, 125, 10**6, need=MAX_COUNTS + 1, qs=(0.5,))
    assert lu is None and quantiles is None
    # a rate bound putting the quantiles far past MAX_COUNTS (ten million units at up to
    # 2%): only the counts the search needs are summed
    lu, quantiles = lot_sums(a0, b0, 0, 125, 10**7, need=10, qs=(0.5,), rate_high=0.02)
    assert quantiles is None and lu.size == 65
    # a lot of few units: all R + 1 counts are summed whatever the search needs
    lu, quantiles = lot_sums(a0, b0, 0, 125, 140, need=900, qs=(0.5, 0.95))
    assert lu.size == 16 and quantiles is not None


@pytest.mark.parametrize("m", [0, 1, 40, 700, 3000])
def test_reweighted_probability_against_scipy(m):
    # reference: scipy.stats.betabinom per draw, weighted by B(alpha, beta + m) /
    # B(alpha, beta) (importance reweighting by m further clean units)
    a0, b0 = _draws(9, d=400)
    x, n, size, spec = 2, 200, 4000, 0.01
    alpha, beta = a0 + x, b0 + (n - x)
    k_star = int(np.floor(spec * size - x + 1e-9))
    lu, _ = lot_sums(a0, b0, x, n, size, need=k_star, qs=(0.5,))
    logw = special.betaln(alpha, beta + m) - special.betaln(alpha, beta)
    w = np.exp(logw - logw.max())
    expected = float(np.sum(w * stats.betabinom.cdf(k_star, size - n - m, alpha, beta + m))
                     / w.sum())
    log_z = float(logw.max() + np.log(w.mean()))
    assert reweighted_prob(lu, k_star, size - n - m, log_z) == pytest.approx(expected,
                                                                             rel=1e-9)


def test_clean_units_with_the_sums_equal_the_draw_by_draw_search():
    # the same counts as summing every draw for every count tried (the earlier search), on
    # lots of many sizes, the too-small and the too-large included
    a0, b0 = _draws(10, d=1000)
    rng = np.random.default_rng(11)
    seen = 0
    for _ in range(40):
        n = int(rng.choice([50, 80, 125, 200, 315]))
        size = int(rng.integers(n + 1, 30_000))
        x = int(rng.binomial(n, 0.006))
        spec, c = 0.01, 0.95
        remaining = size - n
        k_star = int(np.floor(spec * size - x + 1e-9))
        lu, _ = lot_sums(a0, b0, x, n, size, need=max(k_star, 0), qs=(0.5,))
        got = ld.extra_clean_units(a0, b0, float(x), float(n), remaining, size, spec, c,
                                   ld.LOT, lot_sums=lu)
        plain = ld.extra_clean_units(a0, b0, float(x), float(n), remaining, size, spec, c,
                                     ld.LOT)
        assert got == plain, (x, n, size)
        seen += got is not None and got > 0
    assert seen > 10  # real searches, not only lots out of limit
