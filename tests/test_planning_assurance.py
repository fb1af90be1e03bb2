"""Assurance (Wilson & Farrow, 2019, arXiv:1905.08659): closed forms against a Monte Carlo
simulation of the whole test (truth from the design prior, data, then the pass rule), and
the smallest plan reaching a wanted assurance against brute force."""

import math

import numpy as np
import pytest
from scipy import special, stats

from qualbayes.planning import assurance as asr
from qualbayes.planning import mtbf, weibull
from qualbayes.planning.mtbf import GammaPrior
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.planning.weibull import ShapePrior

SIMS = 200_000


def _within_mc(value, hits):
    """|closed form - simulated rate| < 4 Monte Carlo standard errors."""
    m = hits.mean()
    se = math.sqrt(max(m * (1 - m), 1e-12) / hits.size)
    assert abs(value - m) < 4 * se, (value, m, se)


def test_betabinom_cdf_matches_scipy():
    # scipy.stats.betabinom as reference library (design prior on p = 1 - R)
    design = RatePrior.on_reliability(30, 2)
    for n, c in [(10, 0), (40, 3), (200, 12), (5, 5)]:
        assert asr.betabinom_cdf(c, n, design) == pytest.approx(
            stats.betabinom.cdf(c, n, 2, 30), rel=1e-10)


@pytest.mark.parametrize("n", [22, 30, 38, 45, 60])
def test_attribute_assurance_classical_against_simulation(n):
    r, conf = 0.9, 0.9
    design = RatePrior.on_reliability(30, 1.5)
    a = asr.attribute_assurance(n, r, conf, None, design)
    rng = np.random.default_rng(n)
    rel = rng.beta(30, 1.5, SIMS)
    x = rng.binomial(n, 1 - rel)
    # the classical pass rule applied to each simulated test (scipy.stats.binom)
    _within_mc(a, stats.binom.cdf(x, n, 1 - r) <= 1 - conf)


@pytest.mark.parametrize("n", [5, 18, 25, 40])
def test_attribute_assurance_bayes_with_a_different_design_prior(n):
    r, conf = 0.9, 0.9
    analysis = RatePrior.on_reliability(12, 1)  # the prior the test is judged with
    design = RatePrior.on_reliability(25, 2.5)  # what the engineer believes now
    a = asr.attribute_assurance(n, r, conf, analysis, design)
    rng = np.random.default_rng(100 + n)
    rel = rng.beta(25, 2.5, SIMS)
    x = rng.binomial(n, 1 - rel)
    # pass rule: posterior R ~ Beta(12 + n - x, 1 + x), scipy.stats.beta as reference
    _within_mc(a, stats.beta.sf(r, 12 + n - x, 1 + x) >= conf)


def test_attribute_assurance_with_a_mixture_design_prior():
    design = RatePrior.mixture([1.0, 3.0], [80.0, 40.0], "two supplier regimes")
    n, r, conf = 40, 0.95, 0.8
    a = asr.attribute_assurance(n, r, conf, None, design)
    rng = np.random.default_rng(3)
    p = design.sample(rng, SIMS)
    x = rng.binomial(n, p)
    _within_mc(a, stats.binom.cdf(x, n, 1 - r) <= 1 - conf)


@pytest.mark.parametrize("analysis", [None, RatePrior.on_reliability(15, 1)])
def test_smallest_attribute_plan_is_smallest(analysis):
    r, conf, target = 0.9, 0.9, 0.75
    design = RatePrior.on_reliability(40, 1.5)
    s = asr.smallest_attribute_plan(r, conf, analysis, design, target)
    assert s["reached"]
    assert s["assurance"] >= target
    assert asr.attribute_assurance(s["units"], r, conf, analysis, design) == pytest.approx(
        s["assurance"], rel=1e-12)
    for n in range(s["units"]):  # brute force over every smaller test
        assert asr.attribute_assurance(n, r, conf, analysis, design) < target


