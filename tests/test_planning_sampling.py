"""Single sampling plans by attributes: risks met, minimality, OC, and the Bayesian view of
accepted lots against simulation."""

import math

import numpy as np
import pytest
from scipy import stats

from qualbayes.errors import OptionError
from qualbayes.planning import sampling
from qualbayes.planning.rate_prior import RatePrior

CASES = [(0.01, 0.05, 0.05, 0.10), (0.005, 0.05, 0.03, 0.10), (0.02, 0.10, 0.08, 0.05),
         (0.001, 0.05, 0.01, 0.10)]


def test_pa_for_n125_c3_at_one_percent():
    # binomial OC, scipy.stats.binom.cdf(3, 125, 0.01) = 0.9626 (docs/references.md; plan form as in
    # ISO 2859-1 single sampling)
    assert sampling.acceptance_probability(125, 3, 0.01) == pytest.approx(0.9626, abs=5e-5)
    assert sampling.acceptance_probability(125, 3, 0.01) == pytest.approx(
        stats.binom.cdf(3, 125, 0.01), rel=1e-12)


@pytest.mark.parametrize("aql, alpha, ltpd, beta", CASES)
def test_binomial_plan_meets_both_risks_and_n_minus_1_does_not(aql, alpha, ltpd, beta):
    plan = sampling.find_plan(aql, alpha, ltpd, beta)
    # OC with scipy.stats.binom as reference library
    assert stats.binom.cdf(plan.c, plan.n, aql) >= 1 - alpha
    assert stats.binom.cdf(plan.c, plan.n, ltpd) <= beta
    assert not sampling.meets(plan.n - 1, plan.c, aql, alpha, ltpd, beta)
    assert stats.binom.cdf(plan.c, plan.n - 1, ltpd) > beta


@pytest.mark.parametrize("aql, alpha, ltpd, beta", CASES[:3])
def test_no_smaller_plan_exists(aql, alpha, ltpd, beta):
    # brute force over every (n', c') with n' < n, scipy.stats.binom as reference
    plan = sampling.find_plan(aql, alpha, ltpd, beta)
    n = np.arange(1, plan.n)[:, None]
    c = np.arange(plan.n)[None, :]
    ok = (stats.binom.cdf(c, n, aql) >= 1 - alpha) & (stats.binom.cdf(c, n, ltpd) <= beta)
    assert not ok.any()


@pytest.mark.parametrize("lot", [200, 500, 2000])
def test_hypergeometric_plan_meets_both_risks_and_is_smallest(lot):
    aql, alpha, ltpd, beta = 0.01, 0.05, 0.05, 0.10
    plan = sampling.find_plan(aql, alpha, ltpd, beta, lot_size=lot)
    d1, d2 = round(aql * lot), round(ltpd * lot)
    # scipy.stats.hypergeom as reference library: lot of N with D defectives, n drawn
    assert stats.hypergeom.cdf(plan.c, lot, d1, plan.n) >= 1 - alpha
    assert stats.hypergeom.cdf(plan.c, lot, d2, plan.n) <= beta
    assert stats.hypergeom.cdf(plan.c, lot, d2, plan.n - 1) > beta
    n = np.arange(1, plan.n)[:, None]
    c = np.arange(plan.n)[None, :]
    ok = ((stats.hypergeom.cdf(c, lot, d1, n) >= 1 - alpha)
          & (stats.hypergeom.cdf(c, lot, d2, n) <= beta))
    assert not ok.any()


def test_large_lot_gives_the_binomial_plan():
    big = sampling.find_plan(0.01, 0.05, 0.05, 0.10, lot_size=10_000_000)
    binom = sampling.find_plan(0.01, 0.05, 0.05, 0.10)
    assert (big.n, big.c) == (binom.n, binom.c)


