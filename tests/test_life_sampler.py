"""NUTS answers of the life model against exact references, and the life command.

References: the posterior computed by quadrature on a grid (exact up to the grid), the
Lieblein-Zelen ball-bearing MLE (docs/references.md), and the closed-form zero-failure probability
for a known shape distribution. Tolerances come from Monte Carlo error with ArviZ's ESS:
|mean_nuts - mean_exact| <= 4 sd / sqrt(ESS_mean); for a quantile q, the share of draws below
the exact quantile within 4 sqrt(q (1 - q) / ESS_q) of q.
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest
from scipy import stats

from qualbayes.cli import main
from qualbayes.data.life import read_life
from qualbayes.evidence.life_words import group_notes, run_notes
from qualbayes.evidence.output_set import MARKER  # written with every output set
from qualbayes.inference.run import SamplerSettings
from qualbayes.life_question import assess_life, weibull_quantities
from qualbayes.models.weibull import (
    FLAT,
    LifePrior,
    group_stats,
    log_posterior,
    make_prior,
    posterior_mode,
    reported_mode,
)

with warnings.catch_warnings():
    warnings.simplefilter("ignore", FutureWarning)
    import arviz as az

BEARINGS = np.array([17.88, 28.92, 33.00, 41.52, 42.12, 45.60, 48.48, 51.84, 51.96, 54.12,
                     55.56, 67.80, 68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84,
                     127.92, 128.04, 173.40])
QUANTITIES = ("shape", "scale", "b10", "reliability_at_mission")


def quadrature(st, prior, mission, half_width=12.0, points=721):
    """Exact posterior summaries on a (b, u) grid of +-half_width Laplace sd around the mode."""
    mode = posterior_mode(st, prior)
    sd = np.sqrt(np.diag(mode.cov))
    # a sheared grid follows the posterior's correlation
    z = np.linspace(-half_width, half_width, points)
    z1, z2 = np.meshgrid(z, z, indexing="ij")
    chol = mode.chol()
    b = mode.b + chol[0, 0] * z1
    u = mode.u + chol[1, 0] * z1 + chol[1, 1] * z2
    lp = log_posterior(b, u, st, prior)
    w = np.exp(lp - lp.max())
    edge = max(w[0].max(), w[-1].max(), w[:, 0].max(), w[:, -1].max())
    assert edge < 1e-9, "the grid does not hold the posterior"  # mass outside: negligible
    w = (w / w.sum()).ravel()
    beta = np.exp(b).ravel()
    eta = np.exp(st.log_tref - u.ravel() / beta)
    assert np.all(sd > 0)
    return weibull_quantities(beta, eta, mission), w


def weighted_quantile(x, w, q):
    order = np.argsort(x)
    c = np.cumsum(w[order])
    return float(np.interp(q, c - 0.5 * w[order], x[order]))


def compare_with_quadrature(draws_by_chain: dict, exact: dict, w: np.ndarray):
    for key in QUANTITIES:
        x = draws_by_chain[key]
        flat = x.reshape(-1)
        mean_exact = float(np.sum(w * exact[key]))
        sd = float(np.sqrt(np.sum(w * (exact[key] - mean_exact) ** 2)))
        ess = float(az.ess(x, method="mean"))
        assert abs(flat.mean() - mean_exact) <= 4 * sd / math.sqrt(ess), key
        for q in (0.05, 0.5, 0.95):
            qe = weighted_quantile(exact[key], w, q)
            ess_q = float(az.ess(x, method="quantile", prob=q))
            share = float(np.mean(flat <= qe))
            assert abs(share - q) <= 4 * math.sqrt(q * (1 - q) / ess_q), (key, q)


def fit_draws(st, prior, mission, seed=7):
    from qualbayes.models.life import fit_life

    mode = posterior_mode(st, prior)
    fit = fit_life([st], [mode], prior, SamplerSettings(seed=seed), ["g"], mission)
    assert fit.gate.passed, fit.gate.reasons()
    beta = np.exp(fit.draws["log_shape"][:, :, 0])
    eta = np.exp(fit.draws["log_scale"][:, :, 0])
    return weibull_quantities(beta, eta, mission)


def test_ball_bearings_flat_priors_nuts_matches_quadrature_and_mle():
    st = group_stats(BEARINGS, [])
    draws = fit_draws(st, FLAT, mission=50.0)
    exact, w = quadrature(st, FLAT, 50.0)
    compare_with_quadrature(draws, exact, w)
    # Lieblein & Zelen (1956) MLE shape 2.102, scale 81.88 (docs/references.md): the mode on
    # (log shape, log scale) of the flat-prior posterior is the MLE
    shape, scale = reported_mode(st, FLAT)
    assert abs(shape - 2.102) < 5e-4 and abs(scale - 81.88) < 5e-3
    # the medians lie near it: within 0.5 posterior sd on the log scales (for n = 23 the
    # posterior is skewed by order n^-1/2, so median and mode differ by a fraction of an sd)
    for key, mle in (("shape", 2.102), ("scale", 81.88)):
        logs = np.log(draws[key])
        assert abs(np.median(logs) - math.log(mle)) < 0.5 * logs.std(), key


def test_censored_data_default_prior_nuts_matches_quadrature():
    # invented small data: exact failures, suspensions, inspection intervals, one left
    failures = [310.0, 520.0, 640.0, 790.0, 900.0, 1150.0]
    suspensions = [400.0, 1000.0, 1200.0, 1200.0, 1200.0]
    ia, ib = [200.0, 600.0, 800.0, 1000.0], [500.0, 900.0, 1100.0, 1300.0]
    st = group_stats(failures, suspensions, ia, ib, [250.0])
    prior = LifePrior()
    draws = fit_draws(st, prior, mission=500.0, seed=11)
    exact, w = quadrature(st, prior, 500.0)
    compare_with_quadrature(draws, exact, w)


def test_blife_prior_nuts_matches_quadrature():
    st = group_stats([700.0, 1500.0], [2000.0] * 6)
    prior = make_prior("1.2,3.5", "10:400,3000", None)
    draws = fit_draws(st, prior, mission=1000.0, seed=5)
    exact, w = quadrature(st, prior, 1000.0)
    compare_with_quadrature(draws, exact, w)


def zero_failure_csv(tmp_path, factors, n=10, mission=5000.0):
    lines = ["Unit,Hours,Status,Build"]
    for f in factors:
        lines += [f"U{f}-{k},{f * mission:g},S,L{f:g}" for k in range(n)]
    p = tmp_path / "zero.csv"
    p.write_text("\n".join(lines) + "\n")
    return p


def test_zero_failures_with_shape_prior_probability_rises_with_test_time(tmp_path):
    factors = (0.5, 0.8, 1.0, 1.5)
    table = read_life(zero_failure_csv(tmp_path, factors))
    prior = make_prior("1.8,2.2", None, None)
    res = assess_life(table, mission=5000.0, target=0.9, confidence=0.9, prior=prior)
    probs = [g["prob_meets_target"] for g in res.groups]
    assert all(g["diagnostics"]["passed"] for g in res.groups)
    assert all(np.diff(probs) > 0), probs
    # exact: all units of a group ran L x mission, so the shape's posterior is its prior and
    # P = E[1 - R^(n L^beta)], the Bayesian form of n = ln(1-C)/(L^beta ln R) (docs/references.md)
    m, sd = prior.shape
    nodes, weights = np.polynomial.hermite_e.hermegauss(80)
    beta = np.exp(m + sd * nodes)
    for f, g in zip(factors, res.groups, strict=True):
        exact = float(np.sum(weights * (1 - 0.9 ** (10 * f**beta))) / weights.sum())
        ess = g["diagnostics"]["min_ess_bulk"]
        assert abs(g["prob_meets_target"] - exact) <= 4 * math.sqrt(exact * (1 - exact) / ess)
        assert any("zero failures" in n and "shape prior" in n for n in group_notes(g, res))


def test_failed_gate_gives_no_answer(tmp_path):
    table = read_life(zero_failure_csv(tmp_path, (1.0,)))
    prior = make_prior("1.5,4", None, None)
    tiny = SamplerSettings(num_warmup=30, num_samples=25, retry=False)
    res = assess_life(table, 5000.0, 0.9, 0.9, prior, settings=tiny)
    g = res.groups[0]
    assert g["decision"] == "not-converged"
    assert g["prob_meets_target"] is None and g["reliability_at_mission"] is None
    assert not res.converged and "convergence gate failed" in run_notes(res)[0]


# ------------------------------------------------------------------ the command

def test_life_command_json_keys_and_evidence(examples, tmp_path, capsys):
    out = tmp_path / "ev"
    argv = ["life", str(examples / "sv30_rig_test.csv"), "--mission", "5000", "--target",
            "90%", "--confidence", "0.9", "--units", "h", "--json", "--out", str(out)]
    assert main(argv) == 0
    record = json.loads(capsys.readouterr().out)
    assert record["kind"] == "life" and "CAUTION" in record["caution"]
    assert [g["group"] for g in record["groups"]] == ["Rev B", "Rev C"]
    for g in record["groups"]:
        for key in ("group", "failures", "suspensions", "shape", "scale", "b10", "b1",
                    "mean_life", "reliability_at_mission", "prob_meets_target", "decision",
                    "diagnostics"):
            assert key in g, key
        assert set(g["reliability_at_mission"]) >= {"median", "lower_bound", "interval"}
        assert g["decision"] in ("meets", "does-not-meet", "undecided")
        rel = g["reliability_at_mission"]
        assert rel["lower_bound"] <= rel["median"]
    names = sorted(p.name for p in out.iterdir() if p.name != MARKER)
    assert names == ["life_probability_Rev_B.png", "life_probability_Rev_C.png",
                     "life_reliability_Rev_B.png", "life_reliability_Rev_C.png",
                     "life_results.json", "life_results.xlsx"]
    # never overwrite silently
    assert main(argv) == 3


def test_life_command_refuses_zero_failures_without_shape_prior(examples, tmp_path, capsys):
    out = tmp_path / "ev"
    code = main(["life", str(examples / "sv30_zero_failure.csv"), "--mission", "5000",
                 "--target", "0.9", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "--shape-prior" in err and "nothing was written" in err
    assert not out.exists()


@pytest.mark.parametrize("args,words", [
    (["--mission", "-5", "--target", "0.9"], "--mission"),
    (["--mission", "5000", "--target", "1.2"], "--target"),
    (["--mission", "5000", "--target", "0.9", "--shape-prior", "4,1"], "--shape-prior"),
])
def test_life_command_option_errors(examples, capsys, args, words):
    code = main(["life", str(examples / "sv30_rig_test.csv"), *args])
    assert code == 2 and words in capsys.readouterr().err


def test_scipy_reference_of_r_mission():
    # weibull_quantities' R(t) is scipy's survival function (reference library)
    q = weibull_quantities(np.array([1.3, 2.0]), np.array([900.0, 80.0]), 120.0)
    ref = [stats.weibull_min(1.3, scale=900.0).sf(120.0), stats.weibull_min(2.0,
                                                                            scale=80.0).sf(120)]
    assert np.allclose(q["reliability_at_mission"], ref, rtol=1e-12)


def test_large_group_uses_exact_binned_sums_and_matches_quadrature():
    from qualbayes.models.life import BINNED_FROM, pad_groups

    rng = np.random.default_rng(21)
    n = 3000
    life = 800.0 * rng.weibull(1.6, size=n)
    removal = rng.uniform(100.0, 1500.0, size=n)
    failed = life <= removal
    st = group_stats(life[failed], removal[~failed])
    assert st.d_exposed.size > BINNED_FROM
    prior = LifePrior()
    mode = posterior_mode(st, prior)
    data, _ = pad_groups([st], [mode])
    assert "bin_c" in data  # the binned path is the one sampled below
    draws = fit_draws(st, prior, mission=300.0, seed=3)
    exact, w = quadrature(st, prior, 300.0, half_width=8.0, points=241)
    compare_with_quadrature(draws, exact, w)


def test_life_command_text_on_field_returns(examples, capsys):
    code = main(["life", str(examples / "sv30_field_returns.csv"), "--mission", "5000",
                 "--target", "0.9", "--confidence", "0.9", "--units", "h"])
    text = capsys.readouterr().out
    assert code == 0
    assert "sampler checks passed for group (all units)" in text
    assert "CAUTION" in text and "P(R(5000 h) >= 0.9 | data) >= 0.9?" in text


def test_joint_fit_failing_its_gate_is_redone_group_by_group(examples, monkeypatch):
    # divergences belong to the joint sampler; when the joint fit fails, each group is
    # refitted alone and judged by its own gate
    import qualbayes.models.life as life_model

    real = life_model.fit_life
    calls = []

    def flaky(stats, modes, prior, settings, names, mission):
        fit = real(stats, modes, prior, settings, names, mission)
        calls.append(list(names))
        if len(names) > 1:
            fit.gate.divergences = 3  # pretend the joint sampler diverged
        return fit

    monkeypatch.setattr(life_model, "fit_life", flaky)
    table = read_life(examples / "sv30_rig_test.csv")
    res = assess_life(table, 5000.0, 0.9, 0.9)
    assert calls == [["Rev B", "Rev C"], ["Rev B"], ["Rev C"]]
    assert all(g["diagnostics"]["passed"] and g["diagnostics"]["divergences"] == 0
               for g in res.groups)
