"""Numerical edge cases of the lot path: zero defects in huge samples, all units defective,
a single lot, lots of one unit, identical lots, lots of a trillion units. Each gives a
finite answer checked against a closed form, scipy, or quadrature, and the sampler gate
reports on every part.
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pandas as pd
import pytest
from helpers import write_csv
from scipy import special, stats

from qualbayes.cli import main
from qualbayes.data.lot_table import LotTable, read_lots
from qualbayes.lot_question import assess_lots
from qualbayes.models import lot_posterior as conj
from qualbayes.models import mixtures
from qualbayes.models.lot_prior import UNIFORM
from qualbayes.questions import ACCEPT, REJECT


def _table(rows, part=None) -> LotTable:
    """rows: (lot, inspected, defectives, lot_size[, part])."""
    records = [(r[0], r[4] if len(r) > 4 else part, None, None, r[3], r[1], r[2], k + 2)
               for k, r in enumerate(rows)]
    frame = pd.DataFrame(records, columns=["lot", "part", "supplier", "date", "lot_size",
                                           "inspected", "defectives", "row"])
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    return LotTable(frame, "mem.csv", None, 1, {}, [])


# ------------------------------------------------------------------ conjugate

@pytest.mark.parametrize("n", [10**6, 10**9, 10**12, 2**52])
def test_zero_defects_in_huge_samples_closed_form(n):
    # Uniform prior, x = 0: p | data ~ Beta(1, n + 1), so P(p <= u) = 1 - (1 - u)^(n + 1):
    # upper bound 1 - (1 - C)^(1/(n+1)), mean 1/(n + 2) (conjugacy; docs/references.md). The
    # expm1/log1p forms keep full precision where 1 - u rounds to 1.
    c, spec = 0.95, 1e-6
    res = assess_lots(_table([("A", n, 0, None)]), spec, c, UNIFORM).lots.iloc[0]
    upper = -np.expm1(np.log1p(-c) / (n + 1))
    prob = -np.expm1((n + 1) * np.log1p(-spec))
    assert res["upper_bound"] == pytest.approx(upper, rel=1e-9)
    assert res["posterior_mean"] == pytest.approx(1 / (n + 2), rel=1e-12)
    assert res["prob_within_spec"] == pytest.approx(prob, rel=1e-12)
    assert res["decision"] == (ACCEPT if prob >= c else "undecided")
    lo, hi = res["interval_low"], res["interval_high"]
    assert 0 < lo < res["posterior_mean"] < upper < hi < 1e-5


@pytest.mark.parametrize("n", [1, 50, 10**6])
def test_all_units_defective_closed_form(n):
    # x = n: p | data ~ Beta(n + 1, 1), P(p <= u) = u^(n+1); upper bound C^(1/(n+1))
    c = 0.95
    res = assess_lots(_table([("A", n, n, None)]), 0.01, c, UNIFORM).lots.iloc[0]
    assert res["upper_bound"] == pytest.approx(c ** (1 / (n + 1)), rel=1e-12)
    assert res["prob_within_spec"] == pytest.approx(0.01 ** (n + 1), rel=1e-9, abs=1e-300)
    # reject now carries the clean-unit count when more inspection could still change it
    # (issue 11 item 4): the conjugate count for Beta(n + 1, 1), or none beyond the cap
    expected = conj.extra_clean_units(n + 1.0, 1.0, 0.01, c)
    assert res["decision"] == REJECT
    got = res["extra_clean_units_to_accept"]
    assert (pd.isna(got) and expected is None) or got == expected


def test_lots_of_one_unit_closed_form():
    # n = 1: Beta(1, 2) after a good unit, Beta(2, 1) after a bad one
    # the rate p (process basis); the lot basis asks about the 10-unit lot instead
    res = assess_lots(_table([("good", 1, 0, 10), ("bad", 1, 1, 10)]), 0.01, 0.95,
                      UNIFORM, decision_basis="process").lots
    assert res["prob_within_spec"].tolist() == pytest.approx([1 - 0.99**2, 0.01**2])
    assert res["posterior_mean"].tolist() == pytest.approx([1 / 3, 2 / 3])
    # 9 units left: the beta-binomial predictive of scipy (reference library)
    for k, (a, b) in enumerate([(1, 2), (2, 1)]):
        bb = stats.betabinom(9, a, b)
        assert res["remaining_defectives_median"].iloc[k] == bb.ppf(0.5)
        assert res["remaining_defectives_upper"].iloc[k] == bb.ppf(0.95)


def test_counts_with_thirteen_digits_through_the_command(tmp_path, capsys):
    import json

    p = write_csv(tmp_path / "big.csv", ["Lot", "Lot Size", "Inspected", "Defects"],
                  [["A", "4,000,000,000,000", "1,000,000,000,000", 0],
                   ["B", "2000", "2000", "2000"],
                   ["C", "1,000,000,000,000", "100", "10"]])
    t = read_lots(p)
    assert t.frame["inspected"].tolist() == [10**12, 2000, 100]
    assert main(["lots", str(p), "--spec", "1ppm", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    a, b, c = doc["lots"]
    assert a["decision"] == "accept" and b["decision"] == "reject" == c["decision"]
    assert np.isfinite([a["upper_bound"], b["upper_bound"], a["prob_within_spec"]]).all()
    # lot A: 3e12 units left but only a few defectives expected, so the sum is exact; it
    # agrees with the continuous limit 3e12 x the Beta(1, 1e12 + 1) quantile (scipy) to
    # within the stated error of that limit
    rem, q = 3 * 10**12, 0.95
    limit = rem * stats.beta.ppf(q, 1, 10**12 + 1)
    assert abs(a["remaining_defectives"]["upper_bound"] - limit) <= stats.norm.ppf(q) / 2 + 1
    # lot C: about 1e11 defectives among the rest: the continuous limit, said in a note
    assert c["remaining_defectives"]["upper_bound"] == pytest.approx(
        (10**12 - 100) * stats.beta.ppf(q, 11, 91), rel=1e-9)
    assert [n for n in doc["notes"] if "continuous limit" in n and "lot(s) C:" in n]


def test_remaining_defectives_of_a_huge_lot_in_bounded_memory():
    # Before, the quantile summed probabilities 0..k in one array: a trillion-unit lot
    # asked for terabytes. Now: exact sums up to MAX_PMF_TERMS, then the continuous limit.
    tracemalloc.start()
    try:
        res = conj.remaining_defectives(np.array([11.0]), np.array([91.0]),
                                        np.array([10**12]), 0.95)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 64 * 2**20
    assert not res["exact"][0]
    assert res["upper_bound"][0] == pytest.approx(10**12 * stats.beta.ppf(0.95, 11, 91),
                                                  rel=1e-9)


@pytest.mark.parametrize("remaining,a,b", [(10**6, 5.0, 1000.0), (10**7, 11.0, 91.0),
                                           (10**7, 1.0, 126.0)])
def test_continuous_limit_is_within_its_stated_error(monkeypatch, remaining, a, b):
    # force the continuous limit where scipy can still give the exact beta-binomial
    # quantile (reference library), and check the stated error:
    # about (z/2) sqrt((a + b) p (1 - p)) units (see betabinom_quantile)
    monkeypatch.setattr(mixtures, "MAX_PMF_TERMS", 16)
    for q in (0.5, 0.95):
        k, exact = mixtures.betabinom_quantile(q, remaining, np.array([a]), np.array([b]))
        assert not exact
        p = a / (a + b)
        z = max(stats.norm.ppf(q), 0.5)
        bound = z / 2 * np.sqrt((a + b) * p * (1 - p)) + 1
        assert abs(k - stats.betabinom(remaining, a, b).ppf(q)) <= bound


def test_exact_sum_in_blocks_matches_scipy_for_many_draws():
    rng = np.random.default_rng(4)
    a, b = rng.uniform(2, 4, 3000), rng.uniform(400, 700, 3000)
    for q in (0.5, 0.95):
        k, exact = mixtures.betabinom_quantile(q, 5000, a, b)
        assert exact
        # the mixture CDF (average of scipy's beta-binomial CDFs) crosses q at k
        cdf = lambda j: np.mean(stats.betabinom.cdf(j, 5000, a, b))  # noqa: E731
        assert cdf(k) >= q - 1e-12 > cdf(k - 1)


# ------------------------------------------------------------------ history model (NUTS)

EDGE_PARTS = {
    # part: list of (inspected, defectives, lot size)
    "single": [(125, 2, 5000)],
    "one-unit": [(1, 1, None)] * 4 + [(1, 0, None)] * 37,
    "all-defective": [(50, 50, None)] * 8,
    "zero-in-huge": [(10**6, 0, 10**9)] * 10,
    "ties": [(125, 1, 2000)] * 30,
}


def _edge_table() -> LotTable:
    rows = []
    for part, lots in EDGE_PARTS.items():
        for k, (n, x, size) in enumerate(lots):
            rows.append((f"{part}-{k}", n, x, size, part))
    return _table(rows)


def grid_moments(x: np.ndarray, n: np.ndarray) -> dict[str, tuple[float, float]]:
    """Posterior mean and sd of mu and log kappa by quadrature on a fixed wide fine grid in
    the sampler's own coordinates u = logit(mu), v = log(tau - tau_lo(mu)), written here
    independently of qualbayes.models.lot_history_grid: tau = (kappa mu (1-mu))^(-1/2)
    ~ HalfNormal(0.5) truncated to tau >= tau_lo = (1e8 mu (1-mu))^(-1/2) (closed-form
    density: scipy.stats.norm in logs), mu ~ Beta(1, 1), Jacobians mu (1 - mu) and e^v."""
    u = np.linspace(-32, 32, 1601)
    v = np.linspace(-30, 12, 1601)
    uu, vv = np.meshgrid(u, v, indexing="ij")
    mu, not_mu = special.expit(uu), special.expit(-uu)
    m = mu * not_mu
    lo = 1 / np.sqrt(1e8 * m)
    tau = lo + np.exp(vv)
    kappa = 1 / (m * tau**2)
    a, b = mu * kappa, not_mu * kappa
    scale = 0.5
    log_prior_tau = (np.log(2) + stats.norm.logpdf(tau / scale) - np.log(scale)
                     - np.log(2) - special.log_ndtr(-lo / scale))
    logp = special.log_expit(uu) + special.log_expit(-uu) + log_prior_tau + vv
    pairs, counts = np.unique(np.stack([x, n], 1), axis=0, return_counts=True)
    for (xi, ni), c in zip(pairs, counts, strict=True):
        logp += c * (special.betaln(a + xi, b + (ni - xi)) - special.betaln(a, b))
    w = np.exp(logp - logp.max())
    w /= w.sum()
    edge = w[0, :].sum() + w[-1, :].sum() + w[:, 0].sum() + w[:, -1].sum()
    assert edge < 1e-8  # the grid holds the mass
    out = {}
    for name, val in (("mu", mu), ("log_kappa", np.log(kappa))):
        mean = float(np.sum(w * val))
        out[name] = (mean, float(np.sqrt(np.sum(w * (val - mean) ** 2))))
    return out


@pytest.fixture(scope="module")
def history():
    from qualbayes.inference.run import SamplerSettings

    return assess_lots(_edge_table(), 0.01, 0.95, "history", settings=SamplerSettings(seed=3))


def test_history_edge_parts_match_quadrature(history):
    import arviz as az

    for part, lots in EDGE_PARTS.items():
        gate = history.diagnostics[part]
        assert gate["passed"], (part, gate["reasons"])
        n = np.array([lot[0] for lot in lots], float)
        x = np.array([lot[1] for lot in lots], float)
        exact = grid_moments(x, n)
        draws = history.draws[part]
        for name, d in (("mu", draws["mu"]), ("log_kappa", np.log(draws["kappa"]))):
            ess = float(az.ess(np.asarray(d), method="bulk"))
            mean, sd = exact[name]
            # 4 Monte Carlo standard errors plus a grid allowance of 1% of the sd
            assert abs(float(np.mean(d)) - mean) <= 4 * sd / np.sqrt(ess) + 0.01 * sd, (
                part, name, float(np.mean(d)), mean, sd, ess)


def test_history_edge_parts_give_finite_sensible_decisions(history):
    lots = history.lots.set_index("lot")
    numeric = ["posterior_mean", "interval_low", "interval_high", "upper_bound",
               "prob_within_spec"]
    assert np.isfinite(lots[numeric].to_numpy(float)).all()
    assert ((0 <= lots["interval_low"]) & (lots["interval_low"] <= lots["upper_bound"])
            & (lots["upper_bound"] <= lots["interval_high"]) & (lots["interval_high"] <= 1)).all()
    # each reported quantile is where the lot's mixture CDF reaches its level, even for the
    # extremely skewed mixtures of a million clean units (mean above the 97.5% point there)
    from qualbayes.lot_answers import SUMMARY_DRAWS

    for lot, row in lots.iterrows():
        draws = history.draws[row["part"]]
        mu, kappa = np.ravel(draws["mu"]), np.ravel(draws["kappa"])
        # the summaries are taken from SUMMARY_DRAWS evenly thinned draws (docs/lots.md)
        keep = np.linspace(0, mu.size - 1, min(SUMMARY_DRAWS, mu.size)).round().astype(int)
        mu, kappa = mu[keep], kappa[keep]
        x, n = float(row["defectives"]), float(row["inspected"])
        alpha, beta = mu * kappa + x, (1 - mu) * kappa + (n - x)
        for key, level in (("interval_low", 0.025), ("upper_bound", 0.95),
                           ("interval_high", 0.975)):
            value = row[key]
            if 0 < value < 1 - 1e-12:
                assert mixtures.cdf(value, alpha, beta) == pytest.approx(level, abs=1e-6), (
                    lot, key)
                assert mixtures.cdf(value * (1 - 1e-6), alpha, beta) < level, (lot, key)
            elif value == 0:  # the quantile is below the smallest double
                assert mixtures.cdf(1e-300, alpha, beta) >= level, (lot, key)
            else:  # within 1e-12 of 1 (all units defective): as close as doubles allow
                assert mixtures.cdf(value, alpha, beta) >= level - 1e-6, (lot, key)
    part = lots["part"]
    assert (lots.loc[part == "all-defective", "decision"] == REJECT).all()
    # a million clean units per lot: each lot's own rate is tiny whatever the history says
    huge = lots.loc[part == "zero-in-huge"]
    assert (huge["decision"] == ACCEPT).all() and (huge["upper_bound"] < 1e-5).all()
    assert (huge["remaining_defectives_upper"] >= 0).all()
    # identical lots get identical answers (one set of draws, one conditional Beta each)
    ties = lots.loc[part == "ties", numeric + ["decision"]]
    assert (ties.nunique() == 1).all()
    # one unit per lot tells nothing about lot-to-lot spread: mu | data is exactly
    # Beta(1 + 4, 1 + 37) whatever kappa is (the beta-binomial with n = 1 is Bernoulli(mu))
    import arviz as az

    mu = np.asarray(history.draws["one-unit"]["mu"])
    exact = stats.beta(5, 38)
    ess = float(az.ess(mu, method="bulk"))
    assert abs(mu.mean() - exact.mean()) <= 4 * exact.std() / np.sqrt(ess)
    for q in (0.1, 0.5, 0.9):
        assert abs(np.mean(mu <= exact.ppf(q)) - q) <= 4 * np.sqrt(q * (1 - q) / ess)
    for part_name, gate in history.diagnostics.items():
        assert gate["passed"] and gate["divergences"] == 0, part_name
        assert np.isfinite(history.next_lot[part_name]["mean"])


@pytest.mark.parametrize("q, alpha, beta", [
    # found by a random search over mixtures: Newton's step lands where expit rounds p to
    # exactly 0 or 1, whose log is -inf (the density there is 0 and the step bisects)
    (0.999999, [0.5644409108191676, 0.0719892638287456, 0.057771986683554315,
                75.14594476016886, 183.9750582624694],
     [11.701557842884009, 35.356033222538535, 6.636766839814641, 224.89909030937227,
      76.91354409636486]),
    (0.95, [10.471950186800722, 1.0420615696737532], [1.6897338050998296, 150.2753334783132]),
])
def test_mixture_quantile_at_a_rounded_end_warns_nothing_and_is_right(q, alpha, beta):
    """The quantile of a Beta mixture where the search passes p = 0 or 1 in floating point:
    no RuntimeWarning reaches the user, and the answer's CDF is q by scipy.stats.beta (an
    equal-weight mixture of scipy's Beta CDFs)."""
    import warnings

    a, b = np.array(alpha), np.array(beta)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        value = mixtures.ppf(q, a, b)
    assert np.mean(stats.beta.cdf(value, a, b)) == pytest.approx(q, abs=1e-9)
