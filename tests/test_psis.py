"""Pareto-smoothed importance sampling in numpy (qualbayes.inference.psis) against the
reference library ArviZ (``arviz.psislw``, which implements Vehtari et al. 2024 with the
generalized Pareto fit of Zhang & Stephens 2009; docs/references.md, "PSIS in numpy"), and
against a generalized Pareto sample whose shape is known (scipy.stats.genpareto)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import stats

from qualbayes.inference.psis import gpd_fit, pareto_k, psis, tail_length


def _reference(lw, r_eff=1.0):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import arviz as az

        return az.psislw(np.array(lw, dtype=float), reff=r_eff)


def _cases():
    """Seeded log weights from light to very heavy tails, several sizes and r_eff."""
    out = []
    for seed, (kind, size, r_eff) in enumerate([
            ("normal", 4000, 1.0), ("normal", 1000, 0.6), ("student3", 4000, 1.0),
            ("lognormal-wide", 2000, 0.8), ("pareto-heavy", 4000, 1.0),
            ("weibull-reweight", 4000, 0.9), ("uniform", 300, 1.0)]):
        rng = np.random.default_rng(100 + seed)
        if kind == "normal":
            lw = rng.standard_normal(size)
        elif kind == "student3":
            lw = np.log(np.abs(rng.standard_t(3, size)) + 1e-3)
        elif kind == "lognormal-wide":
            lw = 3.0 * rng.standard_normal(size)
        elif kind == "pareto-heavy":  # weights with tail index 1/0.9: k near 0.9
            lw = np.log(rng.pareto(1 / 0.9, size) + 1)
        elif kind == "weibull-reweight":  # as in life_remaining: -m (x/eta)^beta
            beta = np.exp(rng.normal(0.6, 0.2, size))
            eta = np.exp(rng.normal(8.0, 0.3, size))
            lw = -5 * (2500 / eta) ** beta
        else:
            lw = rng.uniform(-1, 0, size)
        out.append(pytest.param(lw, r_eff, id=f"{kind}-{size}-reff{r_eff}"))
    return out


@pytest.mark.parametrize(("lw", "r_eff"), _cases())
def test_weights_and_k_equal_arviz(lw, r_eff):
    ref_w, ref_k = _reference(lw, r_eff)
    got_w, got_k = psis(lw, r_eff)
    assert got_k == pytest.approx(float(ref_k), abs=1e-10)
    np.testing.assert_allclose(got_w, ref_w, rtol=0, atol=1e-10)
    assert np.exp(got_w).sum() == pytest.approx(1.0, abs=1e-12)
    assert pareto_k(lw, r_eff) == got_k


def test_rows_are_independent_and_equal_arviz():
    rng = np.random.default_rng(7)
    lw = np.stack([rng.standard_normal(1500), 2.5 * rng.standard_normal(1500),
                   np.log(rng.pareto(1.5, 1500) + 1)])
    ref_w, ref_k = _reference(lw)
    got_w, got_k = psis(lw)
    np.testing.assert_allclose(got_k, ref_k, rtol=0, atol=1e-10)
    np.testing.assert_allclose(got_w, ref_w, rtol=0, atol=1e-10)
    assert got_k.shape == (3,)


def test_zero_weights_are_kept_as_arviz_does():
    rng = np.random.default_rng(3)
    lw = rng.standard_normal(1000)
    lw[:50] = -np.inf  # overflowed likelihood ratios: weight zero
    ref_w, ref_k = _reference(lw)
    got_w, got_k = psis(lw)
    assert got_k == pytest.approx(float(ref_k), abs=1e-10)
    np.testing.assert_array_equal(np.isneginf(got_w), np.isneginf(ref_w))
    ok = np.isfinite(ref_w)
    np.testing.assert_allclose(got_w[ok], ref_w[ok], rtol=0, atol=1e-10)


@pytest.mark.parametrize("k_true", [-0.2, 0.3, 0.6])
def test_gpd_fit_recovers_a_known_shape(k_true):
    """scipy.stats.genpareto(c=k) sample: the estimate is within its sampling error (the
    asymptotic sd of the k estimate is about (1 + k)/sqrt(n) for k > -1/2, Zhang & Stephens
    2009, section 2; five of them as tolerance)."""
    n = 4000
    y = np.sort(stats.genpareto(c=k_true, scale=2.0).rvs(n, random_state=11))
    k, sigma = gpd_fit(y)
    k_raw = (k * (n + 10) - 5) / n  # undo the prior's pull toward 1/2
    assert abs(k_raw - k_true) < 5 * (1 + k_true) / np.sqrt(n)
    assert sigma == pytest.approx(2.0, rel=0.15)


def test_tail_length_and_refusals():
    assert tail_length(4000) == 190  # 3 sqrt(4000) = 189.7 < 800
    assert tail_length(100) == 20  # 100 / 5 = 20 < 30
    assert psis(np.arange(12.0))[1] == np.inf  # tail of 3 draws: no fit
    with pytest.raises(ValueError, match="finite"):
        psis(np.array([0.0, np.nan, 1.0]))
    with pytest.raises(ValueError, match="two draws"):
        psis(np.array([1.0]))
