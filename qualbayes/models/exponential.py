r"""Exponential life with censoring: log density, conjugate posterior, numpyro model.

Constant hazard :math:`\lambda = 1/\theta` (:math:`\theta` the mean life, MTBF for a
repairable system's renewal):

.. math::

    H(t) = t/\theta, \qquad R(t) = e^{-t/\theta}, \qquad B_q = -\theta\log(1 - q)

It is the Weibull with shape 1. Sampled scale: :math:`u = \log H(t_{ref}) =
\log(t_{ref}/\theta)`. Likelihood terms:

* exact failure at t: :math:`u - \log t_{ref} - H(t)`
* suspension at t: :math:`-H(t)`
* interval (a, b]: :math:`-H(a) + \log(1 - e^{-(H(b) - H(a))})`
* left-censored at b: :math:`\log(1 - e^{-H(b)})`

Prior (the Weibull default at shape 1): uniform on the cumulative hazard at
:math:`t_{ref}`, :math:`\Lambda = H(t_{ref}) = e^u` (density :math:`e^u` on u). With exact
failures and suspensions only it is conjugate:

.. math:: \Lambda \mid \text{data} \sim \mathrm{Gamma}\Big(r + 1,\ \sum_i t_i / t_{ref}\Big)

(r failures, :math:`\sum_i t_i` the total time on test), so draws are exact and
independent; otherwise NUTS samples u (:func:`exponential_life_model`).
"""

from __future__ import annotations

import numpy as np

from qualbayes.models.censored import weighted_sum
from qualbayes.models.weibull import log1mexp_from_log

PRIOR_TEXT = ("mean life: uniform on the cumulative hazard t_ref/theta at t_ref (the "
              "Weibull default at shape 1)")


def terms(u, log_tref, obs: dict, xp=np) -> dict:
    """Log-likelihood terms by kind, shape (..., n_kind), u broadcast on the left."""
    uu = u[..., None]
    lt = log_tref[..., None] if np.ndim(log_tref) else log_tref
    h_e = xp.exp(uu + xp.log(obs["e_exact"]) - lt)
    lgap = uu + xp.log(obs["i_int_b"] - obs["i_int_a"]) - lt
    return {
        "exact": uu - lt - h_e,
        "right": -xp.exp(uu + xp.log(obs["r_right"]) - lt),
        "interval": -xp.exp(uu + xp.log(obs["i_int_a"]) - lt) + log1mexp_from_log(lgap, xp),
        "left": log1mexp_from_log(uu + xp.log(obs["l_left"]) - lt, xp),
    }


def log_likelihood(u, log_tref, obs: dict, xp=np):
    """The weighted sum of :func:`terms` over the last axis."""
    return weighted_sum(terms(u, log_tref, obs, xp), obs, xp)


def log_prior(u):
    """Uniform on Lambda = e^u: density e^u on u."""
    return u


def conjugate_draws(failures: float, total_time: float, t_ref: float, size: int,
                    rng: np.random.Generator) -> np.ndarray:
    """Exact posterior draws of u = log(t_ref/theta) with exact failures and suspensions
    only: Lambda ~ Gamma(r + 1, rate sum t / t_ref)."""
    lam = rng.gamma(failures + 1.0, 1.0, size=size) / (total_time / t_ref)
    return np.log(lam)


def mean_life(u, t_ref: float):
    """theta = t_ref e^{-u}."""
    return t_ref * np.exp(-np.asarray(u))


def exponential_life_model(obs, log_tref, center, scale):
    r"""numpyro model of every group at once: ``obs`` the padded (groups, width) arrays of
    :func:`qualbayes.models.censored.pad`; the sampled site z is whitened,
    :math:`u = m + s z` with m, s the Laplace mode and sd of each group."""
    import jax.numpy as jnp  # noqa: PLC0415
    import numpyro  # noqa: PLC0415
    import numpyro.distributions as dist  # noqa: PLC0415

    z = numpyro.sample("z", dist.ImproperUniform(dist.constraints.real, (),
                                                 (center.shape[0],)))
    u = center + scale * z
    numpyro.deterministic("u", u)
    lp = log_prior(u) + log_likelihood(u, log_tref, obs, jnp)
    numpyro.factor("log_posterior", jnp.sum(lp))


