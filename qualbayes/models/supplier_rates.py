r"""Defect rates of suppliers (and of each supplier's periods): a hierarchical model, NUTS.

For supplier s, period t (a month or a quarter) and lot i of that period:

.. math::

    x_{sti} \mid p_{sti} &\sim \mathrm{Binomial}(n_{sti}, p_{sti}) \\
    p_{sti} \mid \mu_{st}, \kappa &\sim \mathrm{Beta}(\mu_{st}\kappa, (1-\mu_{st})\kappa) \\
    \mathrm{logit}\,\mu_{st} &= a_s + \sigma_{w,s} e_{st}, \qquad e_{st} \sim N(0, 1) \\
    a_s &= m + \sigma_b z_s, \qquad z_s \sim N(0, 1) \\
    m &\sim N(-5, 2^2), \quad \sigma_b \sim \mathrm{HalfNormal}(1), \quad
    \sigma_{w,s} \sim \mathrm{HalfNormal}(0.5), \quad
    \phi = (\kappa+1)^{-1/2} \sim \mathrm{Uniform}(10^{-4}, 1)

:math:`\mu_{st}` is the mean defect rate of the supplier's lots in period t, :math:`a_s` the
supplier's typical level on the logit scale, :math:`\sigma_b` the spread between suppliers,
:math:`\sigma_{w,s}` the spread of supplier s's periods about its level (its own: a steady
supplier's periods are pooled hard, a drifting one's much less), and :math:`\phi^2` the
intra-class correlation of lots within a period (shared by all suppliers, as in the lot
history model, ``models/lot_history.py``). Without periods the :math:`e_{st}` level is left
out and :math:`\mathrm{logit}\,\mu_s = a_s`.

The lot rates are integrated out: :math:`x_{sti} \sim \mathrm{BetaBinomial}(n_{sti},
\mu_{st}\kappa, (1-\mu_{st})\kappa)`, and lots of a cell that share (x, n) are collapsed into
one weighted term (exact), so NUTS samples :math:`3 + 2S + C` dimensions (C the number of
supplier-periods with lots; :math:`3 + S` without periods), all in one vectorised model with
non-centred :math:`z, e`.

The quantities reported are computed from the draws: the supplier's rate over the periods
shown, :math:`r_s = \frac{1}{T_s}\sum_t \mu_{st}`; whether its latest period is worse than its
earlier ones, :math:`\mu_{s,T_s} > \frac{1}{T_s-1}\sum_{t<T_s}\mu_{st}`; and which supplier
has the highest :math:`r_s`.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference.run import Fit, SamplerSettings, run_nuts, setup_jax
from qualbayes.models.lot_history import PHI_MIN, bucket, collapse

#: Hyperprior constants (docs/suppliers.md; operating characteristics in docs/calibration.md)
M_MEAN, M_SD = -5.0, 2.0  # logit of a typical supplier's rate: 95% in about 0.013% to 25%
SIGMA_B_SCALE = 1.0  # supplier-to-supplier spread (logit scale)
SIGMA_W_SCALE = 0.5  # period-to-period spread within a supplier (logit scale)

setup_jax()

import jax  # noqa: E402
import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def _level(supplier_template, periods: bool):
    m = numpyro.sample("m", dist.Normal(M_MEAN, M_SD))
    sigma_b = numpyro.sample("sigma_b", dist.HalfNormal(SIGMA_B_SCALE))
    with numpyro.plate("suppliers", supplier_template.shape[0]):
        z = numpyro.sample("z", dist.Normal(0.0, 1.0))
        sigma_w = numpyro.sample("sigma_w", dist.HalfNormal(SIGMA_W_SCALE)) if periods else None
    return numpyro.deterministic("a", m + sigma_b * z), sigma_w


def _lots(theta, x, n, w):
    phi = numpyro.sample("phi", dist.Uniform(PHI_MIN, 1.0))
    kappa = 1.0 / phi**2 - 1.0
    mu = jax.nn.sigmoid(theta)[:, None]
    loglik = dist.BetaBinomial(mu * kappa, (1.0 - mu) * kappa, total_count=n).log_prob(x)
    numpyro.factor("x", jnp.sum(w * loglik))


def supplier_model(x, n, w, cell_supplier, supplier_template):
    """Suppliers only: ``x, n, w`` (suppliers, terms); one cell per supplier."""
    a, _ = _level(supplier_template, periods=False)
    _lots(a[cell_supplier], x, n, w)


def supplier_period_model(x, n, w, cell_supplier, supplier_template):
    """Suppliers and periods: ``x, n, w`` (cells, terms), ``cell_supplier`` (cells,)."""
    a, sigma_w = _level(supplier_template, periods=True)
    with numpyro.plate("cells", x.shape[0]):
        e = numpyro.sample("e", dist.Normal(0.0, 1.0))
    _lots(a[cell_supplier] + sigma_w[cell_supplier] * e, x, n, w)


def cell_terms(cells: list[tuple[np.ndarray, np.ndarray]]):
    """Each cell's lots as collapsed (x, n, w) terms, stacked and padded with w = 0."""
    terms = [collapse(np.asarray(x), np.asarray(n)) for x, n in cells]
    cols = bucket(max(len(t[0]) for t in terms), least=4)
    xs, ns, ws = (np.zeros((len(cells), cols)) for _ in range(3))
    for j, (x, n, w) in enumerate(terms):
        xs[j, : len(x)], ns[j, : len(n)], ws[j, : len(w)] = x, n, w
    return xs, ns, ws


