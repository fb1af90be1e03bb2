"""Accelerated life (qualbayes at-use): the likelihood against scipy.stats, the posterior mode
against scipy maximum likelihood and a published example, NUTS against the MLE, recovery of
a known activation energy, refusals and the command line. External values: docs/references.md
("Accelerated life and forecasts")."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

from qualbayes.data.life import LifeTable
from qualbayes.data.stress_life import (
    StressLifeTable,
    header_temperature_unit,
    parse_use_temperature,
)
from qualbayes.errors import InputError, OptionError
from qualbayes.models import life_stress as ls
from tests.helpers import write_csv

K_B = 8.617333262e-5  # eV/K, CODATA 2018 (docs/references.md)

# Motorette insulation life test (Nelson & Hahn 1972; analysed by Schmee & Hahn 1979):
# hours at 150, 170, 190 and 220 C, 10 units each, 1 = failed. docs/references.md.
MOTOR_TEMP = [150] * 10 + [170] * 10 + [190] * 10 + [220] * 10
MOTOR_TIME = ([8064] * 10 + [1764, 2772, 3444, 3542, 3780, 4860, 5196, 5448, 5448, 5448]
              + [408, 408, 1344, 1344, 1440] + [1680] * 5 + [408, 408, 504, 504, 504]
              + [528] * 5)
MOTOR_FAILED = [0] * 10 + [1] * 7 + [0] * 3 + [1] * 5 + [0] * 5 + [1] * 5 + [0] * 5
# Published maximum-likelihood fit (lognormal, log10 life = b0 + b1 * 1000/(T C + 273.2)),
# quoted from memory (docs/references.md): b0 = -6.019, b1 = 4.311, sigma = 0.2592.
MOTOR_PUBLISHED = {"b0": -6.019, "b1": 4.311, "sigma10": 0.2592}


def table_from(kind, lower, upper, stress, temp_units=None) -> StressLifeTable:
    n = len(kind)
    f = pd.DataFrame({"unit": [f"U{i}" for i in range(n)], "group": "(all units)",
                      "kind": kind, "lower": lower, "upper": upper, "row": np.arange(2, n + 2)})
    stress = np.asarray(stress, float).reshape(n, -1)
    return StressLifeTable(LifeTable(f, "memory", None, 1, {}, []),
                           [f"s{j}" for j in range(stress.shape[1])], stress,
                           list(temp_units or [None] * stress.shape[1]))


def simulate_weibull(rng, stress_k, ea, beta, eta_at, t_ref_k, censor, interval=False):
    """Weibull-Arrhenius units: eta(T) = eta_at * exp(Ea/k (1/T - 1/T_ref)); type I
    censoring at ``censor``; optionally the failures inspected on a grid (intervals)."""
    eta = eta_at * np.exp(ea / K_B * (1.0 / stress_k - 1.0 / t_ref_k))
    t = eta * rng.weibull(beta, size=stress_k.size)
    kind = np.where(t < censor, "failure", "suspension").astype(object)
    lower = np.minimum(t, censor)
    upper = np.where(t < censor, t, np.inf)
    if interval:
        grid = censor / 5.0
        insp = (kind == "failure") & (rng.random(t.size) < 0.4)
        a = np.floor(t / grid) * grid
        kind[insp & (a > 0)] = "interval"
        kind[insp & (a == 0)] = "left"
        lower = np.where(insp & (a > 0), a, lower)
        lower = np.where(insp & (a == 0), 0.0, lower)
        upper = np.where(insp, a + grid, upper)
    return kind.astype(str), lower, upper


def scipy_loglik(params, kind, lower, upper, s, distribution):
    """The same censored log-location-scale likelihood written with scipy.stats frozen
    distributions on the natural scale: params = (log sigma, gamma0 at s = 0, gamma...)."""
    sigma = math.exp(params[0])
    mu = params[1] + s @ np.asarray(params[2:])
    if distribution == "weibull":
        d = stats.weibull_min(1.0 / sigma, scale=np.exp(mu))
    else:
        d = stats.lognorm(sigma, scale=np.exp(mu))
    ll = np.where(kind == "failure", d.logpdf(lower), 0.0)
    ll += np.where(kind == "suspension", d.logsf(lower), 0.0)
    ll += np.where(kind == "left", d.logcdf(upper), 0.0)
    # P(a < T <= b) from whichever side keeps its digits (cdf - cdf cancels near 1)
    upper_tail = d.cdf(lower) > 0.5
    mass = np.where(upper_tail, d.sf(lower) - d.sf(upper), d.cdf(upper) - d.cdf(lower))
    with np.errstate(divide="ignore", invalid="ignore"):
        ll += np.where(kind == "interval", np.log(mass), 0.0)
    return float(ll.sum())


def to_internal(params, design):
    """Natural (log sigma, gamma0 at s = 0, gamma) -> the model's theta."""
    gamma = np.asarray(params[2:])
    return np.concatenate([[params[0], params[1] + gamma @ design.ref], gamma * design.spread])


