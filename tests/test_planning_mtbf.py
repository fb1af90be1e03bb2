"""Constant failure rate tests: chi-square factors and the NIST Bayesian worked example."""

import pytest
from scipy import stats

from qualbayes.errors import OptionError
from qualbayes.planning import mtbf
from qualbayes.planning.mtbf import GammaPrior

# T/MTBF = chi2(C; 2r+2)/2: NIST/SEMATECH e-Handbook of Statistical Methods, section 8.3.1.2
# (test length guide table); MIL-HDBK-781A. Values as listed in docs/references.md (3 decimals).
FACTORS = [(0, 0.80, 1.609), (0, 0.90, 2.303), (0, 0.95, 2.996), (1, 0.80, 2.994),
           (1, 0.90, 3.890), (2, 0.80, 4.279), (2, 0.90, 5.322)]


@pytest.mark.parametrize("r, c, factor", FACTORS)
def test_chi_square_test_time_factors(r, c, factor):
    assert mtbf.chi2_factor(c, r) == pytest.approx(factor, abs=5e-4)
    assert mtbf.classical_test_time(600.0, c, r) == pytest.approx(600.0 * factor, abs=0.3)


@pytest.mark.parametrize("r, c, factor", FACTORS)
def test_classical_time_puts_the_poisson_risk_at_the_goal_at_one_minus_c(r, c, factor):
    # Poisson-chi-square identity: P(X <= r | T / M) = 1 - C at the plan's T
    # (scipy.stats.poisson as reference library)
    t = mtbf.classical_test_time(1000.0, c, r)
    assert stats.poisson.cdf(r, t / 1000.0) == pytest.approx(1 - c, rel=1e-9)
    assert mtbf.passes(t * (1 + 1e-9), r, 1000.0, c)
    assert not mtbf.passes(t * (1 - 1e-6), r, 1000.0, c)


def test_nist_bayesian_test_time_1909_hours():
    # NIST/SEMATECH e-Handbook, sections 8.3.1.5 and 8.4.6 (worked example): MTBF goal 600 h
    # at 80%, gamma prior a = 2, b = 1400 h, r = 2 allowed failures -> T = 1909 h
    prior = GammaPrior(2.0, 1400.0)
    t = mtbf.bayes_test_time(600.0, 0.8, 2, prior)
    assert round(t) == 1909
    # the closed form with scipy.stats.gamma as reference library
    assert t == pytest.approx(600.0 * stats.gamma.ppf(0.8, 4) - 1400.0, rel=1e-12)


def test_nist_posterior_after_the_test():
    # NIST/SEMATECH e-Handbook, section 8.4.6: after 2 failures in 1909 h the posterior is
    # Gamma(4, 3309 h); median MTBF 901 h, 80% lower bound 600 h
    post = mtbf.posterior_mtbf(GammaPrior(2.0, 1400.0), 2, 1909.0, 0.8)
    assert post["shape"] == 4
    assert post["rate"] == pytest.approx(3309.0)
    assert round(post["median_mtbf"]) == 901
    assert round(post["lower_bound_mtbf"]) == 600


def test_bayes_time_passes_exactly_at_its_threshold():
    prior = GammaPrior(2.0, 1400.0)
    t = mtbf.bayes_test_time(600.0, 0.8, 2, prior)
    assert mtbf.allowed_failures(t * (1 + 1e-9), 600.0, 0.8, prior) == 2
    assert mtbf.allowed_failures(t * (1 - 1e-6), 600.0, 0.8, prior) == 1


def test_strong_prior_needs_no_test_time():
    # prior as if 20 failures in 60000 h (MTBF ~ 3000 h) already shows 600 h at 80%
    assert mtbf.bayes_test_time(600.0, 0.8, 0, GammaPrior(20.0, 60_000.0)) == 0.0


def test_oc_curve_falls_with_worse_mtbf():
    import numpy as np

    grid = np.geomspace(100, 10_000, 50)
    oc = mtbf.oc_curve(2567.4, 2, grid)
    assert np.all(np.diff(oc) > 0)  # higher true MTBF, more likely to pass
    assert oc[0] < 0.01 and oc[-1] > 0.9


def test_bad_mtbf_inputs():
    with pytest.raises(OptionError, match="confidence"):
        mtbf.chi2_factor(1.2, 0)
    with pytest.raises(OptionError, match="negative"):
        mtbf.chi2_factor(0.9, -1)
    with pytest.raises(OptionError, match="MTBF"):
        mtbf.classical_test_time(-5.0, 0.9, 0)
    with pytest.raises(OptionError, match="gamma prior"):
        GammaPrior(0.0, 100.0)
