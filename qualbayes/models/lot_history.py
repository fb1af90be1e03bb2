r"""Lot histories of part numbers: hierarchical beta-binomials, fitted with NUTS.

Model, for part j and its lots i = 1..k_j (parts are independent of each other):

.. math::

    x_{ji} \mid p_{ji} &\sim \mathrm{Binomial}(n_{ji}, p_{ji}) \\
    p_{ji} \mid \mu_j, \kappa_j &\sim \mathrm{Beta}(\mu_j\kappa_j,\; (1-\mu_j)\kappa_j) \\
    \mu_j &\sim \mathrm{Beta}(1, 1), \qquad
    \phi_j = (\kappa_j + 1)^{-1/2} \sim \mathrm{Uniform}(\phi_{min}, 1),
    \quad \phi_{min} = 10^{-4}

:math:`\mu_j` is the mean defect rate of the part's lots and :math:`\phi_j^2 = 1/(\kappa_j+1)`
the intra-class correlation: the lot-to-lot standard deviation of :math:`p_{ji}` is
:math:`\phi_j\sqrt{\mu_j(1-\mu_j)}`. A uniform :math:`\phi` is a proper version of the prior
:math:`p(\mu, \kappa) \propto (\kappa+1)^{-3/2}` (compare Gelman et al., Bayesian Data
Analysis, 3rd ed., sec. 5.3, which uses the improper :math:`(\alpha+\beta)^{-5/2}`).
The lower bound caps :math:`\kappa` at about :math:`10^8`: lots that alike are
indistinguishable from the binomial limit for any real sample size, and beyond it the
log-gamma differences of the beta-binomial lose all precision even in float64 (a chain that
wandered there met a flat, meaningless likelihood and stalled; seen in testing).

The lot rates are marginalised out: :math:`x_{ji} \mid \mu_j,\kappa_j \sim
\mathrm{BetaBinomial}(n_{ji}, \mu_j\kappa_j, (1-\mu_j)\kappa_j)`, so NUTS samples two
dimensions per part. Given a draw of :math:`(\mu_j, \kappa_j)`, :math:`p_{ji}` is exactly
:math:`\mathrm{Beta}(\mu_j\kappa_j + x_{ji}, (1-\mu_j)\kappa_j + n_{ji} - x_{ji})`; lot summaries
average these conditional Betas over the draws (Rao-Blackwellised), and the next lot's rate
is :math:`\mathrm{Beta}(\mu_j\kappa_j, (1-\mu_j)\kappa_j)` mixed over the draws.

All parts are sampled in one vectorised model (a plate over parts), so one compilation
serves them all. Padding: a lot with :math:`n = 0` contributes exactly zero to the
log-likelihood, so the lots axis is padded to a few fixed sizes and compiled code is reused
across files with similar numbers of lots.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference import Fit, SamplerSettings, run_nuts, setup_jax

PHI_MIN = 1e-4  # kappa <= 1/PHI_MIN^2 - 1, about 1e8

setup_jax()

import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def lot_history_model(x, n):
    """Marginalised hierarchical beta-binomial; ``x``, ``n`` have shape (parts, lots)."""
    with numpyro.plate("parts", x.shape[0], dim=-2):
        mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
        phi = numpyro.sample("phi", dist.Uniform(PHI_MIN, 1.0))
        kappa = numpyro.deterministic("kappa", 1.0 / phi**2 - 1.0)
        with numpyro.plate("lots", x.shape[1], dim=-1):
            numpyro.sample("x", dist.BetaBinomial(mu * kappa, (1.0 - mu) * kappa,
                                                  total_count=n), obs=x)


def lot_history_model_plain(x, n):
    """The same model with every p sampled (not marginalised): for the benchmark only."""
    with numpyro.plate("parts", x.shape[0], dim=-2):
        mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
        phi = numpyro.sample("phi", dist.Uniform(PHI_MIN, 1.0))
        kappa = numpyro.deterministic("kappa", 1.0 / phi**2 - 1.0)
        with numpyro.plate("lots", x.shape[1], dim=-1):
            p = numpyro.sample("p", dist.Beta(mu * kappa, (1.0 - mu) * kappa))
            numpyro.sample("x", dist.Binomial(total_count=n, probs=p), obs=x)


def bucket(k: int, least: int = 8) -> int:
    """Padded length: the next power of two, at least ``least``."""
    return max(least, 1 << (max(k, 1) - 1).bit_length())


def pad(groups: list[tuple[np.ndarray, np.ndarray]]) -> tuple[np.ndarray, np.ndarray]:
    """Stack each part's (x, n) into (parts, lots) arrays padded with empty lots/parts."""
    rows = len(groups)
    cols = bucket(max(len(x) for x, _ in groups))
    xs = np.zeros((rows, cols))
    ns = np.zeros((rows, cols))
    for j, (x, n) in enumerate(groups):
        xs[j, : len(x)] = x
        ns[j, : len(n)] = n
    return xs, ns


def fit_histories(groups: list[tuple[np.ndarray, np.ndarray]], settings: SamplerSettings,
                  names: list[str] | None = None, model=lot_history_model) -> Fit:
    """Fit every part's lot history at once. ``groups[j] = (x_j, n_j)``.

    Draws of ``mu`` and ``kappa`` come back with shape (chain, draw, parts) with the padding
    removed; the gate checks mu and log kappa of every real part.
    """
    k = len(groups)
    names = names or [str(j) for j in range(k)]
    xs, ns = pad(groups)

    def gate_on(draws: dict) -> dict:
        out = {}
        for j, name in enumerate(names):
            out[f"mu[{name}]"] = draws["mu"][:, :, j, 0]
            out[f"log_kappa[{name}]"] = np.log(draws["kappa"][:, :, j, 0])
        return out

    fit = run_nuts(model, (jnp.asarray(xs), jnp.asarray(ns)), settings, gate_on=gate_on)
    fit.draws = {"mu": fit.draws["mu"][:, :, :k, 0], "kappa": fit.draws["kappa"][:, :, :k, 0]}
    return fit
