"""The outlier check of lot histories: each lot's leave-one-out predictive p-value, on one
grid shared by every lot of the group (models/lot_history_grid.loo_pvalues).

References: (1) the earlier exact leave-one-out, every term's posterior on its own grid
(lot_history_grid.loo_pvalues_per_term, 100 points per side as the check shipped, and 300 as
the finer truth); (2) scipy.stats.betabinom for the complete-pooling limit (a lot-to-lot
spread near 0: the lots share one rate p ~ Beta(1, 1), and a new lot's defectives given the
other lots are BetaBinomial(n_k, 1 + sum x, 1 + sum (n - x)); beta-binomial predictive,
Hamada et al. 2008, ch. 2, docs/references.md)."""

import numpy as np
import pytest
from scipy import stats

from qualbayes.models import lot_history_grid as grid
from qualbayes.models.lot_spread import HistoryPrior

#: the shared grid and the per-term 100-point grids are quadratures of the same integral
#: on different grids: where they differ by more than this, 200-point per-term grids
#: decide, and the shared grid must be at least as close to them as the earlier check was
#: (its largest error no larger than the earlier one's plus this)
CLOSE = 1e-6


def _histories():
    rng = np.random.default_rng(3)
    sizes = np.array([50, 80, 125, 200, 315])
    out = [([0.0] * 9 + [9.0], [125.0] * 9 + [80.0]),  # one outlier among clean lots
           ([0.0] * 19 + [30.0], [200.0] * 20),  # an extreme outlier
           ([0.0, 3.0], [50.0, 50.0]), ([0.0, 0.0, 4.0], [80.0, 80.0, 80.0]),
           ([1.0] * 20, [80.0] * 20), (np.zeros(15), np.full(15, 125.0))]
    for i in range(10):
        lots = int(rng.integers(5, 31))
        n = rng.choice(sizes, lots)
        base = rng.choice([0.003, 0.01, 0.03])
        spread = 300.0 if i % 2 else 5.0  # homogeneous and heterogeneous histories
        x = rng.binomial(n, rng.beta(base * spread, (1 - base) * spread, lots))
        x[-1] = rng.binomial(n[-1], min(0.5, base * (1 + 10 * (i % 3))))  # some outlying
        out.append((x.astype(float), n.astype(float)))
    return out


@pytest.mark.parametrize("prior", [HistoryPrior(), HistoryPrior(2.0)])
def test_shared_grid_equals_the_per_term_leave_one_out(prior):
    flagged = 0
    for x, n in _histories():
        xs, ns, p = grid.loo_pvalues(x, n, prior=prior)
        rx, rn, ref = grid.loo_pvalues_per_term(x, n, prior=prior)
        assert np.array_equal(xs, rx) and np.array_equal(ns, rn)
        err = np.max(np.abs(p - ref))
        if err > CLOSE:
            fine = grid.loo_pvalues_per_term(x, n, prior=prior, size=200)[2]
            assert np.max(np.abs(p - fine)) <= np.max(np.abs(ref - fine)) + CLOSE, (x, n)
        clear = np.abs(ref - grid.OUTLIER_LEVEL) > err  # a flag is decided by p
        assert np.array_equal((p < grid.OUTLIER_LEVEL)[clear],
                              (ref < grid.OUTLIER_LEVEL)[clear])
        flagged += int((ref < grid.OUTLIER_LEVEL).sum())
    assert flagged >= 5  # the cases do include outlying lots


def test_complete_pooling_limit_against_scipy_betabinom():
    """Spread scale 0.01 (the smallest allowed): lot CVs below 0.02 with 95% prior
    probability, which inflates the predictive variance of these lots by under 0.2% (n^2
    mu^2 CV^2 over n mu); the p-values may then differ from complete pooling by a few 1e-4
    at most, so 1e-3 is the bound (measured: 3e-5)."""
    prior = HistoryPrior(0.01)
    for x, n in (([1.0] * 19 + [4.0], [80.0] * 20), ([0.0] * 14 + [2.0], [125.0] * 15),
                 ([2.0, 1.0, 3.0, 1.0, 2.0, 6.0], [200.0] * 6)):
        x, n = np.asarray(x), np.asarray(n)
        xs, ns, p = grid.loo_pvalues(x, n, prior=prior)
        for xk, nk, pk in zip(xs, ns, p, strict=True):
            rest = np.ones(len(x), bool)
            rest[np.flatnonzero((x == xk) & (n == nk))[0]] = False
            ref = stats.betabinom(int(nk), 1 + x[rest].sum(), 1 + (n[rest] - x[rest]).sum())
            assert pk == pytest.approx(ref.sf(xk - 1), abs=1e-3)


def test_one_lot_has_no_p_value_and_equal_lots_are_not_flagged():
    assert grid.loo_pvalues([3.0], [50.0])[2].tolist() == [1.0]
    xs, _, p = grid.loo_pvalues([1.0] * 20, [80.0] * 20)
    assert len(xs) == 1 and 0.3 < p[0] <= 1.0  # P(X >= 1) for a lot like all others


def test_a_term_whose_box_is_much_smaller_gets_its_own_grid(monkeypatch):
    """Leaving out the one extreme lot narrows the posterior far below the others' boxes:
    that term is computed on its own grid (the reference), the others on the shared one,
    and the answer is the same with the shared grid's limit raised or lowered."""
    x, n = [0.0] * 19 + [30.0], [200.0] * 20
    base = grid.loo_pvalues(x, n)[2]
    monkeypatch.setattr(grid, "LOO_SHARED_MAX", 100)  # nearly every term on its own grid
    assert np.max(np.abs(grid.loo_pvalues(x, n)[2] - base)) <= CLOSE
    monkeypatch.setattr(grid, "LOO_SHARED_MAX", 10_000)  # every term on the shared grid
    assert np.max(np.abs(grid.loo_pvalues(x, n)[2] - base)) <= CLOSE
