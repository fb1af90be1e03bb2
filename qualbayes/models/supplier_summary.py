r"""Scorecard numbers from draws of the cell rates (numpy only: no jax here).

Given draws :math:`\theta^{(k)}_c = \mathrm{logit}\,\mu_c` of every supplier-period cell c,
shape (chain, draw, cells), and which supplier and period each cell is:

* supplier rate :math:`r_s = \frac{1}{T_s}\sum_{c \in s}\mu_c` (median, one-sided upper bound
  at C, P(r_s > limit));
* latest worse: :math:`\mu_{s,\mathrm{last}} > \frac{1}{T_s - 1}\sum_{c \in s, c \ne
  \mathrm{last}}\mu_c`, for suppliers with two periods or more;
* worst: :math:`r_s = \max_{s'} r_{s'}`.

Each probability is the mean of an indicator over the draws, with its Monte Carlo standard
error from :func:`qualbayes.inference.mcse.mcse_mean`.

>>> import numpy as np
>>> theta = np.log(np.full((2, 8, 2), 0.01) / 0.99)
>>> out = supplier_summaries(theta, np.array([0, 1]), 2, spec=0.02, confidence=0.95)
>>> out["prob_above"].tolist(), float(out["prob_worst"].sum())
([0.0, 0.0], 1.0)
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference.mcse import mcse_mean


def _sigmoid(theta: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-theta))


def averaging(cell_supplier: np.ndarray, n_suppliers: int) -> np.ndarray:
    """(cells, suppliers) matrix whose column s averages supplier s's cells."""
    a = np.zeros((len(cell_supplier), n_suppliers))
    a[np.arange(len(cell_supplier)), cell_supplier] = 1.0
    return a / a.sum(axis=0, keepdims=True)


def supplier_summaries(theta: np.ndarray, cell_supplier: np.ndarray, n_suppliers: int, *,
                       spec: float, confidence: float) -> dict[str, np.ndarray]:
    """Per supplier: median and upper bound of r_s, P(r_s > spec), P(worst), P(latest worse)
    and their MCSEs. Cells of a supplier must be in time order (the last is the latest)."""
    mu = _sigmoid(np.asarray(theta, dtype=float))
    cell_supplier = np.asarray(cell_supplier)
    rate = mu @ averaging(cell_supplier, n_suppliers)  # (chain, draw, suppliers)
    flat = rate.reshape(-1, n_suppliers)
    above = (rate > spec).astype(float)
    # the highest rate of each draw (a tie, which continuous draws almost never give, goes
    # to the first supplier, so the probabilities sum to 1)
    worst = np.eye(n_suppliers)[rate.argmax(axis=-1)]
    worse, worse_mcse, latest = _latest_worse(mu, cell_supplier, n_suppliers)
    return {
        "rate_median": np.median(flat, axis=0),
        "rate_upper": np.quantile(flat, confidence, axis=0),
        "rate_mean": flat.mean(axis=0),
        "prob_above": above.mean(axis=(0, 1)), "prob_above_mcse": _mcse(above),
        "prob_worst": worst.mean(axis=(0, 1)), "prob_worst_mcse": _mcse(worst),
        "prob_latest_worse": worse, "prob_latest_worse_mcse": worse_mcse,
        "latest_cell": latest,
    }


def _mcse(g: np.ndarray) -> np.ndarray:
    return np.atleast_1d(mcse_mean(g))


def _latest_worse(mu, cell_supplier, n_suppliers):
    worse = np.full(n_suppliers, np.nan)
    mcse = np.full(n_suppliers, np.nan)
    latest = np.full(n_suppliers, -1)
    for s in range(n_suppliers):
        cells = np.flatnonzero(cell_supplier == s)
        latest[s] = cells[-1]
        if len(cells) < 2:
            continue
        g = (mu[..., cells[-1]] > mu[..., cells[:-1]].mean(axis=-1)).astype(float)
        worse[s], mcse[s] = g.mean(), mcse_mean(g)
    return worse, mcse, latest


def cell_summaries(theta: np.ndarray, *, spec: float, confidence: float
                   ) -> dict[str, np.ndarray]:
    """Per cell: median, central interval at C, one-sided upper bound, P(mu > spec)."""
    mu = _sigmoid(np.asarray(theta, dtype=float))
    flat = mu.reshape(-1, mu.shape[-1])
    tail = (1.0 - confidence) / 2.0
    above = (mu > spec).astype(float)
    return {"rate_median": np.median(flat, axis=0),
            "interval_low": np.quantile(flat, tail, axis=0),
            "interval_high": np.quantile(flat, 1.0 - tail, axis=0),
            "rate_upper": np.quantile(flat, confidence, axis=0),
            "prob_above": above.mean(axis=(0, 1)), "prob_above_mcse": _mcse(above)}
