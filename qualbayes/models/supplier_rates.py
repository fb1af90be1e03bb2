r"""Defect rates of suppliers (and of each supplier's periods): a hierarchical model, NUTS.

For supplier s, period t (a month or a quarter) and lot i of that period:

.. math::

    x_{sti} \mid p_{sti} &\sim \mathrm{Binomial}(n_{sti}, p_{sti}) \\
    p_{sti} \mid \mu_{st}, \kappa &\sim \mathrm{Beta}(\mu_{st}\kappa, (1-\mu_{st})\kappa) \\
    \mathrm{logit}\,\mu_{st} &= a_s + \sigma_{w,s} e_{st} + \delta_s [t = T_s],
        \qquad e_{st} \sim N(0, 1), \quad \delta_s \sim N(0, 1) \\
    a_s &= m + \sigma_b z_s, \qquad z_s \sim N(0, 1) \\
    m &\sim N(-5, 2^2), \quad \sigma_b \sim \mathrm{HalfNormal}(1), \quad
    \sigma_{w,s} \sim \mathrm{HalfNormal}(0.5), \quad
    \phi = (\kappa+1)^{-1/2} \sim \mathrm{Uniform}(10^{-4}, 1)

:math:`\mu_{st}` is the mean defect rate of the supplier's lots in period t, :math:`a_s` the
supplier's typical level on the logit scale, :math:`\sigma_b` the spread between suppliers,
:math:`\sigma_{w,s}` the spread of supplier s's periods about its level (its own: a steady
supplier's periods are pooled hard, a drifting one's much less), :math:`\delta_s` a change of
the latest period :math:`T_s` beyond that spread (only for suppliers with two periods or
more; :math:`[t = T_s]` is 1 for the latest period, 0 otherwise), and :math:`\phi^2` the
intra-class correlation of lots within a period (shared by all suppliers, as in the lot
history model, ``models/lot_history.py``). Without periods the :math:`e_{st}` and
:math:`\delta_s` terms are left out and :math:`\mathrm{logit}\,\mu_s = a_s`.

Why :math:`\delta_s`: the question "is the latest period worse than the earlier ones?" tests
whether the latest period is exchangeable with the earlier ones; a model that assumes it is
(normal period effects only) shrinks a single real jump into the supplier's other periods.
Measured on whole simulated histories (a fivefold jump, 0.5% to 2.5%, on 1,000 units a
quarter), the exchangeable model called only 9 of 12 drifting suppliers "worse" (one history:
19 defectives in 1,000 units against 42 in 7,000 gave P = 0.873). :math:`\delta_s \sim N(0,
1)` lets the latest period move by up to about a factor of 7 (95%) from what the earlier
periods predict, symmetric in both directions (no lean toward "worse" or "better"), while
the earlier periods are pooled as before. Operating characteristics: docs/calibration.md,
"Supplier scorecard".

The lot rates are integrated out: :math:`x_{sti} \sim \mathrm{BetaBinomial}(n_{sti},
\mu_{st}\kappa, (1-\mu_{st})\kappa)`, and lots of a cell that share (x, n) are collapsed into
one weighted term (exact), so NUTS samples :math:`3 + 2S + C` dimensions (C the number of
supplier-periods with lots; :math:`3 + S` without periods), all in one vectorised model.
:math:`\delta_s` and :math:`e_{s,T_s}` enter only through their sum, which given
:math:`\sigma_{w,s}` is :math:`N(0, \sigma_{w,s}^2 + 1)`: the latest cell's effect is
sampled as that one term, centred (:func:`cell_theta`), exactly the same posterior for every rate
without the ridge along which the two trade off (a drifting supplier's chains diverged there
now and then, docs/calibration.md).

Speed (the same model, a cheaper computation; bench/bench_suppliers.py, docs/suppliers.md):

* the beta-binomial log-likelihood drops the constant binomial coefficients and writes the
  rising factorials of the small defective counts out as sums of logarithms: one log-gamma
  per distinct lot size of a cell instead of two per distinct (x, n) term, exact
  (:mod:`qualbayes.models.cell_likelihood`, which falls back to the log-gamma form when the
  counts are large); on 200 suppliers x 8 quarters x 30 lots one gradient went from 2.1 ms
  to the figure in docs/suppliers.md;
* the supplier level :math:`a_s` is sampled centred, :math:`a_s \sim N(m, \sigma_b^2)`, when
  the supplier has at least ``CENTRE_AT`` defectives (its data then pin :math:`a_s` better
  than the prior does) and there are at least ``CENTRE_MIN_SUPPLIERS`` suppliers (so that
  :math:`\sigma_b` is well known), and non-centred, :math:`a_s = m + \sigma_b z_s`,
  otherwise; the period effects stay non-centred (a steady supplier's :math:`\sigma_{w,s}`
  goes toward 0, where the centred form has a funnel: tree depth 10 and divergences when
  tried). Measured on 20 suppliers x 8 quarters x 30 lots: 63 leapfrog steps per draw
  non-centred, 31 with the levels centred.

The quantities reported are computed from the draws: the supplier's rate over the periods
shown, :math:`r_s = \frac{1}{T_s}\sum_t \mu_{st}`; whether its latest period is worse than its
earlier ones, :math:`\mu_{s,T_s} > \frac{1}{T_s-1}\sum_{t<T_s}\mu_{st}`; and which supplier
has the highest :math:`r_s`.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference.run import Fit, SamplerSettings, continue_nuts, run_nuts, setup_jax
from qualbayes.models.cell_likelihood import cell_terms, loglik
from qualbayes.models.lot_history import PHI_MIN

#: Hyperprior constants (docs/suppliers.md; operating characteristics in docs/calibration.md)
M_MEAN, M_SD = -5.0, 2.0  # logit of a typical supplier's rate: 95% in about 0.013% to 25%
SIGMA_B_SCALE = 1.0  # supplier-to-supplier spread (logit scale)
SIGMA_W_SCALE = 0.5  # period-to-period spread within a supplier (logit scale)
CHANGE_SD = 1.0  # the latest period's change delta_s beyond that spread (logit scale)
#: a supplier with at least this many defectives has its level a_s sampled centred, when the
#: scorecard has at least CENTRE_MIN_SUPPLIERS suppliers (with fewer, sigma_b is loosely
#: known and the centred levels form a funnel: 4 suppliers x 4 quarters x 5 lots gave 204
#: divergences in 8,000 draws)
CENTRE_AT = 10
CENTRE_MIN_SUPPLIERS = 20

setup_jax()

import jax  # noqa: E402
import jax.numpy as jnp  # noqa: E402
import numpyro  # noqa: E402
import numpyro.distributions as dist  # noqa: E402


def _level(centred, periods: bool):
    """``centred`` (suppliers,): True where a_s is sampled as N(m, sigma_b^2) itself, False
    where as m + sigma_b z_s with z_s ~ N(0, 1) (the same prior either way)."""
    m = numpyro.sample("m", dist.Normal(M_MEAN, M_SD))
    sigma_b = numpyro.sample("sigma_b", dist.HalfNormal(SIGMA_B_SCALE))
    with numpyro.plate("suppliers", centred.shape[0]):
        u = numpyro.sample("u", dist.Normal(jnp.where(centred, m, 0.0),
                                            jnp.where(centred, sigma_b, 1.0)))
        sigma_w = numpyro.sample("sigma_w", dist.HalfNormal(SIGMA_W_SCALE)) if periods else None
    return numpyro.deterministic("a", jnp.where(centred, u, m + sigma_b * u)), sigma_w


def _lots(theta, terms):
    """Beta-binomial log-likelihood of the lots, up to a constant
    (:mod:`qualbayes.models.cell_likelihood`)."""
    phi = numpyro.sample("phi", dist.Uniform(PHI_MIN, 1.0))
    kappa = 1.0 / phi**2 - 1.0
    mu = jax.nn.sigmoid(theta)
    numpyro.factor("x", loglik(jnp, mu * kappa, (1.0 - mu) * kappa, kappa, terms))


def supplier_model(terms, cell_supplier, centred):
    """Suppliers only: ``terms`` from :func:`likelihood_terms` (one cell per supplier)."""
    a, _ = _level(centred, periods=False)
    _lots(a[cell_supplier], terms)


def supplier_period_model(terms, cell_supplier, centred, latest):
    """Suppliers and periods: ``terms`` (cells, ...), ``cell_supplier`` (cells,), ``latest``
    (cells,) 1.0 for the latest cell of a supplier with two periods or more, else 0.0."""
    a, sigma_w = _level(centred, periods=True)
    a_c, sigma_c = a[cell_supplier], sigma_w[cell_supplier]
    with numpyro.plate("cells", cell_supplier.shape[0]):
        e = numpyro.sample("e", dist.Normal(jnp.where(latest > 0, a_c, 0.0),
                                            jnp.where(latest > 0, latest_scale(sigma_c), 1.0)))
    _lots(cell_theta(a_c, sigma_c, e, latest), terms)


def latest_scale(sigma_w):
    """sqrt(sigma_w,s^2 + CHANGE_SD^2): the spread of the latest period's logit rate about
    the supplier's level. delta_s and e_{s,T} enter the model only through their sum
    sigma_w,s e_{s,T} + delta_s, which given sigma_w,s is N(0, sigma_w,s^2 + CHANGE_SD^2):
    drawing that sum as one term integrates the direction the data cannot see exactly (the
    posterior of every rate, level and spread is unchanged; delta_s itself is not drawn)."""
    return (sigma_w**2 + CHANGE_SD**2) ** 0.5


def cell_theta(a_c, sigma_c, e, latest):
    """Each cell's logit rate from its draw ``e``: a_s + sigma_w,s e_st for the earlier
    periods (non-centred; a steady supplier's sigma_w,s goes toward 0) and e itself for the
    latest (``latest`` 1.0), drawn centred as N(a_s, sigma_w,s^2 + CHANGE_SD^2): its spread
    is at least CHANGE_SD, so the centred form has no funnel, and a drifting supplier's
    latest period, pinned by its own data, is sampled where it is. numpy or jax arrays."""
    return (1.0 - latest) * (a_c + sigma_c * e) + latest * e


def latest_cells(cell_supplier: np.ndarray) -> np.ndarray:
    """1.0 for each supplier's last cell (cells are in time order within a supplier) when the
    supplier has two cells or more, else 0.0."""
    cell_supplier = np.asarray(cell_supplier)
    out = np.zeros(len(cell_supplier))
    for s in np.unique(cell_supplier):
        cells = np.flatnonzero(cell_supplier == s)
        if len(cells) >= 2:
            out[cells[-1]] = 1.0
    return out


def likelihood_terms(cells: list[tuple[np.ndarray, np.ndarray]]):
    """The lots of ``cells[c] = (x, n)`` in the cheaper exact form of
    :func:`qualbayes.models.cell_likelihood.cell_terms`, as jax arrays."""
    terms = cell_terms(cells)
    return type(terms)(*(jnp.asarray(v) for v in terms))


def centring(cells, cell_supplier, n_suppliers: int) -> np.ndarray:
    """True for suppliers with at least CENTRE_AT defectives (their a_s sampled centred) in a
    scorecard of at least CENTRE_MIN_SUPPLIERS suppliers; otherwise all False."""
    if n_suppliers < CENTRE_MIN_SUPPLIERS:
        return np.zeros(n_suppliers, dtype=bool)
    defectives = np.zeros(n_suppliers)
    np.add.at(defectives, np.asarray(cell_supplier), [float(np.sum(x)) for x, _ in cells])
    return defectives >= CENTRE_AT


def fit_suppliers(cells: list[tuple[np.ndarray, np.ndarray]], cell_supplier: np.ndarray,
                  suppliers: list[str], cell_names: list[str], periods: bool,
                  settings: SamplerSettings) -> Fit:
    """Fit the scorecard model. ``cells[c] = (x, n)`` of the lots of cell c, which belongs to
    supplier ``cell_supplier[c]``. Returns draws ``theta`` (chain, draw, cells) = logit of the
    cell rates, ``a`` (chain, draw, suppliers) and the hyperparameters.

    The gate checks m, log sigma_b, log sigma_w, logit phi, every supplier's level a_s and
    every cell's logit rate (labelled ``a[supplier]``, ``theta[cell]``).
    """
    cell_supplier = np.asarray(cell_supplier, dtype=np.int32)
    model = supplier_period_model if periods else supplier_model
    args = (likelihood_terms(cells), jnp.asarray(cell_supplier),
            jnp.asarray(centring(cells, cell_supplier, len(suppliers))))
    latest = latest_cells(cell_supplier)
    if periods:
        args += (jnp.asarray(latest),)

    def theta_of(draws: dict) -> np.ndarray:
        a = draws["a"][..., cell_supplier]
        if not periods:
            return a
        return cell_theta(a, draws["sigma_w"][..., cell_supplier], draws["e"], latest)

    def gate_on(draws: dict) -> dict:
        return gate_quantities(draws | {"theta": theta_of(draws)}, suppliers, cell_names,
                               periods)

    def kept(draws: dict) -> dict:
        names = ("m", "sigma_b", "phi", "a") + (("sigma_w",) if periods else ())
        return {k: draws[k] for k in names} | {"theta": theta_of(draws)}

    return run_nuts(model, args, settings, gate_on=gate_on, transform=kept)


def gate_quantities(draws: dict, suppliers: list[str], cell_names: list[str],
                    periods: bool) -> dict:
    """What the gate judges: m, log sigma_b, logit phi, every supplier's a_s (and log
    sigma_w,s with periods) and every cell's logit rate theta (with periods)."""
    out = {"m": draws["m"], "log_sigma_b": np.log(draws["sigma_b"]),
           "logit_phi": np.log(draws["phi"]) - np.log1p(-draws["phi"])}
    for j, name in enumerate(suppliers):
        out[f"a[{name}]"] = draws["a"][:, :, j]
        if periods:
            out[f"log_sigma_w[{name}]"] = np.log(draws["sigma_w"][:, :, j])
    if periods:
        for c, name in enumerate(cell_names):
            out[f"theta[{name}]"] = draws["theta"][:, :, c]
    return out


def more_draws(fit: Fit) -> Fit:
    """The fit with as many draws again per chain, continued from its adapted chains (no new
    warmup, the same compiled sampler); the gate is judged again on all draws, divergences of
    the continuation included (no retry: a failed continuation fails the whole answer).

    Before, each round was a new NUTS run (a new warmup, seed shifted) added as further
    chains: four times the sampling cost of a continuation, and each new warmup could adapt
    a step size that diverged once, failing the gate of an otherwise converged fit (the drift
    study's two failed histories, docs/calibration.md)."""
    return continue_nuts(fit)
