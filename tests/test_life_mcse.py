"""Monte Carlo error of the life decision (qualbayes/life_precision.py).

Checks: (1) the reported MCSE of P(R(mission) >= target) agrees with the spread of P over
independent seeds (a variance-ratio test: with K seeds the sample variance over the mean
squared MCSE is chi-square(K - 1) / (K - 1) when the MCSE is right; refused outside its
0.5% and 99.5% quantiles, a 1% two-sided test); (2) a case built to sit on C (C set to the
exact P from 2-D quadrature of the posterior, the reference of tests/test_life_sampler.py)
gives the same decision under five seeds; (3) no seed turns a verdict into the opposite
verdict or into a plain "undecided" (zero close-call flips); (4) the rule, its cap and the
run-record check, without sampling.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from test_life_sampler import quadrature

from qualbayes.data.frames import life_table
from qualbayes.errors import InputError
from qualbayes.evidence.life_record import life_record, life_text
from qualbayes.evidence.life_words import group_notes
from qualbayes.evidence.run_record import check_decisions
from qualbayes.inference.run import SamplerSettings
from qualbayes.life_precision import (
    CLOSE_NOTE,
    MAX_DRAWS_PER_CHAIN,
    more_draws,
    prob_meets,
    settle,
)
from qualbayes.life_question import assess_life
from qualbayes.models.weibull import group_stats, make_prior

# invented small test: four failures and twelve units still running at 1,500 h
FAIL = [620.0, 910.0, 1480.0, 2100.0]
RUNNING = [1500.0] * 12
PRIOR = ("1.5,3", None, None)  # shape between 1.5 and 3 with 95% probability
SMALL = {"num_warmup": 300, "num_samples": 400}


def table():
    rows = [{"unit": f"f{i}", "group": "X", "hours": t, "status": "F"}
            for i, t in enumerate(FAIL)]
    rows += [{"unit": f"s{i}", "group": "X", "hours": t, "status": "S"}
             for i, t in enumerate(RUNNING)]
    return life_table(pd.DataFrame(rows))


@pytest.fixture
def no_extras(monkeypatch):
    """The extras (remaining test time, comparisons) do not change P or the decision."""
    monkeypatch.setattr("qualbayes.life_extras.add_extras", lambda *a, **k: None)


def run(seed: int, mission: float, confidence: float, **sampler):
    settings = SamplerSettings(seed=seed, **(SMALL | sampler))
    return assess_life(table(), mission, 0.95, confidence, make_prior(*PRIOR),
                       settings=settings).groups[0]


def exact_prob(mission: float, target: float = 0.95) -> float:
    st = group_stats(FAIL, RUNNING)
    q, w = quadrature(st, make_prior(*PRIOR), mission)
    return float(np.sum(w * (q["reliability_at_mission"] >= target)))


def variance_ratio_bounds(k: int, level: float = 0.01) -> tuple[float, float]:
    df = k - 1
    return (stats.chi2.ppf(level / 2, df) / df, stats.chi2.ppf(1 - level / 2, df) / df)


def spread_study(seeds, mission: float, **sampler) -> dict:
    groups = [run(s, mission, 0.9, **sampler) for s in seeds]
    p = np.array([g["prob_meets_target"] for g in groups])
    mc = np.array([g["prob_meets_target_mcse"] for g in groups])
    ratio = float(p.var(ddof=1) / np.mean(mc ** 2))
    return {"p": p, "mcse": mc, "ratio": ratio, "decisions": [g["decision"] for g in groups],
            "exact": exact_prob(mission)}


def check_spread(study: dict, k: int) -> None:
    lo, hi = variance_ratio_bounds(k)
    assert lo <= study["ratio"] <= hi, study
    # the seeds' mean agrees with the exact P within its own Monte Carlo error
    se = math.sqrt(np.mean(study["mcse"] ** 2) / k)
    assert abs(study["p"].mean() - study["exact"]) <= 4 * se, study
    assert len(set(study["decisions"])) == 1, study  # far from C: one decision


def test_reported_mcse_agrees_with_spread_over_ten_seeds(no_extras):
    # mission 700 h: P near 0.5, far from C = 0.9 and 1 - C (no extra draws)
    study = spread_study(range(101, 111), 700.0)
    check_spread(study, 10)
    assert set(study["decisions"]) == {"undecided"}


@pytest.mark.slow
def test_reported_mcse_agrees_with_spread_over_forty_seeds_default_draws(no_extras):
    study = spread_study(range(201, 241), 700.0, num_warmup=1000, num_samples=1000)
    check_spread(study, 40)


def test_case_on_c_gives_the_same_decision_under_five_seeds(no_extras):
    mission = 450.0
    c = exact_prob(mission)
    assert 0.6 < c < 0.99  # a meaningful confidence level
    groups = [run(seed, mission, c) for seed in range(1, 6)]
    # the first draws sit within 1 MCSE of C by construction (in expectation); whatever the
    # seed, the extra rounds end at the cap and the answer is the close-call label
    for g in groups:
        assert g["decision"] == "undecided", g["monte_carlo"]
        assert g["close_call"] and g["monte_carlo"]["extra_draw_rounds"] == 2
        assert g["monte_carlo"]["draws_per_chain"] == 16 * SMALL["num_samples"]
        assert any(CLOSE_NOTE in n for n in group_notes(g, _Result(g, c)))
        assert abs(g["prob_meets_target"] - c) <= 3 * g["prob_meets_target_mcse"]
    # reproducible: the same seed gives the same numbers
    again = run(1, mission, c)
    assert again["prob_meets_target"] == groups[0]["prob_meets_target"]
    assert again["prob_meets_target_mcse"] == groups[0]["prob_meets_target_mcse"]
    text = life_text(life_record(_Result(again, c), table(), "0" * 64, "test", {}))
    assert "MCSE of P" in text and f"{again['prob_meets_target_mcse']:.4f}" in text


@dataclass
class _Result:
    """The smallest LifeAssessment-like object the record builder reads."""

    group: dict
    confidence: float

    def __post_init__(self):
        from qualbayes.models.weibull import LifePrior

        self.groups, self.mission, self.target, self.units = [self.group], 450.0, 0.95, "h"
        self.prior, self.model, self.seed = LifePrior(), "weibull", 1
        self.comparisons, self.draws, self.alternatives, self.remaining_words = [], {}, (), {}


# --------------------------------------------------------------------- rule, without NUTS

@dataclass
class Gate:
    passed: bool = True


def test_settle_draws_more_up_to_the_cap_with_the_same_seed():
    rng = np.random.default_rng(3)
    seen = []

    def chains(n):  # P about 0.5 whatever n
        return {"log_shape": np.zeros((4, n)), "log_scale": rng.normal(0.0, 1.0, (4, n))}

    def refit(more):
        seen.append((more.num_samples, more.seed, more.num_warmup))
        return chains(more.num_samples), Gate()

    base = SamplerSettings(seed=9, num_samples=1000)
    # mission 1, target e^-1: R >= target exactly when log scale >= 0
    _, _, prec = settle(chains(1000), Gate(), settings=base, refit=refit, mission=1.0,
                        target=math.exp(-1.0), confidence=0.5)
    assert seen == [(4000, 9, 1000), (16000, 9, 1000)]
    assert prec.close_call and prec.extra_rounds == 2
    assert prec.draws_per_chain == MAX_DRAWS_PER_CHAIN
    assert more_draws(SamplerSettings(num_samples=4000), 1).num_samples == MAX_DRAWS_PER_CHAIN
    assert more_draws(SamplerSettings(num_samples=4000), 2) is None
    assert more_draws(SamplerSettings(num_samples=20000), 1) is None
    # far from C: no refit at all
    seen.clear()
    _, _, prec = settle(chains(1000), Gate(), settings=base, refit=refit, mission=1.0,
                        target=math.exp(-1.0), confidence=0.95)
    assert seen == [] and not prec.close_call and prec.extra_rounds == 0
    # a failed gate is never sampled again for precision (it gives no verdict)
    _, gate, prec = settle(chains(1000), Gate(False), settings=base, refit=refit, mission=1.0,
                           target=math.exp(-1.0), confidence=0.5)
    assert seen == [] and not gate.passed and not prec.close_call


def test_prob_meets_matches_independent_draws_binomial_error():
    # independent draws: the MCSE is the binomial sqrt(p (1 - p) / S) (within ESS noise)
    rng = np.random.default_rng(5)
    ls = np.zeros((4, 5000))
    lc = rng.normal(0.0, 1.0, (4, 5000))
    p, mc = prob_meets(ls, lc, mission=1.0, target=math.exp(-1.0))
    assert abs(mc / math.sqrt(p * (1 - p) / lc.size) - 1) < 0.1


def _record(decision, p, mcse, c=0.9):
    g = {"group": "X", "decision": decision, "prob_meets_target": p,
         "diagnostics": {"passed": True}}
    if mcse is not None:
        g["prob_meets_target_mcse"] = mcse
    return {"kind": "life", "question": {"confidence": c}, "groups": [g]}


def test_run_record_accepts_the_close_call_rule_and_refuses_a_verdict_inside_it():
    check_decisions("run.json", _record("undecided", 0.905, 0.004))  # within 3 MCSE: fine
    check_decisions("run.json", _record("meets", 0.95, 0.004))
    check_decisions("run.json", _record("meets", 0.905, None))  # earlier records: unchecked
    with pytest.raises(InputError, match="too close to call"):
        check_decisions("run.json", _record("meets", 0.905, 0.004))
    with pytest.raises(InputError, match="too close to call"):
        check_decisions("run.json", _record("does-not-meet", 0.095, 0.004))


def test_groups_with_different_numbers_of_draws_are_compared():
    # a close-call group carries up to 16 times the draws of the others
    from qualbayes.life_compare import compare_pair

    rng = np.random.default_rng(11)
    a = {"log_shape": np.zeros((4, 1000)), "log_scale": rng.normal(0.3, 1.0, (4, 1000))}
    b = {"log_shape": np.zeros((4, 16000)), "log_scale": rng.normal(0.0, 1.0, (4, 16000))}
    c = compare_pair("A", "B", a, b, mission=1.0, confidence=0.9)
    # exponential life, R = exp(-1/eta): A better when its log scale is larger;
    # P(N(0.3, 1) > N(0, 1)) = Phi(0.3 / sqrt 2)
    exact = stats.norm.cdf(0.3 / math.sqrt(2.0))
    assert abs(c["prob_a_more_reliable"] - exact) <= 4 * c["prob_a_more_reliable_mcse"]
