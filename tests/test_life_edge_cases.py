"""Numerical edge cases of the Weibull life path: times spanning 1e-3 to 1e7, every unit
suspended (at times spread over ten decades), heavy ties, and every failure at one instant.
Each gives a finite answer checked against scipy or a one-dimensional quadrature, or the
convergence gate fails and says why. (Zero failures at one common time, the ball bearings
and ordinary censored samples are in tests/test_life_model.py and test_life_sampler.py.)
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats

from qualbayes.cli import main
from qualbayes.data.life import read_life
from qualbayes.inference.gate import diagnose
from qualbayes.life_question import assess_life
from qualbayes.models.weibull import FLAT, group_stats, make_prior, reported_mode


def life_csv(path, rows):
    path.write_text("Unit,Time,Status\n" + "".join(f"U{i},{t!r},{s}\n"
                                                   for i, (t, s) in enumerate(rows)))
    return path


def scipy_loglik(c, scale, tf, ts):
    d = stats.weibull_min(c, scale=scale)
    return float(np.sum(d.logpdf(tf)) + np.sum(d.logsf(ts)))


@pytest.mark.parametrize("tf,ts", [
    # ten decades: failures log-spaced from 1e-3 to 1e7, five units still running at 1e7
    (np.geomspace(1e-3, 1e7, 25), np.full(5, 1e7)),
    # ties: Weibull(2, 1000) lives logged to the nearest 100 h, suspensions all at 1500 h
    (np.round(1000 * np.random.default_rng(5).weibull(2.0, 60) / 100) * 100, np.full(20, 1500.)),
])
def test_mode_with_flat_priors_is_scipys_censored_mle(tf, ts):
    tf = tf[(tf > 0) & (tf <= (ts.max() if ts.size else np.inf))]
    st = group_stats(tf, ts)
    shape, scale = reported_mode(st, FLAT)
    c, _, sc = stats.weibull_min.fit(stats.CensoredData(uncensored=tf, right=ts), floc=0)
    # scipy (reference library) ends a Nelder-Mead search with xtol 1e-4: our maximum is at
    # least as high and agrees to that search's precision
    assert scipy_loglik(shape, scale, tf, ts) >= scipy_loglik(c, sc, tf, ts) - 1e-9
    assert shape == pytest.approx(c, rel=1e-3) and scale == pytest.approx(sc, rel=1e-3)


def test_ten_decades_through_the_command(tmp_path, capsys):
    rows = [(float(t), "F") for t in np.geomspace(1e-3, 1e7, 25)] + [(1e7, "S")] * 5
    p = life_csv(tmp_path / "decades.csv", rows)
    assert main(["life", str(p), "--mission", "1000", "--target", "0.5", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    g = doc["groups"][0]
    assert g["diagnostics"]["passed"], g["diagnostics"]["reasons"]
    for key in ("shape", "scale", "b10", "mean_life"):
        assert all(math.isfinite(v) and v > 0 for v in [g[key]["median"], *g[key]["interval"]])
    # the data say a shape far below 1 (early failures); the MLE is 0.14
    assert g["shape"]["interval"][1] < 0.3
    assert 0 < g["reliability_at_mission"]["median"] < 1


def test_every_unit_suspended_at_times_spread_over_ten_decades(tmp_path):
    """No failure at all, units removed from 1e-3 to 1e7 h. With the default prior on the
    scale (uniform on lambda = H(t_ref)) the cumulative hazard integrates out in closed form:
    given beta, lambda | data ~ Exponential(S(beta)), S(beta) = sum (t_i/t_ref)^beta, so
    p(beta | data) is proportional to p(beta) / S(beta) and
    P(R(m) >= r | beta) = 1 - r^(sum (t_i/m)^beta). A one-dimensional quadrature over the
    shape prior gives the exact P(R(m) >= r | data) for the sampler to reproduce."""
    times = np.geomspace(1e-3, 1e7, 30)
    table = read_life(life_csv(tmp_path / "susp.csv", [(float(t), "S") for t in times]))
    prior = make_prior("0.5,2", None, None)
    mission, target = 1e6, 0.9
    res = assess_life(table, mission, target, confidence=0.9, prior=prior, seed=4)
    g = res.groups[0]
    assert g["diagnostics"]["passed"], g["diagnostics"]["reasons"]
    m, sd = prior.shape
    nodes, weights = np.polynomial.hermite_e.hermegauss(160)
    b = m + sd * nodes
    beta = np.exp(b)
    log_tref = math.log(times.max())
    s = np.array([np.sum(np.exp(bt * (np.log(times) - log_tref))) for bt in beta])
    post = weights / s
    post /= post.sum()
    with np.errstate(over="ignore"):  # H = inf far out in the shape: target**inf = 0, exact
        expo = np.array([np.sum(np.exp(bt * (np.log(times) - math.log(mission))))
                         for bt in beta])
    exact = float(np.sum(post * (1 - target**expo)))
    ess = g["diagnostics"]["min_ess_bulk"]
    assert 0.05 < exact < 0.95  # a question the shape matters to
    assert abs(g["prob_meets_target"] - exact) <= 4 * math.sqrt(exact * (1 - exact) / ess)
    # the shape's posterior is no longer its prior (the spread-out removal times inform it)
    mean_b = float(np.sum(post * b))
    sd_b = float(np.sqrt(np.sum(post * (b - mean_b) ** 2)))
    assert abs(mean_b - m) > 0.1 * sd
    draws_b = np.log(res.draws["(all units)"]["shape"])
    assert abs(draws_b.mean() - mean_b) <= 4 * sd_b / math.sqrt(ess)
    from qualbayes.evidence.life_words import group_notes

    assert any("zero failures" in n for n in group_notes(g, res))


@pytest.mark.filterwarnings("error::RuntimeWarning")  # no numpy overflow noise either
def test_every_failure_at_one_instant_is_judged_on_the_parameters(tmp_path):
    # 20 units all failed at exactly 100 h: the likelihood grows without bound in the
    # shape, the posterior sits where the prior stops it (shape ~ e^20) and R(50 h) is 1.0
    # in every draw. R(mission) is derived and saturated: the gate judges the parameters
    # (log shape, log scale), which converge, so the answer is given (issue 12, item 4:
    # a saturated derived quantity must not turn a clear verdict into "not-converged").
    table = read_life(life_csv(tmp_path / "same.csv", [(100.0, "F")] * 20))
    res = assess_life(table, 50.0, 0.9, confidence=0.9, seed=2)
    g = res.groups[0]
    names = {p["name"].split("[")[0] for p in g["diagnostics"]["parameters"]}
    assert names == {"log_shape", "log_scale"}
    assert g["diagnostics"]["passed"], g["diagnostics"]["reasons"]
    assert g["decision"] == "meets" and g["prob_meets_target"] == 1.0


def test_gate_names_draws_that_never_vary():
    rng = np.random.default_rng(0)
    gate = diagnose({"a": rng.normal(size=(4, 500)), "b": np.ones((4, 500))}, 0)
    assert not gate.passed
    assert gate.reasons() == ["R-hat and ESS of b cannot be computed: it is constant (every "
                              "draw of every chain is the same, so the sampler did not move); "
                              "convergence is not shown"]
    assert math.isnan(gate.max_rhat)  # arviz gives R-hat NaN for constant draws
    assert "nan" in gate.summary()
