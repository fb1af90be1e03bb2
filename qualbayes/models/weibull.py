r"""Two-parameter Weibull with censoring: log density, priors and posterior mode (no jax).

Parameters, sampled on unconstrained scales: :math:`b = \log\beta` (shape) and
:math:`u = \log H(t_{\mathrm{ref}}) = \beta(\log t_{\mathrm{ref}} - \log\eta)`, the log
cumulative hazard at a reference time of the group's data; the scale is reported as
:math:`\log\eta = \log t_{\mathrm{ref}} - u/\beta`. Sampling :math:`u` rather than
:math:`\log\eta` removes the funnel that few-failure data give in :math:`(\log\beta,
\log\eta)` (the spread of :math:`\log\eta` grows as :math:`1/\beta`). With
:math:`d = \log t - \log t_{\mathrm{ref}}` the cumulative hazard is
:math:`H(t) = (t/\eta)^\beta = \exp(\beta d + u)`:

.. math::

    \text{failure at } t:&\quad \log f(t) = \log\beta - \log t + \beta(\log t - \log\eta)
        - H(t) \\
    \text{suspension at } t:&\quad \log S(t) = -H(t) \\
    \text{interval } (a, b]:&\quad \log(S(a) - S(b)) = -H(a) + \log(1 - e^{-(H(b) - H(a))}),
        \quad H(b) - H(a) = H(a)\,\mathrm{expm1}(\beta\log(b/a)) \\
    \text{left-censored at } b:&\quad \log F(b) = \log(1 - e^{-H(b)})

Exact failures and suspensions enter through the sums :math:`n_f`, :math:`\sum\log t_f`,
:math:`\sum (\log t_f - \log t_{\mathrm{ref}})` (constants) and :math:`\sum_{f \cup s}
e^{\beta d_i}` with :math:`d_i = \log t_i - \log t_{\mathrm{ref}} \le 0` (one vectorised
pass per evaluation, no overflow since :math:`\beta > 0`). :math:`\log(1 - e^{-x})` is
evaluated from :math:`\log x` so that tiny and huge :math:`x` both stay finite.

Priors (densities on :math:`(b, u)`, Jacobians included):

* shape: :math:`\log\beta \sim N(m, \sigma)`; the default is :math:`N(0, 1)` (95% of the
  mass on :math:`0.14 < \beta < 7.1`); a range "LO,HI" becomes the lognormal with that central
  95%; ``flat`` is the improper uniform on :math:`\log\beta` (tests only).
* scale, default (``hazard``): uniform on the cumulative hazard at the reference time,
  :math:`\lambda = H(t_{\mathrm{ref}}) = e^{u}`, i.e. :math:`p(u \mid \beta) \propto e^u`.
  With :math:`t_{\mathrm{ref}}` the largest exact, suspension or interval-start time, the
  posterior is proper whenever the group has such a unit. Given the shape, exact and
  right-censored data give :math:`\lambda \mid \text{data} \sim \mathrm{Gamma}(n_f + 1,
  \sum (t_i/t_{\mathrm{ref}})^\beta)`; with zero failures this reproduces the zero-failure
  (success-run / extended-test) demonstration formula, see docs/life.md.
* scale, ``blife``: :math:`\log B_q = \log\eta + \log(-\log(1-q))/\beta \sim N(m, \sigma)`;
  Jacobian :math:`|\partial\log\eta/\partial u| = 1/\beta`.
* scale, ``reliability``: :math:`\log H(T) = \beta(\log T - \log t_{\mathrm{ref}}) + u \sim
  N(m, \sigma)`, a range on :math:`R(T) = e^{-H(T)}`; Jacobian 1.
* scale, ``flat``: improper uniform on :math:`\log\eta` (tests only); Jacobian
  :math:`1/\beta`.
* scale, ``jeffreys`` (with a flat shape): uniform on :math:`(b, u)`, i.e. density
  :math:`\propto 1/\eta` on :math:`(\beta, \eta)`, the Jeffreys rule prior of the complete-sample
  Weibull model (the Fisher information has determinant :math:`\pi^2/(6\eta^2)`).
* earlier data (power prior, Ibrahim & Chen 2000, Statistical Science 15:46): each term
  ``(w, stats, label)`` of ``LifePrior.earlier`` multiplies the prior by the earlier data's
  likelihood to the power :math:`w \in [0, 1]`; its log-likelihood is evaluated at the same
  :math:`(\beta, \eta)`, i.e. at
  :math:`u_0 = u + \beta(\log t_{\mathrm{ref},0} - \log t_{\mathrm{ref}})`.

The same functions serve numpy (posterior mode, quadrature, tests) and jax (the sampler):
the array module is passed as ``xp``.

Modules: ``weibull_prior`` (the prior), ``weibull_stats`` (sufficient statistics, binned
sums), ``weibull_density`` (log-likelihood and log prior), ``weibull_mode`` (posterior mode).
This module keeps every name importable from one place; the option texts (``make_prior``,
``parse_*_prior``) live in :mod:`qualbayes.commands.life_prior_text`.
"""

from __future__ import annotations

from qualbayes.models.weibull_density import (  # noqa: F401
    LN2,
    LOG_2PI,
    data_arrays,
    earlier_log_likelihood,
    log1mexp_from_log,
    log_expm1,
    log_likelihood,
    log_posterior,
    log_prior,
    log_scale,
)
from qualbayes.models.weibull_mode import Mode, posterior_mode, reported_mode  # noqa: F401
from qualbayes.models.weibull_prior import (  # noqa: F401
    FLAT,
    SHAPE_DEFAULT,
    Z975,
    LifePrior,
    lognormal_from_range,
)
from qualbayes.models.weibull_stats import (  # noqa: F401
    SHAPE_CAP_SD,
    TAYLOR_ORDER,
    GroupStats,
    binned_moments,
    exposure_sum_binned,
    group_stats,
)

_TEXT = ("make_prior", "parse_shape_prior", "parse_blife_prior", "parse_reliability_prior")


def __getattr__(name: str):
    """The option-text parsers, kept importable from here for earlier callers."""
    if name in _TEXT:
        from qualbayes.commands import life_prior_text  # noqa: PLC0415

        return getattr(life_prior_text, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
