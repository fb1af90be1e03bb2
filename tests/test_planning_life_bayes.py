"""The Bayesian plan with the test time scaled by a Weibull shape (planning.life_bayes): its
posterior against
direct numerical integration by scipy.integrate, the conjugate closed forms it must reduce to,
the attribute plan it must agree with at L = 1, monotonicity in the test time, and the plan
record and assurance built on it."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from qualbayes.planning import assurance as asr
from qualbayes.planning import attribute, life_bayes, weibull
from qualbayes.planning.plans import plan_life
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.planning.weibull import ShapePrior


def _reference(a, b, n, c, ratio, beta, p_star):
    """P(p <= p* | c of n failed) by direct quadrature of prior x likelihood (scipy.stats
    beta density, scipy.integrate.quad), independent of the signed Beta sum."""
    k = ratio ** beta

    def f(p):
        q = -math.expm1(k * math.log1p(-p))
        return stats.beta.pdf(p, a, b) * q**c * (1.0 - q) ** (n - c)

    opts = {"limit": 500, "epsabs": 0.0, "epsrel": 1e-11}
    below = integrate.quad(f, 0.0, p_star, **opts)[0]
    return below / (below + integrate.quad(f, p_star, 1.0, **opts)[0])


@pytest.mark.parametrize("a,b,n,c,ratio,beta", [
    (1.2, 8.0, 10, 2, 1.7, 1.5), (1.2, 8.0, 30, 5, 0.6, 3.0), (0.5, 0.5, 8, 3, 2.5, 2.0),
    (1.0, 1.0, 50, 10, 1.2, 1.0), (2.0, 1.0, 12, 1, 3.0, 0.8), (1.2, 8.0, 20, 10, 1e-2, 2.0),
])
def test_posterior_against_direct_quadrature(a, b, n, c, ratio, beta):
    got = life_bayes.prob_demonstrated(RatePrior.beta(a, b), 0.9, n, ratio, c, beta)
    assert got == pytest.approx(_reference(a, b, n, c, ratio, beta, 0.1), rel=1e-8, abs=1e-12)


def test_shape_range_posterior_against_a_double_integral():
    """ln(beta) ~ Normal: scipy.integrate.dblquad over (ln beta, p) of the normal density x
    the Beta prior x the likelihood, against the Gauss-Hermite sum."""
    shape = ShapePrior.from_range(1.5, 3.0)
    a, b, n, c, ratio, p_star = 1.5, 12.0, 15, 2, 1.4, 0.1

    def kernel(p, z):
        k = ratio ** math.exp(z)
        q = -math.expm1(k * math.log1p(-p))
        return (stats.norm.pdf(z, shape.log_median, shape.log_sd) * stats.beta.pdf(p, a, b)
                * q**c * (1.0 - q) ** (n - c))

    zlo, zhi = shape.log_median - 8 * shape.log_sd, shape.log_median + 8 * shape.log_sd
    below = integrate.dblquad(kernel, zlo, zhi, 0.0, p_star, epsabs=0, epsrel=1e-10)[0]
    above = integrate.dblquad(kernel, zlo, zhi, p_star, 1.0, epsabs=0, epsrel=1e-10)[0]
    got = life_bayes.prob_demonstrated(RatePrior.beta(a, b), 0.9, n, ratio, c, shape)
    assert got == pytest.approx(below / (below + above), rel=1e-7)


@pytest.mark.parametrize("c", [0, 1, 2, 3])
def test_unit_ratio_and_known_shape_is_the_conjugate_attribute_posterior(c):
    # L = 1: q = p, so p | c of n ~ Beta(a + c, b + n - c) (conjugate; scipy.stats.beta)
    got = life_bayes.prob_demonstrated(RatePrior.beta(0.5, 5.0), 0.9, 20, 1.0, c, 2.0)
    assert got == pytest.approx(stats.beta.cdf(0.1, 0.5 + c, 5.0 + 20 - c), rel=1e-9)


def test_zero_failures_is_beta_with_k_n_added():
    # c = 0: likelihood (1 - p)^(k n), posterior Beta(a, b + k n) exactly, k = L^beta
    for ratio, beta in ((0.5, 2.0), (2.0, 1.3), (3.0, 3.5)):
        k = ratio**beta
        got = life_bayes.prob_demonstrated(RatePrior.beta(1.0, 3.0), 0.95, 9, ratio, 0, beta)
        assert got == pytest.approx(stats.beta.cdf(0.05, 1.0, 3.0 + 9 * k), rel=1e-12)


def test_zero_failure_time_ratio_closed_form():
    # uniform prior, c = 0: P = 1 - (1 - p*)^(1 + k n) = C gives k = (ln(1-C)/ln(1-p*) - 1)/n
    r, conf, n, beta = 0.9, 0.9, 10, 2.0
    k = (math.log(1 - conf) / math.log(r) - 1) / n
    got = life_bayes.time_ratio(RatePrior.beta(1, 1), r, conf, n, beta, 0)
    assert got == pytest.approx(k ** (1 / beta), rel=1e-9)


@pytest.mark.parametrize("shape", [2.0, 0.7, ShapePrior.from_range(1.5, 3.0)])
def test_probability_rises_with_the_test_time(shape):
    prior = RatePrior.beta(1.5, 20.0)
    probs = [life_bayes.prob_demonstrated(prior, 0.95, 12, L, 2, shape)
             for L in np.geomspace(0.05, 1e4, 80)]
    assert np.all(np.diff(probs) > -1e-12)
    assert probs[-1] > 0.999


def test_bayesian_units_at_unit_ratio_agree_with_the_attribute_plan():
    """Known shape: the attribute Bayesian plan's n (checked module, docs/references.md)
    needs L <= 1,
    and one unit fewer needs L > 1."""
    prior = RatePrior.beta(1.0, 9.0)
    for c in (0, 1, 2):
        n = attribute.bayes_units(prior, 0.9, 0.9, c)
        assert life_bayes.time_ratio(prior, 0.9, 0.9, n, 2.0, c) <= 1.0 + 1e-9
        assert life_bayes.time_ratio(prior, 0.9, 0.9, n - 1, 2.0, c) > 1.0


def test_plan_meets_the_rule_and_a_shorter_test_does_not():
    prior = RatePrior.beta(1.2, 15.0)
    shape = ShapePrior.from_range(1.2, 2.5)
    for c in (0, 1, 3):
        L = life_bayes.time_ratio(prior, 0.95, 0.9, 15, shape, c)
        at = life_bayes.prob_demonstrated(prior, 0.95, 15, L, c, shape)
        assert at == pytest.approx(0.9, abs=1e-9)
        assert life_bayes.prob_demonstrated(prior, 0.95, 15, 0.99 * L, c, shape) < 0.9


def test_prior_alone_gives_no_test():
    strong = RatePrior.beta(1.0, 200.0)  # P(p <= 0.1) = 1 - 0.9^200
    assert life_bayes.time_ratio(strong, 0.9, 0.9, 5, 2.0, 1) == 0.0
    rec = plan_life(0.9, 0.9, 1000, 5, 2.0, [0, 1], analysis=strong)
    assert any("the prior alone shows the goal" in line for line in rec["summary"])


def test_plan_record_bayesian_columns_and_time_saved():
    prior = RatePrior.on_reliability(18.0, 1.0)
    rec = plan_life(0.9, 0.9, 1000.0, 10, 2.0, [0, 1], analysis=prior)
    cols = rec["tables"][0]["columns"]
    rows = [dict(zip(cols, r, strict=True)) for r in rec["tables"][0]["rows"]]
    classical = plan_life(0.9, 0.9, 1000.0, 10, 2.0, [0, 1])
    for row, crow in zip(rows, classical["tables"][0]["rows"], strict=True):
        c = row["allowed failures c"]
        assert row["P(R >= goal | c of n)"] == pytest.approx(0.9, abs=1e-9)
        assert row["classical time per unit"] == pytest.approx(crow[2], rel=1e-12)
        assert row["time saved"] == pytest.approx(crow[2] - row["time per unit"], rel=1e-12)
        assert row["time per unit"] == pytest.approx(
            1000 * life_bayes.time_ratio(prior, 0.9, 0.9, 10, 2.0, c), rel=1e-12)
        # the assurance defaults to the analysis prior
        assert row["assurance"] == pytest.approx(
            asr.life_assurance(10, row["L (test / mission)"], c, 2.0, prior), rel=1e-12)
    assert rec["priors"]["analysis"] == prior.label


def test_smallest_plan_for_a_wanted_assurance_under_the_bayesian_rule():
    prior = RatePrior.beta(1.5, 25.0)
    shape = 2.0
    ratios = [life_bayes.time_ratio(prior, 0.9, 0.9, 10, shape, c) for c in range(10)]
    assur = [asr.life_assurance(10, L, c, shape, prior) for c, L in enumerate(ratios)]
    for target in (0.7, 0.78, 0.8):
        found = asr.smallest_life_plan(0.9, 0.9, 10, shape, prior, target, analysis=prior)
        reaching = [c for c, v in enumerate(assur) if v >= target]
        assert found["reached"] == bool(reaching)
        if reaching:  # the first allowance whose Bayesian plan reaches the target
            assert found["failures"] == reaching[0]
            assert found["ratio"] == pytest.approx(ratios[reaching[0]], rel=1e-12)
        else:  # the best plan is shown, and said to fall short
            assert found["assurance"] == pytest.approx(max(assur), rel=1e-12)
            assert "not reached" in found["reason"]


def test_classical_plan_is_unchanged_without_a_prior():
    rec = plan_life(0.9, 0.9, 1000.0, 10, 2.0, [0, 1])
    assert rec["tables"][0]["columns"][:5] == ["allowed failures c", "L (test / mission)",
                                               "time per unit", "total unit-time",
                                               "P(pass | R = goal)"]
    assert rec["tables"][0]["rows"][0][1] == pytest.approx(
        weibull.time_ratio(0.9, 0.9, 10, 2.0, 0), rel=1e-12)
