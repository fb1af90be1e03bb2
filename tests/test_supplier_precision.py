"""Close calls of the supplier scorecard are re-sampled before they are labelled.

A call whose probability lies within 3 MCSE of the confidence level C gets further draws (the
adapted chains continued by as many draws again, the gate judged again on all of them), up to
``scorecard.MAX_EXTRA_RUNS``; a call still that close is "too close to call at this Monte
Carlo precision", never a verdict that could change with the seed (docs/suppliers.md).

The close case is engineered: the limit is set to the supplier's own one-sided upper bound at
C from a first fit with the same seed, so P(rate > limit) = 1 - C in those draws, which no
further draws can move by more than a few MCSE (their own P is 1 - C up to Monte Carlo
error: a combined P that left the 3-MCSE band would need a deviation of several MCSE).
"""

from dataclasses import replace

import numpy as np
from supplier_sim import simulate

from qualbayes import scorecard
from qualbayes.inference.mcse import is_close_call
from qualbayes.inference.run import SamplerSettings

# target acceptance 0.99: this three-supplier, six-lot history gave 6 divergent transitions
# at 0.95 on the merged tree (the gate then refuses every call; that refusal is tested in
# test_suppliers.py); this test is about close calls, so it samples with smaller steps
SETTINGS = SamplerSettings(num_warmup=500, num_samples=500, target_accept=0.99, seed=5)


def _table():
    return simulate(np.array([[0.004], [0.01], [0.03]]), lots=6, n=100, kappa=400, seed=3)


def test_close_call_draws_more_then_says_too_close():
    table = _table()
    first = scorecard.assess_suppliers(table, 0.01, settings=SETTINGS)
    assert first.converged, first.diagnostics["reasons"]
    assert first.extra_runs == 0  # nothing close at a 1% limit: no extra draws
    assert scorecard.TOO_CLOSE not in set(first.suppliers["limit_call"])
    row = first.suppliers.set_index("supplier").loc["S01"]
    # the limit at the supplier's own upper bound: P(rate > limit) = 1 - C in these draws
    close = scorecard.assess_suppliers(table, float(row["rate_upper"]), settings=SETTINGS)
    assert close.converged, close.diagnostics["reasons"]
    assert close.extra_runs == scorecard.MAX_EXTRA_RUNS
    # the adapted chains continued by as many draws again each round (no new chains)
    assert close.diagnostics["settings"]["chains"] == SETTINGS.num_chains
    # (per round as many draws as the fit's own run: SETTINGS' or, when the first attempt
    # failed the gate, the retry's twice as many)
    assert close.diagnostics["settings"]["continued_draws_per_chain"] == (
        close.diagnostics["settings"]["draws_per_chain"] * scorecard.MAX_EXTRA_RUNS)
    s01 = close.suppliers.set_index("supplier").loc["S01"]
    assert s01["limit_call"] == scorecard.TOO_CLOSE
    assert is_close_call(1.0 - s01["prob_above"], s01["prob_above_mcse"], 0.95)
    # the MCSE shrank with the further draws (about 1/2 for 4x the draws; allow for the
    # MCSE's own estimation error)
    assert s01["prob_above_mcse"] < 0.8 * first.suppliers.set_index("supplier").loc[
        "S01", "prob_above_mcse"]
    assert any("too close to call at this Monte Carlo precision" in n and "S01" in n
               for n in close.notes)
    assert any(f"continued {scorecard.MAX_EXTRA_RUNS} time(s)" in n for n in close.notes)
    # no continuation failed here: no retry after one (the other path is the next test)
    assert not any("drawn again" in n for n in close.notes)
    # every other call follows its (combined) probability and MCSE
    for _, r in close.suppliers.iterrows():
        near = is_close_call(1.0 - r["prob_above"], r["prob_above_mcse"], 0.95)
        assert (r["limit_call"] == scorecard.TOO_CLOSE) == bool(near)


def test_failed_continuation_is_retried_once_with_smaller_steps(monkeypatch):
    """A continuation that fails the gate (a divergence, as one history of the drift study
    gave) counts as a failed first attempt: the fit is drawn again once with the retry's
    settings (SamplerSettings.harder) and every figure comes from that fit, said in a note.
    The divergence is injected into the first continuation only (the real continuation's
    draws, its gate's divergence count raised by one)."""
    from qualbayes.models import supplier_rates

    real, calls = supplier_rates.more_draws, []

    def diverging_once(fit):
        out = real(fit)
        calls.append(out.gate.passed)
        if len(calls) == 1:
            out.gate.divergences += 1
        return out

    # seed 2: a first attempt that passes the gate on this tiny history (seed 1 needs
    # run_nuts's own retry, after which no second retry is taken)
    settings = replace(SETTINGS, seed=2)
    table = _table()
    first = scorecard.assess_suppliers(table, 0.01, settings=settings)
    assert first.diagnostics["attempts"] == 1, "choose a seed whose first attempt passes"
    limit = float(first.suppliers.set_index("supplier").loc["S01", "rate_upper"])
    monkeypatch.setattr(supplier_rates, "more_draws", diverging_once)
    out = scorecard.assess_suppliers(table, limit, settings=settings)
    assert calls and calls[0]  # the real continuation had passed: the failure is injected
    harder = settings.harder()
    assert out.converged, out.diagnostics["reasons"]
    assert out.diagnostics["attempts"] == 2
    assert out.diagnostics["settings"]["target_accept"] == harder.target_accept
    assert out.diagnostics["settings"]["draws_per_chain"] == harder.num_samples
    assert out.seed == harder.seed
    assert any("drawn again with smaller steps" in n for n in out.notes)
