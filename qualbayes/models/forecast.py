r"""Field-failure forecast: how many of the units in service will fail in each coming period
(pure numpy; no jax).

A unit of age :math:`a` (in life units: hours, cycles) that is still working accumulates
:math:`u` life units per period (the usage rate). Given the life law with location
:math:`\mu` and scale :math:`\sigma` (Weibull: :math:`\eta = e^\mu`, :math:`\beta =
1/\sigma`; lognormal: median :math:`e^\mu`), it fails in period :math:`k = 1..K` with the
exact conditional probability

.. math::

    p_k(a) = \frac{S(a + (k-1)u) - S(a + ku)}{S(a)}, \qquad
    p_{K+1}(a) = \frac{S(a + Ku)}{S(a)} \ (\text{still working at the horizon}).

Units of the same age form a cohort of :math:`n_c` units whose failures per period are
multinomial :math:`(n_c; p_1, \dots, p_{K+1})`, independent across cohorts given the
parameters. For each posterior draw :math:`(\mu_s, \sigma_s)` the forecast draws one
multinomial per cohort (as a chain of binomials, vectorised over draws and cohorts) and sums
over cohorts: the counts are then draws from the posterior predictive distribution, which
carries both the uncertainty in the life parameters and the chance of which units fail.
The expected number of failures per period given the parameters, :math:`\sum_c n_c
p_k(a_c)`, is kept as well (its posterior band is the parameter uncertainty alone).

Ages are used exactly while there are at most ``max_cohorts`` distinct ages; beyond that
they are grouped into equal-width bins, each at the mean age of its units (a second-order
error). The largest relative change this makes to the expected count per period is computed
exactly over every unit at the posterior median parameters; while it exceeds
BINNING_TOLERANCE (1e-4) the number of bins is doubled, and the error is reported.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

MAX_COHORTS = 256
BINNING_TOLERANCE = 1e-4  # relative error of the expected counts allowed from age bins
CHUNK = 64  # draws per vectorised block (memory: CHUNK x cohorts x periods floats)


@dataclass
class LifeDraws:
    """Posterior draws of the life law, (chain, draw) each."""

    mu: np.ndarray
    sigma: np.ndarray
    distribution: str = "weibull"

    @classmethod
    def weibull(cls, shape, scale) -> LifeDraws:
        return cls(np.log(np.asarray(scale, float)), 1.0 / np.asarray(shape, float), "weibull")

    def thinned(self, most: int) -> LifeDraws:
        """At most ``most`` draws, evenly spaced within each chain (chains kept)."""
        chains, draws = self.mu.shape
        per = max(1, min(draws, most // chains))
        take = np.linspace(0, draws - 1, per).astype(int)
        return LifeDraws(self.mu[:, take], self.sigma[:, take], self.distribution)


def cohorts(ages, counts=None, max_cohorts: int = MAX_COHORTS):
    """Distinct ages and their unit counts; equal-width bins at the mean age beyond
    ``max_cohorts`` distinct ages. Returns (ages, counts, binned)."""
    ages = np.asarray(ages, float)
    counts = np.ones(ages.size) if counts is None else np.asarray(counts, float)
    uniq, inv = np.unique(ages, return_inverse=True)
    n = np.bincount(inv, weights=counts)
    if uniq.size <= max_cohorts:
        return uniq, n, False
    edges = np.linspace(uniq[0], uniq[-1], max_cohorts + 1)
    idx = np.clip(np.searchsorted(edges, uniq, side="right") - 1, 0, max_cohorts - 1)
    total = np.bincount(idx, weights=n, minlength=max_cohorts)
    age_sum = np.bincount(idx, weights=n * uniq, minlength=max_cohorts)
    keep = total > 0
    return age_sum[keep] / total[keep], total[keep], True


def log_survival(t, mu, sigma, distribution: str):
    """log S(t) for log-location mu and scale sigma (broadcast); t = 0 gives 0."""
    with np.errstate(divide="ignore"):
        z = (np.log(t) - mu) / sigma
    if distribution == "weibull":
        return -np.exp(z)
    return special.log_ndtr(-z)


def period_probabilities(ages, mu, sigma, usage: float, horizon: int, distribution: str):
    """p[..., c, k]: probability that a unit of age ``ages[c]`` fails in period k+1
    (k < horizon) or survives the horizon (k = horizon), given it works now. ``mu`` and
    ``sigma`` have shape (...,); the result (..., cohorts, horizon + 1)."""
    mu = np.asarray(mu, float)[..., None, None]
    sigma = np.asarray(sigma, float)[..., None, None]
    t = np.asarray(ages, float)[:, None] + usage * np.arange(horizon + 1)[None, :]
    log_s = log_survival(t, mu, sigma, distribution)
    cond = np.exp(log_s - log_s[..., :1])  # S(a + k u) / S(a)
    p = np.empty(cond.shape[:-1] + (horizon + 1,))
    p[..., :horizon] = cond[..., :-1] - cond[..., 1:]
    p[..., horizon] = cond[..., -1]
    return np.clip(p, 0.0, 1.0)


def simulate_counts(p: np.ndarray, n: np.ndarray, rng) -> np.ndarray:
    """Failures per period summed over cohorts: one multinomial(n_c, p_c) per cohort and
    draw, as a chain of binomials. p (draws, cohorts, K + 1) -> counts (draws, K)."""
    horizon = p.shape[-1] - 1
    remaining = np.broadcast_to(n.astype(np.int64), p.shape[:-1]).copy()
    left = np.ones(p.shape[:-1])
    out = np.zeros(p.shape[:-2] + (horizon,), dtype=np.int64)
    for k in range(horizon):
        with np.errstate(invalid="ignore", divide="ignore"):
            q = np.where(left > 0, p[..., k] / left, 0.0)
        x = rng.binomial(remaining, np.clip(q, 0.0, 1.0))
        out[..., k] = x.sum(axis=-1)
        remaining -= x
        left = left - p[..., k]
    return out


def forecast_counts(ages, counts, draws: LifeDraws, usage: float, horizon: int,
                    seed: int = 0, max_cohorts: int = MAX_COHORTS) -> dict:
    """Posterior predictive failures per period for one installed base.

    Returns ``counts`` (chain, draw, K) predictive draws, ``expected`` (chain, draw, K) the
    expected failures given each draw, and the cohort summary. Draws are processed in
    blocks of CHUNK so memory stays at CHUNK x cohorts x K floats.
    """
    mu_med, sig_med = float(np.median(draws.mu)), float(np.median(draws.sigma))
    while True:
        age_c, n_c, binned = cohorts(ages, counts, max_cohorts)
        error = binning_error(ages, counts, age_c, n_c, mu_med, sig_med, usage, horizon,
                              draws.distribution) if binned else 0.0
        if error <= BINNING_TOLERANCE:
            break
        max_cohorts *= 2
    rng = np.random.default_rng(seed)
    mu, sigma = draws.mu.reshape(-1), draws.sigma.reshape(-1)
    sim = np.zeros((mu.size, horizon), dtype=np.int64)
    expected = np.zeros((mu.size, horizon))
    for start in range(0, mu.size, CHUNK):
        sl = slice(start, start + CHUNK)
        p = period_probabilities(age_c, mu[sl], sigma[sl], usage, horizon, draws.distribution)
        expected[sl] = np.einsum("c,sck->sk", n_c, p[..., :horizon])
        sim[sl] = simulate_counts(p, n_c, rng)
    shape = draws.mu.shape + (horizon,)
    out = {"counts": sim.reshape(shape), "expected": expected.reshape(shape),
           "cohorts": int(age_c.size), "binned": binned, "units": float(n_c.sum()),
           "binning_error": error}
    return out


def expected_exact(ages, counts, mu: float, sigma: float, usage: float, horizon: int,
                   distribution: str, block: int = 20000) -> np.ndarray:
    """Expected failures per period summed over every unit at its own age (no cohorts)."""
    ages = np.asarray(ages, float)
    counts = np.ones(ages.size) if counts is None else np.asarray(counts, float)
    total = np.zeros(horizon)
    for start in range(0, ages.size, block):
        p = period_probabilities(ages[start:start + block], mu, sigma, usage, horizon,
                                 distribution)
        total += counts[start:start + block] @ p[:, :horizon]
    return total


def binning_error(ages, counts, age_c, n_c, mu, sigma, usage, horizon, distribution) -> float:
    """Largest relative change of the expected count per period made by the age bins, at
    one parameter value (exact over every unit)."""
    exact = expected_exact(ages, counts, mu, sigma, usage, horizon, distribution)
    approx = n_c @ period_probabilities(age_c, mu, sigma, usage, horizon,
                                        distribution)[:, :horizon]
    scale = np.maximum(exact, 1e-12)
    return float(np.max(np.abs(approx - exact) / scale))
