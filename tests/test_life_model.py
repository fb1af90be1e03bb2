"""Weibull log density, priors, posterior mode and plotting positions (no sampler).

Outside references: the Lieblein-Zelen ball-bearing MLE (docs/references.md),
scipy.stats.weibull_min
(log-density terms and the censored maximum-likelihood fit), scipy.stats.beta and lognorm,
and closed forms derived in the module docstrings (Gamma conditional posterior).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

from qualbayes.errors import OptionError
from qualbayes.models.weibull import (
    FLAT,
    LifePrior,
    binned_moments,
    data_arrays,
    exposure_sum_binned,
    group_stats,
    log_likelihood,
    log_posterior,
    log_prior,
    lognormal_from_range,
    make_prior,
    parse_reliability_prior,
    reported_mode,
)
from qualbayes.models.weibull_ranks import adjusted_ranks, bernard, plotting_positions

# Lieblein & Zelen (1956), J. Res. NBS 57:273: 23 ball bearings, millions of revolutions
BEARINGS = np.array([17.88, 28.92, 33.00, 41.52, 42.12, 45.60, 48.48, 51.84, 51.96, 54.12,
                     55.56, 67.80, 68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84,
                     127.92, 128.04, 173.40])


def censored_sample(seed=11, n=80):
    """Invented test data: right-censored at 90, some failures known only to an interval
    (inspections every 15), a few left-censored (found failed at the first inspection)."""
    rng = np.random.default_rng(seed)
    life = 100.0 * rng.weibull(1.8, size=n)
    stop = 90.0
    exact = life[:40][life[:40] < stop]
    right = np.concatenate([np.full((life[:40] >= stop).sum(), stop),
                            np.full((life[40:] >= stop).sum(), stop)])
    insp = life[40:][life[40:] < stop]
    a = np.floor(insp / 15.0) * 15.0
    left = a[a == 0] + 15.0
    ia, ib = a[a > 0], a[a > 0] + 15.0
    return exact, right, ia, ib, left


def scipy_loglik(shape, scale, exact, right, ia, ib, left):
    """The same log-likelihood from scipy.stats.weibull_min (reference library)."""
    d = stats.weibull_min(shape, scale=scale)
    return (d.logpdf(exact).sum() + d.logsf(right).sum()
            + np.log(d.cdf(ib) - d.cdf(ia)).sum() + d.logcdf(left).sum())


def to_bu(st, shape, scale):
    b = math.log(shape)
    return b, shape * (st.log_tref - math.log(scale))


# ------------------------------------------------------------------ likelihood terms

@pytest.mark.parametrize("shape,scale", [(0.6, 40.0), (1.8, 100.0), (4.5, 70.0),
                                         (12.0, 95.0)])
def test_log_likelihood_equals_scipy_terms(shape, scale):
    parts = censored_sample()
    st = group_stats(*parts)
    b, u = to_bu(st, shape, scale)
    ours = log_likelihood(np.array(b), np.array(u), data_arrays(st))
    assert ours == pytest.approx(scipy_loglik(shape, scale, *parts), rel=1e-11)


def test_interval_term_stays_finite_where_naive_difference_underflows():
    # S(a) - S(b) is below 1e-320 here: computed naively it is 0 and its log -inf
    st = group_stats([], [1.0], [50.0], [50.0 + 1e-6])
    b, u = to_bu(st, 3.0, 1.0)
    value = log_likelihood(np.array(b), np.array(u), data_arrays(st))
    # log S(1) = -1; log(S(a) - S(b)) = -H(a) + log(1 - exp(-(H(b) - H(a)))), H(a) = 50^3,
    # H(b) - H(a) = 3 * 50^2 * 1e-6 + 3 * 50 * 1e-12 + 1e-18 (binomial expansion, exact)
    gap = 3 * 2500.0 * 1e-6 + 150.0 * 1e-12 + 1e-18
    expected = -1.0 - 125000.0 + math.log(-math.expm1(-gap))
    assert np.isfinite(value) and value == pytest.approx(expected, rel=1e-9)


def test_binned_sums_equal_exact_sums():
    rng = np.random.default_rng(5)
    d = -np.abs(rng.normal(0, 2.0, size=20000))
    w = rng.integers(1, 4, size=d.size).astype(float)
    cap = 3.0
    centres, coef = binned_moments(d, w, cap)
    for beta in (0.05, 0.7, 1.0, 2.9, 4.0, 6.0):
        exact = np.sum(w * np.exp(beta * d))
        fast = exposure_sum_binned(np.array(beta), centres, coef)
        assert fast == pytest.approx(exact, rel=1e-12)


def test_jax_and_numpy_log_densities_agree():
    jnp = pytest.importorskip("jax.numpy")
    from qualbayes.inference.run import jax_scope

    with jax_scope():
        _compare_log_densities(jnp)


def _compare_log_densities(jnp):
    parts = censored_sample()
    st = group_stats(*parts)
    data = data_arrays(st)
    jdata = {k: jnp.asarray(v) for k, v in data.items()}
    prior = make_prior("1.2,3", None, "60:0.5,0.9")
    for b, u in [(0.3, -0.5), (1.1, 0.4), (-0.4, 1.5)]:
        ref = log_likelihood(np.array(b), np.array(u), data) + log_prior(
            np.array(b), np.array(u), prior, st.log_tref)
        got = log_likelihood(jnp.asarray(b), jnp.asarray(u), jdata, jnp) + log_prior(
            jnp.asarray(b), jnp.asarray(u), prior, st.log_tref, jnp)
        assert float(got) == pytest.approx(float(ref), rel=1e-12)


# ------------------------------------------------------------------ posterior mode = MLE

def test_ball_bearing_mode_with_flat_priors_is_the_published_mle():
    st = group_stats(BEARINGS, [])
    shape, scale = reported_mode(st, FLAT)
    # Lieblein & Zelen (1956); MLE as in Lawless (2003): shape 2.102, scale 81.88
    # (docs/references.md)
    assert abs(shape - 2.102) < 5e-4 and abs(scale - 81.88) < 5e-3
    # scipy.stats.weibull_min.fit (reference library), to its optimiser's precision
    c, _, sc = stats.weibull_min.fit(BEARINGS, floc=0)
    assert shape == pytest.approx(c, rel=1e-5) and scale == pytest.approx(sc, rel=1e-5)


@pytest.mark.parametrize("seed", [11, 12])
def test_censored_mode_matches_scipy_censored_fit(seed):
    exact, right, ia, ib, left = censored_sample(seed)
    st = group_stats(exact, right, ia, ib, left)
    shape, scale = reported_mode(st, FLAT)
    data = stats.CensoredData(uncensored=exact, right=right, left=left,
                              interval=np.column_stack([ia, ib]))
    c, _, sc = stats.weibull_min.fit(data, floc=0)
    # scipy's censored fit ends a Nelder-Mead search (xtol 1e-4); our optimum is at least as
    # high and within that search's precision
    ours = scipy_loglik(shape, scale, exact, right, ia, ib, left)
    theirs = scipy_loglik(c, sc, exact, right, ia, ib, left)
    assert ours >= theirs - 1e-9
    assert shape == pytest.approx(c, rel=1e-3) and scale == pytest.approx(sc, rel=1e-3)


# ------------------------------------------------------------------ priors

def test_range_becomes_lognormal_with_that_central_95():
    m, sd = lognormal_from_range(1.5, 4.0)
    lo, hi = stats.lognorm(s=sd, scale=math.exp(m)).ppf([0.025, 0.975])
    assert lo == pytest.approx(1.5, rel=1e-9) and hi == pytest.approx(4.0, rel=1e-9)


def test_reliability_prior_range_is_the_central_95_of_r():
    t, m, sd, _ = parse_reliability_prior("5000:0.8,0.99")
    # R = exp(-exp(v)), v ~ N(m, sd): R is decreasing in v
    r_hi, r_lo = np.exp(-np.exp(stats.norm(m, sd).ppf([0.025, 0.975])))
    assert t == 5000 and r_lo == pytest.approx(0.8) and r_hi == pytest.approx(0.99)


@pytest.mark.parametrize("prior", [make_prior("1.5,4", "10:2000,8000", None),
                                   make_prior("0.8,2.5", None, "5000:0.8,0.99")])
def test_stated_priors_are_proper_densities_on_the_sampled_scale(prior):
    # the Jacobians are right exactly when the density integrates to one over (b, u)
    log_tref = math.log(6000.0)

    def inner(b):
        f = lambda u: math.exp(float(log_prior(np.array(b), np.array(u), prior, log_tref)))  # noqa: E731
        return integrate.quad(f, -60, 40, limit=400, points=[-5, 0, 5])[0]

    total = integrate.quad(inner, -2.5, 3.5, limit=200)[0]
    assert total == pytest.approx(1.0, abs=2e-6)


def test_default_scale_prior_gives_the_gamma_conditional_posterior():
    # given the shape, exact + right-censored data and a uniform prior on lambda = H(t_ref)
    # give lambda ~ Gamma(n_f + 1, sum (t_i/t_ref)^beta) (conjugacy): compare log densities
    rng = np.random.default_rng(2)
    tf, ts = 50 * rng.weibull(2.0, size=6), np.full(9, 60.0)
    st = group_stats(tf, ts)
    prior = LifePrior()
    beta = 1.7
    b = math.log(beta)
    s_beta = np.sum(np.exp(beta * (np.log(np.concatenate([tf, ts])) - st.log_tref)))
    us = np.linspace(-4, 1, 7)
    ours = np.array([float(log_posterior(b, u, st, prior)) for u in us])
    gamma = stats.gamma(a=st.n_f + 1, scale=1 / s_beta)
    ref = gamma.logpdf(np.exp(us)) + us  # density of u = log(lambda)
    assert np.allclose(ours - ours[0], ref - ref[0], atol=1e-9)


def test_zero_failure_closed_form_for_known_shape():
    # with the shape fixed and no failures, P(R(T) >= r) = 1 - r^(sum (t_i/T)^beta): the
    # Weibull extended zero-failure test n = ln(1-C)/(L^beta ln R) (docs/references.md, Kececioglu)
    st = group_stats([], np.full(22, 5000.0))
    beta, r, mission = 1.0, 0.90, 5000.0
    b = math.log(beta)
    prior = LifePrior()

    def dens(u):
        return math.exp(float(log_posterior(b, u, st, prior)))

    # R(T) >= r  <=>  H(T) = e^u (T/t_ref)^beta <= -ln r
    u_edge = math.log(-math.log(r)) - beta * (math.log(mission) - st.log_tref)
    num = integrate.quad(dens, -40, u_edge, limit=200)[0]
    den = num + integrate.quad(dens, u_edge, 10, limit=200)[0]
    assert num / den == pytest.approx(1 - r**22, rel=1e-7)
    # 22 units at R=0.90: confidence just above 0.90, the success-run value (docs/references.md)
    assert 1 - r**22 >= 0.90 > 1 - r**21


def test_prior_options_are_checked():
    for bad in ("4,1.5", "0,3", "a,b", "1.5"):
        with pytest.raises(OptionError):
            make_prior(bad, None, None)
    with pytest.raises(OptionError):
        make_prior(None, "10:2000,8000", "5000:0.8,0.9")
    for bad in ("2000,8000", "150:1,2", "10:-1,5"):
        with pytest.raises(OptionError):
            make_prior(None, bad, None)
    for bad in ("5000:0.9,1.2", "0:0.5,0.9", "x:0.5,0.9"):
        with pytest.raises(OptionError):
            make_prior(None, None, bad)


# ------------------------------------------------------------------ plotting positions

def test_adjusted_ranks_without_suspensions_are_the_order_numbers():
    t = np.array([5.0, 1.0, 3.0, 2.0])
    times, ranks, _ = adjusted_ranks(t, np.ones(4, bool))
    assert list(times) == [1, 2, 3, 5] and np.allclose(ranks, [1, 2, 3, 4])


def test_adjusted_ranks_small_example_by_hand():
    # Johnson's increment (n + 1 - previous) / (1 + reverse rank), worked by hand:
    # 10 F (reverse rank 4): 0 + 5/5 = 1; 20 S; 30 F (2): 1 + 4/3; 40 F (1): 7/3 + (8/3)/2
    times, ranks, rev = adjusted_ranks([10, 20, 30, 40], [True, False, True, True])
    assert list(rev) == [4, 2, 1]
    assert np.allclose(ranks, [1.0, 7.0 / 3.0, 11.0 / 3.0])


def test_adjusted_ranks_equal_the_product_form():
    # algebraic identity: r_j / (n + 1) = 1 - prod_{k <= j} k_k / (k_k + 1) (the
    # Herd-Johnson form of the same estimate), checked on random censored data
    rng = np.random.default_rng(9)
    t = rng.exponential(size=40)
    failed = rng.random(40) < 0.6
    _, ranks, rev = adjusted_ranks(t, failed)
    product = 1 - np.cumprod(rev / (rev + 1.0))
    assert np.allclose(ranks / 41, product, rtol=1e-12)


def test_bernard_is_close_to_the_exact_median_rank():
    # exact median rank: the median of Beta(i, n - i + 1) (scipy.stats.beta); Bernard's
    # approximation is known to be good to about 0.1 percentage point (common practice,
    # no source); an i/(n+1) or (i-0.5)/n plotting position would fail this
    for n in (3, 10, 30, 100):
        i = np.arange(1, n + 1)
        exact = stats.beta.ppf(0.5, i, n - i + 1)
        assert np.max(np.abs(bernard(i, n) - exact)) < 0.002


def test_plotting_positions_handle_every_kind():
    pos = plotting_positions([10.0, 40.0], [20.0, 50.0], [25.0], [35.0], [5.0])
    assert list(pos["time"]) == [5.0, 10.0, 30.0, 40.0]
    assert list(pos["kind"]) == [2, 0, 1, 0]
    assert pos["n"] == 6
    assert np.all(np.diff(pos["median_rank"]) > 0)


def test_gammaln_mean_life_formula():
    from qualbayes.life_question import weibull_quantities

    q = weibull_quantities(np.array([2.0]), np.array([100.0]), 50.0)
    d = stats.weibull_min(2.0, scale=100.0)
    assert q["mean_life"][0] == pytest.approx(d.mean(), rel=1e-12)
    assert q["b10"][0] == pytest.approx(d.ppf(0.10), rel=1e-12)
    assert q["b1"][0] == pytest.approx(d.ppf(0.01), rel=1e-12)
    assert q["reliability_at_mission"][0] == pytest.approx(d.sf(50.0), rel=1e-12)
    assert special.gamma(1.5) * 100 == pytest.approx(d.mean())