@pytest.mark.parametrize("distribution", ["weibull", "lognormal"])
def test_log_likelihood_equals_scipy_terms(distribution):
    rng = np.random.default_rng(11)
    temps = np.repeat([358.15, 378.15, 398.15], 30)
    volts = np.tile([10.0, 20.0], 45)
    kind, lower, upper = simulate_weibull(rng, temps, 0.6, 1.8, 3000.0, 378.15, 2500.0,
                                          interval=True)
    s = np.column_stack([ls.transform("arrhenius", temps), ls.transform("inverse-power",
                                                                         volts)])
    design = ls.build_design(kind, lower, upper, s, distribution)
    assert set(kind) == {"failure", "suspension", "interval", "left"}
    for params in ([-0.4, -7.6, 0.6, 1.5], [0.3, -6.0, 0.5, 1.0], [-1.0, -9.5, 0.7, 1.2]):
        mine = ls.log_likelihood(to_internal(params, design), design)
        ref = scipy_loglik(params, kind, lower, upper, s, distribution)
        assert mine == pytest.approx(ref, rel=1e-9, abs=1e-8)


def scipy_mle(kind, lower, upper, s, distribution, start):
    res = optimize.minimize(lambda p: -scipy_loglik(p, kind, lower, upper, s, distribution),
                            start, method="Nelder-Mead",
                            options={"xatol": 1e-9, "fatol": 1e-11, "maxiter": 40000,
                                     "maxfev": 40000})
    return res.x


def test_mode_with_flat_priors_is_the_scipy_mle():
    """Inverse-power Weibull with right, interval and left censoring: the posterior mode
    under flat priors on (log sigma, gamma0, n) is the maximum-likelihood point."""
    rng = np.random.default_rng(5)
    volts = np.repeat([20.0, 26.0, 32.0], 25)
    eta = 4000.0 * (volts / 20.0) ** -4.0
    t = eta * rng.weibull(2.2, size=volts.size)
    censor = 3000.0
    kind = np.where(t < censor, "failure", "suspension")
    lower, upper = np.minimum(t, censor), np.where(t < censor, t, np.inf)
    s = ls.transform("inverse-power", volts)[:, None]
    design = ls.build_design(kind, lower, upper, s, "weibull")
    term = ls.StressTerm("V", "inverse-power", 12.0)
    mode = ls.posterior_mode(design, ls.StressPrior(shape=None), (term,))
    assert mode.converged
    mine_nat = ls.natural(mode.center, design)
    mine = [math.log(mine_nat["sigma"]), float(mine_nat["gamma0"] - mine_nat["coef"][0]
                                               * design.ref[0]), float(mine_nat["coef"][0])]
    ref = scipy_mle(kind, lower, upper, s, "weibull", np.array(mine) + [0.05, 0.3, 0.1])
    np.testing.assert_allclose(mine, ref, rtol=1e-4, atol=1e-4)


def test_motorette_published_fit():
    """Lognormal-Arrhenius MLE of the motorette data equals the published values (from
    memory, docs/references.md) to their rounding, with 273.2 as the published offset."""
    kind = np.where(np.array(MOTOR_FAILED) == 1, "failure", "suspension")
    t = np.array(MOTOR_TIME, float)
    upper = np.where(kind == "failure", t, np.inf)
    x = 1000.0 / (np.array(MOTOR_TEMP, float) + 273.2)
    # the design takes s = x itself (mu = gamma0 + gamma x), so gamma = b1 * ln 10
    design = ls.build_design(kind, t, upper, x[:, None], "lognormal")
    term = ls.StressTerm("T", "log-linear", 1.0)
    mode = ls.posterior_mode(design, ls.StressPrior(shape=None), (term,))
    nat = ls.natural(mode.center, design)
    b1 = float(nat["coef"][0]) / math.log(10)
    b0 = float(nat["gamma0"] - nat["coef"][0] * design.ref[0]) / math.log(10)
    assert b0 == pytest.approx(MOTOR_PUBLISHED["b0"], abs=6e-4)
    assert b1 == pytest.approx(MOTOR_PUBLISHED["b1"], abs=6e-4)
    assert float(nat["sigma"]) / math.log(10) == pytest.approx(MOTOR_PUBLISHED["sigma10"],
                                                                abs=6e-5)


