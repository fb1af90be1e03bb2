"""Field-failure forecasts (qualbayes returns): conditional period probabilities against
scipy.stats, the forecast against a direct Monte Carlo simulation of the installed base under
fixed parameters, coverage of the predictive interval over simulated fleets, the
installed-base reader and the command line. External values: docs/references.md
("Accelerated life and forecasts")."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from qualbayes.errors import InputError, OptionError
from qualbayes.field_forecast import summarise_counts
from qualbayes.models.forecast import (
    LifeDraws,
    expected_exact,
    forecast_counts,
    period_probabilities,
)
from tests.helpers import write_csv


def constant_draws(shape, scale, chains=4, per_chain=500) -> LifeDraws:
    return LifeDraws.weibull(np.full((chains, per_chain), shape),
                             np.full((chains, per_chain), scale))


@pytest.mark.parametrize("distribution", ["weibull", "lognormal"])
def test_period_probabilities_are_scipy_conditional_survival(distribution):
    ages = np.array([0.0, 150.0, 1200.0, 4000.0])
    mu, sigma, u, k = math.log(2500.0), 0.6, 200.0, 5
    p = period_probabilities(ages, mu, sigma, u, k, distribution)
    if distribution == "weibull":
        d = stats.weibull_min(1 / sigma, scale=math.exp(mu))
    else:
        d = stats.lognorm(sigma, scale=math.exp(mu))
    for c, a in enumerate(ages):
        edges = a + u * np.arange(k + 1)
        ref = (d.sf(edges[:-1]) - d.sf(edges[1:])) / d.sf(a)
        np.testing.assert_allclose(p[c, :k], ref, rtol=1e-10, atol=1e-15)
        assert p[c, k] == pytest.approx(d.sf(edges[-1]) / d.sf(a), rel=1e-10)
        assert p[c].sum() == pytest.approx(1.0, abs=1e-12)


def direct_simulation(rng, ages, shape, scale, usage, horizon, reps):
    """Every unit of every replicate fleet gets a failure time drawn from the Weibull law
    conditioned on survival to its age (inverse cdf: T = eta ((a/eta)^beta - ln U)^(1/beta));
    failures are counted per period."""
    u = rng.random((reps, ages.size))
    t = scale * ((ages / scale) ** shape - np.log(u)) ** (1.0 / shape)
    period = np.ceil((t - ages) / usage).astype(int)
    out = np.zeros((reps, horizon), int)
    for k in range(1, horizon + 1):
        out[:, k - 1] = (period == k).sum(axis=1)
    return out


def test_forecast_matches_direct_monte_carlo_at_fixed_parameters():
    rng = np.random.default_rng(17)
    ages = np.round(rng.uniform(0, 2000, size=300))
    shape, scale, usage, horizon = 1.5, 3000.0, 100.0, 6
    fc = forecast_counts(ages, None, constant_draws(shape, scale), usage, horizon, seed=3,
                         max_cohorts=10_000)  # every age exactly (no bins)
    sim = fc["counts"].reshape(-1, horizon)
    mc = direct_simulation(rng, ages, shape, scale, usage, horizon, reps=4000)
    # the exact expectation: scipy's conditional survival summed over the units
    d = stats.weibull_min(shape, scale=scale)
    exact = np.array([((d.sf(ages + (k - 1) * usage) - d.sf(ages + k * usage)) / d.sf(ages)
                       ).sum() for k in range(1, horizon + 1)])
    np.testing.assert_allclose(fc["expected"].reshape(-1, horizon)[0], exact, rtol=1e-10)
    # means: within 4 combined Monte Carlo standard errors
    se = np.sqrt(sim.var(axis=0) / sim.shape[0] + mc.var(axis=0) / mc.shape[0])
    assert np.all(np.abs(sim.mean(axis=0) - mc.mean(axis=0)) < 4 * se)
    assert np.all(np.abs(mc.mean(axis=0) - exact) < 4 * mc.std(axis=0) / math.sqrt(4000))
    # spread of the total: the variance of a Poisson-binomial, sum p (1 - p) over units
    tot_sim, tot_mc = sim.sum(axis=1), mc.sum(axis=1)
    p_all = 1 - d.sf(ages + horizon * usage) / d.sf(ages)
    var_exact = float((p_all * (1 - p_all)).sum())
    for tot in (tot_sim, tot_mc):
        rel_se = math.sqrt(2.0 / (tot.size - 1))
        assert abs(tot.var(ddof=1) / var_exact - 1) < 4 * rel_se


def test_many_ages_are_binned_within_the_stated_error():
    rng = np.random.default_rng(4)
    ages = rng.uniform(0, 5000, size=20_000)
    draws = constant_draws(2.0, 6000.0, per_chain=50)
    fc = forecast_counts(ages, None, draws, 250.0, 12, seed=1)
    exact = expected_exact(ages, None, math.log(6000.0), 0.5, 250.0, 12, "weibull")
    assert fc["binned"] and fc["binning_error"] <= 1e-4
    np.testing.assert_allclose(fc["expected"][0, 0], exact, rtol=1e-4)


def coverage_study(fleets: int, seed: int, per_chain: int = 100,
                   confidence: float = 0.9) -> float:
    """Share of simulated fleets whose realised total failures fall in the forecast's
    central interval. True parameters are drawn from the prior, so a correct posterior
    predictive covers at the nominal rate. Shape known (2); lambda = (t_ref/eta)^beta has
    the Gamma(2, 2) prior; a life test of 20 units to t_ref gives the exact conjugate
    posterior Gamma(2 + r, 2 + sum (t_i/t_ref)^beta) (docs/life.md), from which draws
    are taken (4 x ``per_chain``); the fleet of 1,000 units with ages up to 1,500 is
    forecast 12 periods of 50.
    (The realised count is discrete; with totals in the hundreds its atoms are too small to
    move the coverage measurably.)"""
    rng = np.random.default_rng(seed)
    beta, t_ref, n_test = 2.0, 1000.0, 20
    hits = 0
    for _ in range(fleets):
        lam = rng.gamma(2.0, 1 / 2.0)
        eta = t_ref * lam ** (-1 / beta)
        t = eta * rng.weibull(beta, n_test)
        r = int((t < t_ref).sum())
        expo = float(((np.minimum(t, t_ref) / t_ref) ** beta).sum())
        lam_post = rng.gamma(2.0 + r, 1 / (2.0 + expo), size=(4, per_chain))
        draws = LifeDraws.weibull(np.full((4, per_chain), beta),
                                  t_ref * lam_post ** (-1 / beta))
        ages = 10.0 * np.round(rng.uniform(0, 150, 1000))  # 151 distinct ages, no bins
        fc = forecast_counts(ages, None, draws, 50.0, 12, seed=int(rng.integers(1 << 30)))
        lo, hi = summarise_counts(fc["counts"], fc["expected"], confidence, None)["total"][
            "interval"]  # the interval the command reports
        true = direct_simulation(rng, ages, beta, eta, 50.0, 12, reps=1).sum()
        hits += int(lo <= true <= hi)
    return hits / fleets


def test_forecast_interval_coverage_ci_sized():
    """150 fleets, 200 draws each: the 90% interval's coverage within 3.5 binomial standard
    errors (sqrt(0.9 x 0.1 / 150) = 0.024) of 0.90."""
    cov = coverage_study(150, seed=99, per_chain=50)
    assert abs(cov - 0.9) < 3.5 * math.sqrt(0.09 / 150)


@pytest.mark.slow
def test_forecast_interval_coverage_study():
    """2,000 fleets: coverage in 88-92% (3 binomial standard errors of 0.0067)."""
    cov = coverage_study(2000, seed=2026)
    assert 0.88 <= cov <= 0.92


# ----------------------------------------------------------------------------- reader

def test_fleet_from_ship_dates_and_counts(tmp_path):
    import datetime as dt

    from qualbayes.data.fleet import read_fleet

    f = write_csv(tmp_path / "fleet.csv", ["Ship Date", "Qty", "Region"],
                  [["2026-01-01", 10, "North"], ["2025-07-01", 1200, "South"]])
    fleet = read_fleet(f, as_of=dt.date(2026, 7, 1), usage=300.0, period="month")
    days = np.array([(dt.date(2026, 7, 1) - dt.date(2026, 1, 1)).days,
                     (dt.date(2026, 7, 1) - dt.date(2025, 7, 1)).days])
    np.testing.assert_allclose(fleet.ages, days / (365.25 / 12) * 300.0)
    assert fleet.counts.tolist() == [10, 1200] and fleet.groups.tolist() == ["North", "South"]
    with pytest.raises(OptionError, match="--as-of"):
        read_fleet(f, usage=300.0)


def test_fleet_bad_rows_are_named(tmp_path):
    from qualbayes.data.fleet import read_fleet

    f = write_csv(tmp_path / "fleet.csv", ["Serial", "Hours"], [["A", 10], ["B", -5]])
    with pytest.raises(InputError) as err:
        read_fleet(f)
    assert err.value.row == 3 and err.value.column == "Hours"
    g = write_csv(tmp_path / "both.csv", ["Serial", "Hours", "Ship Date"], [["A", 1, "2026-01-01"]])
    with pytest.raises(InputError, match="exactly one"):
        read_fleet(g)


# ----------------------------------------------------------------------------- command line

def test_cli_returns_bad_fleet_names_row_and_column(tmp_path, capsys, examples):
    """(The JSON, --out and --report of a good run: tests/test_accelerated_pipeline.py.)"""
    from qualbayes.cli import main

    bad = write_csv(tmp_path / "bad.csv", ["Serial", "Hours"], [["A", "ten"]])
    assert main(["returns", str(bad), "--life", str(examples / "sv30_rig_test.csv"),
                 "--life-group", "Rev C", "--usage", "250", "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "row 2" in err and "Hours" in err
    assert not (tmp_path / "o").exists()


def test_fleet_thousands_separator_needs_evidence(tmp_path):
    """'1,200' alone could be 1200 or 1.2 (a decimal comma): refused, naming the column."""
    from qualbayes.data.fleet import read_fleet

    f = write_csv(tmp_path / "fleet.csv", ["Serial", "Hours"], [["A", "1,200"]])
    with pytest.raises(InputError, match="Hours"):
        read_fleet(f)
