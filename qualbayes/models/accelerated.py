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

from qualbayes.inference.run import Fit, SamplerSettings, run_nuts, setup_jax
from qualbayes.models.life import bucket
from qualbayes.models.life_stress import Design, Laplace, StressPrior, log_likelihood, log_prior

setup_jax()

import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def accelerated_model(center, chol, arrays, spread, *, design: Design, prior: StressPrior,
                      terms: tuple):
    """theta = center + chol @ z; the log posterior of theta enters as one factor.
    ``arrays`` (the observations, padded with weight-0 entries) and ``spread`` (the column
    scales) are arguments, not constants, so compiled code is reused for new data of the
    same padded shape."""
    z = numpyro.sample("z", dist.ImproperUniform(dist.constraints.real, (), (center.shape[0],)))
    theta = center + chol @ z
    numpyro.deterministic("theta", theta)
    data = Design(design.distribution, design.n_sigma, design.n_coef, design.ref, spread,
                  arrays, design.counts)
    log_post = log_prior(theta, data, prior, terms, jnp) + log_likelihood(theta, data, jnp)
    numpyro.factor("log_posterior", log_post)


def padded_arrays(design: Design) -> dict:
    """Each kind's observations padded to a few fixed lengths with weight-0 entries (log time
    0, interval width 1: finite terms that count nothing), as jax arrays."""
    out = {}
    for key, a in design.arrays.items():
        n = a["w"].shape[0]
        width = bucket(n)
        pad = width - n
        out[key] = {
            "x": jnp.asarray(np.vstack([a["x"], np.zeros((pad, a["x"].shape[1]))])),
            "g": jnp.asarray(np.concatenate([a["g"], np.zeros(pad, int)])),
            "y": jnp.asarray(np.concatenate([a["y"], np.zeros(pad)])),
            "y2": jnp.asarray(np.concatenate([a["y2"], np.ones(pad)])),
            "w": jnp.asarray(np.concatenate([a["w"], np.zeros(pad)])),
        }
    return out


def fit_accelerated(design: Design, laplace: Laplace, prior: StressPrior, terms: tuple,
                    settings: SamplerSettings, gate_on) -> Fit:
    """NUTS draws of theta, (chain, draw, k), gated on ``gate_on(draws)``."""
    rng = np.random.default_rng(settings.seed)
    init = {"z": jnp.asarray(rng.uniform(-1.0, 1.0, size=(settings.num_chains, design.size)))}
    model = partial(accelerated_model, design=design, prior=prior, terms=tuple(terms))
    args = (jnp.asarray(laplace.center), jnp.asarray(laplace.chol()), padded_arrays(design),
            jnp.asarray(design.spread))
    fit = run_nuts(model, args, settings, gate_on=gate_on, init_params=init)
    fit.draws = {"theta": fit.draws["theta"]}
    return fit