def test_arrhenius_transform_reproduces_the_motorette_slope():
    """The same fit through the Arrhenius transform: Ea = b1 * 1000 * ln(10) * k_B."""
    kind = np.where(np.array(MOTOR_FAILED) == 1, "failure", "suspension")
    t = np.array(MOTOR_TIME, float)
    kelvin = np.array(MOTOR_TEMP, float) + 273.2
    design = ls.build_design(kind, t, np.where(kind == "failure", t, np.inf),
                             ls.transform("arrhenius", kelvin)[:, None], "lognormal")
    term = ls.StressTerm("T", "arrhenius", 403.2)
    mode = ls.posterior_mode(design, ls.StressPrior(shape=None), (term,))
    ea = float(ls.natural(mode.center, design)["coef"][0])
    assert ea == pytest.approx(MOTOR_PUBLISHED["b1"] * 1000 * math.log(10) * K_B, abs=2e-4)


# ----------------------------------------------------------------------------- NUTS

TRUE_EA, TRUE_BETA = 0.7, 2.0


@pytest.fixture(scope="module")
def simulated_fit():
    """3 temperatures x 100 units, Weibull shape 2, Ea 0.7 eV, type I censoring: the NUTS
    answer with the default priors (flat Ea), and the scipy MLE of the same data."""
    from qualbayes.accelerated_analysis import assess_at_use

    rng = np.random.default_rng(2026)
    temps = np.repeat([358.15, 378.15, 398.15], 100)
    kind, lower, upper = simulate_weibull(rng, temps, TRUE_EA, TRUE_BETA, 2000.0, 378.15,
                                          3000.0)
    s = ls.transform("arrhenius", temps)[:, None]
    start = [math.log(1 / TRUE_BETA), 0.0, TRUE_EA]
    start[1] = math.log(2000.0) - TRUE_EA / (K_B * 378.15)
    mle = scipy_mle(kind, lower, upper, s, "weibull", np.array(start))
    # the mission at which the MLE puts R(use) at the target: P(R >= target) is then near
    # 1/2, where its Monte Carlo error is largest
    mu_use = mle[1] + mle[2] * float(ls.transform("arrhenius", 328.15))
    mission = math.exp(mu_use + math.exp(mle[0]) * math.log(-math.log(0.9)))
    table = table_from(kind, lower, upper, temps, ["K"])
    term = ls.StressTerm("s0", "arrhenius", 328.15)
    result = assess_at_use(table, [term], mission=mission, target=0.9, confidence=0.9,
                           check_shape=False)
    return result, mle, temps, mission


def test_nuts_median_near_the_mle_with_many_units(simulated_fit):
    """With 300 units the posterior concentrates at the MLE: posterior median minus MLE is
    O(1/n) against a posterior sd O(1/sqrt n); allowed 0.2 sd (plus the median's Monte Carlo
    error, about 0.03 sd at ESS > 1,000)."""
    result, mle, _, _ = simulated_fit
    assert result.converged
    nat = ls.natural(result.theta, result.design)
    ea = nat["coef"][..., 0].reshape(-1)
    log_sigma = np.log(nat["sigma"]).reshape(-1)
    assert abs(np.median(ea) - mle[2]) < 0.2 * ea.std()
    assert abs(np.median(log_sigma) - mle[0]) < 0.2 * log_sigma.std()


def test_known_activation_energy_is_recovered(simulated_fit):
    """The true Ea and shape lie within 3 posterior sd of the posterior median (a miss has
    probability about 0.3% per parameter for a calibrated posterior; the 90% interval would
    miss 10% of the time and is not a test)."""
    result, _, _, _ = simulated_fit
    nat = ls.natural(result.theta, result.design)
    ea = nat["coef"][..., 0].reshape(-1)
    log_shape = -np.log(nat["sigma"]).reshape(-1)
    assert abs(np.median(ea) - TRUE_EA) < 3 * ea.std()
    assert abs(np.median(log_shape) - math.log(TRUE_BETA)) < 3 * log_shape.std()
    assert result.result["coefficients"][0]["median"] == pytest.approx(np.median(ea))


def test_acceleration_factor_is_the_arrhenius_formula(simulated_fit):
    """AF(T) = exp(Ea/k (1/T_use - 1/T)) draw by draw (the standard Arrhenius factor)."""
    result, _, temps, _ = simulated_fit
    ea = ls.natural(result.theta, result.design)["coef"][..., 0].reshape(-1)
    for level in result.result["levels"]:
        t_k = level["stress"][0]
        af = np.exp(ea / K_B * (1 / 328.15 - 1 / t_k))
        assert level["acceleration_factor"]["median"] == pytest.approx(np.median(af), rel=1e-9)


