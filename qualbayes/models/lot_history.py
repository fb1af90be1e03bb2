r"""Lot histories of part numbers: hierarchical beta-binomials, fitted with NUTS.

Model, for part j and its lots i = 1..k_j (parts are independent of each other):

.. math::

    x_{ji} \mid p_{ji} &\sim \mathrm{Binomial}(n_{ji}, p_{ji}) \\
    p_{ji} \mid \mu_j, \kappa_j &\sim \mathrm{Beta}(\mu_j\kappa_j,\; (1-\mu_j)\kappa_j) \\
    \mu_j &\sim \mathrm{Beta}(1, 1), \qquad
    \tau_j = (\kappa_j \mu_j(1-\mu_j))^{-1/2} \sim \mathrm{HalfNormal}(S),
    \ \tau_j \ge \tau_{lo}(\mu_j)

tau is the lot-to-lot coefficient of variation of the defect rate (for rare defects), stated
by the engineer through S (the default and why: :mod:`qualbayes.models.lot_spread`,
docs/lots.md). NUTS samples :math:`(\mathrm{logit}\,\mu_j, \log(\tau_j - \tau_{lo}))` with
the spread prior added as a factor. The lower bound of tau caps :math:`\kappa` at
about :math:`10^8`: lots that
alike are indistinguishable from the binomial limit for any real sample size, and beyond it
the log-gamma differences of the beta-binomial lose all precision even in float64. The
earlier hyperprior, :math:`\phi \sim \mathrm{Uniform}(\phi_{min}, 1)`, is kept only as
``lot_history_model_phi_uniform`` (``--prior history-phi-uniform``).

The lot rates are marginalised out: :math:`x_{ji} \mid \mu_j,\kappa_j \sim
\mathrm{BetaBinomial}(n_{ji}, \mu_j\kappa_j, (1-\mu_j)\kappa_j)`, so NUTS samples two
dimensions per part. Given a draw of :math:`(\mu_j, \kappa_j)`, :math:`p_{ji}` is exactly
:math:`\mathrm{Beta}(\mu_j\kappa_j + x_{ji}, (1-\mu_j)\kappa_j + n_{ji} - x_{ji})`; lot summaries
average these conditional Betas over the draws (Rao-Blackwellised), and the next lot's rate
is :math:`\mathrm{Beta}(\mu_j\kappa_j, (1-\mu_j)\kappa_j)` mixed over the draws.

One part is sampled by this model directly; several parts are sampled as independent
problems, each its own NUTS chain, adaptation and gate
(:mod:`qualbayes.models.lot_history_parts`, docs/speed.md); ``independent=False`` keeps one
joint run over a plate of parts. A close call continues the adapted chains
(:func:`more_draws`).

Sufficient statistics: the likelihood depends on the lots only through the distinct
(defectives, inspected) pairs and how many lots share each, so lots are collapsed into
weighted terms :math:`\sum_k w_k \log \mathrm{BB}(x_k \mid n_k, \ldots)` (exact). Inspection
data repeat themselves (sample sizes come from a few standard values, defect counts are
small), so 1,000 lots typically become a few dozen terms. Padding: a term with weight 0
contributes nothing, so the term axis is padded to a few fixed sizes and compiled code is
reused across files of similar size.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference.run import Fit, SamplerSettings, run_nuts, setup_jax
from qualbayes.models import beta_binomial
from qualbayes.models.lot_spread import KAPPA_MAX, PHI_MIN, HistoryPrior, PhiUniformPrior

setup_jax()

import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402
from jax.scipy.special import log_ndtr  # noqa: E402
from numpyro.distributions import constraints  # noqa: E402

__all__ = ["PHI_MIN", "fit_histories", "lot_history_model", "lot_history_model_phi_uniform"]


def _log_tau_density(tau, mu, scale):
    """log p(tau | mu) of :class:`qualbayes.models.lot_spread.HistoryPrior` in jax:
    HalfNormal(scale) truncated to tau >= tau_lo(mu)."""
    lo = 1.0 / jnp.sqrt(KAPPA_MAX * (mu * (1.0 - mu)))
    log_z = jnp.log(2.0) + log_ndtr(-lo / scale)
    return 0.5 * jnp.log(2.0 / jnp.pi) - jnp.log(scale) - 0.5 * (tau / scale) ** 2 - log_z


def _log_tau_density_phi_uniform(tau, mu):
    m = (mu * (1.0 - mu))
    return 0.5 * jnp.log(m) - 1.5 * jnp.log1p(m * tau**2) - jnp.log1p(-PHI_MIN)


def hyperprior_sites(n_parts, scale):
    """mu ~ Beta(1, 1) and the spread tau = tau_lo(mu) + exp(y), y flat: y is about log tau,
    not a ridge along log mu for NUTS. The spread prior and the Jacobian exp(y) are added as
    a factor (``scale`` None: the earlier prior, phi uniform)."""
    with numpyro.plate("parts", n_parts, dim=-2):
        mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
        y = numpyro.sample("spread_y", dist.ImproperUniform(constraints.real, (), ()))
        m = (mu * (1.0 - mu))
        tau = numpyro.deterministic("tau", 1.0 / jnp.sqrt(KAPPA_MAX * m) + jnp.exp(y))
        kappa = numpyro.deterministic("kappa", 1.0 / (m * tau**2))
    prior = (_log_tau_density_phi_uniform(tau, mu) if scale is None
             else _log_tau_density(tau, mu, scale))
    numpyro.factor("spread", jnp.sum(prior + y))
    return mu, kappa


def lot_history_model(x, n, w, scale):
    """Marginalised hierarchical beta-binomial. ``x``, ``n``, ``w`` have shape (parts, terms):
    distinct (defectives, inspected) pairs of each part and the number of lots sharing each;
    ``scale`` the half-normal scale S of the lot-to-lot CV. The likelihood factor leaves out
    the binomial coefficients, a constant of the data
    (:func:`qualbayes.models.beta_binomial.log_kernel`)."""
    mu, kappa = hyperprior_sites(x.shape[0], scale)
    loglik = beta_binomial.log_kernel(x, n, mu * kappa, (1.0 - mu) * kappa)
    numpyro.factor("x", jnp.sum(w * loglik))


def lot_history_model_phi_uniform(x, n, w, scale=None):
    """The earlier hyperprior, phi ~ Uniform(PHI_MIN, 1) (``history-phi-uniform``): kept for
    comparison only; see docs/lots.md for why it is not the default."""
    mu, kappa = hyperprior_sites(x.shape[0], None)
    loglik = beta_binomial.log_kernel(x, n, mu * kappa, (1.0 - mu) * kappa)
    numpyro.factor("x", jnp.sum(w * loglik))


def lot_history_model_plain(x, n, w, scale):
    """The same model with every lot's p sampled (not marginalised, no collapsing of equal
    lots; ``w`` is ignored and must be 1 for real lots): for the benchmark only."""
    mu, kappa = hyperprior_sites(x.shape[0], scale)
    with numpyro.plate("parts", x.shape[0], dim=-2), numpyro.plate("lots", x.shape[1], dim=-1):
        p = numpyro.sample("p", dist.Beta(mu * kappa, (1.0 - mu) * kappa))
        numpyro.sample("x", dist.Binomial(total_count=n, probs=p), obs=x)


#: parts from which the history fit samples every part as its own problem (docs/speed.md)
INDEPENDENT_FROM = 2


def bucket(k: int, least: int = 8) -> int:
    """Padded length: the next power of two, at least ``least``."""
    return max(least, 1 << (max(k, 1) - 1).bit_length())


def collapse(x: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct (x, n) pairs and their multiplicities."""
    pairs, counts = np.unique(np.stack([x, n], axis=1), axis=0, return_counts=True)
    return pairs[:, 0], pairs[:, 1], counts.astype(float)


