"""Lognormal and exponential life models beside the Weibull: log-likelihood terms and
maximum-likelihood fits against scipy.stats (reference library: lognorm, expon, weibull_min
and their censored fits on ``scipy.stats.CensoredData``), the exponential conjugate posterior
against its closed form (Gamma) and 1-D quadrature, and the lognormal posterior against 2-D
quadrature. Every check value is listed in docs/references.md (section "Life").
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from qualbayes.life_models import (
    b_life,
    exponential_mode,
    log_lik_pointwise,
    lognormal_mode,
    max_likelihood,
    reliability,
)
from qualbayes.models import exponential as expo
from qualbayes.models import lognormal as logn
from qualbayes.models.censored import arrays, observations


def censored_sample(seed=3, n=60, family="lognormal"):
    """Invented test data: right-censored at 120, some failures known only to an interval
    (inspections every 20), a few left-censored (found failed at the first inspection)."""
    rng = np.random.default_rng(seed)
    life = (np.exp(rng.normal(math.log(80.0), 0.7, n)) if family == "lognormal"
            else rng.exponential(90.0, n))
    stop = 120.0
    half = n // 2
    exact = life[:half][life[:half] < stop]
    right = np.full(int((life >= stop).sum()), stop)
    insp = life[half:][life[half:] < stop]
    a = np.floor(insp / 20.0) * 20.0
    return {"failures": exact, "suspensions": right, "interval_lower": a[a > 0],
            "interval_upper": a[a > 0] + 20.0, "left": a[a == 0] + 20.0}


def scipy_censored(parts):
    return stats.CensoredData(uncensored=parts["failures"], right=parts["suspensions"],
                              left=parts["left"],
                              interval=np.column_stack([parts["interval_lower"],
                                                        parts["interval_upper"]]))


def scipy_loglik(dist, parts):
    return (dist.logpdf(parts["failures"]).sum() + dist.logsf(parts["suspensions"]).sum()
            + np.log(dist.cdf(parts["interval_upper"]) - dist.cdf(parts["interval_lower"])).sum()
            + dist.logcdf(parts["left"]).sum())


@pytest.mark.parametrize("mu,sigma", [(4.0, 0.3), (4.5, 0.8), (3.0, 2.0)])
def test_lognormal_terms_equal_scipy(mu, sigma):
    parts = censored_sample()
    obs = observations(**parts)
    ll = log_lik_pointwise("lognormal", {"mu": np.array([mu]), "log_sigma":
                                         np.array([math.log(sigma)])}, obs)
    ours = float(ll[0] @ obs.weights())
    ref = scipy_loglik(stats.lognorm(s=sigma, scale=math.exp(mu)), parts)
    assert ours == pytest.approx(ref, rel=1e-11)
    summed = logn.log_likelihood(np.array(mu), np.array(math.log(sigma)), arrays(obs))
    assert float(summed) == pytest.approx(ref, rel=1e-11)


@pytest.mark.parametrize("theta", [30.0, 90.0, 400.0])
def test_exponential_terms_equal_scipy(theta):
    parts = censored_sample(family="exponential")
    obs = observations(**parts)
    u = np.array([math.log(obs.t_ref / theta)])
    ll = log_lik_pointwise("exponential", {"u": u, "t_ref": obs.t_ref}, obs)
    ref = scipy_loglik(stats.expon(scale=theta), parts)
    assert float(ll[0] @ obs.weights()) == pytest.approx(ref, rel=1e-11)


def test_weibull_pointwise_terms_equal_scipy():
    parts = censored_sample()
    obs = observations(**parts)
    ll = log_lik_pointwise("weibull", {"log_shape": np.array([math.log(1.7)]),
                                       "log_scale": np.array([math.log(95.0)])}, obs)
    ref = scipy_loglik(stats.weibull_min(1.7, scale=95.0), parts)
    assert float(ll[0] @ obs.weights()) == pytest.approx(ref, rel=1e-11)


def test_narrow_interval_far_in_the_tail_stays_finite():
    # Phi(z_b) - Phi(z_a) underflows at z = 40; the tail form keeps its log exactly:
    # log(Phi(-40) - Phi(-40 - 1e-6)) = log phi(40) + log(1e-6) to first order
    val = logn.log_interval(np.array(40.0), np.array(40.0 + 1e-6))
    expected = stats.norm.logpdf(40.0) + math.log(1e-6)
    assert np.isfinite(val) and float(val) == pytest.approx(expected, rel=1e-5)


@pytest.mark.parametrize("seed", [3, 4])
def test_lognormal_mle_matches_scipy_censored_fit(seed):
    parts = censored_sample(seed)
    ml = max_likelihood(observations(**parts), parts, mission=100.0)["lognormal"]
    s, _, scale = stats.lognorm.fit(scipy_censored(parts), floc=0)
    # scipy ends a Nelder-Mead search; our optimum is at least as high and close to it
    ours = scipy_loglik(stats.lognorm(s=ml["sigma"], scale=ml["median_life"]), parts)
    assert ours >= scipy_loglik(stats.lognorm(s=s, scale=scale), parts) - 1e-9
    assert ml["sigma"] == pytest.approx(s, rel=1e-3)
    assert ml["median_life"] == pytest.approx(scale, rel=1e-3)
    assert ml["reliability_at_mission"] == pytest.approx(
        stats.lognorm(s=s, scale=scale).sf(100.0), abs=1e-3)


@pytest.mark.parametrize("seed", [3, 4])
def test_exponential_mle_matches_scipy_censored_fit(seed):
    parts = censored_sample(seed, family="exponential")
    ml = max_likelihood(observations(**parts), parts, mission=50.0)["exponential"]
    _, scale = stats.expon.fit(scipy_censored(parts), floc=0)
    assert ml["mean_life"] == pytest.approx(scale, rel=1e-3)
    # without interval or left-censored units: total time on test / failures (closed form)
    right_only = {**parts, "interval_lower": [], "interval_upper": [], "left": []}
    ml = max_likelihood(observations(**right_only), right_only, 50.0)["exponential"]
    total = parts["failures"].sum() + parts["suspensions"].sum()
    assert ml["mean_life"] == pytest.approx(total / parts["failures"].size, rel=1e-7)


def test_max_likelihood_refuses_zero_failures():
    parts = {"failures": [], "suspensions": [100.0, 200.0]}
    ml = max_likelihood(observations(**parts), parts, 50.0)
    assert all(not v["fitted"] and v["reason"] == "zero-failures" for v in ml.values())
    from qualbayes.evidence.life_words import WHY_NO_ML  # the words are the evidence layer's

    assert "zero failures" in WHY_NO_ML["zero-failures"]


def test_quantities_equal_scipy():
    d = {"mu": np.array([4.2]), "log_sigma": np.array([math.log(0.6)])}
    ref = stats.lognorm(s=0.6, scale=math.exp(4.2))
    assert reliability("lognormal", d, 50.0)[0] == pytest.approx(ref.sf(50.0), rel=1e-12)
    assert b_life("lognormal", d, 0.1)[0] == pytest.approx(ref.ppf(0.1), rel=1e-12)
    e = {"u": np.array([math.log(100.0 / 250.0)]), "t_ref": 100.0}
    assert b_life("exponential", e, 0.1)[0] == pytest.approx(
        stats.expon(scale=250.0).ppf(0.1), rel=1e-12)


def test_exponential_conjugate_posterior_is_the_gamma_closed_form():
    # uniform prior on Lambda = H(t_ref) with exact + right data: Lambda ~ Gamma(r + 1,
    # T / t_ref) (conjugacy, derived in the module docstring); compare the log density on u
    parts = censored_sample(5, family="exponential")
    parts = {**parts, "interval_lower": [], "interval_upper": [], "left": []}
    obs = observations(**parts)
    data = arrays(obs)
    total = parts["failures"].sum() + parts["suspensions"].sum()
    us = np.linspace(-2.0, 1.0, 9)
    ours = np.array([float(expo.log_likelihood(np.array(u), math.log(obs.t_ref), data)
                           + expo.log_prior(u)) for u in us])
    ref = stats.gamma(obs.failures + 1, scale=obs.t_ref / total).logpdf(np.exp(us)) + us
    assert np.allclose(ours - ours[0], ref - ref[0], atol=1e-9)
    # and the posterior mean of the failure rate: (r + 1) / T
    draws = expo.conjugate_draws(obs.failures, total, obs.t_ref, 200_000,
                                 np.random.default_rng(1))
    rate = np.exp(draws) / obs.t_ref
    assert rate.mean() == pytest.approx((obs.failures + 1) / total,
                                        abs=4 * rate.std() / math.sqrt(rate.size))


def test_exponential_mode_with_interval_data_by_one_dimensional_quadrature():
    # the Laplace mode on u is the argmax of the exact 1-D posterior on a fine grid
    parts = censored_sample(6, family="exponential")
    obs = observations(**parts)
    data, ltr = arrays(obs), math.log(obs.t_ref)
    x, cov, ok = exponential_mode(obs)
    grid = np.linspace(x[0] - 8 * math.sqrt(cov[0, 0]), x[0] + 8 * math.sqrt(cov[0, 0]), 4001)
    lp = np.array([float(expo.log_likelihood(np.array(u), ltr, data)) + u for u in grid])
    assert ok and abs(grid[np.argmax(lp)] - x[0]) < 2 * (grid[1] - grid[0])
    w = np.exp(lp - lp.max())
    mean = integrate.trapezoid(grid * w, grid) / integrate.trapezoid(w, grid)
    assert abs(mean - x[0]) < 0.2 * math.sqrt(cov[0, 0])  # near-normal posterior


def test_lognormal_prior_is_uniform_on_the_fraction_failed_at_t_ref():
    # mu | sigma ~ N(log t_ref, sigma)  <=>  F(t_ref) = Phi((log t_ref - mu)/sigma) ~ U(0,1)
    prior = logn.LognormalPrior()
    rng = np.random.default_rng(0)
    s = rng.normal(*prior.log_sigma, 100_000)
    mu = rng.normal(math.log(300.0), np.exp(s))
    f = stats.norm.cdf((math.log(300.0) - mu) / np.exp(s))
    assert stats.kstest(f, "uniform").pvalue > 1e-3
    # and the density integrates to one over (mu, s)
    total = integrate.dblquad(lambda mu_, s_: math.exp(logn.log_prior(mu_, s_, 5.7, prior)),
                              -7, 7, lambda s_: 5.7 - 12 * math.exp(s_),
                              lambda s_: 5.7 + 12 * math.exp(s_), epsabs=1e-10)[0]
    assert total == pytest.approx(1.0, abs=1e-6)


def test_stated_shape_range_becomes_the_sigma_range():
    prior = logn.sigma_from_shape_range(1.5, 4.0)
    lo, hi = np.exp(stats.norm(*prior.log_sigma).ppf([0.025, 0.975]))
    assert lo == pytest.approx(logn.GUMBEL_SD / 4.0) and hi == pytest.approx(
        logn.GUMBEL_SD / 1.5)


def test_lognormal_mode_polishes_to_the_likelihood_maximum():
    parts = censored_sample(7)
    obs = observations(**parts)
    x, cov, ok = lognormal_mode(obs, None)
    s, _, scale = stats.lognorm.fit(scipy_censored(parts), floc=0)
    assert ok and x[0] == pytest.approx(math.log(scale), abs=2e-3)
    assert math.exp(x[1]) == pytest.approx(s, rel=2e-3)
    assert np.all(np.linalg.eigvalsh(cov) > 0)