def fit_suppliers(cells: list[tuple[np.ndarray, np.ndarray]], cell_supplier: np.ndarray,
                  suppliers: list[str], cell_names: list[str], periods: bool,
                  settings: SamplerSettings) -> Fit:
    """Fit the scorecard model. ``cells[c] = (x, n)`` of the lots of cell c, which belongs to
    supplier ``cell_supplier[c]``. Returns draws ``theta`` (chain, draw, cells) = logit of the
    cell rates, ``a`` (chain, draw, suppliers) and the hyperparameters.

    The gate checks m, log sigma_b, log sigma_w, logit phi, every supplier's level a_s and
    every cell's logit rate (labelled ``a[supplier]``, ``theta[cell]``).
    """
    xs, ns, ws = cell_terms(cells)
    cell_supplier = np.asarray(cell_supplier, dtype=np.int32)
    model = supplier_period_model if periods else supplier_model
    args = (jnp.asarray(xs), jnp.asarray(ns), jnp.asarray(ws), jnp.asarray(cell_supplier),
            jnp.zeros(len(suppliers)))

    def theta_of(draws: dict) -> np.ndarray:
        a = draws["a"][..., cell_supplier]
        return a + draws["sigma_w"][..., cell_supplier] * draws["e"] if periods else a

    def gate_on(draws: dict) -> dict:
        out = {"m": draws["m"], "log_sigma_b": np.log(draws["sigma_b"]),
               "logit_phi": np.log(draws["phi"]) - np.log1p(-draws["phi"])}
        for j, name in enumerate(suppliers):
            out[f"a[{name}]"] = draws["a"][:, :, j]
            if periods:
                out[f"log_sigma_w[{name}]"] = np.log(draws["sigma_w"][:, :, j])
        if periods:
            theta = theta_of(draws)
            for c, name in enumerate(cell_names):
                out[f"theta[{name}]"] = theta[:, :, c]
        return out

    fit = run_nuts(model, args, settings, gate_on=gate_on)
    keep = {k: fit.draws[k] for k in ("m", "sigma_b", "phi", "a")}
    if periods:
        keep["sigma_w"] = fit.draws["sigma_w"]
    keep["theta"] = theta_of(fit.draws)
    fit.draws = keep
    return fit