def test_decision_carries_its_monte_carlo_error(simulated_fit):
    from qualbayes.inference.mcse import decide_within_error

    result, _, _, mission = simulated_fit
    r = result.result
    assert 0.02 < r["prob_meets_target"] < 0.98  # the mission is chosen near the target
    assert 0 < r["prob_meets_target_mc_error"] < 0.05
    verdict = decide_within_error(r["prob_meets_target"], r["prob_meets_target_mc_error"], 0.9)
    assert r["decision"] == {"accept": "meets", "reject": "does-not-meet",
                             "undecided": "undecided", "too-close": "too-close-to-call"}[verdict]
    rel = ls.reliability(mission, *[np.asarray(v) for v in result.use_life_draws()], "weibull")
    assert r["prob_meets_target"] == pytest.approx(float(np.mean(rel >= 0.9)), abs=1e-12)


def test_extrapolation_is_flagged_far_from_the_tested_range(simulated_fit):
    from qualbayes.accelerated_analysis import extrapolation

    _, _, temps, _ = simulated_fit
    near = extrapolation(temps[:, None], [ls.StressTerm("T", "arrhenius", 368.15)])
    assert near["notes"] == [] and not near["terms"][0]["outside"]
    far = extrapolation(temps[:, None], [ls.StressTerm("T", "arrhenius", 298.15)])
    assert far["terms"][0]["spans_beyond"] > 1
    assert "EXTRAPOLATION CAUTION" in far["notes"][0]


def test_common_shape_check_flags_different_shapes():
    """Shapes 1 and 5 at two levels (40 failures each): the check must say they differ."""
    from qualbayes.accelerated_check import common_shape_check
    from qualbayes.inference.run import SamplerSettings

    rng = np.random.default_rng(8)
    t = np.concatenate([1000 * rng.weibull(1.0, 40), 300 * rng.weibull(5.0, 40)])
    kind = np.full(80, "failure")
    levels = np.array([[358.15], [398.15]])
    level_of = np.repeat([0, 1], 40)
    out = common_shape_check(kind, t, t, level_of, levels, "weibull", ls.StressPrior(),
                             SamplerSettings(num_samples=500, num_warmup=500), 0.9)
    assert out["done"] and any(p["differ"] for p in out["pairs"])
    assert "COMMON-SHAPE CAUTION" in out["notes"][0]


# ----------------------------------------------------------------------------- refusals

def test_refuses_no_failures_and_an_unidentified_slope():
    from qualbayes.accelerated_analysis import check_identified

    temps = np.repeat([358.15, 398.15], 5)
    term = [ls.StressTerm("T", "arrhenius", 330.0)]
    table = table_from(np.array(["suspension"] * 10), np.full(10, 100.0), np.full(10, np.inf),
                       temps, ["K"])
    with pytest.raises(InputError, match="no failures"):
        check_identified(table, term, table.life.frame["kind"].to_numpy())
    kind = np.array(["failure"] * 5 + ["suspension"] * 5)
    with pytest.raises(OptionError, match="activation-energy"):
        check_identified(table, term, kind)
    stated = [ls.StressTerm("T", "arrhenius", 330.0, prior=(0.7, 0.2), prior_range=(0.3, 1.1))]
    check_identified(table, stated, kind)  # a stated range makes it answerable


def test_temperature_units_are_never_guessed():
    assert header_temperature_unit("Chamber Temp (C)") == "C"
    assert header_temperature_unit("Temperature [K]") == "K"
    assert header_temperature_unit("Temp degC") == "C"
    assert header_temperature_unit("Temperature") is None
    assert parse_use_temperature("40C") == pytest.approx(313.15)
    assert parse_use_temperature("313.15 K") == pytest.approx(313.15)
    with pytest.raises(OptionError, match="C or kelvin"):
        parse_use_temperature("40")


# ----------------------------------------------------------------------------- command line

def motor_csv(path, header="Temp (C)"):
    rows = [[f"M{i + 1}", temp, t, "F" if f else "S"]
            for i, (temp, t, f) in enumerate(zip(MOTOR_TEMP, MOTOR_TIME, MOTOR_FAILED,
                                                  strict=True))]
    return write_csv(path, ["Unit", header, "Hours", "Status"], rows)


