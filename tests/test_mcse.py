"""The Monte Carlo error of a mean over chains (qualbayes.inference.mcse)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import lfilter

from qualbayes.inference.mcse import ess_mean, mcse_mean, mcse_means


def _rows(rng, k: int, chains: int, draws: int) -> np.ndarray:
    """k sequences like the lots' g: values in [0, 1], autocorrelated, and the awkward
    cases: a row that never varies, a row with one constant chain, a rare indicator."""
    g = rng.beta(20, 2, size=(k, chains, draws))
    g = np.clip(g + np.cumsum(rng.normal(size=g.shape) * 0.01, axis=2), 0.0, 1.0)
    g[0] = 0.7
    g[1, 0] = 1.0
    g[2] = (rng.uniform(size=(chains, draws)) < 0.002).astype(float)
    return g


@pytest.mark.parametrize("chains, draws", [(4, 4000), (4, 1000), (1, 16), (2, 17),
                                           (3, 777), (8, 10), (1, 1001)])
def test_rows_together_give_each_row_its_own_numbers(chains, draws):
    # mcse_means is only a faster way to the same numbers: bit for bit, whatever the
    # number of chains and draws (odd counts drop the middle draw of each chain)
    g = _rows(np.random.default_rng(chains * 10_000 + draws), 40, chains, draws)
    together = mcse_means(g)
    assert np.array_equal(together, [mcse_mean(row) for row in g])
    assert together[0] == 0.0  # a sequence that never varies has no Monte Carlo error
    # and in blocks of any size, as lot_decisions.probabilities calls it
    blocks = np.concatenate([mcse_means(g[s:s + 7]) for s in range(0, len(g), 7)])
    assert np.array_equal(blocks, together)


def test_rows_together_refuse_other_shapes():
    with pytest.raises(ValueError, match="row, chain, draw"):
        mcse_means(np.zeros((4, 100)))


def test_ess_of_ar1_chains_matches_their_integrated_autocorrelation_time():
    # Closed form (docs/references.md, "AR(1) autocorrelation time"; from memory):
    # x_t = phi x_{t-1} + e_t has autocorrelation phi^k, so its integrated autocorrelation
    # time is tau = (1 + phi) / (1 - phi) and the ESS of its mean N / tau. Chains start in
    # the stationary law. The estimate's relative standard deviation is about
    # sqrt(2 (2M + 1) / N) (Sokal's approximation, same entry) with a window M of at most
    # 5 tau = 15 lags here: 2.5 % for N = 100,000 (40 seeds gave 2.1 %); allowed: 4 of them.
    phi, chains, draws = 0.5, 4, 25_000
    rng = np.random.default_rng(11)
    e = rng.normal(size=(chains, draws))
    e[:, 0] /= np.sqrt(1.0 - phi**2)
    x = lfilter([1.0], [1.0, -phi], e, axis=1)
    exact = chains * draws * (1.0 - phi) / (1.0 + phi)
    assert ess_mean(x) == pytest.approx(exact, rel=0.10)
    # the MCSE of the mean is sd / sqrt(ESS): for AR(1), sqrt(1 / (1 - phi^2) / ESS)
    assert mcse_mean(x) == pytest.approx(np.sqrt(1.0 / (1.0 - phi**2) / exact), rel=0.06)
    # and the rows' path gives the same for the same chains
    assert mcse_means(x[None])[0] == mcse_mean(x)
