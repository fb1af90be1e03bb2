"""Monte Carlo error of plan numbers from a learned history prior (planning/draw_error.py).

The plan numbers are exact given the posterior draws: checked by equality with the plan
modules' own functions. Their MCSE is checked against the spread of the same number over
independent sets of draws (a variance-ratio test: sample variance over mean squared MCSE is
chi-square(K - 1) / (K - 1) when the MCSE is right; refused outside its 0.5% and 99.5%
quantiles, a 1% two-sided test), with draws that are independent and with draws that are
autocorrelated like MCMC chains (an AR(1) sequence, so the ESS matters).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from qualbayes.planning import assurance as asr
from qualbayes.planning import draw_error, sampling
from qualbayes.planning.rate_prior import RatePrior

CHAINS, DRAWS, REPLICATES = 4, 500, 200


def fake_history(rng, rho: float) -> RatePrior:
    """Draws of (mu, kappa) as four chains: logit mu an AR(1) sequence with lag-one
    correlation ``rho`` around logit 0.004 (0 gives independent draws), kappa lognormal."""
    z = np.empty((CHAINS, DRAWS))
    z[:, 0] = rng.normal(size=CHAINS)
    for t in range(1, DRAWS):
        z[:, t] = rho * z[:, t - 1] + np.sqrt(1 - rho**2) * rng.normal(size=CHAINS)
    mu = special.expit(special.logit(0.004) + 0.6 * z).reshape(-1)
    kappa = np.exp(rng.normal(np.log(300.0), 0.3, size=mu.size))
    return RatePrior.mixture(mu * kappa, (1 - mu) * kappa, "fake history")


def ratio_bounds(k: int) -> tuple[float, float]:
    return stats.chi2.ppf(0.005, k - 1) / (k - 1), stats.chi2.ppf(0.995, k - 1) / (k - 1)


@pytest.mark.parametrize("rho", [0.0, 0.8])
def test_mcse_of_plan_probabilities_agrees_with_spread_over_draw_sets(rho):
    rng = np.random.default_rng([7, int(10 * rho)])
    got = {"posterior": [], "assurance": [], "accepted": []}
    for _ in range(REPLICATES):
        prior = fake_history(rng, rho)
        got["posterior"].append(draw_error.prob_at_most(prior, 0.005, 300, 1, chains=CHAINS))
        got["assurance"].append(draw_error.pass_probability(prior, 1, 300, chains=CHAINS))
        rows, _ = draw_error.sampling_errors(_History(prior), 125, 1, 0.01, 0.9)
        got["accepted"].append((rows[0][3], rows[0][4]))
    lo, hi = ratio_bounds(REPLICATES)
    for key, pairs in got.items():
        p, mc = np.array(pairs).T
        ratio = p.var(ddof=1) / np.mean(mc**2)
        assert lo <= ratio <= hi, (key, rho, ratio)


class _History:
    def __init__(self, prior, chains=CHAINS):
        self.prior, self.chains = prior, chains


def test_plan_numbers_are_exact_given_the_draws():
    prior = fake_history(np.random.default_rng(1), 0.5)
    p, _ = draw_error.prob_at_most(prior, 0.005, 300, 1, chains=CHAINS)
    assert p == pytest.approx(prior.prob_at_most(0.005, 300, 1), rel=1e-12)
    a, _ = draw_error.pass_probability(prior, 1, 300, chains=CHAINS)
    assert a == pytest.approx(asr.betabinom_cdf(1, 300, prior), rel=1e-12)
    for lot in (None, 2000):
        q = sampling.accepted_lot_quality(125, 1, prior, 0.01, lot)
        rows, _ = draw_error.sampling_errors(_History(prior), 125, 1, 0.01, 0.9, lot)
        assert rows[0][1] == pytest.approx(q["prob_accept"], rel=1e-12)
        want = q["prob_within_spec_if_accepted"] if lot is None else \
            q["lot_within_spec_if_accepted"]
        assert rows[0][3] == pytest.approx(want, rel=1e-12)


def test_close_words_only_within_three_mcse():
    assert draw_error.close_words(0.905, 0.002, 0.9, "P")  # 2.5 MCSE from the level
    assert not draw_error.close_words(0.91, 0.002, 0.9, "P")
    assert not draw_error.close_words(None, None, 0.9, "P")
