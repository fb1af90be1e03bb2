"""The power prior (Ibrahim & Chen 2000, Statistical Science 15:46: prior proportional to
L(earlier data)^w x initial prior): closed forms against the definition, weight 0 equals
the analysis without the earlier data, weight 1 equals pooling the two data sets (exact for
the beta-binomial; for the Weibull the pooled maximum likelihood fit of scipy.stats and the
Lieblein-Zelen ball-bearing MLE of docs/references.md, and NUTS against a direct fit of the pooled
data within Monte Carlo error)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import LOT_HEADER, write_csv
from scipy import integrate, stats

from qualbayes.data.lot_table import read_lots
from qualbayes.errors import OptionError
from qualbayes.lot_question import assess_lots
from qualbayes.models.lot_prior import BetaPrior
from qualbayes.models.weibull import (
    FLAT,
    LifePrior,
    group_stats,
    log_posterior,
    log_prior,
    reported_mode,
)
from qualbayes.priors.power_prior import (
    EarlierCounts,
    EarlierExposure,
    beta_power,
    gamma_power,
    parse_counts,
    parse_exposure,
    parse_weight,
)

BEARINGS = np.array([17.88, 28.92, 33.00, 41.52, 42.12, 45.60, 48.48, 51.84, 51.96, 54.12,
                     55.56, 67.80, 68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84,
                     127.92, 128.04, 173.40])  # Lieblein & Zelen (1956), docs/references.md


# --------------------------------------------------------------------------- binomial

@pytest.mark.parametrize("w", [0.0, 0.3, 0.5, 1.0])
def test_beta_power_prior_is_the_normalised_definition(w):
    # Ibrahim & Chen's definition, integrated numerically: Beta(a0, b0) x L(p | 3 in 400)^w
    a0, b0, x0, n0 = 1.5, 200.0, 3, 400
    a, b = beta_power(a0, b0, EarlierCounts(x0, n0, "test"), w)

    def unnormalised(p):
        return stats.beta.pdf(p, a0, b0) * stats.binom.pmf(x0, n0, p) ** w

    z = integrate.quad(unnormalised, 0, 1, points=[0.005, 0.02], limit=200)[0]
    for p in (0.001, 0.004, 0.008, 0.02):
        assert unnormalised(p) / z == pytest.approx(stats.beta.pdf(p, a, b), rel=1e-6)


def _lots(tmp_path, name, rows):
    return read_lots(write_csv(tmp_path / name, LOT_HEADER, rows))


def test_weight_zero_equals_the_analysis_without_earlier_data(tmp_path):
    lots = _lots(tmp_path, "now.csv", [["N-1", "KV", "Acme", "2026-08-01", 900, 200, 1],
                                       ["N-2", "KV", "Acme", "2026-08-02", 900, 125, 0]])
    earlier = EarlierCounts(7, 2500, "earlier plant")
    base = assess_lots(lots, 0.01, 0.95, BetaPrior(1.0, 1.0, "uniform"))
    a, b = beta_power(1.0, 1.0, earlier, 0.0)
    borrowed = assess_lots(lots, 0.01, 0.95, BetaPrior(a, b, "w0"))
    for col in ("prob_within_spec", "upper_bound", "decision", "extra_clean_units_to_accept"):
        assert list(borrowed.lots[col]) == list(base.lots[col])


def test_weight_one_equals_pooling_the_two_data_sets_exactly(tmp_path):
    # one new lot, and an earlier file of three lots; at w = 1 the posterior is that of the
    # pooled counts (x + sum x0 in n + sum n0) under the same initial prior
    now = _lots(tmp_path, "now.csv", [["N-1", "KV", "Acme", "2026-08-01", 900, 200, 2]])
    old_rows = [["E-1", "KV", "Acme", "2025-01-01", 900, 315, 1],
                ["E-2", "KV", "Acme", "2025-01-02", 900, 315, 0],
                ["E-3", "KV", "Acme", "2025-01-03", 900, 500, 3]]
    path = write_csv(tmp_path / "earlier.csv", LOT_HEADER, old_rows)
    from qualbayes.priors.power_prior import counts_from_lots

    earlier = counts_from_lots(path)
    assert (earlier.failures, earlier.units, earlier.lots) == (4, 1130, 3)
    a, b = beta_power(0.5, 0.5, earlier, 1.0)
    # the posterior of the rate p (process basis; the lot basis would also weigh lot sizes)
    borrowed = assess_lots(now, 0.01, 0.95, BetaPrior(a, b, "w1"), decision_basis="process")
    pooled = _lots(tmp_path, "pooled.csv", [["P", "KV", "Acme", "2026-08-01", 9000,
                                             200 + 1130, 2 + 4]])
    direct = assess_lots(pooled, 0.01, 0.95, BetaPrior(0.5, 0.5, "jeffreys"),
                         decision_basis="process")
    for col in ("posterior_mean", "prob_within_spec", "upper_bound", "interval_low"):
        assert borrowed.lots[col].iloc[0] == pytest.approx(direct.lots[col].iloc[0], rel=1e-13)
    # the same answer from scipy.stats.beta directly (reference library)
    assert borrowed.lots["prob_within_spec"].iloc[0] == pytest.approx(
        stats.beta.cdf(0.01, 0.5 + 6, 0.5 + 1330 - 6), rel=1e-12)


def test_weights_and_counts_are_parsed_and_checked():
    assert parse_weight("0.5") == 0.5 and parse_weight("50%") == 0.5
    assert parse_weight("0") == 0.0 and parse_weight("1") == 1.0
    for bad in ("-0.1", "1.2", "half", "150%"):
        with pytest.raises(OptionError, match="--earlier-weight"):
            parse_weight(bad)
    c = parse_counts("1/40")
    assert (c.failures, c.units) == (1, 40)
    assert parse_counts("earlier.xlsx") is None
    with pytest.raises(OptionError, match="defectives <= units"):
        parse_counts("41/40")
    with pytest.raises(ValueError):
        beta_power(1, 1, c, 1.5)


# --------------------------------------------------------------------------- Poisson

@pytest.mark.parametrize("w", [0.0, 0.5, 1.0])
def test_gamma_power_prior_is_the_normalised_definition(w):
    a0, b0, r0, t0 = 2.0, 1400.0, 2, 1909.0  # NIST 8.4.6 (docs/references.md)
    a, b = gamma_power(a0, b0, EarlierExposure(r0, t0, "test"), w)

    def unnormalised(lam):
        return stats.gamma.pdf(lam, a0, scale=1 / b0) * stats.poisson.pmf(r0, lam * t0) ** w

    z = integrate.quad(unnormalised, 0, 0.02, points=[0.001], limit=200)[0]
    for lam in (2e-4, 8e-4, 2e-3):
        assert unnormalised(lam) / z == pytest.approx(stats.gamma.pdf(lam, a, scale=1 / b),
                                                      rel=1e-6)
    if w == 1.0:
        # pooling: the NIST worked example's posterior after the test, Gamma(4, 3309 h)
        assert (a, b) == (4.0, 3309.0)


def test_exposure_parsing():
    e = parse_exposure("2/3000")
    assert (e.failures, e.time) == (2, 3000.0)
    with pytest.raises(OptionError, match="FAILURES/TIME"):
        parse_exposure("2 in 3000 h")


# --------------------------------------------------------------------------- Weibull

def _scipy_loglik(shape, scale, failures=(), suspensions=(), ia=(), ib=(), left=()):
    """Censored Weibull log-likelihood from scipy.stats.weibull_min (reference library)."""
    d = stats.weibull_min(shape, scale=scale)
    ll = np.sum(d.logpdf(failures)) + np.sum(d.logsf(suspensions))
    ll += np.sum(np.log(d.sf(ia) - d.sf(ib))) + np.sum(d.logcdf(left))
    return float(ll)


def test_weibull_power_term_is_w_times_the_earlier_log_likelihood_scipy():
    earlier = dict(failures=[420.0, 610.0, 900.0], suspensions=[1000.0] * 5,
                   ia=[300.0, 700.0], ib=[500.0, 950.0], left=[200.0])
    st0 = group_stats(earlier["failures"], earlier["suspensions"], earlier["ia"],
                      earlier["ib"], earlier["left"])
    now = group_stats([350.0, 800.0], [1200.0] * 4)
    rng = np.random.default_rng(3)
    for w in (0.0, 0.4, 1.0):
        with_earlier = LifePrior(earlier=((w, st0, "earlier"),))
        for _ in range(5):
            shape, scale = rng.uniform(0.8, 3.0), rng.uniform(400.0, 2000.0)
            b = math.log(shape)
            u = shape * (now.log_tref - math.log(scale))
            diff = (log_prior(b, u, with_earlier, now.log_tref)
                    - log_prior(b, u, LifePrior(), now.log_tref))
            assert float(diff) == pytest.approx(w * _scipy_loglik(shape, scale, **earlier),
                                                rel=1e-10, abs=1e-10)


def test_weibull_weight_zero_leaves_the_posterior_unchanged():
    st0 = group_stats([420.0, 610.0], [1000.0] * 3)
    now = group_stats([350.0, 800.0, 950.0], [1200.0] * 4)
    b, u = np.meshgrid(np.linspace(-0.5, 1.2, 7), np.linspace(-3.0, 1.0, 7))
    plain = log_posterior(b, u, now, LifePrior())
    zero = log_posterior(b, u, now, LifePrior(earlier=((0.0, st0, "ignored"),)))
    assert np.array_equal(plain, zero)


def test_weibull_weight_one_mode_is_the_pooled_mle_scipy_and_lieblein_zelen():
    # split the ball bearings: 10 "now", 13 "earlier"; with flat priors and w = 1 the mode on
    # (log shape, log scale) is the MLE of all 23 (docs/references.md: shape 2.102, scale 81.88;
    # scipy.stats.weibull_min.fit agrees)
    now, old = BEARINGS[::2][:10], np.setdiff1d(BEARINGS, BEARINGS[::2][:10])
    old = np.concatenate([old, [68.64]])  # 68.64 occurs twice in the data
    assert old.size + now.size == BEARINGS.size
    st_now, st_old = group_stats(now, []), group_stats(old, [])
    prior = replace_earlier(FLAT, ((1.0, st_old, "earlier bearings"),))
    shape, scale = reported_mode(st_now, prior)
    assert abs(shape - 2.102) < 5e-4 and abs(scale - 81.88) < 5e-3
    c, _, sc = stats.weibull_min.fit(BEARINGS, floc=0)
    assert shape == pytest.approx(c, rel=1e-4) and scale == pytest.approx(sc, rel=1e-4)


def replace_earlier(prior, terms):
    from dataclasses import replace

    return replace(prior, earlier=terms)


def test_weibull_weight_one_with_censoring_is_the_pooled_censored_mle_scipy():
    now_f, now_s = [310.0, 520.0, 640.0, 790.0], [400.0, 1000.0, 1200.0]
    old_f, old_s = [450.0, 700.0, 880.0, 1150.0], [900.0, 1300.0, 1300.0]
    prior = replace_earlier(FLAT, ((1.0, group_stats(old_f, old_s), "earlier"),))
    shape, scale = reported_mode(group_stats(now_f, now_s), prior)
    data = stats.CensoredData(uncensored=now_f + old_f, right=now_s + old_s)
    c, _, sc = stats.weibull_min.fit(data, floc=0)  # scipy as the reference library
    assert shape == pytest.approx(c, rel=2e-4) and scale == pytest.approx(sc, rel=2e-4)


def test_weibull_weight_one_nuts_matches_a_direct_fit_of_the_pooled_data(tmp_path):
    """NUTS with the earlier data at w = 1 against NUTS on the pooled file (same flat prior):
    the means of log shape, log scale and R(mission) agree within
    4 sqrt(sd1^2/ESS1 + sd2^2/ESS2)."""
    from qualbayes.data.life import read_life
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.life_question import assess_life

    def life_csv(name, times):
        p = tmp_path / name
        p.write_text("Unit,Hours,Status\n" + "".join(f"U{k},{t},F\n" for k, t in
                                                      enumerate(times)))
        return read_life(p)

    now, old = BEARINGS[:9], BEARINGS[9:]
    settings = SamplerSettings(num_warmup=400, num_samples=600, seed=11)
    prior = replace_earlier(FLAT, ((1.0, group_stats(old, []), "earlier bearings"),))
    borrowed = assess_life(life_csv("now.csv", now), 50.0, 0.8, 0.9, prior, settings=settings)
    pooled = assess_life(life_csv("all.csv", BEARINGS), 50.0, 0.8, 0.9, FLAT,
                         settings=settings)
    g1, g2 = borrowed.groups[0], pooled.groups[0]
    assert g1["diagnostics"]["passed"] and g2["diagnostics"]["passed"]
    d1, d2 = next(iter(borrowed.draws.values())), next(iter(pooled.draws.values()))
    ess1, ess2 = g1["diagnostics"]["min_ess_bulk"], g2["diagnostics"]["min_ess_bulk"]
    for f in (np.log, lambda x: x):
        for key in ("shape", "scale"):
            x1, x2 = f(np.asarray(d1[key])), f(np.asarray(d2[key]))
            tol = 4 * math.sqrt(x1.var() / ess1 + x2.var() / ess2)
            assert abs(x1.mean() - x2.mean()) <= tol, key
    p1, p2 = g1["prob_meets_target"], g2["prob_meets_target"]
    assert abs(p1 - p2) <= 4 * math.sqrt(p1 * (1 - p1) / ess1 + p2 * (1 - p2) / ess2) + 1e-9