def test_oc_curve_falls_and_passes_through_both_points():
    plan = sampling.find_plan(0.01, 0.05, 0.05, 0.10)
    grid = np.linspace(0, 0.2, 101)
    oc = sampling.oc_curve(plan.n, plan.c, grid)
    assert oc[0] == 1.0
    assert np.all(np.diff(oc) <= 0)
    assert np.interp(0.01, grid, oc) >= 0.95 - 1e-3
    assert sampling.acceptance_probability(plan.n, plan.c, 0.05) <= 0.10


def test_accepted_lot_quality_against_simulation():
    # closed form (beta-binomial sums) against simulating lots p ~ Beta, x ~ Binomial(n, p);
    # tolerance 4 Monte Carlo standard errors, fixed seed
    prior = RatePrior.beta(1.2, 90.0)
    n, c, spec = 80, 2, 0.02
    q = sampling.accepted_lot_quality(n, c, prior, spec)
    rng = np.random.default_rng(5)
    p = prior.sample(rng, 400_000)
    x = rng.binomial(n, p)
    acc = x <= c
    assert abs(q["prob_accept"] - acc.mean()) < 4 * math.sqrt(acc.mean() * (1 - acc.mean())
                                                               / acc.size)
    within = (p[acc] <= spec)
    se = math.sqrt(within.mean() * (1 - within.mean()) / within.size)
    assert abs(q["prob_within_spec_if_accepted"] - within.mean()) < 4 * se
    rej = (p[~acc] <= spec)
    se = math.sqrt(rej.mean() * (1 - rej.mean()) / rej.size)
    assert abs(q["prob_within_spec_if_rejected"] - rej.mean()) < 4 * se
    se = p[acc].std() / math.sqrt(acc.sum())
    assert abs(q["mean_rate_if_accepted"] - p[acc].mean()) < 4 * se


def test_finite_lot_within_spec_against_simulation():
    # a lot of N: D ~ Binomial(N, p), the sample x ~ Hypergeometric(N, D, n); the closed form
    # for P(D <= sN | accepted) against simulation, 4 standard errors, fixed seed
    prior = RatePrior.beta(1.5, 120.0)
    lot, n, c, spec = 600, 60, 1, 0.015
    q = sampling.accepted_lot_quality(n, c, prior, spec, lot_size=lot)
    rng = np.random.default_rng(9)
    p = prior.sample(rng, 300_000)
    d = rng.binomial(lot, p)
    x = rng.hypergeometric(d, lot - d, n)
    acc = x <= c
    within = d[acc] <= math.floor(spec * lot)
    se = math.sqrt(within.mean() * (1 - within.mean()) / within.size)
    assert abs(q["lot_within_spec_if_accepted"] - within.mean()) < 4 * se
    # the sample of a binomial lot is binomial: acceptance matches the large-lot value
    assert q["prob_accept"] == pytest.approx(
        sampling.accepted_lot_quality(n, c, prior, spec)["prob_accept"], rel=1e-12)


def test_acceptance_raises_the_chance_of_being_within_spec():
    q = sampling.accepted_lot_quality(132, 3, RatePrior.beta(1, 60), 0.03)
    assert q["prob_within_spec_if_accepted"] > q["prob_within_spec_prior"] > q[
        "prob_within_spec_if_rejected"]


@pytest.mark.parametrize("args, match", [
    ((0.05, 0.05, 0.05, 0.10), "below LTPD"),
    ((0.06, 0.05, 0.05, 0.10), "below LTPD"),
    ((0.0, 0.05, 0.05, 0.10), "AQL"),
    ((0.01, 1.5, 0.05, 0.10), "alpha"),
    ((0.01, 0.05, 0.05, 0.0), "beta"),
])
def test_bad_sampling_inputs(args, match):
    with pytest.raises(OptionError, match=match):
        sampling.find_plan(*args)


def test_lot_too_small_to_separate_aql_from_ltpd():
    with pytest.raises(OptionError, match="too small"):
        sampling.find_plan(0.01, 0.05, 0.02, 0.10, lot_size=20)
    with pytest.raises(OptionError, match="lot size"):
        sampling.find_plan(0.01, 0.05, 0.05, 0.10, lot_size=-3)
