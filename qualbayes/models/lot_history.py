r"""Lot history of one part number: a hierarchical beta-binomial, fitted with NUTS.

Model, for lots i = 1..k of one part:

.. math::

    x_i \mid p_i &\sim \mathrm{Binomial}(n_i, p_i) \\
    p_i \mid \mu, \kappa &\sim \mathrm{Beta}(\mu\kappa,\; (1-\mu)\kappa) \\
    \mu &\sim \mathrm{Beta}(1, 1), \qquad
    \phi = (\kappa + 1)^{-1/2} \sim \mathrm{Uniform}(0, 1)

:math:`\mu` is the mean defect rate of the supplier's lots and :math:`\phi^2 = 1/(\kappa+1)`
the intra-class correlation: the lot-to-lot standard deviation of :math:`p_i` is
:math:`\phi\sqrt{\mu(1-\mu)}`. A uniform :math:`\phi` is a proper version of the prior
:math:`p(\mu, \kappa) \propto (\kappa+1)^{-3/2}` (compare Gelman et al., Bayesian Data
Analysis, 3rd ed., sec. 5.3, which uses :math:`(\alpha+\beta)^{-5/2}`, improper).

The lot rates are marginalised out: :math:`x_i \mid \mu,\kappa \sim
\mathrm{BetaBinomial}(n_i, \mu\kappa, (1-\mu)\kappa)`, so NUTS samples two dimensions. Given
each draw of :math:`(\mu, \kappa)`, :math:`p_i` is exactly
:math:`\mathrm{Beta}(\mu\kappa + x_i, (1-\mu)\kappa + n_i - x_i)`; lot summaries average these
conditional Beta distributions over the draws (Rao-Blackwellised), and the next lot's rate
is :math:`\mathrm{Beta}(\mu\kappa, (1-\mu)\kappa)` mixed over the draws.

Padding: a lot with :math:`n_i = 0` contributes exactly zero to the log-likelihood, so lot
arrays are padded with empty lots to a few fixed sizes and one compilation serves many parts.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference import Fit, SamplerSettings, run_nuts, setup_jax

setup_jax()

import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def lot_history_model(x, n):
    """Marginalised hierarchical beta-binomial (the production model)."""
    mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
    phi = numpyro.sample("phi", dist.Uniform(0.0, 1.0))
    kappa = numpyro.deterministic("kappa", 1.0 / phi**2 - 1.0)
    numpyro.sample("x", dist.BetaBinomial(mu * kappa, (1.0 - mu) * kappa, total_count=n),
                   obs=x)


def lot_history_model_plain(x, n):
    """The same model with every p_i sampled (not marginalised): for the benchmark only."""
    mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
    phi = numpyro.sample("phi", dist.Uniform(0.0, 1.0))
    kappa = numpyro.deterministic("kappa", 1.0 / phi**2 - 1.0)
    with numpyro.plate("lots", x.shape[0]):
        p = numpyro.sample("p", dist.Beta(mu * kappa, (1.0 - mu) * kappa))
        numpyro.sample("x", dist.Binomial(total_count=n, probs=p), obs=x)


def bucket(k: int) -> int:
    """Padded length for k lots: the next power of two, at least 8."""
    return max(8, 1 << (max(k, 1) - 1).bit_length())


def _gate_quantities(draws: dict) -> dict:
    return {"mu": draws["mu"], "log_kappa": np.log(draws["kappa"])}


def fit_history(x, n, settings: SamplerSettings) -> Fit:
    """Fit one part's lot history. ``x``, ``n`` are the lots' defectives and sample sizes."""
    x = np.asarray(x, dtype=float)
    n = np.asarray(n, dtype=float)
    size = bucket(len(x))
    xp = jnp.zeros(size).at[: len(x)].set(x)
    np_ = jnp.zeros(size).at[: len(n)].set(n)
    return run_nuts(lot_history_model, (xp, np_), settings, gate_on=_gate_quantities)
