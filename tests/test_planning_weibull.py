"""Test plans with the test time scaled by an assumed Weibull shape: reduction to the success
run, closed
forms, monotone trade-off, and the shape-range integral against simulation."""

import math

import numpy as np
import pytest
from scipy import stats
from test_planning_attribute import SUCCESS_RUN

from qualbayes.errors import OptionError
from qualbayes.planning import attribute, weibull
from qualbayes.planning.weibull import ShapePrior


@pytest.mark.parametrize("r, c, n", SUCCESS_RUN)
@pytest.mark.parametrize("shape", [0.7, 1.0, 2.0, 3.5])
def test_unit_test_time_ratio_gives_back_the_success_run(r, c, n, shape):
    # L = 1: n = ln(1-C)/(L^beta ln R) is the success-run size whatever the shape
    # (test time scaled by the Weibull shape, common practice; Kececioglu); values from
    # docs/references.md
    assert weibull.units_needed(r, c, 1.0, shape, 0) == n
    # n units need L <= 1, n - 1 units need L > 1
    assert weibull.time_ratio(r, c, n, shape, 0) <= 1.0
    assert weibull.time_ratio(r, c, n - 1, shape, 0) > 1.0


@pytest.mark.parametrize("c", [1, 2, 4])
def test_unit_ratio_with_failures_gives_the_binomial_plan(c):
    for r, conf in [(0.9, 0.9), (0.95, 0.8)]:
        assert weibull.units_needed(r, conf, 1.0, 2.0, c) == attribute.units_for_failures(
            r, conf, c)


@pytest.mark.parametrize("ratio, shape", [(2.0, 2.0), (1.5, 3.0), (3.0, 1.2), (0.5, 2.0)])
def test_zero_failure_extended_closed_form(ratio, shape):
    # n = ceil(ln(1 - C) / (L^beta ln R)) (time-scaled binomial, common practice; Kececioglu)
    r, conf = 0.9, 0.9
    n = math.ceil(math.log(1 - conf) / (ratio**shape * math.log(r)) - 1e-9)
    assert weibull.units_needed(r, conf, ratio, shape, 0) == n


@pytest.mark.parametrize("units, c", [(5, 0), (10, 1), (30, 2), (8, 3)])
def test_time_ratio_meets_the_risk_exactly(units, c):
    r, conf, shape = 0.9, 0.9, 2.0
    ratio = weibull.time_ratio(r, conf, units, shape, c)
    # at the returned L the consumer's risk at the goal is exactly 1 - C
    # (scipy.stats.binom as reference library)
    p_test = 1 - r ** (ratio**shape)
    assert stats.binom.cdf(c, units, p_test) == pytest.approx(1 - conf, rel=1e-9)
    assert weibull.units_needed(r, conf, ratio * (1 + 1e-9), shape, c) <= units


@pytest.mark.parametrize("shape", [1.0, 2.5, ShapePrior.from_range(1.5, 3.0)])
@pytest.mark.parametrize("c", [0, 2])
def test_test_time_falls_as_units_rise(shape, c):
    times = [weibull.life_plan(0.9, 0.9, 1000.0, n, shape, c)["test_time"]
             for n in range(c + 1, 80)]
    assert all(b < a for a, b in zip(times, times[1:], strict=False))


def test_narrow_shape_range_approaches_the_known_shape():
    narrow = ShapePrior.from_range(1.999, 2.001)
    for n, c in [(6, 0), (12, 2)]:
        assert weibull.time_ratio(0.9, 0.9, n, narrow, c) == pytest.approx(
            weibull.time_ratio(0.9, 0.9, n, 2.0, c), rel=1e-4)


def test_shape_prior_holds_the_range_as_its_central_95():
    sp = ShapePrior.from_range(1.5, 3.0)
    # lognormal check with scipy.stats.lognorm as reference
    dist = stats.lognorm(s=sp.log_sd, scale=math.exp(sp.log_median))
    assert dist.ppf(0.025) == pytest.approx(1.5, rel=1e-9)
    assert dist.ppf(0.975) == pytest.approx(3.0, rel=1e-9)


def test_shape_averaged_risk_agrees_with_simulation():
    # Gauss-Hermite average over ln(shape) against Monte Carlo draws of the shape; the
    # tolerance is 4 Monte Carlo standard errors (fixed seed)
    sp = ShapePrior.from_range(1.2, 3.5)
    n, ratio, c, r = 9, 1.8, 1, 0.9
    quad = weibull.consumer_risk(n, ratio, c, r, sp)
    rng = np.random.default_rng(11)
    betas = sp.sample(rng, 200_000)
    vals = stats.binom.cdf(c, n, 1 - r ** (ratio**betas))
    se = vals.std() / math.sqrt(vals.size)
    assert abs(quad - vals.mean()) < 4 * se


def test_the_integrated_plan_lies_between_the_plans_at_the_range_ends():
    sp = ShapePrior.from_range(1.5, 3.0)
    t = weibull.time_ratio(0.9, 0.9, 8, sp, 1)
    t_lo = weibull.time_ratio(0.9, 0.9, 8, 1.5, 1)
    t_hi = weibull.time_ratio(0.9, 0.9, 8, 3.0, 1)
    assert t_hi < t < t_lo  # L > 1 here: a low shape needs the longest test


def test_bad_life_inputs():
    with pytest.raises(OptionError, match="more units"):
        weibull.time_ratio(0.9, 0.9, 2, 2.0, 2)
    with pytest.raises(OptionError, match="shape"):
        weibull.time_ratio(0.9, 0.9, 5, -1.0, 0)
    with pytest.raises(OptionError, match="low end must be below"):
        ShapePrior.from_range(3.0, 1.5)
    with pytest.raises(OptionError, match="mission"):
        weibull.life_plan(0.9, 0.9, 0.0, 5, 2.0, 0)
    with pytest.raises(OptionError, match="reliability"):
        weibull.time_ratio(1.0, 0.9, 5, 2.0, 0)
