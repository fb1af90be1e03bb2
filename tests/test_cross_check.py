"""Quadrature of the two-parameter posteriors and the cross-check of NUTS answers.

The Weibull grid (qualbayes.models.weibull_grid) is checked against scipy.integrate.dblquad
of the same density (an independent adaptive integrator) and, with flat priors and many
units, against the censored maximum-likelihood fit of scipy.stats.weibull_min (the posterior
concentrates at the MLE: Bernstein-von Mises). The cross-check must agree on ordinary data
and must fail the gate, with its reason, when the NUTS draws are deliberately corrupted.
Tolerances: the grid's own stated error (tested here), 4 MCSE for draws.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from qualbayes import cross_check
from qualbayes.data.life import read_life
from qualbayes.models import weibull_grid as wg
from qualbayes.models.weibull import FLAT, LifePrior, group_stats, log_posterior, posterior_mode


def _dblquad_prob(st, prior, t, r):
    """P(R(t) >= r) and E[R(t)] by dblquad over (b, u) (b = log shape, u = log H(t_ref))."""
    m = posterior_mode(st, prior)
    lp0 = float(log_posterior(m.b, m.u, st, prior))
    sb, su = math.sqrt(m.cov[0, 0]), math.sqrt(m.cov[1, 1])
    k = math.log(t) - st.log_tref

    def dens(u, b):
        return math.exp(float(log_posterior(b, u, st, prior)) - lp0)

    def rel(u, b):
        return math.exp(-math.exp(math.exp(b) * k + u)) * dens(u, b)

    b_lo, b_hi = m.b - 12 * sb, m.b + 12 * sb
    u_lo, u_hi = (lambda b: m.u - 30 * su), (lambda b: m.u + 30 * su)
    opts = {"epsabs": 1e-12, "epsrel": 1e-9}
    den = integrate.dblquad(dens, b_lo, b_hi, u_lo, u_hi, **opts)[0]
    below = integrate.dblquad(dens, b_lo, b_hi, u_lo,
                              lambda b: math.log(-math.log(r)) - math.exp(b) * k, **opts)[0]
    mean = integrate.dblquad(rel, b_lo, b_hi, u_lo, u_hi, **opts)[0]
    return below / den, mean / den


CASES = [
    # (failures, suspensions, interval (a, b) pairs, left-censored, prior, t, r)
    ([120.0, 340.0, 510.0, 800.0], [900.0, 900.0], [], [], LifePrior(), 200.0, 0.9),
    ([55.0, 140.0], [300.0] * 6, [(100.0, 200.0), (150.0, 400.0)], [80.0],
     LifePrior(shape=(math.log(2.0), 0.4), shape_given=True), 100.0, 0.8),
]


@pytest.mark.parametrize("case", CASES)
def test_weibull_grid_matches_dblquad_within_its_stated_error(case):
    fail, susp, intervals, left, prior, t, r = case
    st = group_stats(fail, susp, [a for a, _ in intervals], [b for _, b in intervals], left)
    g = wg.posterior_grid(st, prior)
    p, p_err = g.prob_reliability_at_least(t, r)
    m, m_err = g.mean_reliability(t)
    p_ref, m_ref = _dblquad_prob(st, prior, t, r)
    assert abs(p - p_ref) <= p_err and p_err < 2e-3
    assert abs(m - m_ref) <= m_err + 1e-9 and m_err < 1e-3
    # the lower bound of R is the quantile where P(R <= x) = 1 - C (round trip)
    lb = g.reliability_lower_bound(t, 0.9)
    assert abs(g.reliability_cdf(t, lb) - 0.1) < 1e-6


def test_weibull_grid_flat_prior_many_units_at_the_censored_mle():
    """scipy.stats.weibull_min.fit on CensoredData (type-I censoring at 1,500 h, simulated
    from shape 2, scale 1,000; invented data): the posterior median of B10 under flat priors
    lies within 0.25 posterior sd of the MLE's B10 (Bernstein-von Mises, n = 400)."""
    rng = np.random.default_rng(7)
    t = 1000.0 * rng.weibull(2.0, size=400)
    fail, susp = t[t < 1500.0], np.full(int((t >= 1500.0).sum()), 1500.0)
    data = stats.CensoredData(uncensored=fail, right=susp)
    shape, _, scale = stats.weibull_min.fit(data, floc=0)
    b10_mle = scale * (-math.log(0.9)) ** (1.0 / shape)
    g = wg.posterior_grid(group_stats(fail, susp), FLAT)
    lo, med, hi = (g.blife_quantile(0.1, q) for q in (0.1587, 0.5, 0.8413))
    sd = 0.5 * (math.log(hi) - math.log(lo))
    assert abs(math.log(med) - math.log(b10_mle)) <= 0.25 * sd