def pad(groups: list[tuple[np.ndarray, np.ndarray]], distinct: bool = True):
    """Stack each part's terms into (parts, terms) arrays x, n, w, padded with w = 0 terms.

    ``distinct=False`` keeps one term per lot (w = 1), as the plain model needs."""
    terms = [collapse(x, n) if distinct else (x, n, np.ones(len(x))) for x, n in groups]
    cols = bucket(max(len(t[0]) for t in terms))
    xs, ns, ws = (np.zeros((len(groups), cols)) for _ in range(3))
    for j, (x, n, w) in enumerate(terms):
        xs[j, : len(x)], ns[j, : len(n)], ws[j, : len(w)] = x, n, w
    return xs, ns, ws


def fit_histories(groups: list[tuple[np.ndarray, np.ndarray]], settings: SamplerSettings,
                  names: list[str] | None = None, model=None, prior=None,
                  independent: bool | None = None) -> Fit:
    """Fit every part's lot history. ``groups[j] = (x_j, n_j)``.

    ``independent`` (default: when there are at least :data:`INDEPENDENT_FROM` parts): every
    part its own sampler, adaptation and gate
    (:func:`qualbayes.models.lot_history_parts.fit_parts`); else one joint NUTS run.

    Draws of ``mu`` and ``kappa`` come back with shape (chain, draw, parts) with the padding
    removed; the gate checks mu and log kappa of every real part. The Fit keeps the adapted
    sampler, so :func:`more_draws` continues its chains.
    """
    prior = prior if prior is not None else HistoryPrior()
    if model is None:
        model = (lot_history_model_phi_uniform if isinstance(prior, PhiUniformPrior)
                 else lot_history_model)
    k = len(groups)
    names = names or [str(j) for j in range(k)]
    if independent is None:
        independent = k >= INDEPENDENT_FROM
    if independent and model is not lot_history_model_plain:
        from qualbayes.models.lot_history_parts import fit_parts  # noqa: PLC0415

        return fit_parts(groups, settings, names, prior, model=model)
    xs, ns, ws = pad(groups, distinct=model is not lot_history_model_plain)

    def gate_on(draws: dict) -> dict:
        out = {}
        for j, name in enumerate(names):
            out[f"mu[{name}]"] = draws["mu"][:, :, j, 0]
            out[f"log_kappa[{name}]"] = np.log(draws["kappa"][:, :, j, 0])
        return out

    scale = None if prior.cv_scale is None else jnp.asarray(float(prior.cv_scale))
    args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws), scale)
    return run_nuts(model, args, settings, gate_on=gate_on,
                    transform=lambda d: {"mu": d["mu"][:, :, :k, 0],
                                         "kappa": d["kappa"][:, :, :k, 0]})


def more_draws(fit: Fit, groups=None, names: list[str] | None = None, prior=None,
               round_no: int = 1, parts=None) -> Fit:
    """The fit with as many draws again per chain, continued from its adapted chains (no
    new warmup, the same compiled sampler); the gate is judged again on all draws.
    ``parts`` (indices): when every part has its own sampler, only these parts are
    continued and the Fit returned holds only them, in that order; a joint fit is always
    continued whole. ``groups``, ``names``, ``prior`` and ``round_no`` are kept for earlier
    callers."""
    from qualbayes.inference.run import continue_nuts  # noqa: PLC0415
    from qualbayes.models.lot_history_parts import continue_parts, is_part_fit  # noqa: PLC0415

    return continue_parts(fit, parts=parts) if is_part_fit(fit) else continue_nuts(fit)
