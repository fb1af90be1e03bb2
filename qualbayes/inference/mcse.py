r"""Monte Carlo error of answers computed from MCMC draws, and decisions that respect it.

A probability computed from draws, :math:`\hat P = \frac{1}{S}\sum_s g(\theta_s)` (with
:math:`g` an indicator or, Rao-Blackwellised, a conditional probability), has Monte Carlo
standard error

.. math::

    \mathrm{MCSE}(\hat P) = \frac{\mathrm{sd}(g)}{\sqrt{\mathrm{ESS}(g)}}

where ESS is the effective sample size of the sequence :math:`g(\theta_s)` over all chains:
the split-chain autocorrelation estimate of Vehtari, Gelman, Simpson, Carpenter & Buerkner
(2021), Bayesian Analysis 16:667, eqs. (10)-(11), with Geyer's (1992) initial monotone
sequence to truncate the autocorrelation sum. Pure numpy, vectorised over any trailing
axes, so no ArviZ import is needed.

Example
-------
>>> import numpy as np
>>> rng = np.random.default_rng(1)
>>> g = rng.uniform(size=(4, 1000))          # independent draws: ESS near 4,000
>>> bool(3000 < ess_mean(g) < 5000)
True
>>> decide_within_error(0.951, 0.0002, 0.95)
'accept'
>>> decide_within_error(0.9505, 0.0002, 0.95)  # within 3 MCSE of C
'too-close'
"""

from __future__ import annotations

import numpy as np

#: |P - C| within this many MCSE cannot be called at the present Monte Carlo precision
CLOSE_MCSE = 3.0


def _split(x: np.ndarray) -> np.ndarray:
    """(chain, draw, ...) -> (2 chain, draw // 2, ...): each chain split in halves."""
    n = x.shape[1] // 2
    return np.concatenate([x[:, :n], x[:, x.shape[1] - n:]], axis=0)


def ess_mean(x: np.ndarray) -> np.ndarray | float:
    """Effective sample size for the mean of ``x`` with shape (chain, draw, *rest).

    Returns an array of shape ``rest`` (a float when ``rest`` is empty). A sequence that never
    varies has no Monte Carlo error: its ESS is returned as the number of draws.
    """
    x = np.asarray(x, dtype=float)
    if x.ndim < 2:
        raise ValueError("x must have shape (chain, draw, ...)")
    total = x.shape[0] * x.shape[1]
    y = _split(x)
    m, n = y.shape[0], y.shape[1]
    if n < 4:
        raise ValueError("at least 8 draws per chain are needed for an effective sample size")
    centred = y - y.mean(axis=1, keepdims=True)
    size = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfft(centred, n=size, axis=1)
    acov = np.fft.irfft(f * np.conj(f), n=size, axis=1)[:, :n] / n  # (m, n, ...)
    chain_mean = y.mean(axis=1)
    chain_var = acov[:, 0] * n / (n - 1.0)
    w = chain_var.mean(axis=0)
    b_over_n = chain_mean.var(axis=0, ddof=1)
    var_plus = w * (n - 1.0) / n + b_over_n
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = 1.0 - (w - acov.mean(axis=0)) / var_plus  # (n, ...)
    rho[0] = 1.0
    pairs = n // 2
    p = rho[: 2 * pairs : 2] + rho[1 : 2 * pairs : 2]  # (pairs, ...)
    positive = np.cumprod(p > 0, axis=0).astype(bool)  # initial positive sequence
    p = np.where(positive, p, 0.0)
    p = np.minimum.accumulate(np.where(positive, p, np.inf), axis=0)  # initial monotone
    p = np.where(positive, p, 0.0)
    tau = -1.0 + 2.0 * p.sum(axis=0)
    tau = np.maximum(tau, 1.0 / np.log10(m * n))  # the cap Stan uses for antithetic chains
    with np.errstate(invalid="ignore", divide="ignore"):
        ess = m * n / tau
    constant = ~(var_plus > 0)
    ess = np.where(constant, float(total), ess)
    return float(ess) if np.ndim(ess) == 0 else ess


def mcse_mean(x: np.ndarray) -> np.ndarray | float:
    """Monte Carlo standard error of the mean of ``x`` (chain, draw, *rest) over its draws.

    >>> import numpy as np
    >>> g = np.full((4, 100), 0.3)
    >>> mcse_mean(g)
    0.0
    """
    x = np.asarray(x, dtype=float)
    flat = x.reshape(x.shape[0] * x.shape[1], *x.shape[2:])
    sd = np.where(np.ptp(flat, axis=0) == 0, 0.0, flat.std(axis=0, ddof=1))
    out = sd / np.sqrt(ess_mean(x))
    return float(out) if np.ndim(out) == 0 else out


def is_close_call(p, mcse, confidence: float, k: float = CLOSE_MCSE):
    """True where P or 1 - P lies within ``k`` MCSE of the confidence level C.

    Both thresholds matter: P >= C accepts and 1 - P >= C rejects."""
    p = np.asarray(p, dtype=float)
    mcse = np.asarray(mcse, dtype=float)
    near_accept = np.abs(p - confidence) <= k * mcse
    near_reject = np.abs((1.0 - p) - confidence) <= k * mcse
    out = near_accept | near_reject
    return bool(out) if out.ndim == 0 else out


def decide_within_error(p: float, mcse: float, confidence: float) -> str:
    """``accept`` (P >= C), ``reject`` (1 - P >= C), ``undecided``, or ``too-close`` when the
    Monte Carlo error leaves the side of a threshold unsettled (caller draws more or reports
    "too close to call at this Monte Carlo precision")."""
    if is_close_call(p, mcse, confidence):
        return "too-close"
    if p >= confidence:
        return "accept"
    if 1.0 - p >= confidence:
        return "reject"
    return "undecided"
