r"""Lognormal life with censoring: log density, priors in engineering terms, numpyro model.

The life T of a unit has :math:`\log T \sim \mathrm{Normal}(\mu, \sigma)`:

.. math::

    z(t) = \frac{\log t - \mu}{\sigma}, \qquad R(t) = \Phi(-z(t)), \qquad
    t_{50} = e^{\mu}, \qquad B_q = \exp(\mu + \sigma\,\Phi^{-1}(q))

Likelihood terms (the same censoring kinds as the Weibull model):

* exact failure at t: :math:`\log f(t) = -\tfrac12 z^2 - \tfrac12\log 2\pi - \log\sigma - \log t`
* suspension at t: :math:`\log S(t) = \log\Phi(-z(t))`
* interval (a, b]: :math:`\log(\Phi(z_b) - \Phi(z_a))`, computed in the tail where both
  probabilities are small (so a narrow interval far out keeps its exact log-probability)
* left-censored at b: :math:`\log\Phi(z_b)`

Priors, on the sampled scale :math:`(\mu, s = \log\sigma)`:

* :math:`s \sim \mathrm{Normal}(m_s, d_s)`. Default :math:`m_s = \log 1.28`, :math:`d_s = 1`:
  the spread of log life a Weibull of shape :math:`\beta` has is :math:`1.28/\beta`
  (sd of a Gumbel, :math:`\pi/(\beta\sqrt6)`), so this is the default Weibull shape prior
  :math:`\log\beta \sim N(0, 1)` carried over. A stated Weibull shape range (LO, HI) becomes
  the sigma range (1.28/HI, 1.28/LO) (:func:`sigma_from_shape_range`).
* :math:`\mu \mid \sigma \sim \mathrm{Normal}(\log t_{ref}, \sigma)`, which is exactly "the
  fraction failed by :math:`t_{ref}`, :math:`F(t_{ref}) = \Phi((\log t_{ref} - \mu)/\sigma)`,
  is uniform on (0, 1)": scale-free, proper, and the lognormal counterpart of the Weibull
  default (uniform on the cumulative hazard at :math:`t_{ref}`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qualbayes.models.censored import weighted_sum

LOG_2PI = math.log(2.0 * math.pi)
GUMBEL_SD = math.pi / math.sqrt(6.0)  # sd of log life of a Weibull with shape 1 (1.2825)


@dataclass(frozen=True)
class LognormalPrior:
    """log sigma ~ Normal(m, sd); mu | sigma ~ Normal(log t_ref, sigma)."""

    log_sigma: tuple[float, float] = (math.log(GUMBEL_SD), 1.0)
    text: str = ("sigma: log sigma ~ Normal(ln 1.28, 1), the default Weibull shape prior "
                 "carried over (sd of log life 1.28/shape); median: uniform on the fraction "
                 "failed by t_ref (mu | sigma ~ Normal(ln t_ref, sigma))")


def sigma_from_shape_range(lo: float, hi: float) -> LognormalPrior:
    """The lognormal prior matching a stated Weibull shape range (central 95%): the same
    spread of log life, sigma in (1.28/hi, 1.28/lo)."""
    s_lo, s_hi = math.log(GUMBEL_SD / hi), math.log(GUMBEL_SD / lo)
    m, sd = 0.5 * (s_lo + s_hi), (s_hi - s_lo) / (2 * 1.959963984540054)
    return LognormalPrior((m, sd), f"sigma: central 95% {GUMBEL_SD / hi:.3g} to "
                                   f"{GUMBEL_SD / lo:.3g} (from the stated shape range "
                                   f"{lo:g} to {hi:g}: same spread of log life); median: "
                                   "uniform on the fraction failed by t_ref")


def _log_ndtr(x, xp):
    if xp is np:
        from scipy.special import log_ndtr  # noqa: PLC0415

        return log_ndtr(x)
    from jax.scipy.special import log_ndtr  # noqa: PLC0415

    return log_ndtr(x)


def log_interval(za, zb, xp=np):
    r""":math:`\log(\Phi(z_b) - \Phi(z_a))` for :math:`z_a < z_b`, from the tail nearer both."""
    flip = za > 0
    lo = xp.where(flip, -zb, za)
    hi = xp.where(flip, -za, zb)
    lhi = _log_ndtr(hi, xp)
    return lhi + xp.log(-xp.expm1(_log_ndtr(lo, xp) - lhi))


def terms(mu, s, obs: dict, xp=np) -> dict:
    """Log-likelihood terms by kind, shape (..., n_kind) with mu, s broadcast on the left;
    ``obs`` holds the arrays of :func:`qualbayes.models.censored.pad` (or one group's)."""
    sigma = xp.exp(s)[..., None]
    m = mu[..., None]
    ze = (xp.log(obs["e_exact"]) - m) / sigma
    zr = (xp.log(obs["r_right"]) - m) / sigma
    za = (xp.log(obs["i_int_a"]) - m) / sigma
    zb = (xp.log(obs["i_int_b"]) - m) / sigma
    zl = (xp.log(obs["l_left"]) - m) / sigma
    return {
        "exact": -0.5 * ze * ze - 0.5 * LOG_2PI - xp.log(sigma) - xp.log(obs["e_exact"]),
        "right": _log_ndtr(-zr, xp),
        "interval": log_interval(za, zb, xp),
        "left": _log_ndtr(zl, xp),
    }


def log_likelihood(mu, s, obs: dict, xp=np):
    """The weighted sum of :func:`terms` over the last axis."""
    return weighted_sum(terms(mu, s, obs, xp), obs, xp)


def log_prior(mu, s, log_tref, prior: LognormalPrior, xp=np):
    """Log prior density on (mu, s = log sigma)."""
    m, sd = prior.log_sigma
    zs = (s - m) / sd
    zm = (mu - log_tref) / xp.exp(s)
    return -0.5 * zs * zs - math.log(sd) - 0.5 * zm * zm - s - LOG_2PI


def reliability(t, mu, s):
    """R(t) = Phi(-(log t - mu)/sigma) (numpy; broadcasts)."""
    from scipy.special import ndtr  # noqa: PLC0415

    return ndtr(-(np.log(t) - mu) / np.exp(s))


def lognormal_life_model(obs, log_tref, center, chol, *, prior: LognormalPrior):
    r"""numpyro model of every group at once, sampled on :math:`(v, s)` with
    :math:`v = (\log t_{ref} - \mu)/\sigma` (so :math:`F(t_{ref}) = \Phi(v)`) and
    :math:`s = \log\sigma`. The default prior is then simply :math:`v \sim N(0, 1)`,
    :math:`s \sim N(m_s, d_s)` (the density on :math:`(\mu, s)` times the Jacobian
    :math:`\sigma`), and v is far less tied to s than :math:`\mu` is when failures are few.

    ``obs``: the padded (groups, width) arrays; ``center`` (G, 2) the posterior mode of
    (v, s) and ``chol`` (G, 2, 2) its Laplace Cholesky factor; the sampled site z is
    whitened, :math:`(v, s) = m + L z` (a constant Jacobian: the posterior is unchanged).
    """
    import jax.numpy as jnp  # noqa: PLC0415
    import numpyro  # noqa: PLC0415
    import numpyro.distributions as dist  # noqa: PLC0415

    z = numpyro.sample("z", dist.ImproperUniform(dist.constraints.real, (),
                                                 (center.shape[0], 2)))
    v = center[:, 0] + chol[:, 0, 0] * z[:, 0]
    s = center[:, 1] + chol[:, 1, 0] * z[:, 0] + chol[:, 1, 1] * z[:, 1]
    mu = log_tref - jnp.exp(s) * v
    numpyro.deterministic("mu", mu)
    numpyro.deterministic("log_sigma", s)
    lp = log_prior(mu, s, log_tref, prior, jnp) + s + log_likelihood(mu, s, obs, jnp)
    numpyro.factor("log_posterior", jnp.sum(lp))
