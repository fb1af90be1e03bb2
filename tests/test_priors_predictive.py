"""Prior predictive checks: what data each prior expects, against scipy.stats (beta-binomial,
negative binomial) and an exact lognormal quantile for the Weibull simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from qualbayes.planning.assurance import mtbf_assurance
from qualbayes.planning.mtbf import GammaPrior
from qualbayes.priors.predictive import (
    beta_expectations,
    betabinom_cdf,
    gamma_expectations,
    life_expectations,
    lots_predictive,
    plan_predictive,
    surprising,
)


@pytest.mark.parametrize("a,b,n", [(1.0, 1.0, 125), (1.68, 678.6, 315), (0.5, 0.5, 80),
                                   (2.0, 1.0, 200), (12.3, 3460.0, 5000)])
def test_beta_binomial_range_and_zero_match_scipy(a, b, n):
    ref = stats.betabinom(n, a, b)  # scipy.stats as the reference library
    out = beta_expectations(a, b, n)
    assert out["range"] == [int(ref.ppf(0.05)), int(ref.ppf(0.95))]
    assert out["prob_none"] == pytest.approx(ref.pmf(0), rel=1e-10)
    assert out["mean"] == pytest.approx(ref.mean(), rel=1e-12)
    for k in (0, 1, 3, 10):
        assert betabinom_cdf(k, n, a, b) == pytest.approx(ref.cdf(k), rel=1e-9, abs=1e-14)


def test_lots_outside_the_priors_range_are_named():
    # under Beta(1, 499) (mean 0.2%) 9 defectives in 80 is far outside the 90% range
    lots = [("L-1", 0, 125), ("L-2", 1, 125), ("L-9", 9, 80)]
    out = lots_predictive(1.0, 499.0, lots)
    assert out["outside"] == ["L-9"] and out["checked"] == 3
    assert "1 of 3 lots fall outside" in out["words"]
    ref = stats.betabinom(80, 1.0, 499.0)
    assert ref.sf(8) < 0.05  # P(X >= 9): the reference agrees that it is surprising
    assert not surprising(0, 125, 1.0, 499.0)


def test_plan_predictive_pass_probability_is_the_beta_binomial_cdf():
    out = plan_predictive(1.6, 25.0, 38, 1)
    assert out["prob_pass"] == pytest.approx(stats.betabinom(38, 1.6, 25.0).cdf(1), rel=1e-10)


@pytest.mark.parametrize("a,b,t,r", [(2.0, 1400.0, 1909.0, 2), (3.18, 2692.7, 750.0, 1),
                                     (0.77, 943.6, 5000.0, 0)])
def test_failures_in_a_test_are_negative_binomial_scipy(a, b, t, r):
    ref = stats.nbinom(a, b / (b + t))  # real shape a allowed by scipy
    out = gamma_expectations(a, b, t, r)
    assert out["range"] == [int(ref.ppf(0.05)), int(ref.ppf(0.95))]
    assert out["prob_pass"] == pytest.approx(ref.cdf(r), rel=1e-10)
    assert out["prob_none"] == pytest.approx(ref.pmf(0), rel=1e-10)
    assert gamma_expectations(1.0, 0.0, t, r) is None  # improper: no predictive


def test_mtbf_assurance_uses_the_real_gamma_shape():
    # regression: scipy.special.nbdtr truncated a non-integer shape (3.18 -> 3), so elicited
    # gamma priors gave a wrong assurance; the chance of at most r failures is the negative
    # binomial CDF with a real shape (scipy.stats.nbinom)
    design = GammaPrior(3.18, 2692.7)
    time, goal, conf = 1470.0, 600.0, 0.8
    got = mtbf_assurance(time, goal, conf, design, design)
    from qualbayes.planning.mtbf import allowed_failures

    r = allowed_failures(time, goal, conf, design)
    assert got == pytest.approx(stats.nbinom(3.18, 2692.7 / (2692.7 + time)).cdf(r), rel=1e-10)


def test_life_prior_simulation_matches_the_exact_lognormal_quantiles():
    # a reliability prior at the mission time with an almost fixed shape: R(T) = exp(-H),
    # ln H ~ N(m, s), so its quantiles are exact; the simulated ones agree within Monte Carlo
    # error (binomial sd of the share below the exact quantile, 4 sigma)
    rng = np.random.default_rng(5)
    n, m, s, mission = 40_000, math.log(0.05), 0.6, 5000.0
    beta = np.full(n, 2.0)
    z = rng.normal(m, s, n)
    eta = np.exp(math.log(mission) - z / beta)
    out = life_expectations(beta, eta, mission, 20)
    lo, hi = out["reliability_range"]
    exact_lo = math.exp(-math.exp(m + s * stats.norm.ppf(0.95)))
    exact_hi = math.exp(-math.exp(m + s * stats.norm.ppf(0.05)))
    rel = np.exp(-np.exp(z))
    tol = 4 * math.sqrt(0.05 * 0.95 / n)
    assert abs(np.mean(rel <= exact_lo) - 0.05) <= tol and abs(lo - exact_lo) < 0.01
    assert abs(np.mean(rel <= exact_hi) - 0.95) <= tol and abs(hi - exact_hi) < 0.01
    assert out["range"][0] >= 0 and out["range"][1] <= 20


def test_mixture_plan_predictive_against_scipy_betabinom():
    """The history prior's predictive: an equal-weight mixture of scipy.stats.betabinom."""
    from qualbayes.priors.predictive import mixture_plan_predictive

    a, b = np.array([0.8, 2.0, 5.0]), np.array([150.0, 90.0, 400.0])
    got = mixture_plan_predictive(a, b, 200, 3, noun="defectives")
    k = np.arange(201)
    pmf = np.mean([stats.betabinom.pmf(k, 200, ai, bi) for ai, bi in zip(a, b, strict=True)],
                  axis=0)
    cdf = np.cumsum(pmf)
    assert got["prob_pass"] == pytest.approx(cdf[3], rel=1e-10)
    assert got["prob_none"] == pytest.approx(pmf[0], rel=1e-10)
    assert got["range"] == [int(np.argmax(cdf >= 0.05 - 1e-12)),
                            int(np.argmax(cdf >= 0.95 - 1e-12))]
    assert "defectives among 200 units" in got["words"]
