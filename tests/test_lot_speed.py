"""Speed work on the lot path: the faster per-lot sums give the same numbers as the direct
formulas, and the per-part sampler (each part its own NUTS chain and adaptation) agrees
with the exact quadrature within its Monte Carlo error."""

import numpy as np
import pytest
from scipy import stats

from qualbayes.models import mixtures


def test_shared_quantile_sum_equals_separate_quantiles_and_scipy():
    # reference: scipy.stats.betabinom (docs/references.md, "Reference libraries")
    rng = np.random.default_rng(7)
    a, b = rng.uniform(1, 5, 400), rng.uniform(100, 900, 400)
    for rem in (1, 37, 1875, 4700):
        both = mixtures.betabinom_quantiles((0.5, 0.95), rem, a, b)
        assert both == [mixtures.betabinom_quantile(q, rem, a, b) for q in (0.5, 0.95)]
        for q, (k, exact) in zip((0.5, 0.95), both, strict=True):
            assert exact
            cdf = np.mean(stats.betabinom.cdf([k, k - 1], rem, a[:, None], b[:, None]), axis=0)
            assert cdf[0] >= q - 1e-12 > cdf[1]


def test_betabinom_cdf_by_products_and_by_logs_against_scipy():
    from qualbayes.lot_decisions import betabinom_cdf

    # small a: pmf(0) near 1 (products); a = 800: pmf(0) underflows below e^-600 (logs)
    for a, b, r, k in ((2.0, 300.0, 4000, 40), (800.0, 50.0, 3000, 2900), (0.5, 9.0, 50, 3)):
        got = betabinom_cdf(k, r, np.array([a]), np.array([b]))[0]
        assert got == pytest.approx(stats.betabinom(r, a, b).cdf(k), rel=1e-9, abs=1e-300)


@pytest.mark.slow
def test_per_part_sampler_matches_quadrature_within_monte_carlo_error():
    from qualbayes.inference.diagnostics import ess_bulk
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.models.lot_history import lot_history_model, pad
    from qualbayes.models.lot_history_grid import posterior_grid
    from qualbayes.models.lot_history_parts import sample_parts

    x1 = np.array([0, 1, 3, 0, 2, 5, 1, 0, 0, 4, 2, 1], float)
    n1 = np.array([50, 80, 125, 50, 80, 200, 125, 80, 50, 125, 200, 80], float)
    x2, n2 = np.zeros(15), np.full(15, 125.0)  # a clean history: a very different posterior
    groups = [(x1, n1), (x2, n2)]
    mu, kappa, div = sample_parts(lot_history_model, *pad(groups), 0.5,
                                  SamplerSettings(seed=5, target_accept=0.99))
    assert div.sum() == 0
    for j, (x, n) in enumerate(groups):
        g = posterior_grid(x, n, size=400)
        assert g.edge_mass < 1e-6
        for values, exact in ((mu[:, :, j], g.mu), (np.log(kappa[:, :, j]), np.log(g.kappa))):
            ess = float(ess_bulk(values))
            assert ess > 400
            m = float(np.sum(g.weight * exact))
            sd = float(np.sqrt(np.sum(g.weight * (exact - m) ** 2)))
            assert abs(values.mean() - m) <= 4 * sd / np.sqrt(ess) + 0.01 * sd


def test_answers_reusing_known_probabilities_equal_a_fresh_computation():
    import pandas as pd

    from qualbayes.lot_answers import answer_lots

    rng = np.random.default_rng(3)
    k = 300
    n = rng.choice([50, 80, 125, 200], size=k)
    frame = pd.DataFrame({"defectives": rng.binomial(n, 0.01).astype(float),
                          "inspected": n.astype(float),
                          "lot_size": pd.array(rng.choice([800, 2000, None], size=k),
                                               dtype="Int64")})
    frame["decision_basis"] = np.where(frame["lot_size"].notna(), "lot", "process")
    mu = rng.beta(20, 2000, 2000)
    kappa = np.exp(rng.normal(np.log(300), 0.5, 2000))
    a0, b0 = mu * kappa, (1 - mu) * kappa
    known = answer_lots(frame, a0, b0, 4, 0.01, 0.95, full=False)
    fresh = answer_lots(frame, a0, b0, 4, 0.01, 0.95)
    reused = answer_lots(frame, a0, b0, 4, 0.01, 0.95, known=known)
    for column, values in fresh.items():
        assert pd.Series(list(values)).equals(pd.Series(list(reused[column]))), column
