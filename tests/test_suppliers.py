"""The supplier scorecard against outside references.

* one supplier: the NUTS posterior of its rate against 2-D quadrature of the same model, the
  beta-binomial likelihood from scipy.stats.betabinom (reference library);
* "latest period worse" and "worst of all" against importance sampling from a direct
  simulation of the hierarchical model (prior draws weighted by the likelihood);
* the command: record, workbook, chart and the gate.

Tolerances come from Monte Carlo error (MCSE of the draws, the importance-sampling standard
error) and from the change of the quadrature between two grid resolutions.
"""

import json

import numpy as np
import pytest
from scipy import special, stats

from qualbayes.cli import main
from qualbayes.inference.mcse import mcse_mean
from qualbayes.inference.run import SamplerSettings
from qualbayes.models import supplier_rates as sr
from qualbayes.models.supplier_summary import supplier_summaries

# 500 warmup draws adapt these small models (the gate below is asserted); the tolerances come
# from the MCSE of the kept draws, so fewer warmup draws do not widen any check.
SETTINGS = SamplerSettings(num_warmup=500, num_samples=1000, target_accept=0.95, seed=11)
LOTS = [(2, 80), (0, 50), (1, 125), (3, 80), (0, 80)]  # (defectives, inspected), one supplier


def _theta_prior(theta: np.ndarray, sb_points: int) -> np.ndarray:
    """Prior density of logit mu for one supplier: N(M, M_SD^2 + sigma_b^2) mixed over
    sigma_b ~ HalfNormal(SIGMA_B_SCALE) (a 1-D integral, trapezoid rule)."""
    sb = np.linspace(0.0, 8.0 * sr.SIGMA_B_SCALE, sb_points)
    w = stats.halfnorm(scale=sr.SIGMA_B_SCALE).pdf(sb)
    sd = np.sqrt(sr.M_SD**2 + sb**2)
    dens = stats.norm.pdf(theta[:, None], sr.M_MEAN, sd[None, :]) * w[None, :]
    return np.trapezoid(dens, sb, axis=1)


