r"""Pareto-smoothed importance sampling in numpy (no ArviZ import on the sampling path).

Given log importance weights :math:`\log r_s` of S draws, the M largest weights
(:math:`M = \lceil\min(S/5,\ 3\sqrt{S/r_{\mathrm{eff}}})\rceil`) are modelled as a generalized
Pareto distribution above the threshold :math:`u` (the (M+1)-th largest weight):

.. math:: P(r - u > y \mid r > u) = (1 + k y / \sigma)^{-1/k}.

:math:`(k, \sigma)` are estimated by the empirical-Bayes method of Zhang & Stephens (2009,
Technometrics 51(3):316-325): with :math:`\theta = -k/\sigma` and the tail exceedances
:math:`y_{(1)} \le \dots \le y_{(n)}`, for a grid of
:math:`m = 30 + \lfloor\sqrt n\rfloor` values

.. math:: \theta_j = \frac{1}{y_{(n)}}
          + \frac{1 - \sqrt{m/(j - 1/2)}}{3\,y_{(\lfloor n/4 + 1/2\rfloor)}},

the profile :math:`\hat k(\theta) = \overline{\log(1 - \theta y)}` (sign as in
:math:`k` above) and log-likelihood
:math:`\ell(\theta) = n(\log(-\theta/\hat k(\theta)) - \hat k(\theta) - 1)` give
posterior weights :math:`w_j \propto e^{\ell(\theta_j)}`; :math:`\hat\theta = \sum_j w_j
\theta_j`, :math:`\hat k = \overline{\log(1-\hat\theta y)}`, :math:`\hat\sigma =
-\hat k/\hat\theta`. The weakly informative prior of Vehtari, Simpson, Gelman, Yao & Gabry
(2024, "Pareto smoothed importance sampling", JMLR 25(72):1-58) then shrinks
:math:`\hat k` toward 1/2 as if 10 more observations had been seen:
:math:`\hat k \leftarrow (n\hat k + 5)/(n + 10)`. The tail weights are replaced by the
fitted quantiles at :math:`(i - 1/2)/M`, capped at the largest raw weight, and the log
weights renormalised. :math:`\hat k > 0.7` means the importance estimate is unreliable.

The same conventions as ``arviz.psislw`` (the reference library of tests/test_psis.py):
weights and :math:`\hat k` agree to 1e-10.

>>> import numpy as np
>>> lw = np.random.default_rng(1).standard_normal(2000)   # light-tailed weights
>>> smoothed, k = psis(lw)
>>> bool(k < 0.5), bool(abs(np.exp(smoothed).sum() - 1) < 1e-12)
(True, True)
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["gpd_fit", "pareto_k", "psis"]

_PRIOR_N = 10.0  # the prior on k: as if 10 observations at k = 1/2
_PRIOR_K = 0.5
_MIN_TAIL = 5  # fewer tail draws than this: no fit, k reported as infinite


def tail_length(n_draws: int, r_eff: float = 1.0) -> int:
    """M, the number of largest weights modelled as a generalized Pareto tail."""
    return int(math.ceil(min(n_draws / 5.0, 3.0 * math.sqrt(n_draws / r_eff))))


def gpd_fit(exceedances: np.ndarray) -> tuple[float, float]:
    """(k, sigma) of a generalized Pareto fitted to sorted positive ``exceedances``
    (Zhang & Stephens 2009, with the prior on k of Vehtari et al. 2024)."""
    y = np.asarray(exceedances, dtype=float)
    n = y.size
    m = 30 + int(math.sqrt(n))
    quartile = y[int(n / 4 + 0.5) - 1]
    theta = 1.0 / y[-1] + (1.0 - np.sqrt(m / (np.arange(1, m + 1) - 0.5))) / (3.0 * quartile)
    k_theta = np.log1p(-theta[:, None] * y).mean(axis=1)
    loglik = n * (np.log(-theta / k_theta) - k_theta - 1.0)
    # w_j = 1 / sum_i exp(l_i - l_j): the normalised likelihood without overflow
    with np.errstate(over="ignore"):  # an overflowing sum is a weight of 0, as meant
        w = 1.0 / np.exp(loglik[None, :] - loglik[:, None]).sum(axis=1)
    keep = w >= 10 * np.finfo(float).eps
    w, theta = w[keep], theta[keep]
    theta_hat = float(np.sum(theta * w / w.sum()))
    k_hat = float(np.log1p(-theta_hat * y).mean())
    sigma = -k_hat / theta_hat
    k_hat = (n * k_hat + _PRIOR_N * _PRIOR_K) / (n + _PRIOR_N)
    return k_hat, sigma


def _gpd_quantile(p: np.ndarray, k: float, sigma: float) -> np.ndarray:
    """Quantiles of the generalized Pareto(k, sigma) at 0 < p < 1."""
    if sigma <= 0:
        return np.full_like(p, np.nan)
    if abs(k) < np.finfo(float).eps:
        return -sigma * np.log1p(-p)
    return sigma * np.expm1(-k * np.log1p(-p)) / k


def _psis_1d(log_w: np.ndarray, m: int) -> tuple[np.ndarray, float]:
    x = np.array(log_w, dtype=float)
    x -= x.max()
    threshold = max(np.sort(x)[-m - 1], math.log(np.finfo(float).tiny))
    tail = np.flatnonzero(x > threshold)
    if tail.size < _MIN_TAIL:
        k = math.inf
    else:
        tail = tail[np.argsort(x[tail], kind="stable")]
        base = math.exp(threshold)
        k, sigma = gpd_fit(np.exp(x[tail]) - base)
        if math.isfinite(k):
            p = (np.arange(tail.size) + 0.5) / tail.size
            x[tail] = np.log(_gpd_quantile(p, k, sigma) + base)
            x[x > 0] = 0.0  # no smoothed weight above the largest raw weight
    top = x.max()
    x -= top + math.log(np.exp(x - top).sum())
    return x, float(k)


def psis(log_weights, r_eff: float = 1.0) -> tuple[np.ndarray, np.ndarray | float]:
    """Smoothed, normalised log weights and the Pareto k of each row (last axis: draws).

    ``log_weights``: (..., S) array; ``r_eff``: relative efficiency of the draws (ESS / S).
    Returns (log weights of the same shape, k as a float for 1-D input else an array)."""
    lw = np.asarray(log_weights, dtype=float)
    if lw.ndim == 0 or lw.shape[-1] < 2:
        raise ValueError("log_weights needs at least two draws on its last axis")
    if np.isnan(lw).any() or (lw == np.inf).any():
        raise ValueError("log_weights must be finite or -inf (a zero weight)")
    if not np.isfinite(lw).any(axis=-1).all():
        raise ValueError("every row of log_weights needs a finite (non-zero) weight")
    m = tail_length(lw.shape[-1], r_eff)
    flat = lw.reshape(-1, lw.shape[-1])
    out = np.empty_like(flat)
    ks = np.empty(flat.shape[0])
    for i, row in enumerate(flat):
        out[i], ks[i] = _psis_1d(row, m)
    if lw.ndim == 1:
        return out[0], float(ks[0])
    return out.reshape(lw.shape), ks.reshape(lw.shape[:-1])


def pareto_k(log_weights, r_eff: float = 1.0) -> float:
    """The Pareto k diagnostic of one set of log weights (1-D)."""
    return float(psis(np.ravel(log_weights), r_eff)[1])