def test_cli_bad_input_names_row_and_column(tmp_path, capsys):
    from qualbayes.cli import main

    f = tmp_path / "bad.csv"
    write_csv(f, ["Unit", "Temp (C)", "Hours", "Status"],
              [["A", 150, 100, "F"], ["B", "", 200, "F"], ["C", 170, 50, "F"]])
    argv = ["at-use", str(f), "--stress-column", "Temp (C)", "--relation", "arrhenius",
            "--use", "40C", "--mission", "100", "--target", "0.9", "--out",
            str(tmp_path / "o")]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "row 3" in err and "Temp (C)" in err and "stress is empty" in err
    assert not (tmp_path / "o").exists()
    g = motor_csv(tmp_path / "nounit.csv", header="Temperature")
    assert main(["at-use", str(g), "--stress-column", "Temperature", "--relation",
                 "arrhenius", "--use", "40C", "--mission", "100", "--target", "0.9"]) == 2
    assert "--temperature-unit" in capsys.readouterr().err
    assert main(["at-use", str(g), "--stress-column", "Temperature", "--relation",
                 "arrhenius", "--use", "40", "--mission", "100", "--target", "0.9"]) == 2
    assert "40C or 313.15K" in capsys.readouterr().err
    assert main(["at-use", str(g), "--stress-column", "Oven", "--relation", "arrhenius",
                 "--use", "40C", "--mission", "100", "--target", "0.9"]) == 2
    assert "no column headed 'Oven'" in capsys.readouterr().err


def test_close_call_is_not_decided_by_the_seed():
    """Draws whose P(R >= target) sits within 3 MCSE of C give 'too-close-to-call'; far
    from C the same rule decides."""
    from qualbayes.accelerated_analysis import decide_at_use

    rng = np.random.default_rng(3)
    kind = np.array(["failure"] * 4)
    design = ls.build_design(kind, np.ones(4), np.ones(4), np.arange(4.0)[:, None])
    s_use = design.ref[None, :]  # the use point at the mean stress: mu_use = gamma0

    def theta_with(p_good):
        # R(1) >= 0.5 exactly when gamma0 >= log(1 / ln 2) * sigma with sigma = 1
        good = rng.random((4, 1000)) < p_good
        g0 = np.where(good, 2.0, -2.0)
        return np.stack([np.zeros_like(g0), g0, np.zeros_like(g0)], axis=-1)

    close = decide_at_use(theta_with(0.9), design, s_use, 1.0, 0.5, 0.9, "weibull", True)
    assert abs(close["prob_meets_target"] - 0.9) < 3 * close["prob_meets_target_mc_error"]
    assert close["decision"] == "too-close-to-call" and close["close"]
    far = decide_at_use(theta_with(0.99), design, s_use, 1.0, 0.5, 0.9, "weibull", True)
    assert far["decision"] == "meets"
    gate_failed = decide_at_use(theta_with(0.99), design, s_use, 1.0, 0.5, 0.9, "weibull",
                                False)
    assert gate_failed["decision"] == "not-converged"


def test_two_stresses_acceleration_factor():
    """Temperature (Arrhenius) and voltage (inverse power) together: AF of each tested level
    is exp(Ea/k (1/T_use - 1/T) + n ln(V/V_use)) draw by draw."""
    from qualbayes.accelerated_analysis import assess_at_use

    rng = np.random.default_rng(21)
    temps = np.repeat([358.15, 398.15], 60)
    volts = np.tile(np.repeat([12.0, 24.0], 30), 2)
    eta = 3000.0 * np.exp(0.6 / K_B * (1 / temps - 1 / 378.15)) * (volts / 12.0) ** -2.0
    t = eta * rng.weibull(2.0, size=temps.size)
    kind = np.where(t < 2500.0, "failure", "suspension")
    table = table_from(kind, np.minimum(t, 2500.0), np.where(t < 2500, t, np.inf),
                       np.column_stack([temps, volts]), ["K", None])
    terms = [ls.StressTerm("s0", "arrhenius", 323.15), ls.StressTerm("s1", "inverse-power", 5.0)]
    res = assess_at_use(table, terms, mission=1000.0, target=0.9, check_shape=False)
    assert res.converged
    coef = ls.natural(res.theta, res.design)["coef"].reshape(-1, 2)
    for level in res.result["levels"]:
        t_k, v = level["stress"]
        af = np.exp(coef[:, 0] / K_B * (1 / 323.15 - 1 / t_k) + coef[:, 1] * np.log(v / 5.0))
        assert level["acceleration_factor"]["median"] == pytest.approx(np.median(af), rel=1e-9)
    n = coef[:, 1]
    assert abs(np.median(n) - 2.0) < 3 * n.std()  # the true exponent, within 3 sd