def _quadrature(spec: float, points: int):
    theta = np.linspace(-14.0, 2.0, points)
    phi = np.linspace(sr.PHI_MIN, 1.0 - 1e-6, points // 3)
    kappa = 1.0 / phi**2 - 1.0
    mu = special.expit(theta)[:, None]
    loglik = sum(stats.betabinom.logpmf(x, n, mu * kappa, (1 - mu) * kappa) for x, n in LOTS)
    post = np.exp(loglik - loglik.max()) * _theta_prior(theta, 400)[:, None]
    marginal = np.trapezoid(post, phi, axis=1)
    cdf = np.concatenate([[0.0], np.cumsum((marginal[1:] + marginal[:-1]) / 2 * np.diff(theta))])
    cdf /= cdf[-1]
    quantile = lambda q: np.interp(q, cdf, theta)  # noqa: E731
    return {"above": 1.0 - np.interp(special.logit(spec), theta, cdf),
            "median": quantile(0.5), "q95": quantile(0.95),
            "cdf": lambda t: np.interp(t, theta, cdf)}


def test_one_supplier_matches_2d_quadrature():
    spec = 0.02
    fine, coarse = _quadrature(spec, 1800), _quadrature(spec, 900)
    grid_error = 3 * abs(fine["above"] - coarse["above"]) + 1e-4
    fit = sr.fit_suppliers([(np.array([x for x, _ in LOTS]), np.array([n for _, n in LOTS]))],
                           np.array([0]), ["A"], ["A"], False, SETTINGS)
    assert fit.gate.passed, fit.gate.reasons()
    theta = fit.draws["theta"][:, :, 0]
    above = (theta > special.logit(spec)).astype(float)
    assert abs(above.mean() - fine["above"]) <= 4 * mcse_mean(above) + grid_error
    for q, key in ((0.5, "median"), (0.95, "q95")):
        below = (theta <= fine[key]).astype(float)  # P(theta <= quadrature quantile) = q
        grid = 3 * abs(coarse["cdf"](fine[key]) - q) + 1e-4
        assert abs(below.mean() - q) <= 4 * mcse_mean(below) + grid


# ------------------------------------------------------------ direct simulation of the model

CELLS = [(0, 1), (0, 0), (1, 0), (1, 3), (2, 2), (2, 2)]  # (supplier, defectives), n = 15
N_UNITS = 15


def _importance(draws: int, seed: int):
    """P(latest worse) and P(worst) by prior simulation of every parameter, weighted by the
    beta-binomial likelihood (scipy.stats.betabinom); returns estimates and standard errors."""
    rng = np.random.default_rng(seed)
    sup = np.array([c[0] for c in CELLS])
    x = np.array([c[1] for c in CELLS])
    m = rng.normal(sr.M_MEAN, sr.M_SD, draws)
    sb = np.abs(rng.normal(0, sr.SIGMA_B_SCALE, draws))
    z = rng.normal(size=(draws, 3))
    sw = np.abs(rng.normal(0, sr.SIGMA_W_SCALE, (draws, 3)))
    e = rng.normal(size=(draws, len(CELLS)))
    delta = rng.normal(0, sr.CHANGE_SD, (draws, 3))  # each supplier's latest-period change
    latest = sr.latest_cells(sup)  # [0, 1, 0, 1, 0, 1]: every supplier's second cell
    phi = rng.uniform(sr.PHI_MIN, 1.0, draws)
    kappa = (1.0 / phi**2 - 1.0)[:, None]
    theta = (m[:, None] + sb[:, None] * z)[:, sup] + sw[:, sup] * e + delta[:, sup] * latest
    mu = special.expit(theta)
    loglik = stats.betabinom.logpmf(x, N_UNITS, mu * kappa, (1 - mu) * kappa).sum(axis=1)
    w = np.exp(loglik - loglik.max())
    w /= w.sum()
    rate = (mu[:, 0::2] + mu[:, 1::2]) / 2.0
    worse = (mu[:, 1::2] > mu[:, 0::2]).astype(float)
    worst = (rate == rate.max(axis=1, keepdims=True)).astype(float)
    out = {}
    for name, g in (("worse", worse), ("worst", worst)):
        p = w @ g
        out[name] = (p, np.sqrt((w[:, None] ** 2 * (g - p) ** 2).sum(axis=0)))
    return out, 1.0 / (w**2).sum()


@pytest.mark.slow  # about 50 s of NUTS under load; CI keeps the quadrature check above
def test_worse_than_before_and_worst_of_all_match_direct_simulation():
    ref, ess = _importance(1_000_000, seed=3)
    assert ess > 3000  # the weighted prior sample is large enough to be a reference
    cells = [(np.array([x]), np.array([N_UNITS])) for _, x in CELLS]
    fit = sr.fit_suppliers(cells, np.array([c[0] for c in CELLS]), ["A", "B", "C"],
                           [f"c{k}" for k in range(len(CELLS))], True, SETTINGS)
    assert fit.gate.passed, fit.gate.reasons()
    got = supplier_summaries(fit.draws["theta"], np.array([c[0] for c in CELLS]), 3,
                             spec=0.05, confidence=0.95)
    for name, key in (("worse", "prob_latest_worse"), ("worst", "prob_worst")):
        p, se = ref[name]
        tol = 4.5 * np.sqrt(got[f"{key}_mcse"] ** 2 + se**2)
        assert np.all(np.abs(got[key] - p) <= tol), (name, got[key], p, tol)


def test_latest_cells_marks_each_suppliers_last_cell_of_two_or_more():
    assert sr.latest_cells(np.array([0, 0, 1, 2, 2, 2])).tolist() == [0, 1, 0, 0, 0, 1]


def test_summaries_against_hand_counts():
    """Indicator means by hand on a tiny set of draws (no sampler)."""
    mu = np.array([[[0.01, 0.03, 0.02, 0.01], [0.02, 0.01, 0.05, 0.04]]])  # 1 chain, 2 draws
    mu = np.tile(mu, (1, 4, 1))  # 8 draws, the same two four times (ESS needs 8 per chain)
    got = supplier_summaries(special.logit(mu), np.array([0, 0, 1, 1]), 2, spec=0.025,
                             confidence=0.9)
    # supplier rates: draw 1 (0.02, 0.015), draw 2 (0.015, 0.045)
    assert got["prob_worst"].tolist() == pytest.approx([0.5, 0.5])
    assert got["prob_latest_worse"].tolist() == pytest.approx([0.5, 0.0])
    assert got["prob_above"].tolist() == pytest.approx([0.0, 0.5])


# ------------------------------------------------------------ the command

def test_suppliers_command_writes_the_group(tmp_path, capsys):
    from supplier_sim import simulate

    # a small history (3 suppliers x 2 quarters x 3 lots) keeps the sampling short: the test
    # is of the command's files, record and gate, not of the model's accuracy
    rates = np.array([[0.004] * 2, [0.01] * 2, [0.004, 0.02]])
    table = simulate(rates, lots=3, n=100, kappa=400, seed=5)
    path = tmp_path / "lots.csv"
    f = table.frame.rename(columns={"lot": "Inspection lot", "supplier": "Vendor",
                                    "date": "Insp. start date", "inspected": "Sample Qty",
                                    "defectives": "Defective qty"})
    f[["Inspection lot", "Vendor", "Insp. start date", "Sample Qty",
       "Defective qty"]].to_csv(path, index=False)
    out = tmp_path / "ev"
    code = main(["suppliers", str(path), "--spec", "1%", "--period", "quarter", "--out",
                 str(out), "--seed", "3", "--analyst", "A. Tester"])
    text = capsys.readouterr().out
    assert code == 0
    assert "CAUTION: decision support only" in text and "convergence gate: passed" in text
    record = json.loads((out / "supplier_scorecard.json").read_text())
    assert record["kind"] == "suppliers" and len(record["suppliers"]) == 3
    from qualbayes.evidence.run_record import seal

    # stamped and sealed by the pipeline: the digest is of the record as written
    assert record["analyst"] == "A. Tester" and record["report_id"]
    assert seal(record)["digest"] == record["digest"]
    for s in record["suppliers"]:
        assert s["prob_above_mcse"] is not None and s["prob_worst_mcse"] is not None
    assert sum(s["prob_worst"] for s in record["suppliers"]) == pytest.approx(1.0)
    assert (out / "supplier_rates.png").stat().st_size > 1000
    from openpyxl import load_workbook

    assert load_workbook(out / "supplier_scorecard.xlsx").sheetnames[:2] == [
        "Scorecard", "Periods"]
    # targets are checked before any work: a second run refuses at once
    assert main(["suppliers", str(path), "--spec", "1%", "--out", str(out)]) == 3


def test_missing_supplier_column_is_refused_before_sampling(tmp_path, capsys):
    p = tmp_path / "a.csv"
    p.write_text("Lot,Inspected,Defects\nA,50,0\n")
    assert main(["suppliers", str(p), "--spec", "1%"]) == 2
    assert "supplier column" in capsys.readouterr().err


def test_failed_gate_gives_no_verdict(monkeypatch):
    from supplier_sim import simulate

    from qualbayes import scorecard

    table = simulate(np.array([[0.01, 0.01], [0.02, 0.02]]), lots=2, n=50, kappa=400, seed=1)
    tiny = SamplerSettings(num_warmup=20, num_samples=20, retry=False, seed=1)
    result = scorecard.assess_suppliers(table, 0.01, period="quarter", settings=tiny)
    assert not result.converged
    assert set(result.suppliers["limit_call"]) == {"not-converged"}
    assert result.suppliers["prob_above"].isna().all()
