"""Simulation-based calibration (Talts et al., 2018, arXiv:1804.06788; docs/references.md) of the
hierarchical lot model and the censored Weibull model, NUTS included.

Replications draw parameters from the prior and data from the model; the rank of the true
value among 99 thinned posterior draws must then be uniform on 0..99, and central 50% and
90% intervals must cover the truth in 50% and 90% of replications. Tests, with tolerances
from the sampling distributions (not chosen to pass):

* uniformity: chi-square on ranks binned into 10 bins, p-value above 0.001 / 60;
* coverage: the number of intervals covering the truth is Binomial(R, level); the observed
  fraction must lie in that binomial's central 1 - 0.001 / 60 band.

The 60 is the number of such checks in this file (10 studies that must pass, 2 parameters,
3 checks each): each is made at 0.001 / 60 (Bonferroni), so a correct model fails any of
them by chance at most 0.1% of the time. (At 0.001 a check, the set falsely failed about 6%
of the time, and once did: the 1-lot study's mu ranks at p = 0.0003, where exact grid
quadrature of the same simulated data, with no sampler involved, gave ranks at p = 0.019
and agreed with NUTS rank by rank, correlation 0.99.)

The CI version (60 replications, one fit per study with every replication a "part" or
"group" of the vectorised model) is run with deliberately wrong likelihoods as well and
must detect them (p-value below the same per-check level): the lot model with the
lot-to-lot variation dropped, the Weibull model with the suspension terms dropped. The large
version is marked slow (pytest -m slow); bench/calibration.py prints the table of
docs/calibration.md.
"""

from __future__ import annotations

import numpy as np
import pytest
import sbc

from qualbayes.inference.run import SamplerSettings

CI_SETTINGS = SamplerSettings(num_chains=4, num_warmup=500, num_samples=500, seed=11,
                              retry=False)
P_MIN = sbc.PER_CHECK  # 0.001 / 60, see the module docstring


def assert_calibrated(cal: sbc.Calibration) -> None:
    for key in cal.ranks:
        stat, p = cal.chi_square(key)
        assert p > P_MIN, (cal.name, key, stat, p, sbc.markdown_rows(cal))
        for level in (0.5, 0.9):
            lo, hi = sbc.coverage_band(cal.replications, level)
            assert lo <= cal.coverage(key, level) <= hi, (cal.name, key, level,
                                                            cal.coverage(key, level))


def assert_detected(cal: sbc.Calibration) -> None:
    worst = min(cal.chi_square(key)[1] for key in cal.ranks)
    assert worst < P_MIN, (cal.name, sbc.markdown_rows(cal))
    lo, _ = sbc.coverage_band(cal.replications, 0.9)
    assert min(cal.coverage(key, 0.9) for key in cal.ranks) < lo


@pytest.fixture(scope="module")
def lot_sim():
    return sbc.simulate(60, 5, seed=2018)


@pytest.fixture(scope="module")
def life_sim():
    return sbc.simulate_life(60, 10, seed=1804)


def test_sbc_lot_history(lot_sim):
    cal = sbc.run(lot_sim, CI_SETTINGS, name="lot history")
    assert cal.replications == 60
    assert_calibrated(cal)


def test_sbc_catches_a_dropped_lot_to_lot_term():
    # 100 replications (the calibration check uses 60): at 60 the wrong model's worst
    # chi-square p-value sat at 2.3e-05 against the 1.7e-05 threshold for one seed stream,
    # too little power to rely on; the threshold itself is the calibration check's
    sim = sbc.simulate(100, 5, seed=2018)
    assert_detected(sbc.run(sim, CI_SETTINGS, model=sbc.pooled_binomial_model,
                            name="lot history, variation dropped (wrong)"))


def test_sbc_weibull_right_censored(life_sim):
    assert sum(len(u["failures"]) == 0 for u in life_sim.units) > 0  # all-suspended cases
    assert_calibrated(sbc.run_life(life_sim, CI_SETTINGS, name="Weibull, right-censored"))


def test_sbc_catches_a_dropped_censoring_term(life_sim):
    assert_detected(sbc.run_life(life_sim, CI_SETTINGS, drop_suspensions=True,
                                 name="Weibull, suspensions dropped (wrong)"))


