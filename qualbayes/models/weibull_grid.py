r"""Deterministic 2-D quadrature of one group's Weibull posterior (numpy only, no jax).

The twin of the NUTS fit of :mod:`qualbayes.models.life`: the same density
(:func:`qualbayes.models.weibull_density.log_posterior`) on :math:`(b, u) = (\log\beta,
\log H(t_{\mathrm{ref}}))`, evaluated on a grid instead of sampled. The grid is centred on
the posterior mode and scaled by its Laplace covariance :math:`\Sigma`, sheared so that
each row (fixed :math:`b`) runs along :math:`u`:

.. math::

    u = u_0 + s\,(b - b_0) + \sigma_{u|b}\, z, \qquad s = \Sigma_{bu}/\Sigma_{bb},
    \quad \sigma_{u|b}^2 = \Sigma_{uu} - \Sigma_{bu}^2/\Sigma_{bb}

(unit Jacobian). The box starts at :math:`\pm 7` Laplace standard deviations and is widened
on any side whose border log density is within 30 of the maximum (non-Gaussian tails, few
failures). Every answer is of the form :math:`P(u \le c(b))` with :math:`c` linear in
:math:`\beta = e^b`:

* :math:`R(t) \ge r \iff u \le \log(-\log r) - \beta(\log t - \log t_{\mathrm{ref}})`;
* :math:`B_q \le t \iff u \ge \log(-\log(1-q)) - \beta(\log t - \log t_{\mathrm{ref}})`,

so it is computed row by row from the trapezoid cumulative of the density along :math:`u`
(interpolated at the threshold, second order in the spacing), then summed over rows with
trapezoid weights. Quantiles (the lower bound of R, B10) invert these distribution
functions by bisection. The quadrature error is estimated by repeating every answer on the
grid of every other point (:attr:`WeibullGrid.error` of a probability is the difference
between the two, plus the mass on the border rows and columns).

>>> from qualbayes.models.weibull import LifePrior, group_stats, posterior_mode
>>> st = group_stats([120.0, 340.0, 510.0, 800.0], [900.0, 900.0])
>>> g = posterior_grid(st, LifePrior())
>>> p, err = g.prob_reliability_at_least(200.0, 0.9)
>>> bool(0.0 < p < 1.0 and err < 1e-3)
True
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qualbayes.models.weibull_density import data_arrays, log_likelihood, log_prior
from qualbayes.models.weibull_mode import Mode, posterior_mode
from qualbayes.models.weibull_prior import LifePrior
from qualbayes.models.weibull_stats import GroupStats

SIZE = 201  # points per axis (odd: the every-other-point grid shares the ends)
_START = 7.0  # half-width of the first box, in Laplace standard deviations
_DROP = 30.0  # a border within this log density of the maximum widens the box
_WIDEN = 1.6
_MAX_WIDEN = 8
_CELLS = 4_000_000  # evaluation block: rows x columns x interval/left-censored terms


@dataclass
class WeibullGrid:
    """The posterior density on a sheared grid: rows ``b`` (log shape), columns ``z``;
    ``u = u0 + slope (b - b0) + sd_u z``; ``dens`` is the unnormalised density."""

    log_tref: float
    b: np.ndarray
    z: np.ndarray
    b0: float
    u0: float
    slope: float
    sd_u: float
    dens: np.ndarray
    edge_mass: float

    def _p_u_below(self, c_of_beta, step: int = 1) -> float:
        """P(u <= c(beta)) on the grid of every ``step``-th point."""
        b, z, d = self.b[::step], self.z[::step], self.dens[::step, ::step]
        h = z[1] - z[0]
        cum = np.concatenate([np.zeros((d.shape[0], 1)),
                              np.cumsum(0.5 * h * (d[:, 1:] + d[:, :-1]), axis=1)], axis=1)
        zc = (c_of_beta(np.exp(b)) - self.u0 - self.slope * (b - self.b0)) / self.sd_u
        below = np.array([np.interp(t, z, row) for t, row in zip(zc, cum, strict=True)])
        wb = np.full(b.size, b[1] - b[0])
        wb[[0, -1]] *= 0.5
        return float(wb @ below / (wb @ cum[:, -1]))

    def _prob(self, c_of_beta) -> tuple[float, float]:
        fine = self._p_u_below(c_of_beta)
        coarse = self._p_u_below(c_of_beta, 2)
        return fine, abs(fine - coarse) + self.edge_mass

    def prob_reliability_at_least(self, t: float, r: float) -> tuple[float, float]:
        """(P(R(t) >= r), its quadrature error)."""
        k = math.log(t) - self.log_tref
        return self._prob(lambda beta: math.log(-math.log(r)) - beta * k)

    def reliability_cdf(self, t: float, r: float) -> float:
        """P(R(t) <= r)."""
        return 1.0 - self.prob_reliability_at_least(t, r)[0]

    def blife_cdf(self, q: float, t: float) -> float:
        """P(B_q <= t)."""
        k = math.log(t) - self.log_tref
        return 1.0 - self._p_u_below(lambda beta: math.log(-math.log1p(-q)) - beta * k)

    def mean_reliability(self, t: float) -> tuple[float, float]:
        """(E[R(t)], its quadrature error), trapezoid over the grid."""
        def mean(step):
            b, z, d = self.b[::step], self.z[::step], self.dens[::step, ::step]
            u = self.u0 + self.slope * (b - self.b0)[:, None] + self.sd_u * z[None, :]
            with np.errstate(over="ignore"):
                r = np.exp(-np.exp(np.exp(b)[:, None] * (math.log(t) - self.log_tref) + u))
            w = _trap(b.size)[:, None] * _trap(z.size)[None, :] * d
            return float((w * r).sum() / w.sum())
        fine = mean(1)
        return fine, abs(fine - mean(2)) + self.edge_mass

    def reliability_lower_bound(self, t: float, confidence: float) -> float:
        """The (1 - confidence) quantile of R(t)."""
        return _invert(lambda x: self.reliability_cdf(t, x), 1.0 - confidence, 0.0, 1.0)

    def blife_quantile(self, q: float, level: float) -> float:
        """The ``level`` quantile of the B_q life (log-scale bisection)."""
        lo, hi = self.log_tref - 60.0, self.log_tref + 60.0
        return math.exp(_invert(lambda lx: self.blife_cdf(q, math.exp(lx)), level, lo, hi))


def _trap(n: int) -> np.ndarray:
    w = np.ones(n)
    w[[0, -1]] = 0.5
    return w


def _invert(cdf, level: float, lo: float, hi: float, steps: int = 60) -> float:
    for _ in range(steps):
        mid = 0.5 * (lo + hi)
        if cdf(mid) >= level:
            hi = mid
        else:
            lo = mid
    return 0.5 * (lo + hi)


def _log_density(b, u, st, prior, data):
    """log posterior on rows b (1-D) x columns u (2-D, one row per b), in blocks."""
    terms = max(1, data["d_ia"].size + data["d_left"].size)
    rows = max(1, _CELLS // max(u.shape[1] * terms, data["d_exp"].size))
    out = np.empty(u.shape)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        for i in range(0, b.size, rows):
            bb = b[i:i + rows, None]  # the exposure sum depends on b alone: once per row
            uu = u[i:i + rows]
            out[i:i + rows] = (log_likelihood(bb, uu, data)
                               + log_prior(bb, uu, prior, st.log_tref))
    return np.where(np.isfinite(out), out, -np.inf)


def posterior_grid(st: GroupStats, prior: LifePrior, mode: Mode | None = None,
                   size: int = SIZE) -> WeibullGrid:
    """The posterior of one group on a ``size`` x ``size`` grid (see the module notes)."""
    mode = mode or posterior_mode(st, prior)
    data = data_arrays(st)
    cov = np.asarray(mode.cov, float)
    sd_b = math.sqrt(cov[0, 0])
    slope = cov[0, 1] / cov[0, 0]
    sd_u = math.sqrt(max(cov[1, 1] - cov[0, 1] ** 2 / cov[0, 0], 1e-12))
    box = [-_START, _START, -_START, _START]  # b low/high, z low/high in Laplace sds
    for _ in range(_MAX_WIDEN):
        b = mode.b + sd_b * np.linspace(box[0], box[1], size)
        z = np.linspace(box[2], box[3], size)
        u = mode.u + slope * (b - mode.b)[:, None] + sd_u * z[None, :]
        lp = _log_density(b, u, st, prior, data)
        top = lp.max()
        edges = [lp[0].max(), lp[-1].max(), lp[:, 0].max(), lp[:, -1].max()]
        wide = [e > top - _DROP for e in edges]
        if not any(wide):
            break
        for k, side in enumerate(wide):
            if side:
                box[k] *= _WIDEN
    dens = np.exp(lp - top)
    w = _trap(size)[:, None] * _trap(size)[None, :] * dens
    edge = float((w[0].sum() + w[-1].sum() + w[:, 0].sum() + w[:, -1].sum()) / w.sum())
    return WeibullGrid(st.log_tref, b, z, mode.b, mode.u, slope, sd_u, dens, edge)
