r"""Accelerated life with NUTS (imports jax: the sampler path only).

The model, in the symbols of :mod:`qualbayes.models.life_stress`:

.. math::

    \log\sigma &\sim N(-m, s) \quad (\text{shape } \beta = 1/\sigma,\ \log\beta \sim N(m, s)) \\
    \gamma_0 &\sim \text{flat}, \qquad \gamma_j \sim N(m_j, s_j) \text{ or flat} \\
    \mu_i &= \gamma_0 + \sum_j \gamma_j (s_j(x_{ij}) - \bar s_j) \\
    \log T_i &= \mu_i + \sigma\varepsilon_i,\quad \varepsilon_i \sim \mathrm{SEV}
        \ (\text{Weibull}) \text{ or } N(0, 1)\ (\text{lognormal}),
        \text{ observed with censoring.}

Sampling. The posterior mode :math:`m` and Laplace covariance :math:`LL^\top` of
:math:`\theta = (\log\sigma, \gamma_0, c_1, \dots)` are found first (scipy); NUTS samples
:math:`z` with :math:`\theta = m + Lz`, an affine change of variables with a constant
Jacobian that leaves the posterior unchanged and shows the sampler a near-standard-normal
target (the strong correlation of intercept, slope and shape under censoring is removed).
The same model serves the level-check fit (one location and one shape per stress level).
"""

from __future__ import annotations

from functools import partial

import numpy as np

from qualbayes.inference import Fit, SamplerSettings, run_nuts, setup_jax
from qualbayes.models.life_stress import Design, Laplace, StressPrior, log_likelihood, log_prior

setup_jax()

import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def accelerated_model(center, chol, arrays, *, design: Design, prior: StressPrior,
                      terms: tuple):
    """theta = center + chol @ z; the log posterior of theta enters as one factor.
    ``arrays`` are the observations (``design.arrays`` as jax arrays, passed as arguments so
    that compiled code is reused for new data of the same shape)."""
    z = numpyro.sample("z", dist.ImproperUniform(dist.constraints.real, (), (center.shape[0],)))
    theta = center + chol @ z
    numpyro.deterministic("theta", theta)
    data = Design(design.distribution, design.n_sigma, design.n_coef, design.ref,
                  design.spread, arrays, design.counts)
    log_post = log_prior(theta, design, prior, terms, jnp) + log_likelihood(theta, data, jnp)
    numpyro.factor("log_posterior", log_post)


def fit_accelerated(design: Design, laplace: Laplace, prior: StressPrior, terms: tuple,
                    settings: SamplerSettings, gate_on) -> Fit:
    """NUTS draws of theta, (chain, draw, k), gated on ``gate_on(draws)``."""
    rng = np.random.default_rng(settings.seed)
    init = {"z": jnp.asarray(rng.uniform(-1.0, 1.0, size=(settings.num_chains, design.size)))}
    model = partial(accelerated_model, design=design, prior=prior, terms=tuple(terms))
    arrays = {k: {kk: jnp.asarray(vv) for kk, vv in a.items()} for k, a in design.arrays.items()}
    args = (jnp.asarray(laplace.center), jnp.asarray(laplace.chol()), arrays)
    fit = run_nuts(model, args, settings, gate_on=gate_on, init_params=init)
    fit.draws = {"theta": fit.draws["theta"]}
    return fit