def test_sbc_weibull_inspection_data():
    # units checked every 500 h: left-censored, interval-censored and suspended units
    sim = sbc.simulate_life(60, 10, seed=1805, inspections=(500.0, 1000.0, 1500.0, 2000.0))
    kinds = {k for u in sim.units for k in ("left", "interval_lower", "suspensions")
             if len(u[k])}
    assert kinds == {"left", "interval_lower", "suspensions"}
    assert_calibrated(sbc.run_life(sim, CI_SETTINGS, name="Weibull, inspections"))


SLOW_SETTINGS = SamplerSettings(num_chains=4, num_warmup=1000, num_samples=1000, seed=13,
                                retry=False)


@pytest.mark.slow
@pytest.mark.parametrize("lots", [1, 5, 20])
def test_sbc_lot_history_large(lots):
    assert_calibrated(sbc.run(sbc.simulate(400, lots, seed=100 + lots), SLOW_SETTINGS))


@pytest.mark.slow
@pytest.mark.parametrize("units,inspections", [(3, ()), (10, ()), (30, ()),
                                               (10, (500.0, 1000.0, 1500.0, 2000.0))])
def test_sbc_weibull_large(units, inspections):
    sim = sbc.simulate_life(400, units, seed=200 + units + len(inspections),
                            inspections=inspections)
    assert_calibrated(sbc.run_life(sim, SLOW_SETTINGS))


# ------------------------------------------------------------------ lot decision rules: OC

# Operating characteristics of every lot decision rule under fixed true rates (issue 11
# item 2; docs/calibration.md "Lot decisions under fixed true rates"). The history prior is
# evaluated by exact quadrature, which tests/test_lot_decisions.py shows NUTS reproduces.
# Tolerance: the consumer's risk may exceed 1 - C only by 3 Monte Carlo standard errors of
# the study (binomial, over histories).

OC_CI = {"a": 200, "b": 100, "c": 30, "d": 400}
OC_SLOW = {"a": 2000, "b": 1000, "c": 300, "d": 4000}


def oc_study(histories: dict, seed: int = 2026):
    from qualbayes.models import lot_oc

    out = {}
    for sc in lot_oc.scenarios():
        res = lot_oc.run(sc, histories[sc.key], seed, outliers=sc.key == "c")
        out[sc.key] = (sc, {name: lot_oc.risks(sc, res, name)
                            for name in ("uniform", "jeffreys", "history")})
    return out


def assert_oc_targets(study, histories: dict) -> None:
    for key in ("a", "d"):
        sc, risks = study[key]
        for name, r in risks.items():
            risk, err = r["consumer"]
            # binomial error of a rate near 1 - C over the histories, at least
            floor = np.sqrt(0.05 * 0.95 / histories[key])
            assert risk <= 1 - sc.confidence + 3 * max(err, floor), (key, name, risk, err)
    sc, risks = study["b"]
    for name, r in risks.items():
        assert r["producer"][0] <= 1 - sc.confidence, (name, r)
    # (c): the bad lots are stated, and the outlier check flags them more often than the
    # good ones
    _, risks = study["c"]
    assert risks["history"]["flag_bad"] > 5 * max(risks["history"]["flag_good"], 0.01)


def test_lot_oc_ci_sized():
    assert_oc_targets(oc_study(OC_CI), OC_CI)


def test_lot_oc_old_history_prior_fails_the_target():
    """The test can fail: the earlier hyperprior (phi uniform) accepts 2 x spec lots in (a)
    whenever all are clean (about 73% of histories)."""
    from qualbayes.models import lot_oc
    from qualbayes.models.lot_spread import PhiUniformPrior

    sc = lot_oc.scenarios()[0]
    res = lot_oc.run(sc, 100, 7, {"old": PhiUniformPrior()}, outliers=False)
    assert lot_oc.risks(sc, res, "old")["consumer"][0] > 0.5


@pytest.mark.slow
def test_lot_oc_large():
    assert_oc_targets(oc_study(OC_SLOW, seed=2027), OC_SLOW)
