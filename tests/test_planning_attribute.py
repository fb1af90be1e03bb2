"""Attribute (pass/fail) demonstration plans against docs/references.md, exact identities and
reference integrals."""

import math

import numpy as np
import pytest
from scipy import integrate, stats

from qualbayes.planning import attribute
from qualbayes.planning.rate_prior import RatePrior

# Success-run theorem n = ceil(ln(1-C)/ln R): common practice (reliability handbooks, e.g.
# Kececioglu, Reliability and Life Testing Handbook); values as listed in docs/references.md.
SUCCESS_RUN = [(0.90, 0.90, 22), (0.95, 0.90, 45), (0.90, 0.95, 29), (0.95, 0.95, 59),
               (0.99, 0.90, 230), (0.99, 0.95, 299)]


@pytest.mark.parametrize("r, c, n", SUCCESS_RUN)
def test_success_run_sizes_match_checks(r, c, n):
    assert attribute.success_run_units(r, c) == n
    # the c-failure search with c = 0 gives the same size
    assert attribute.units_for_failures(r, c, 0) == n


@pytest.mark.parametrize("r, c, n", SUCCESS_RUN)
def test_success_run_is_smallest_by_definition(r, c, n):
    # R^n <= 1 - C at n and not at n - 1 (the definition, independent of the log formula)
    assert r**n <= 1 - c < r ** (n - 1)


def test_exact_integer_ratio_is_not_rounded_up():
    # R = 0.5, C = 0.75: ln(0.25)/ln(0.5) = 2 exactly, and 0.5^2 = 0.25 = 1 - C
    assert attribute.success_run_units(0.5, 0.75) == 2


@pytest.mark.parametrize("r, conf", [(0.9, 0.9), (0.95, 0.8), (0.99, 0.95), (0.8, 0.6)])
@pytest.mark.parametrize("c", [1, 2, 3, 5])
def test_c_failure_plan_is_the_smallest_meeting_the_binomial_risk(r, conf, c):
    n = attribute.units_for_failures(r, conf, c)
    # definition with scipy.stats.binom as reference library
    assert stats.binom.cdf(c, n, 1 - r) <= 1 - conf
    assert stats.binom.cdf(c, n - 1, 1 - r) > 1 - conf
    # equivalent statement: the exact (Clopper-Pearson) one-sided lower bound after c
    # failures in n reaches R, computed from scipy.stats.beta (a different function)
    assert stats.beta.ppf(1 - conf, n - c, c + 1) >= r
    assert stats.beta.ppf(1 - conf, n - 1 - c, c + 1) < r
    assert attribute.lower_reliability_bound(n, c, conf) == pytest.approx(
        stats.beta.ppf(1 - conf, n - c, c + 1), rel=1e-10)


def test_classical_table_grows_with_allowed_failures():
    rows = attribute.classical_table(0.9, 0.9, list(range(6)))
    sizes = [row["units"] for row in rows]
    assert sizes[0] == 22
    assert all(b > a for a, b in zip(sizes, sizes[1:], strict=False))
    assert all(row["risk_at_goal"] <= 0.1 for row in rows)


@pytest.mark.parametrize("r, c, n", SUCCESS_RUN)
def test_bayes_uniform_prior_zero_failures_closed_form(r, c, n):
    # R ~ Beta(1, 1), n successes: P(R >= r) = 1 - r^(n+1) (closed form of the Beta(n+1, 1)
    # posterior), so the Bayesian zero-failure size is the success-run size minus one
    # unless the success-run ratio is an exact integer.
    prior = RatePrior.on_reliability(1, 1)
    assert attribute.bayes_units(prior, r, c, 0) == math.ceil(math.log(1 - c) / math.log(r)) - 1
    assert attribute.bayes_units(prior, r, c, 0) == n - 1


@pytest.mark.parametrize("a", [3.0, 10.0, 20.5])
def test_bayes_beta_a_1_prior_counts_as_a_earlier_successes(a):
    # R ~ Beta(a, 1): after n successes P(R >= r) = 1 - r^(a+n) (closed form)
    r, conf = 0.95, 0.9
    prior = RatePrior.on_reliability(a, 1)
    n = attribute.bayes_units(prior, r, conf, 0)
    assert 1 - r ** (a + n) >= conf > 1 - r ** (a + n - 1) or n == 0
    assert n == max(0, math.ceil(math.log(1 - conf) / math.log(r) - a))


@pytest.mark.parametrize("c", [0, 1, 3])
def test_bayes_plan_against_scipy_beta_posterior(c):
    a, b, r, conf = 8.0, 1.5, 0.9, 0.9  # prior on R
    prior = RatePrior.on_reliability(a, b)
    n = attribute.bayes_units(prior, r, conf, c)
    # posterior R ~ Beta(a + n - c, b + c): scipy.stats.beta as reference
    assert stats.beta.sf(r, a + n - c, b + c) >= conf
    assert stats.beta.sf(r, a + n - 1 - c, b + c) < conf
    # fewer failures at the same n pass too (the rule covers "at most c")
    for x in range(c):
        assert stats.beta.sf(r, a + n - x, b + x) >= conf


def test_bayes_saves_units_over_classical_with_an_informative_prior():
    prior = RatePrior.on_reliability(20, 1)
    for c in range(4):
        assert attribute.bayes_units(prior, 0.9, 0.9, c) < attribute.units_for_failures(
            0.9, 0.9, c)


def test_mixture_posterior_matches_numerical_integration():
    # two-component mixture prior on p; posterior P(p <= s | x in n) by direct quadrature of
    # prior density x binomial likelihood (scipy.integrate.quad as reference)
    prior = RatePrior.mixture([1.0, 4.0], [60.0, 30.0], "test mixture")
    n, x, s = 40, 2, 0.08

    def dens(p):
        pri = 0.5 * (stats.beta.pdf(p, 1, 60) + stats.beta.pdf(p, 4, 30))
        return pri * stats.binom.pmf(x, n, p)

    num = integrate.quad(dens, 0, s, epsabs=1e-14, limit=200)[0]
    den = integrate.quad(dens, 0, 1, epsabs=1e-14, limit=200, points=[s])[0]
    assert prior.prob_at_most(s, n, x) == pytest.approx(num / den, rel=1e-7)
    q = prior.quantile(0.9, n, x)
    assert integrate.quad(dens, 0, q, epsabs=1e-14, limit=200)[0] / den == pytest.approx(
        0.9, abs=1e-7)


def test_mixture_of_identical_components_equals_the_single_beta():
    single = RatePrior.beta(2.0, 50.0)
    many = RatePrior.mixture(np.full(300, 2.0), np.full(300, 50.0), "copies")
    for c in (0, 1, 2):
        assert attribute.bayes_units(single, 0.95, 0.9, c) == attribute.bayes_units(
            many, 0.95, 0.9, c)
