"""Lot decisions an auditor can defend (issue 11): the lot basis, zero-defect lots, Monte
Carlo error of every sampled probability, the history hyperprior and the model checks.

External check values (docs/references.md, section "Lot decisions"): scipy.stats.betabinom
and scipy.stats.beta as reference libraries; the complete-pooling closed form
P(p <= s) = 1 - (1 - s)^(kn + 1) for k clean lots of n under the uniform prior.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from helpers import write_csv
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from qualbayes.cli import main
from qualbayes.data.lot_table import LotTable
from qualbayes.lot_decisions import LOT, PROCESS, could_settle, decide
from qualbayes.lot_question import MAX_EXTRA_RUNS, assess_lots
from qualbayes.models import lot_history_grid as grid
from qualbayes.models.lot_prior import JEFFREYS, UNIFORM
from qualbayes.models.lot_spread import HistoryPrior, spread_floor


def _table(rows):
    """rows: (lot, part, n, x, N or None[, supplier])"""
    frame = pd.DataFrame([(r[0], r[1], r[5] if len(r) > 5 else None, None, r[4], r[2], r[3],
                           i + 2) for i, r in enumerate(rows)],
                         columns=["lot", "part", "supplier", "date", "lot_size", "inspected",
                                  "defectives", "row"])
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    return LotTable(frame, "t.csv", None, 1, {}, [])


# ------------------------------------------------------------------ lot basis (closed form)

def test_fully_inspected_lots_are_decided_exactly():
    rows = [("A", "P", 200, 0, 200), ("B", "P", 200, 2, 200), ("C", "P", 200, 3, 200)]
    res = assess_lots(_table(rows), 0.01, 0.95, UNIFORM).lots.set_index("lot")
    # 0 and 2 of 200 are within 1%; 3 of 200 is not: certainty either way
    assert res.loc["A", "prob_within_spec"] == 1.0 and res.loc["A", "decision"] == "accept"
    assert res.loc["B", "prob_within_spec"] == 1.0 and res.loc["B", "decision"] == "accept"
    assert res.loc["C", "prob_within_spec"] == 0.0 and res.loc["C", "decision"] == "reject"
    assert (res["decision_basis"] == LOT).all()


@pytest.mark.parametrize("n,x,big_n,spec", [(80, 0, 800, 0.01), (125, 1, 2000, 0.01),
                                            (50, 2, 5000, 0.02), (315, 0, 10_000, 0.001)])
def test_finite_lot_probability_against_scipy_betabinom(n, x, big_n, spec):
    res = assess_lots(_table([("L", "P", n, x, big_n)]), spec, 0.95, JEFFREYS).lots.iloc[0]
    k_star = int(np.floor(spec * big_n)) - x
    # reference: scipy.stats.betabinom (docs/references.md), posterior Beta(a + x, b + n - x)
    ref = stats.betabinom(big_n - n, 0.5 + x, 0.5 + n - x).cdf(k_star)
    assert res["prob_within_spec"] == pytest.approx(ref, rel=1e-10, abs=1e-14)
    proc = assess_lots(_table([("L", "P", n, x, big_n)]), spec, 0.95, JEFFREYS,
                       decision_basis=PROCESS).lots.iloc[0]
    assert proc["decision_basis"] == PROCESS
    assert proc["prob_within_spec"] == pytest.approx(
        stats.beta(0.5 + x, 0.5 + n - x).cdf(spec), rel=1e-10)


def test_issue_examples_zero_defect_lots_are_never_rejected():
    # issue 11 item 3: 1 clean unit of 1 at spec 1%, and 13 of 13 clean at 2500 ppm, C = 0.9
    for n, spec, c in ((1, 0.01, 0.95), (13, 0.0025, 0.9)):
        r = assess_lots(_table([("L", "P", n, 0, None)]), spec, c, UNIFORM).lots.iloc[0]
        assert r["decision"] == "undecided"
        # uniform prior: accept after m clean units where 1 - (1 - s)^(n + m + 1) >= C
        m = int(np.ceil(np.log(1 - c) / np.log(1 - spec) - 1)) - n
        assert r["extra_clean_units_to_accept"] == m


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 5000), spec=st.floats(1e-5, 0.5), c=st.floats(0.5, 0.999),
       big=st.one_of(st.none(), st.integers(0, 10_000)))
def test_zero_defects_never_reject_any_prior_or_basis(n, spec, c, big):
    size = None if big is None else n + big
    for prior in (UNIFORM, JEFFREYS):
        r = assess_lots(_table([("L", "P", n, 0, size)]), spec, c, prior).lots.iloc[0]
        assert r["decision"] != "reject"


def test_decide_rule_within_monte_carlo_error():
    dec, close = decide([0.951, 0.9505, 0.02, 0.02, 0.5], [0.0002] * 5, [0, 0, 3, 0, 1], 0.95)
    assert list(dec) == ["accept", "undecided", "reject", "undecided", "undecided"]
    assert list(close) == [False, True, False, False, False]


# ------------------------------------------------------------------ history hyperprior

def test_spread_prior_is_a_normalised_truncated_half_normal():
    # reference: scipy.stats.halfnorm (docs/references.md); integrate p(tau | mu) numerically
    prior = HistoryPrior(0.5)
    for mu in (1e-6, 1e-3, 0.3):
        lo = float(spread_floor(mu))
        tau = np.linspace(lo, lo + 8.0, 400_001)
        dens = np.exp(prior.log_tau_density(tau, mu))
        assert np.trapezoid(dens, tau) == pytest.approx(1.0, abs=1e-6)
        ref = stats.halfnorm(scale=0.5)
        assert dens[1000] == pytest.approx(ref.pdf(tau[1000]) / ref.sf(lo), rel=1e-9)


def test_implied_lot_rate_quantiles_against_direct_simulation():
    # independent simulation: tau by rejection from scipy's half-normal, p from scipy's beta
    prior = HistoryPrior(0.5)
    implied = prior.implied_lot_rate(100_000, seed=3)
    rng = np.random.default_rng(11)
    mu = rng.uniform(size=100_000)
    tau = stats.halfnorm(scale=0.5).rvs(size=mu.size, random_state=rng)
    low = tau < spread_floor(mu)
    while low.any():
        tau[low] = stats.halfnorm(scale=0.5).rvs(size=int(low.sum()), random_state=rng)
        low = tau < spread_floor(mu)
    kappa = 1.0 / ((mu * (1 - mu)) * tau**2)
    p = stats.beta(mu * kappa, (1 - mu) * kappa).rvs(random_state=rng)
    for q, key in ((0.05, "5%"), (0.25, "25%"), (0.5, "50%"), (0.75, "75%")):
        # two independent samples of 1e5: quantiles agree to a few sampling errors
        err = np.sqrt(q * (1 - q) / 1e5)
        lo, hi = np.quantile(p, [max(q - 5 * err, 0), q + 5 * err])
        assert lo <= implied["quantiles"][key] <= hi
    for key, thr in (("P(p >= 10%)", 0.1), ("P(p >= 50%)", 0.5)):
        ref = float(np.mean(p >= thr))
        assert implied[key] == pytest.approx(ref, abs=5 * np.sqrt(ref * (1 - ref) / 5e4))
    # plausible for incoming inspection: no U-shaped lots (the old prior had 14% at >= 99%)
    assert implied["P(p >= 99%)"] < 0.03


def test_quadrature_reduces_to_complete_pooling_for_a_tiny_spread():
    # CHECKS (docs/references.md): k clean lots of n, uniform prior, complete pooling:
    # P(p <= s) = 1 - (1 - s)^(kn + 1); 20 x 80 at 100 ppm: 0.148
    assert 1 - (1 - 1e-4) ** 1601 == pytest.approx(0.148, abs=5e-4)
    # with lot rates held within a CV of about 1% (S = 0.01) the history answer is the
    # pooled one, Beta(1 + sum x, 1 + sum(n - x)) (scipy.stats.beta): the lot-to-lot
    # variance is 1e-4 of the rate squared against the posterior's 1/21, so they agree to
    # well under 0.003
    x, n = np.ones(20), np.full(20, 80.0)
    g = grid.posterior_grid(x, n, prior=HistoryPrior(0.01), size=400)
    p = float(grid.prob_within(g, [1], [80], 0.015)[0])
    assert p == pytest.approx(stats.beta(21, 1 + 1580).cdf(0.015), abs=0.003)


def test_issue_measurements_under_the_default_prior():
    # issue 11 item 1, by quadrature: clean lots no longer look far better than all data show
    g = grid.posterior_grid(np.zeros(20), np.full(20, 80.0))
    assert float(grid.prob_within(g, [0], [80], 1e-4)[0]) < 0.25  # pooled 0.148; was 0.965
    g1 = grid.posterior_grid([0.0], [50.0])
    own = 1 - 0.99**51  # uniform prior, own data: 0.401
    assert abs(float(grid.prob_within(g1, [0], [50], 0.01)[0]) - own) < 0.1  # was 0.898
    x, n = [0.0] * 9 + [9.0], [125.0] * 9 + [80.0]
    xs, ns, pv = grid.loo_pvalues(x, n)
    assert pv[xs == 9][0] < grid.OUTLIER_LEVEL and pv[xs == 0][0] > 0.1


# ------------------------------------------------------------------ outlier check (quadrature)

def test_planted_outlier_flagged_and_homogeneous_history_at_nominal_rate():
    from qualbayes.models import lot_oc

    planted = lot_oc.Scenario("p", "19 lots at 0.3% and one at 5%", 0.01,
                              (0.003,) * 19 + (0.05,), (200,) * 20)
    r = lot_oc.run(planted, 40, 5, {"history": HistoryPrior()})
    flagged = r["history"]["flagged"]
    # flagged in at least 95% of histories; with 40 histories a true rate of 0.95 shows
    # fewer than 36 flags with probability 0.14, so 36 is the bar (binomial)
    assert flagged[:, -1].sum() >= 36
    homog = lot_oc.Scenario("h", "20 lots at 0.5%", 0.01, (0.005,) * 20, (200,) * 20)
    r = lot_oc.run(homog, 40, 6, {"history": HistoryPrior()})
    rate = r["history"]["flagged"].mean()
    # nominal 5% per lot; 800 lot-checks: 5% + 3 binomial standard errors
    assert rate <= grid.OUTLIER_LEVEL + 3 * np.sqrt(0.05 * 0.95 / 800)


def test_prior_conflict_flagged_for_a_stated_prior(tmp_path, capsys):
    # issue 11 item 4: 9 defectives in 200 under --believe "p<0.5%@90%"
    src = write_csv(tmp_path / "l.csv", ["Lot", "Part", "Inspected", "Defectives"],
                    [["L1", "P", 200, 9], ["L2", "P", 200, 0]])
    assert main(["lots", str(src), "--spec", "1%", "--believe", "p<0.5%@90%", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    by = {lot["lot"]: lot for lot in doc["lots"]}
    assert by["L1"]["outlier"] is True and by["L1"]["outlier_p"] < 0.05
    assert by["L2"]["outlier"] is False
    assert any("conflict with the stated prior" in n for n in doc["notes"])
    assert by["L1"]["own_data_decision"] == "reject"


def test_options_pool_by_and_spread_are_checked_and_shown(tmp_path, capsys):
    src = write_csv(tmp_path / "l.csv", ["Lot", "Part", "Supplier", "Inspected", "Defectives"],
                    [["L1", "P", "S1", 80, 0], ["L2", "P", "S2", 80, 1]])
    assert main(["lots", str(src), "--spec", "1%", "--pool-by", "part,colour"]) == 2
    assert main(["lots", str(src), "--spec", "1%", "--lot-spread", "0.3"]) == 2
    assert main(["lots", str(src), "--spec", "1%", "--prior", "history", "--lot-spread",
                 "0"]) == 2
    capsys.readouterr()


# ------------------------------------------------------------------ history: NUTS answers

@pytest.fixture(scope="module")
def history_run():
    from qualbayes.inference.run import SamplerSettings

    rows = [(f"G{i}", "G", 125, 0, 2000) for i in range(9)] + [("G9", "G", 80, 9, 800)]
    rows += [(f"K{i}", "K", n, x, None) for i, (n, x) in enumerate(
        [(50, 0), (80, 1), (125, 3), (50, 0), (80, 2), (200, 5), (125, 1), (80, 0)])]
    table = _table(rows)
    return table, assess_lots(table, 0.01, 0.95, "history",
                              settings=SamplerSettings(seed=5))


def test_history_answers_match_quadrature_within_mcse(history_run):
    table, res = history_run
    lots = res.lots
    assert res.converged
    for part in ("G", "K"):
        sub = lots[lots["part"] == part]
        proc = sub[sub["decision_basis"] == PROCESS]
        if proc.empty:
            continue
        g = grid.posterior_grid(sub["defectives"], sub["inspected"], size=300)
        exact = grid.prob_within(g, proc["defectives"], proc["inspected"], 0.01)
        err = proc["prob_within_spec_mcse"].to_numpy()
        assert np.all(np.abs(proc["prob_within_spec"].to_numpy() - exact) <= 4 * err + 2e-4)


def test_history_outlier_named_and_own_data_shown(history_run):
    _, res = history_run
    lots = res.lots.set_index("lot")
    assert bool(lots.loc["G9", "outlier"]) and lots.loc["G9", "outlier_p"] < 0.05
    assert not lots.drop(index="G9")["outlier"].astype(bool).any()
    assert any("G9" in n and "does not look like the others" in n for n in res.notes)
    assert (lots["own_data_decision"].notna()).all()
    # a clean lot of 125 of GS-7-like history: own data (uniform) leave it undecided
    assert lots.loc["G0", "own_data_decision"] == "undecided"
    assert (lots["decision"] != "reject").loc[lots["defectives"] == 0].all()


def test_reported_mcse_agrees_with_spread_over_independent_chains():
    """One NUTS run with 24 identical copies of a history as separate groups: each copy's P
    is an independent estimate of the same number, so sum((P_k - mean)^2) / mean(MCSE^2)
    is about chi-square with 23 degrees of freedom when the MCSE is right. Two-sided test at
    the 0.001 level (a reported MCSE off by a factor of two fails it)."""
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.lot_decisions import probabilities
    from qualbayes.models.lot_history import fit_histories

    x = np.array([0, 1, 2, 1, 0], float)
    n = np.array([80, 125, 80, 200, 50], float)
    copies = 24
    # the command's target acceptance (lot_history_answers.TARGET_ACCEPT): each copy is its
    # own NUTS problem with its own adaptation
    fit = fit_histories([(x, n)] * copies, SamplerSettings(num_warmup=500, num_samples=500,
                                                           seed=9, retry=False,
                                                           target_accept=0.99))
    # 48 parameters of short chains: an R-hat of 1.011 somewhere is chance, not a failure of
    # the chains the MCSE describes
    assert fit.gate.max_rhat < 1.03 and fit.gate.divergences == 0, fit.gate.reasons()
    p, err = np.empty(copies), np.empty(copies)
    for j in range(copies):
        mu, kappa = fit.draws["mu"][:, :, j].ravel(), fit.draws["kappa"][:, :, j].ravel()
        prob, mcse, _ = probabilities(mu * kappa, (1 - mu) * kappa, 4,
                                      [(1.0, 125.0, None, None)], 0.02, PROCESS)
        p[j], err[j] = prob[0], mcse[0]
    stat = float(np.sum((p - p.mean()) ** 2) / np.mean(err**2))
    lo, hi = stats.chi2(copies - 1).ppf([0.0005, 0.9995])
    assert lo <= stat <= hi, (stat, lo, hi)


def _close_call_decisions(seeds) -> set:
    """C set to the exact (quadrature) P of a lot: within 1 MCSE of C by construction, so
    every seed must say 'too close to call', never accept or undecided by chance alone. The
    rounds stop at the cap or where no lot too close could still be settled by the cap
    (``could_settle``); a lot that far from settling is not drawn for (typically no extra
    round here)."""
    rows = [("A", "P", 80, 0, None), ("B", "P", 125, 1, None), ("C", "P", 80, 2, None)]
    exact = [float(grid.prob_within(grid.posterior_grid([0, 1, 2], [80, 125, 80], size=k),
                                    [1], [125], 0.03)[0]) for k in (400, 800)]
    assert abs(exact[0] - exact[1]) < 2e-5  # the quadrature has converged
    c = exact[1]
    decisions = set()
    for seed in seeds:
        res = assess_lots(_table(rows), 0.03, c, "history", seed=seed)
        assert res.converged
        b = res.lots.set_index("lot").loc["B"]
        decisions.add((b["decision"], bool(b["too_close"])))
        assert any("too close to call" in n for n in res.notes)
        lots, first = res.lots, res.sampler["draws_per_chain"]
        chains, per_chain = res.draws["P"]["mu"].shape
        cap = chains * first * (1 + MAX_EXTRA_RUNS)
        assert per_chain * chains == cap or not could_settle(
            lots["prob_within_spec"], lots["prob_within_spec_mcse"], lots["defectives"], c,
            lots["prob_within_spec_draws"].astype(float), cap).any()
    return decisions


def test_close_call_same_decision_two_seeds():
    assert _close_call_decisions([0, 1]) == {("undecided", True)}


@pytest.mark.slow
def test_close_call_gives_the_same_decision_under_five_seeds():
    assert _close_call_decisions(range(5)) == {("undecided", True)}


def test_betabinom_cdf_by_ratios_against_scipy():
    # reference: scipy.stats.betabinom (docs/references.md)
    from qualbayes.lot_decisions import betabinom_cdf

    a = np.array([0.05, 0.5, 3.0, 40.0])
    b = np.array([20.0, 200.0, 900.0, 5000.0])
    for k, r in ((0, 10), (5, 700), (50, 4900), (300, 100_000)):
        assert betabinom_cdf(k, r, a, b) == pytest.approx(stats.betabinom(r, a, b).cdf(k),
                                                          rel=1e-9)


def test_could_settle_only_close_lots_that_the_cap_can_settle():
    # the projection of the MCSE to the cap, mcse sqrt(draws / cap): a lot 2 MCSE from C
    # now is 4 projected MCSE from it at four times the draws (settleable), a lot 1 MCSE
    # from C is 2 (not); a lot 5 MCSE away is not close now; at the cap nothing is
    # settleable; a lot without a defective is never close to the reject side
    c, e = 0.95, 1e-4
    prob = np.array([c + 2 * e, c - 1 * e, c + 5 * e, c - 2 * e, 1 - c + 2 * e, 1 - c + 2 * e])
    x = np.array([1, 1, 1, 1, 1, 0])
    draws = np.full(6, 4000.0)
    got = could_settle(prob, np.full(6, e), x, c, draws, 16000)
    assert got.tolist() == [True, False, False, True, True, False]
    assert not could_settle(prob, np.full(6, e), x, c, np.full(6, 16000.0), 16000).any()
    # a lot close to both thresholds (C near 1/2) needs both sides settled
    both = could_settle([0.5], [0.02], [1], 0.52, [4000], 16000)
    assert both.tolist() == [False]
    assert could_settle([0.5], [0.02], [1], 0.52, [4000], 10**8).tolist() == [True]


def test_stopping_when_the_cap_could_settle_nothing_only_removes_verdicts(monkeypatch):
    """The same data and seed with the chains continued whenever any lot is close (the rule
    before 5 December 2026): every lot that the shipped rule decides gets the same decision,
    P and MCSE there (a settled P is final), and the shipped rule stops earlier. C at lot
    B's exact (quadrature) P, so B is too close and the cap cannot settle it."""
    from qualbayes import lot_history_answers

    rows = [("A", "P", 80, 0, None), ("B", "P", 125, 1, None), ("C", "P", 80, 2, None),
            ("D", "P", 200, 1, None), ("E", "P", 125, 0, None)]
    c = float(grid.prob_within(grid.posterior_grid([0, 1, 2, 1, 0], [80, 125, 80, 200, 125],
                                                   size=800), [1], [125], 0.03)[0])
    shipped = assess_lots(_table(rows), 0.03, c, "history", seed=2).lots.set_index("lot")
    monkeypatch.setattr(lot_history_answers, "_settleable",
                        lambda ans, *_: bool(np.any(ans.get("too_close", []))))
    to_cap = assess_lots(_table(rows), 0.03, c, "history", seed=2).lots.set_index("lot")
    assert shipped.loc["B", "too_close"] and to_cap.loc["B", "too_close"]
    assert shipped["prob_within_spec_draws"].max() < to_cap["prob_within_spec_draws"].max()
    cols = ["decision", "prob_within_spec", "prob_within_spec_mcse", "prob_within_spec_draws"]
    decided = ~shipped["too_close"].astype(bool)
    assert decided.sum() >= 3
    assert shipped.loc[decided, cols].equals(to_cap.loc[decided, cols])
