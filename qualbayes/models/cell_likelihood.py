r"""Beta-binomial log-likelihood of many cells of lots, with as few log-gammas as the data allow.

Cell c (a supplier-period of the scorecard) holds lots i with x_i defectives in n_i
inspected; its lots share :math:`\alpha_c = \mu_c\kappa`, :math:`\beta_c = (1-\mu_c)\kappa`,
:math:`\kappa = \alpha_c + \beta_c`. Up to the constant binomial coefficients,

.. math::

    \ell_c = \sum_i \ln\Gamma(x_i+\alpha_c) - \ln\Gamma(\alpha_c)
             + \ln\Gamma(n_i-x_i+\beta_c) - \ln\Gamma(\beta_c)
             - [\ln\Gamma(n_i+\kappa) - \ln\Gamma(\kappa)].

Two exact forms of the same sum (tested equal to each other and to scipy.stats.betabinom):

* ``gamma`` (:class:`GammaTerms`): the lots collapsed to distinct (x, n) terms of weight w,
  two log-gammas per term and two per cell;
* ``rising`` (:class:`RisingTerms`): the rising factorials written out for the small
  counts, :math:`\ln\Gamma(x+\alpha) - \ln\Gamma(\alpha) = \sum_{j<x}\ln(\alpha+j)` and
  :math:`\ln\Gamma(n-x+\beta) = \ln\Gamma(n+\beta) - \sum_{k=1}^{x}\ln(\beta+n-k)`, so that

  .. math::

      \ell_c = \sum_j G_{cj}\ln(\alpha_c+j) - \sum_m H_{cm}\ln(\beta_c+m)
               + \sum_v W_{cv}\ln\Gamma(n_v+\beta_c) - W_c\ln\Gamma(\beta_c) - (\kappa\ \text{part})

  with :math:`G_{cj}` the lots of c with x > j, :math:`H_{cm}` the lots with
  :math:`n-x \le m < n`, :math:`W_{cv}` the lots with n = n_v: one log-gamma per distinct
  lot size of the cell and one per cell, the rest logarithms (about 30 times cheaper with
  their gradient, measured: bench/bench_suppliers.py, docs/suppliers.md).

The :math:`\kappa` part, :math:`\sum_v W_v[\ln\Gamma(\kappa) - \ln\Gamma(n_v+\kappa)]` over
the distinct lot sizes of all cells, is shared by both forms. :func:`cell_terms` picks the
cheaper form for the data (a cell with hundreds of defectives makes the logarithms many).

>>> import numpy as np
>>> t = cell_terms([(np.array([0, 2, 2]), np.array([50, 80, 80]))])
>>> type(t).__name__, t.x_above.tolist()  # lots with x > 0 and with x > 1
('RisingTerms', [[2.0, 2.0, 0.0, 0.0]])
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from qualbayes.models.beta_binomial import gammaln_for
from qualbayes.models.lot_history import bucket, collapse

#: cost of a log-gamma and its gradient in logarithms and theirs (measured on this machine,
#: 25,600 values: 0.84 ms against 0.028 ms); only the choice of form depends on it
GAMMA_COST = 30.0


class GammaTerms(NamedTuple):
    """Collapsed (x, n, w) terms padded per cell (w = 0), each cell's weight W_c, and the
    distinct lot sizes of all cells with their weights."""

    x: np.ndarray
    n: np.ndarray
    w: np.ndarray
    cell_weight: np.ndarray
    n_values: np.ndarray
    n_weight: np.ndarray


class RisingTerms(NamedTuple):
    """G (cells, X): lots with x > j; (m, H) (cells, M); (n_v, W_cv) (cells, V); W_c; and
    the distinct lot sizes of all cells with their weights. Padding has weight 0."""

    x_above: np.ndarray
    m: np.ndarray
    m_weight: np.ndarray
    cell_n: np.ndarray
    cell_n_weight: np.ndarray
    cell_weight: np.ndarray
    n_values: np.ndarray
    n_weight: np.ndarray


def _shared(cells) -> tuple[np.ndarray, np.ndarray]:
    n_all = np.concatenate([np.asarray(n, float) for _, n in cells])
    values, counts = np.unique(n_all, return_counts=True)
    return values, counts.astype(float)


def gamma_terms(cells: list[tuple[np.ndarray, np.ndarray]]) -> GammaTerms:
    """The ``gamma`` form of ``cells[c] = (x, n)``."""
    terms = [collapse(np.asarray(x), np.asarray(n)) for x, n in cells]
    cols = bucket(max(len(t[0]) for t in terms), least=4)
    xs, ns, ws = (np.zeros((len(cells), cols)) for _ in range(3))
    for j, (x, n, w) in enumerate(terms):
        xs[j, : len(x)], ns[j, : len(n)], ws[j, : len(w)] = x, n, w
    return GammaTerms(xs, ns, ws, ws.sum(axis=1), *_shared(cells))


def rising_terms(cells: list[tuple[np.ndarray, np.ndarray]]) -> RisingTerms:
    """The ``rising`` form of ``cells[c] = (x, n)``."""
    above, ms, sizes = [], [], []
    for x, n in cells:
        x, n = np.asarray(x, np.int64), np.asarray(n, np.int64)
        at = np.bincount(x, minlength=1).astype(float)  # lots with x == k
        above.append(at[::-1].cumsum()[::-1][1:])  # lots with x > j, j = 0 .. max x - 1
        lo = np.repeat(n - x, x)  # every m in [n - x, n): the start of its lot ...
        steps = np.arange(len(lo)) - np.repeat(np.cumsum(x) - x, x)  # ... plus 0 .. x - 1
        ms.append(np.unique(lo + steps, return_counts=True))
        sizes.append(np.unique(n, return_counts=True))
    c = len(cells)
    cols = [bucket(max(len(v) for v in vs), least=4)
            for vs in (above, [m for m, _ in ms], [v for v, _ in sizes])]
    g = np.zeros((c, cols[0]))
    m, h = np.zeros((c, cols[1])), np.zeros((c, cols[1]))
    nv, wv = np.zeros((c, cols[2])), np.zeros((c, cols[2]))
    for j in range(c):
        g[j, : len(above[j])] = above[j]
        m[j, : len(ms[j][0])], h[j, : len(ms[j][0])] = ms[j]
        nv[j, : len(sizes[j][0])], wv[j, : len(sizes[j][0])] = sizes[j]
    return RisingTerms(g, m, h, nv, wv, wv.sum(axis=1), *_shared(cells))


def cost(terms: GammaTerms | RisingTerms) -> float:
    """Work of one evaluation with its gradient, in logarithms."""
    if isinstance(terms, GammaTerms):
        return GAMMA_COST * (2 * terms.x.size + 2 * terms.x.shape[0])
    return (terms.x_above.size + terms.m.size
            + GAMMA_COST * (terms.cell_n.size + terms.cell_n.shape[0]))


def cell_terms(cells: list[tuple[np.ndarray, np.ndarray]]) -> GammaTerms | RisingTerms:
    """The cheaper exact form for these cells (:func:`cost`)."""
    rising = rising_terms(cells)
    gamma = gamma_terms(cells)
    return rising if cost(rising) <= cost(gamma) else gamma


def loglik(xp, alpha, beta, kappa, terms: GammaTerms | RisingTerms):
    """Sum over cells of :math:`\\ell_c` (module text); ``alpha``, ``beta`` (cells,),
    ``kappa`` scalar; ``xp`` the array module (``jax.numpy`` in the model, numpy in
    tests) and its log-gamma taken from the matching special-function module."""
    gammaln = gammaln_for(xp)
    shared = xp.sum(terms.n_weight * (gammaln(kappa) - gammaln(terms.n_values + kappa)))
    if isinstance(terms, GammaTerms):
        per = xp.sum(terms.w * (gammaln(terms.x + alpha[:, None])
                                + gammaln(terms.n - terms.x + beta[:, None])), axis=1)
        return xp.sum(per - terms.cell_weight * (gammaln(alpha) + gammaln(beta))) + shared
    j = xp.arange(terms.x_above.shape[1])
    per = (xp.sum(terms.x_above * xp.log(alpha[:, None] + j), axis=1)
           - xp.sum(terms.m_weight * xp.log(beta[:, None] + terms.m), axis=1)
           + xp.sum(terms.cell_n_weight * gammaln(terms.cell_n + beta[:, None]), axis=1)
           - terms.cell_weight * gammaln(beta))
    return xp.sum(per) + shared

