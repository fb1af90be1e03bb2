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
serves them all. Sufficient statistics: the likelihood depends on the lots only through the distinct
(defectives, inspected) pairs and how many lots share each, so lots are collapsed into
weighted terms :math:`\sum_k w_k \log \mathrm{BB}(x_k \mid n_k, \ldots)` (exact). Inspection
data repeat themselves (sample sizes come from a few standard values, defect counts are
small), so 1,000 lots typically become a few dozen terms. Padding: a term with weight 0
contributes nothing, so the term axis is padded to a few fixed sizes and compiled code is
reused across files of similar size.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference import Fit, SamplerSettings, run_nuts, setup_jax

PHI_MIN = 1e-4  # kappa <= 1/PHI_MIN^2 - 1, about 1e8

setup_jax()

import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def lot_history_model(x, n, w):
    """Marginalised hierarchical beta-binomial. ``x``, ``n``, ``w`` have shape (parts, terms):
    distinct (defectives, inspected) pairs of each part and the number of lots sharing each."""
    with numpyro.plate("parts", x.shape[0], dim=-2):
        mu = numpyro.sample("mu", dist.Beta(1.0, 1.0))
        phi = numpyro.sample("phi", dist.Uniform(PHI_MIN, 1.0))
        kappa = numpyro.deterministic("kappa", 1.0 / phi**2 - 1.0)
    loglik = dist.BetaBinomial(mu * kappa, (1.0 - mu) * kappa, total_count=n).log_prob(x)
    numpyro.factor("x", jnp.sum(w * loglik))


def lot_history_model_plain(x, n, w):
    """The same model with every lot's p sampled (not marginalised, no collapsing of equal
    lots; ``w`` is ignored and must be 1 for real lots): for the benchmark only."""
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
                  names: list[str] | None = None, model=lot_history_model) -> Fit:
    """Fit every part's lot history at once. ``groups[j] = (x_j, n_j)``.

    Draws of ``mu`` and ``kappa`` come back with shape (chain, draw, parts) with the padding
    removed; the gate checks mu and log kappa of every real part.
    """
    k = len(groups)
    names = names or [str(j) for j in range(k)]
    xs, ns, ws = pad(groups, distinct=model is lot_history_model)

    def gate_on(draws: dict) -> dict:
        out = {}
        for j, name in enumerate(names):
            out[f"mu[{name}]"] = draws["mu"][:, :, j, 0]
            out[f"log_kappa[{name}]"] = np.log(draws["kappa"][:, :, j, 0])
        return out

    args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws))
    fit = run_nuts(model, args, settings, gate_on=gate_on)
    fit.draws = {"mu": fit.draws["mu"][:, :, :k, 0], "kappa": fit.draws["kappa"][:, :, :k, 0]}
    return fit
