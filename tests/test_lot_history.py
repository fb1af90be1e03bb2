"""The hierarchical lot model (NUTS) against an exact reference and simulated histories."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from qualbayes.data.lot_table import LotTable
from qualbayes.inference.run import SamplerSettings
from qualbayes.lot_question import assess_lots, extra_clean_units_reweighted
from qualbayes.models import lot_posterior as conj
from qualbayes.models import mixtures

# A small history with clear lot-to-lot variation (invented numbers for the check).
X = np.array([0, 1, 3, 0, 2, 5, 1, 0, 0, 4, 2, 1], float)
N = np.array([50, 80, 125, 50, 80, 200, 125, 80, 50, 125, 200, 80], float)


def grid_posterior(x, n, size=400):
    """Exact posterior of (mu, kappa) by 2-D quadrature under the same hyperprior
    (qualbayes.models.lot_history_grid, checked against closed forms below)."""
    from qualbayes.models.lot_history_grid import posterior_grid

    g = posterior_grid(x, n, size=size)
    assert g.edge_mass < 1e-6  # the grid holds the mass
    return g.mu, np.log(g.kappa), g.weight


def weighted_quantile(values, weights, q):
    order = np.argsort(values)
    cdf = np.cumsum(weights[order])
    return float(np.interp(q, cdf, values[order]))


@pytest.fixture(scope="module")
def fit():
    from qualbayes.models.lot_history import fit_histories

    return fit_histories([(X, N)], SamplerSettings(seed=11), names=["P"])


def test_nuts_matches_quadrature_within_monte_carlo_error(fit):
    import arviz as az

    assert fit.gate.passed, fit.gate.reasons()
    mu_g, lk_g, w = grid_posterior(X, N)
    draws = {"mu": fit.draws["mu"][:, :, 0], "log_kappa": np.log(fit.draws["kappa"][:, :, 0])}
    exact = {"mu": mu_g, "log_kappa": lk_g}
    for name, d in draws.items():
        ess = float(az.ess(d, method="bulk"))
        flat = d.ravel()
        mean_exact = float(np.sum(w * exact[name]))
        sd_exact = float(np.sqrt(np.sum(w * (exact[name] - mean_exact) ** 2)))
        # 4 Monte Carlo standard errors of the mean (sd / sqrt(ESS)) plus the grid's own
        # discretisation error (bounded by a small fraction of the sd)
        assert abs(flat.mean() - mean_exact) <= 4 * sd_exact / np.sqrt(ess) + 0.01 * sd_exact
        for q in (0.1, 0.5, 0.9):
            # the fraction of draws below the exact quantile is binomial-like with ESS trials
            qx = weighted_quantile(exact[name], w, q)
            frac = float(np.mean(flat <= qx))
            ess_t = float(az.ess(d, method="tail")) if q != 0.5 else ess
            assert abs(frac - q) <= 4 * np.sqrt(q * (1 - q) / ess_t) + 0.005


def _history_table(groups, seed=0, sizes=(50, 80, 125, 200)):
    rng = np.random.default_rng(seed)
    rows = []
    for part, (mu, kappa, k) in groups.items():
        p = rng.beta(mu * kappa, (1 - mu) * kappa, size=k)
        n = rng.choice(sizes, size=k)
        x = rng.binomial(n, p)
        for i in range(k):
            rows.append((f"{part}-{i}", part, None, None, None, int(n[i]), int(x[i]), i + 2))
    frame = pd.DataFrame(rows, columns=["lot", "part", "supplier", "date", "lot_size",
                                        "inspected", "defectives", "row"])
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    return LotTable(frame, "sim.csv", None, 1, {}, [])


def test_recovery_of_simulated_histories_all_parts_in_one_fit():
    from qualbayes.models.lot_history import fit_histories

    truth = {"A": (0.002, 3000.0, 60), "B": (0.01, 200.0, 60), "C": (0.03, 30.0, 60),
             "D": (0.05, 8.0, 80)}
    table = _history_table(truth, seed=3)
    f = table.frame
    groups = [(f.loc[f.part == k, "defectives"].to_numpy(float),
               f.loc[f.part == k, "inspected"].to_numpy(float)) for k in truth]
    fit = fit_histories(groups, SamplerSettings(seed=5), names=list(truth))
    assert fit.gate.passed, fit.gate.reasons()
    for j, (mu, _kappa, _k) in enumerate(truth.values()):
        d = fit.draws["mu"][:, :, j].ravel()
        lo, hi = np.quantile(d, [0.005, 0.995])
        assert lo <= mu <= hi
    # the posterior ordering of the mean rates follows the truth
    medians = [np.median(fit.draws["mu"][:, :, j]) for j in range(4)]
    assert medians == sorted(medians)


def test_stable_supplier_many_alike_lots_float64_no_divergences():
    # DESIGN.md: a stable supplier (large concentration) is where float32 failed; in float64
    # NUTS must pass the gate with no divergent transitions.
    table = _history_table({"S": (0.002, 20000.0, 200)}, seed=9, sizes=(125, 200, 315))
    res = assess_lots(table, spec=0.01, confidence=0.95, prior="history", seed=2)
    d = res.diagnostics["S"]
    assert d["passed"], d["reasons"]
    assert d["divergences"] == 0
    assert set(res.lots["decision"]) <= {"accept", "undecided"}


def test_failed_gate_gives_no_decision():
    table = _history_table({"Q": (0.01, 100.0, 12)}, seed=1)
    tiny = SamplerSettings(num_warmup=30, num_samples=20, seed=4)  # 80 draws < ESS 400
    res = assess_lots(table, spec=0.02, confidence=0.9, prior="history", settings=tiny)
    d = res.diagnostics["Q"]
    assert not d["passed"] and d["attempts"] == 2  # retried once with more draws
    assert any("ESS" in r for r in d["reasons"])
    assert set(res.lots["decision"]) == {"not-converged"}
    assert res.lots["prob_within_spec"].isna().all()
    assert res.next_lot["Q"] == {"decision": "not-converged"}


def test_mixture_summaries_reduce_to_scipy_for_identical_draws():
    a = np.full(500, 3.0)
    b = np.full(500, 250.0)
    ref = stats.beta(3.0, 250.0)
    assert mixtures.cdf(0.01, a, b) == pytest.approx(ref.cdf(0.01), rel=1e-12)
    assert mixtures.ppf(0.95, a, b) == pytest.approx(ref.ppf(0.95), rel=1e-9)
    assert mixtures.mean(a, b) == pytest.approx(ref.mean(), rel=1e-12)
    bb = stats.betabinom(900, 3.0, 250.0)
    assert mixtures.betabinom_ppf(0.95, 900, a, b) == bb.ppf(0.95)
    assert mixtures.betabinom_ppf(0.5, 900, a, b) == bb.ppf(0.5)


def test_mixture_quantile_of_two_components_against_numeric_inversion():
    a = np.array([2.0, 5.0])
    b = np.array([100.0, 80.0])
    q = mixtures.ppf(0.9, a, b)
    assert 0.5 * (stats.beta.cdf(q, 2, 100) + stats.beta.cdf(q, 5, 80)) == pytest.approx(0.9,
                                                                                       abs=1e-9)


def test_reweighted_extra_units_equal_conjugate_when_draws_coincide():
    # With every draw equal, the importance weights are uniform and the answer must be the
    # conjugate count for the prior Beta(mu kappa, (1 - mu) kappa).
    alpha = np.full(1000, 1.4)
    beta = np.full(1000, 100.0)
    m = extra_clean_units_reweighted(alpha, beta, 0.01, 0.95)
    assert m is not None and m > 0
    assert m == conj.extra_clean_units(1.4, 100.0, 0.01, 0.95)
    assert extra_clean_units_reweighted(alpha, beta + 2000, 0.01, 0.95) == 0
