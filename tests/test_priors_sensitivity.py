"""The sensitivity table: under each prior of the set, the probability and decision equal
a separate run of the question with that prior (lots, attribute and MTBF plans exactly;
the Weibull life question within Monte Carlo error), plus the wording, merging of equal
priors, the gate on every MCMC run, and external check values (docs/references.md: chi-square test
times, the NIST gamma-prior example, the success-run size)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import EXAMPLES
from scipy import integrate, special, stats

from qualbayes.commands.prior_options import beta_setup
from qualbayes.data.lot_table import read_lots
from qualbayes.lot_question import assess_lots
from qualbayes.models.lot_prior import BetaPrior
from qualbayes.priors.elicit import elicit
from qualbayes.priors.power_prior import EarlierCounts, EarlierExposure
from qualbayes.priors.prior_set import (
    DEMONSTRATED,
    NOT_DEMONSTRATED,
    PriorRow,
    attribute_sensitivity,
    beta_rows,
    gamma_rows,
    item_summary,
    lots_sensitivity,
    mtbf_sensitivity,
)
from qualbayes.priors.statements import parse_statements


def _as_run(a, b):
    return PriorRow("as-run", "as run", "beta", {"a": a, "b": b}, f"p ~ Beta({a}, {b})",
                    "as run", "the prior as run")


# --------------------------------------------------------------------------- lots

def test_each_lots_row_equals_a_separate_run_with_that_prior():
    table = read_lots(EXAMPLES / "incoming_inspection.csv")
    setup = beta_setup(parse_statements(["p=0.2%", "p<0.8%@90%"], ("p",)), None, "23/6475",
                       0.5, "p")
    # the sensitivity rows answer the process question (the rate p): compare like with like
    main = assess_lots(table, 0.01, 0.95, BetaPrior(setup.a, setup.b, setup.name),
                       decision_basis="process")
    rows = beta_rows(_as_run(setup.a, setup.b), setup.stated, setup.base, setup.earlier)
    assert len(rows) >= 6
    sec = lots_sensitivity(main.lots, 0.01, 0.95, rows)
    for k, row in enumerate(rows):
        alone = assess_lots(table, 0.01, 0.95, BetaPrior(row.params["a"], row.params["b"],
                                                         row.key), decision_basis="process")
        probs = [item["results"][k]["prob"] for item in sec["items"]]
        decisions = [item["results"][k]["decision"] for item in sec["items"]]
        assert probs == list(alone.lots["prob_within_spec"]), row.label
        assert decisions == list(alone.lots["decision"]), row.label
    # the set holds what the issue lists (stated and the three weights given earlier data)
    keys = " ".join(r.key + " " + r.label for r in rows)
    for part in ("as-run", "uniform", "jeffreys", "stated", "weight 0", "weight 0.5",
                 "weight 1", "sceptical"):
        assert part in keys, part
    sceptical = next(r for r in rows if r.key == "sceptical")
    assert sceptical.params == {"a": 2.0, "b": 1.0}


def test_equal_priors_are_shown_once_with_their_names_joined():
    rows = beta_rows(_as_run(1.0, 1.0))
    assert [r.label for r in rows] == ["as run = uniform", "Jeffreys", "sceptical"]


def test_history_as_run_row_is_taken_from_the_analysis():
    import pandas as pd

    frame = pd.DataFrame({"lot": ["A", "B"], "defectives": [0, 3], "inspected": [200, 200],
                          "prob_within_spec": [0.97, None], "decision": ["accept",
                                                                         "not-converged"]})
    first = PriorRow("as-run", "as run (history)", "history", {}, "history", "", "history")
    rows = beta_rows(first)
    sec = lots_sensitivity(frame, 0.01, 0.95, rows,
                           {"prob": [0.97, None], "decision": ["accept", "not-converged"]})
    assert sec["items"][0]["results"][0] == {"prior": "as-run", "prob": 0.97,
                                             "decision": "accept"}
    assert sec["items"][1]["results"][0]["decision"] == "not-converged"
    assert sec["priors"][0]["predictive"]["range"] is None


def test_summary_says_plainly_when_the_decision_depends_on_the_prior():
    rows = [PriorRow(k, k, "beta", {"a": 1, "b": 1}, "", "", phrase)
            for k, phrase in [("as-run", "the prior as run"), ("uniform", "the uniform prior"),
                              ("jeffreys", "the Jeffreys prior"), ("stated", "the stated prior"),
                              ("w05", "the earlier data at weight 0.5"),
                              ("u", "not usable prior"), ("sceptical", "the sceptical prior")]]
    dec = ["accept"] * 5 + ["not usable", "reject"]
    text, depends = item_summary([{"decision": d} for d in dec], rows)
    assert depends and text == "accept under 5 of 6 priors; reject under the sceptical prior"
    text, depends = item_summary([{"decision": "accept"}] * 7, rows)
    assert not depends and "accept under all 7 priors" in text


# --------------------------------------------------------------------------- attribute plans

def test_attribute_rows_equal_separate_plans_and_closed_forms():
    from qualbayes.planning.plans import plan_attribute
    from qualbayes.planning.rate_prior import RatePrior

    stated = elicit(parse_statements(["R>0.85@95%", "R=0.95"], ("R",)))
    classical = PriorRow("as-run", "as run (classical)", "classical", {}, "none", "", "classical")
    rows = beta_rows(classical, stated, (1.0, 1.0, "uniform"), EarlierCounts(1, 40, "test"))
    plans = [(0, 22), (1, 38)]  # the classical plans for R = 0.9, C = 0.9 (docs/references.md: 22)
    sec = attribute_sensitivity(0.9, 0.9, plans, rows)
    c0 = sec["items"][0]["results"]
    assert c0[0] == {"prior": "as-run", "prob": None, "decision": DEMONSTRATED, "units": 22}
    uni = next(r for r, row in zip(c0, rows, strict=True) if row.key == "uniform")
    # uniform prior, 0 failures in 22: P(R >= 0.9) = 1 - 0.9^23 (Beta(1, 23) on p)
    assert uni["prob"] == pytest.approx(1 - 0.9**23, rel=1e-12)
    assert uni["decision"] == DEMONSTRATED
    scep = next(r for r, row in zip(c0, rows, strict=True) if row.key == "sceptical")
    assert scep["prob"] == pytest.approx(stats.beta.cdf(0.1, 2, 1 + 22), rel=1e-12)
    assert scep["decision"] == NOT_DEMONSTRATED
    for k, row in enumerate(rows[1:], start=1):  # every Beta row: a separate Bayesian plan
        prior = RatePrior.beta(row.params["a"], row.params["b"])
        rec = plan_attribute(0.9, 0.9, [0, 1], analysis=prior)
        units = [r[1] for r in rec["tables"][0]["rows"]]
        assert [item["results"][k]["units"] for item in sec["items"]] == units, row.label


# --------------------------------------------------------------------------- MTBF plans

def test_mtbf_flat_and_jeffreys_rows_against_chi_square_and_nist():
    nist = PriorRow("as-run", "as run", "gamma", {"a": 2.0, "rate": 1400.0}, "", "", "as run")
    rows = gamma_rows(nist)
    goal, conf = 600.0, 0.8
    plans = [(r, 600.0 * special.gammaincinv(2 + r, conf) - 1400.0) for r in (0, 1, 2)]
    sec = mtbf_sensitivity(goal, conf, plans, rows)
    by = {row.key: k for k, row in enumerate(rows)}
    # NIST/SEMATECH 8.4.6 (docs/references.md): Gamma(2, 1400 h), r = 2, 80% -> T = 1909 h
    assert sec["items"][2]["time"] == pytest.approx(1909, abs=0.5)
    assert sec["items"][2]["results"][0]["decision"] == DEMONSTRATED
    for item, r in zip(sec["items"], (0, 1, 2), strict=True):
        flat = item["results"][by["uniform"]]["time"]
        jeff = item["results"][by["jeffreys"]]["time"]
        # flat Gamma(1, 0) gives the classical chi-square time M chi2(C; 2r+2)/2
        # (docs/references.md: 1.609, 2.994, 4.279 x M at 80%); Jeffreys M chi2(C; 2r+1)/2
        assert flat == pytest.approx(goal * stats.chi2.ppf(conf, 2 * r + 2) / 2, rel=1e-10)
        assert jeff == pytest.approx(goal * stats.chi2.ppf(conf, 2 * r + 1) / 2, rel=1e-10)
    assert sec["items"][0]["results"][by["uniform"]]["time"] / goal == pytest.approx(1.609,
                                                                                     abs=5e-4)


def test_mtbf_rows_equal_separate_plans():
    from qualbayes.planning.mtbf import GammaPrior
    from qualbayes.planning.plans import plan_mtbf

    stated = elicit(parse_statements(["mtbf>300@90%", "mtbf=900"], ("mtbf",)))
    first = PriorRow("as-run", "as run (classical)", "classical", {}, "", "", "classical")
    rows = gamma_rows(first, stated, (1.0, 0.0, "flat"), EarlierExposure(2, 1909.0, "t"))
    plans = [(0, 965.7), (2, 2567.0)]
    sec = mtbf_sensitivity(600.0, 0.8, plans, rows)
    for k, row in enumerate(rows):
        if row.family != "gamma" or row.params["rate"] == 0:
            continue
        rec = plan_mtbf(600.0, 0.8, [0, 2], analysis=GammaPrior(row.params["a"],
                                                                 row.params["rate"]))
        times = [r[3] for r in rec["tables"][0]["rows"]]
        got = [item["results"][k]["time"] for item in sec["items"]]
        assert got == pytest.approx(times, rel=1e-12), row.label
        for item, (r, t) in zip(sec["items"], plans, strict=True):
            prob = GammaPrior(row.params["a"], row.params["rate"]).prob_mtbf_at_least(600, r, t)
            assert item["results"][k]["prob"] == pytest.approx(prob, rel=1e-12)


# --------------------------------------------------------------------------- life

def test_jeffreys_rule_prior_of_the_weibull_is_one_over_scale():
    # det of the expected Fisher information of Weibull(shape c, scale s), by numerical
    # integration of the score products with scipy.stats.weibull_min: pi^2 / (6 s^2),
    # independent of the shape (so the Jeffreys rule prior is proportional to 1/scale)
    for c, s in ((0.8, 3.0), (2.0, 1.0), (3.5, 50.0)):
        d = stats.weibull_min(c, scale=s)

        def scores(t, c=c, s=s):
            z = (t / s) ** c
            return (1 / c + math.log(t / s) * (1 - z), (c / s) * (z - 1))

        def info(i, j, d=d, scores=scores):
            return integrate.quad(lambda t: scores(t)[i] * scores(t)[j] * d.pdf(t), 0, np.inf,
                                  limit=400)[0]

        det = info(0, 0) * info(1, 1) - info(0, 1) ** 2
        assert det * s**2 == pytest.approx(math.pi**2 / 6, rel=1e-6)


def test_the_shared_model_density_equals_the_life_models_posterior():
    """log_density (prior numbers as arguments, one function for every prior of a set)
    equals qualbayes.models.weibull.log_posterior with the same prior and data terms."""
    from qualbayes.models.weibull import FLAT, LifePrior, data_arrays, group_stats, log_posterior
    from qualbayes.priors.life_sensitivity import (
        JEFFREYS,
        LifeRow,
        _extra,
        hyper_of,
        log_density,
        numpy_prior,
        structure_of,
    )
    from qualbayes.priors.power_prior import EarlierLife

    st = group_stats([310.0, 520.0, 640.0], [400.0, 1000.0, 1200.0], [200.0], [500.0], [250.0])
    old = group_stats([450.0, 700.0], [900.0, 1300.0])
    earlier = EarlierLife(old, "test", None, old.units, old.failures)
    priors = [LifePrior(), FLAT, JEFFREYS, LifePrior(shape=(0.9, 0.25), shape_given=True,
                                                     scale_kind="blife",
                                                     scale_args=(0.1, 8.3, 0.77)),
              LifePrior(scale_kind="reliability", scale_args=(5000.0, -3.5, 0.97))]
    structure = structure_of(priors)
    extra = _extra(earlier, 800.0)
    extra_np = {"w": None, "data": tuple(data_arrays(s) for s in extra["stats"]),
                "log_tref": np.array([s.log_tref for s in extra["stats"]])}
    rng = np.random.default_rng(1)
    b, u = rng.normal(0.5, 0.4, 20), rng.normal(-1.0, 1.0, 20)
    for prior in priors:
        for w_e, w_s in ((0.0, 0.0), (0.5, 0.0), (1.0, 1.0)):
            row = LifeRow(PriorRow("x", "x", "weibull", {}, "", "", ""), prior, w_e, w_s)
            ref = log_posterior(b, u, st, numpy_prior(row, extra))
            got = log_density(b, u, data_arrays(st), st.log_tref, hyper_of(prior, structure),
                              dict(extra_np, w=np.array([w_e, w_s])), structure)
            assert np.allclose(got, ref, rtol=1e-12, atol=1e-9), (prior.scale_kind, w_e, w_s)


def _life_file(tmp_path):
    # invented rig test of two builds: "A" with five failures, "B" with one (for B the
    # improper priors are not usable)
    rows = ["Unit,Hours,Status,Build"]
    rows += [f"A{k},{t},F,A" for k, t in enumerate([1800, 2600, 3100, 4200, 5200])]
    rows += [f"A{k + 5},6000,S,A" for k in range(7)]
    rows += ["B0,4800,F,B"] + [f"B{k + 1},7000,S,B" for k in range(11)]
    p = tmp_path / "rig.csv"
    p.write_text("\n".join(rows) + "\n")
    return p


def test_life_rows_match_separate_runs_within_monte_carlo_error(tmp_path):
    from qualbayes.data.life import read_life
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.life_question import assess_life, group_data
    from qualbayes.models.weibull import make_prior
    from qualbayes.priors.life_sensitivity import _extra, life_rows, life_sensitivity, numpy_prior

    table = read_life(_life_file(tmp_path))
    settings = SamplerSettings(num_warmup=300, num_samples=500, seed=4)
    as_run = make_prior("1.2,3.5", None, None)
    stated = make_prior("1.5,3", "10:1500,6000", None)
    main = assess_life(table, 3000.0, 0.8, 0.9, as_run, settings=settings)
    rows = life_rows(as_run, stated, None)
    sec = life_sensitivity(main, group_data(table), rows, None, settings)
    keys = [r.row.key for r in rows]
    assert keys == ["as-run", "default", "uniform", "jeffreys", "stated", "sceptical"]
    a, b = sec["items"]
    assert [r["decision"] for r in b["results"]][2:4] == ["not usable", "not usable"]
    assert all(r["decision"] != "not usable" for r in a["results"])
    extra = _extra(None, 3000.0)
    only_a = read_life(_life_file(tmp_path), groups=["A"])
    checked = 0
    for k in (2, 4, 5):  # uniform (flat), stated and sceptical, each run on its own
        # the flat prior's posterior is proper for build A only, so it runs on A alone
        alone = assess_life(only_a if k == 2 else table, 3000.0, 0.8, 0.9,
                            numpy_prior(rows[k], extra), settings=settings)
        for g in alone.groups:
            item = next(i for i in sec["items"] if i["name"] == g["group"])
            res = item["results"][k]
            assert res["gate"]["passed"] and g["diagnostics"]["passed"]
            p1, p2 = res["prob"], g["prob_meets_target"]
            e1, e2 = res["gate"]["min_ess_bulk"], g["diagnostics"]["min_ess_bulk"]
            se = math.sqrt(max(p1 * (1 - p1), 1e-4) / e1 + max(p2 * (1 - p2), 1e-4) / e2)
            assert abs(p1 - p2) <= 4 * se + 1e-9, (keys[k], item["name"])
            # the decision matches where neither probability is within 4 SE of a boundary
            if all(min(abs(p - 0.9), abs(p - 0.1)) > 4 * se for p in (p1, p2)):
                assert res["decision"] == g["decision"]
                checked += 1
    assert checked >= 2


def test_a_life_alternative_that_fails_its_gate_says_so(tmp_path):
    from qualbayes.data.life import read_life
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.life_question import assess_life, group_data
    from qualbayes.models.weibull import make_prior
    from qualbayes.priors.life_sensitivity import life_rows, life_sensitivity

    table = read_life(_life_file(tmp_path), groups=["A"])
    prior = make_prior("1.2,3.5", None, None)
    main = assess_life(table, 3000.0, 0.8, 0.9, prior,
                       settings=SamplerSettings(num_warmup=300, num_samples=500))
    tiny = SamplerSettings(num_warmup=15, num_samples=20, retry=False)
    sec = life_sensitivity(main, group_data(table), life_rows(prior, None, None)[:2], None,
                           tiny)
    res = sec["items"][0]["results"][1]
    assert res["decision"] == "not-converged" and res["prob"] is None
    assert "convergence gate failed" in res["reason"]


# --------------------------------------------------------------------------- sampling plans

def _accepted_within_reference(n, c, a, b, s):
    """P(p <= s | X <= c) by scipy.stats directly: X ~ betabinom(n, a, b) and, given x,
    p ~ beta(a + x, b + n - x) (Bayes' rule written out; scipy.stats as the reference)."""
    x = np.arange(c + 1)
    pmf = stats.betabinom.pmf(x, n, a, b)
    return float((pmf * stats.beta.cdf(s, a + x, b + n - x)).sum() / pmf.sum())


def test_sampling_rows_equal_separate_runs_and_scipy():
    from qualbayes.planning.plans import plan_sampling
    from qualbayes.planning.rate_prior import RatePrior
    from qualbayes.priors.prior_set import sampling_sensitivity

    stated = elicit(parse_statements(["p<1%@90%"], ("p",)))
    classical = PriorRow("as-run", "as run (plan alone)", "classical", {}, "none", "",
                         "the plan alone")
    rows = beta_rows(classical, stated, (1.0, 1.0, "uniform"), EarlierCounts(3, 800, "t"))
    for lot_size, spec in ((None, 0.02), (None, None), (500, 0.02)):
        base = plan_sampling(0.005, 0.05, 0.03, 0.10, lot_size, spec=spec)
        inp = base["inputs"]
        n, c, limit, level = inp["n"], inp["c"], inp["limit"], inp["level"]
        assert limit == (spec or 0.03) and level == pytest.approx(0.9)
        sec = sampling_sensitivity(n, c, lot_size, limit, level, rows)
        res = sec["items"][0]["results"]
        assert res[0]["decision"] == "not usable" and res[0]["prob"] is None
        for k, row in enumerate(rows[1:], start=1):  # each Beta row: a separate run
            alone = plan_sampling(0.005, 0.05, 0.03, 0.10, lot_size, spec=spec,
                                  prior=RatePrior.beta(row.params["a"], row.params["b"]))
            acc = next(t for t in alone["tables"] if t["name"] == "Accepted lots")
            first = acc["rows"][0]
            assert first[0] == limit
            key = first[-2] if lot_size is not None else first[3]
            assert res[k]["prob"] == key, row.label
            assert res[k]["decision"] == first[-1], row.label
            assert res[k]["prob_accept"] == first[2]
            if lot_size is None:
                ref = _accepted_within_reference(n, c, row.params["a"], row.params["b"], limit)
                assert res[k]["prob"] == pytest.approx(ref, rel=1e-10), row.label


def test_sampling_zero_acceptance_number_closed_form():
    """c = 0 and a uniform prior: accepted means x = 0, so p | accepted ~ Beta(1, n + 1) and
    P(p <= s | accepted) = 1 - (1 - s)^(n + 1) (conjugate closed form)."""
    from qualbayes.priors.prior_set import sampling_sensitivity

    rows = beta_rows(None)
    sec = sampling_sensitivity(77, 0, None, 0.03, 0.9, rows)
    uni = sec["items"][0]["results"][0]
    assert rows[0].key == "uniform"
    assert uni["prob"] == pytest.approx(1 - 0.97**78, rel=1e-12)
    assert uni["prob_accept"] == pytest.approx(1 / 78, rel=1e-12)  # P(X = 0) = 1/(n + 1)
    assert uni["decision"] == "protected"  # 1 - 0.97^78 = 0.907 >= 0.9
    scep = next(r for r, row in zip(sec["items"][0]["results"], rows, strict=True)
                if row.key == "sceptical")  # Beta(2, 1): p | x = 0 ~ Beta(2, 78)
    assert scep["prob"] == pytest.approx(stats.beta.cdf(0.03, 2, 78), rel=1e-12)
    assert scep["decision"] == "not protected"


def test_sampling_history_mixture_row_is_the_mixture():
    from qualbayes.planning import sampling
    from qualbayes.planning.rate_prior import RatePrior
    from qualbayes.priors.prior_set import sampling_sensitivity

    mix = RatePrior.mixture(np.array([1.0, 3.0]), np.array([200.0, 150.0]), "history")
    first = PriorRow("as-run", "as run (history)", "history", {}, "history", "", "history")
    sec = sampling_sensitivity(132, 3, None, 0.03, 0.95, beta_rows(first), mix)
    got = sec["items"][0]["results"][0]["prob"]
    # an equal-weight mixture: Bayes' rule over the two components by scipy.stats
    x = np.arange(4)
    pm = [stats.betabinom.pmf(x, 132, a, b) for a, b in ((1, 200), (3, 150))]
    joint = sum((p * stats.beta.cdf(0.03, a + x, b + 132 - x)).sum()
                for p, (a, b) in zip(pm, ((1, 200), (3, 150)), strict=True))
    assert got == pytest.approx(joint / sum(p.sum() for p in pm), rel=1e-10)
    assert got == sampling.accepted_within(132, 3, mix, 0.03)


# --------------------------------------------------------------------------- Weibull life plans

def test_life_plan_rows_equal_separate_plans_and_closed_forms():
    from qualbayes.planning import weibull
    from qualbayes.planning.plans import plan_life
    from qualbayes.planning.rate_prior import RatePrior
    from qualbayes.priors.prior_set import life_plan_sensitivity

    stated = elicit(parse_statements(["R>0.85@95%", "R=0.95"], ("R",)))
    classical = PriorRow("as-run", "as run (classical)", "classical", {}, "none", "", "classical")
    rows = beta_rows(classical, stated, (1.0, 1.0, "uniform"), EarlierCounts(1, 40, "test"))
    mission, n, beta = 1000.0, 10, 2.0
    plans = [(c, weibull.time_ratio(0.9, 0.9, n, beta, c)) for c in (0, 1)]
    sec = life_plan_sensitivity(0.9, 0.9, mission, n, beta, plans, rows)
    c0 = sec["items"][0]["results"]
    assert c0[0]["decision"] == DEMONSTRATED and c0[0]["time"] == pytest.approx(
        plans[0][1] * mission, rel=1e-12)
    uni = next(r for r, row in zip(c0, rows, strict=True) if row.key == "uniform")
    # uniform prior, no failure in n units at L: p | data ~ Beta(1, 1 + n L^beta)
    assert uni["prob"] == pytest.approx(stats.beta.cdf(0.1, 1, 1 + n * plans[0][1] ** beta),
                                        rel=1e-12)
    for k, row in enumerate(rows[1:], start=1):  # every Beta row: a separate Bayesian plan
        prior = RatePrior.beta(row.params["a"], row.params["b"])
        rec = plan_life(0.9, 0.9, mission, n, beta, [0, 1], analysis=prior)
        cols = rec["tables"][0]["columns"]
        times = [r[cols.index("time per unit")] for r in rec["tables"][0]["rows"]]
        assert [i["results"][k]["time"] for i in sec["items"]] == pytest.approx(
            times, rel=1e-12), row.label
        # and the decision at the planned (classical) test matches that prior's own rule:
        # demonstrated exactly when the planned time is at least the time the prior needs
        for item, t in zip(sec["items"], times, strict=True):
            res = item["results"][k]
            assert (res["decision"] == DEMONSTRATED) == (item["time"] >= t * (1 - 1e-9))