def test_classical_assurance_never_exceeds_its_ceiling():
    r, conf = 0.9, 0.9
    design = RatePrior.on_reliability(20, 2)
    ceiling = asr.classical_ceiling(design.prob_at_most(1 - r), conf)
    curve = asr.attribute_assurance_curve(r, conf, None, design, 400)
    assert max(curve["assurance"]) <= ceiling
    s = asr.smallest_attribute_plan(r, conf, None, design, min(0.999, ceiling + 0.01))
    assert not s["reached"] and s["units"] is None and "unreachable" in s["reason"]


def test_mtbf_assurance_negative_binomial_against_simulation():
    goal, conf = 600.0, 0.8
    analysis = GammaPrior(2.0, 1400.0)
    design = GammaPrior(3.0, 4000.0)
    for t in [500.0, 1909.0, 3000.0]:
        a = asr.mtbf_assurance(t, goal, conf, analysis, design)
        rng = np.random.default_rng(int(t))
        lam = design.sample(rng, SIMS)
        x = rng.poisson(lam * t)
        # pass rule: posterior Gamma(2 + x, 1400 + t) on lambda, scipy.stats.gamma
        _within_mc(a, stats.gamma.cdf(1 / goal, 2 + x, scale=1 / (1400 + t)) >= conf)
        a = asr.mtbf_assurance(t, goal, conf, None, design)
        _within_mc(a, stats.poisson.cdf(x, t / goal) <= 1 - conf)


def test_smallest_mtbf_plan_is_shortest():
    goal, conf, target = 600.0, 0.8, 0.55
    analysis, design = GammaPrior(2.0, 1400.0), GammaPrior(3.0, 4000.0)
    s = asr.smallest_mtbf_plan(goal, conf, analysis, design, target)
    assert s["reached"] and s["assurance"] >= target
    assert s["time"] == pytest.approx(mtbf.bayes_test_time(goal, conf, s["failures"], analysis))
    for t in np.linspace(0, s["time"], 400, endpoint=False):  # no shorter test reaches it
        assert asr.mtbf_assurance(float(t), goal, conf, analysis, design) < target


def test_life_assurance_zero_failures_closed_form():
    # c = 0, known shape: P(pass) = E[R^(n L^beta)] = B(a + n L^beta, b) / B(a, b) for
    # R ~ Beta(a, b) (Beta moments, closed form)
    a, b, n, ratio, shape = 30.0, 1.5, 8, 1.6, 2.0
    design = RatePrior.on_reliability(a, b)
    k = n * ratio**shape
    exact = math.exp(special.betaln(a + k, b) - special.betaln(a, b))
    assert asr.life_assurance(n, ratio, 0, shape, design) == pytest.approx(exact, rel=1e-7)


@pytest.mark.parametrize("shape", [2.0, ShapePrior.from_range(1.5, 3.0)])
def test_life_assurance_against_simulation(shape):
    design = RatePrior.on_reliability(30, 1.5)
    n, c, ratio = 10, 1, 1.9
    a = asr.life_assurance(n, ratio, c, shape, design)
    rng = np.random.default_rng(21)
    rel = rng.beta(30, 1.5, SIMS)
    beta = shape.sample(rng, SIMS) if isinstance(shape, ShapePrior) else shape
    x = rng.binomial(n, 1 - rel ** (ratio**beta))
    _within_mc(a, x <= c)


def test_life_with_unit_ratio_and_known_shape_is_the_attribute_assurance():
    design = RatePrior.on_reliability(30, 1.5)
    for n, c in [(22, 0), (38, 1)]:
        assert asr.life_assurance(n, 1.0, c, 2.0, design) == pytest.approx(
            asr.betabinom_cdf(c, n, design), rel=1e-7)


def test_smallest_life_plan_is_shortest():
    r, conf, n, target = 0.9, 0.9, 10, 0.6
    design = RatePrior.on_reliability(40, 1.5)
    s = asr.smallest_life_plan(r, conf, n, 2.0, design, target)
    assert s["reached"] and s["assurance"] >= target
    cuts = [weibull.time_ratio(r, conf, n, 2.0, c) for c in range(n)]
    for ratio in np.linspace(0.05, s["ratio"], 120, endpoint=False):
        allowed = int(np.searchsorted(cuts, ratio, side="right")) - 1
        a = 0.0 if allowed < 0 else asr.life_assurance(n, float(ratio), allowed, 2.0, design)
        assert a < target