def test_tolerance_floor_for_indicators_whose_draws_are_all_equal():
    """All 4,000 draws meet the target (MCSE 0) while quadrature gives 0.99995: agreed."""
    c = cross_check._compare(["P"], [1.0], [0.0], [0.99995], [1e-7], 4000, "grid")
    assert c["agreed"] and c["tolerance"] > 5e-5
    c = cross_check._compare(["P"], [0.95], [0.002], [0.93], [1e-6], 4000, "grid")
    assert not c["agreed"]


# ------------------------------------------------------------------ lots, end to end

def _lot_table():
    from qualbayes.data.lot_table import LotTable

    rng = np.random.default_rng(4)
    n = rng.choice([80, 125, 200], size=30)
    x = rng.binomial(n, rng.beta(2.0, 300.0, size=30))
    frame = pd.DataFrame({"lot": [f"L{i}" for i in range(30)], "part": "P-7", "supplier": None,
                          "date": None,
                          "lot_size": pd.array([None, 2000] * 15, dtype="Int64"),
                          "inspected": n, "defectives": x, "row": np.arange(30) + 2})
    return LotTable(frame, "sim.csv", None, 1, {}, [])


def test_lots_cross_check_agrees_and_a_shifted_fit_fails_the_gate(monkeypatch):
    from qualbayes.lot_question import assess_lots
    from qualbayes.models import lot_history

    res = assess_lots(_lot_table(), spec=0.01, confidence=0.9, prior="history", seed=3)
    c = res.diagnostics["P-7"]["cross_check"]
    assert c["agreed"] and c["quantities"] >= 2, c
    # the outlier p-values, computed on a thread while the sampler ran, are each lot's own
    # (lot order kept): those of the quadrature call on the group's lots
    from qualbayes.models.lot_history_grid import loo_pvalues
    from qualbayes.models.lot_spread import HistoryPrior

    table = _lot_table().frame
    xs, ns, pv = loo_pvalues(table["defectives"].to_numpy(float),
                             table["inspected"].to_numpy(float), prior=HistoryPrior())
    by_term = {(a, b): v for a, b, v in zip(xs, ns, pv, strict=True)}
    expected = [by_term[(float(a), float(b))] for a, b in
                zip(table["defectives"], table["inspected"], strict=True)]
    got = res.lots.set_index("lot").loc[table["lot"], "outlier_p"].to_numpy(float)
    np.testing.assert_array_equal(got, expected)
    assert any("cross-check" in n for n in res.notes)
    # the spread-sensitivity engine (quadrature, every lot on its own basis, half of them
    # finite lots) reproduces the NUTS answers at the stated spread within 4 MCSE + the
    # grid's error (160 against 100 points per axis)
    from qualbayes.history_sensitivity import group_probabilities
    from qualbayes.models.lot_spread import HistoryPrior

    lots = res.lots
    assert set(lots["decision_basis"]) == {"lot", "process"}
    q = group_probabilities(lots, 0.01, HistoryPrior())
    q_err = np.abs(q - group_probabilities(lots, 0.01, HistoryPrior(), size=100))
    p, mc = lots["prob_within_spec"].to_numpy(float), lots["prob_within_spec_mcse"].to_numpy(float)
    assert np.all(np.abs(p - q) <= 4 * mc + q_err + 1e-9), (p, q)

    real, real_more = lot_history.fit_histories, lot_history.more_draws

    def shifted(*args, **kwargs):  # the draws of mu moved up by a factor 1.5
        fit = real(*args, **kwargs)
        fit.draws["mu"] = fit.draws["mu"] * 1.5
        return fit

    def shifted_more(*args, **kwargs):  # close calls continue the sampler's own chains,
        fit = real_more(*args, **kwargs)  # so the continued draws are shifted too
        fit.draws["mu"] = fit.draws["mu"] * 1.5
        return fit

    monkeypatch.setattr(lot_history, "fit_histories", shifted)
    monkeypatch.setattr(lot_history, "more_draws", shifted_more)
    bad = assess_lots(_lot_table(), spec=0.01, confidence=0.9, prior="history", seed=3)
    d = bad.diagnostics["P-7"]
    assert not d["passed"] and not d["cross_check"]["agreed"]
    assert any("disagrees with quadrature" in r for r in d["reasons"])
    assert set(bad.lots["decision"]) == {"not-converged"}


def test_a_failed_fit_does_not_wait_for_the_work_beside_it(monkeypatch):
    """When the fit ends in an error (or an interrupt), the outlier and quadrature work
    running beside it stops at its next group instead of finishing all of them, and the
    error reaches the caller."""
    import threading

    from qualbayes.data.lot_table import LotTable
    from qualbayes.lot_question import assess_lots
    from qualbayes.models import lot_history, lot_history_grid

    rng = np.random.default_rng(5)
    k = 40 * 5  # 40 parts of 5 lots
    n = rng.choice([80, 125, 200], size=k)
    frame = pd.DataFrame({"lot": [f"L{i}" for i in range(k)],
                          "part": [f"P-{i // 5}" for i in range(k)], "supplier": None,
                          "date": None, "lot_size": pd.array([None] * k, dtype="Int64"),
                          "inspected": n, "defectives": rng.binomial(n, 0.01),
                          "row": np.arange(k) + 2})
    started, calls, real = threading.Event(), [], lot_history_grid.loo_pvalues

    def slow(*args, **kwargs):  # a group's outlier check, made slow
        calls.append(1)
        started.set()
        threading.Event().wait(0.05)
        return real(*args, **kwargs)

    def failing(*args, **kwargs):
        started.wait(10)  # the work beside the fit has begun
        raise RuntimeError("the sampler failed")

    monkeypatch.setattr(lot_history_grid, "loo_pvalues", slow)
    monkeypatch.setattr(lot_history, "fit_histories", failing)
    with pytest.raises(RuntimeError, match="the sampler failed"):
        assess_lots(LotTable(frame, "sim.csv", None, 1, {}, []), spec=0.01, confidence=0.9,
                    prior="history", seed=3)
    assert 1 <= len(calls) <= 5  # stopped at its next group, not after all 40


def test_lot_quadrature_is_the_same_whatever_the_chunk_and_serves_the_check():
    """The quadrature side of the lots cross-check (computed before the draws exist) gives
    the same numbers bit for bit whatever the number of groups per chunk, and a check
    given it equals one that computes its own."""
    from qualbayes.models.lot_spread import HistoryPrior

    rng = np.random.default_rng(21)
    data = []
    for _ in range(5):
        n = rng.choice([50.0, 125.0, 315.0], size=12)
        data.append((rng.binomial(n.astype(int), 0.01).astype(float), n))
    one = cross_check.lot_quadrature(data, 0.01, HistoryPrior(), chunk=2)
    every = cross_check.lot_quadrature(data, 0.01, HistoryPrior())
    for a, b in zip(one, every, strict=True):
        for u, v in zip(a, b, strict=True):
            np.testing.assert_array_equal(u, v)
    mu = rng.beta(2, 150, size=(4, 200))
    kappa = np.exp(rng.normal(np.log(300), 0.3, size=(4, 200)))
    x, n = data[3]
    given = cross_check.lot_group(mu, kappa, x, n, 0.01, HistoryPrior(), quadrature=every[3])
    own = cross_check.lot_group(mu, kappa, x, n, 0.01, HistoryPrior())
    assert given == own


# ------------------------------------------------------------------ life, end to end

def _life_table(path):
    rng = np.random.default_rng(12)
    rows = []
    for g, (shape, scale) in {"A": (1.8, 900.0), "B": (2.5, 1400.0)}.items():
        t = scale * rng.weibull(shape, size=25)
        rows += [{"unit": f"{g}{i}", "group": g, "hours": min(v, 1200.0),
                  "status": "F" if v < 1200.0 else "S"} for i, v in enumerate(t)]
    pd.DataFrame(rows).to_csv(path, index=False)
    return read_life(path)


def test_life_cross_check_agrees_and_shifted_draws_fail_the_gate(tmp_path, monkeypatch):
    from qualbayes.life_question import assess_life
    from qualbayes.models import life

    res = assess_life(_life_table(tmp_path / "l.csv"), 300.0, 0.9, 0.9)
    for g in res.groups:
        assert g["diagnostics"]["cross_check"]["agreed"], g["diagnostics"]["cross_check"]
    real = life.fit_life

    def shifted(*args, **kwargs):  # log scale moved by +0.3 (35% longer lives)
        fit = real(*args, **kwargs)
        fit.draws["log_scale"] = fit.draws["log_scale"] + 0.3
        return fit

    monkeypatch.setattr(life, "fit_life", shifted)
    bad = assess_life(_life_table(tmp_path / "l.csv"), 300.0, 0.9, 0.9)
    for g in bad.groups:
        assert g["decision"] == "not-converged"
        assert any("disagrees with quadrature" in r for r in g["diagnostics"]["reasons"])
