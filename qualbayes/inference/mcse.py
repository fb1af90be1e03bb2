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
axes (and :func:`mcse_means` over leading rows, each row's numbers its own), so no ArviZ
import is needed.

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


def _split(x: np.ndarray, chains_last: bool = False) -> np.ndarray:
    """Each chain split in halves: (chain, draw, ...) -> (2 chain, draw // 2, ...), or with
    ``chains_last`` (..., chain, draw) -> (..., 2 chain, draw // 2)."""
    if chains_last:
        n = x.shape[-1] // 2
        return np.concatenate([x[..., :n], x[..., x.shape[-1] - n:]], axis=-2)
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
    ess = _ess_split(_split(x), x.shape[0] * x.shape[1], chains_last=False)
    return float(ess) if np.ndim(ess) == 0 else ess


def _ess_split(y: np.ndarray, total: int, chains_last: bool) -> np.ndarray:
    """The ESS of split chains ``y``: (m, n, *rest), or (*rest, m, n) with ``chains_last``
    (then every transform and sum over the draws runs along memory, and each row's numbers
    are those of the row alone: :func:`mcse_means`)."""
    ca, da = (-2, -1) if chains_last else (0, 1)
    m, n = y.shape[ca], y.shape[da]
    if n < 4:
        raise ValueError("at least 8 draws per chain are needed for an effective sample size")
    centred = y - y.mean(axis=da, keepdims=True)
    size = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfft(centred, n=size, axis=da)
    if chains_last and f.ndim > 2:  # row by row: numpy's complex product rounds an
        power = np.empty_like(f)    # element by where it falls in the array (vector body
        for r in np.ndindex(f.shape[:-2]):  # or tail), so a row alone gives its numbers
            power[r] = f[r] * np.conj(f[r])
    else:
        power = f * np.conj(f)
    acov = np.fft.irfft(power, n=size, axis=da)
    acov = (acov[..., :n] if chains_last else acov[:, :n]) / n  # (m, n, ...) or (..., m, n)
    chain_mean = y.mean(axis=da)
    chain_var = (acov[..., 0] if chains_last else acov[:, 0]) * n / (n - 1.0)
    cm = -1 if chains_last else 0  # the chain axis once the draws are summed
    w = chain_var.mean(axis=cm)
    b_over_n = chain_mean.var(axis=cm, ddof=1)
    var_plus = w * (n - 1.0) / n + b_over_n
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = 1.0 - (np.expand_dims(w, cm) - acov.mean(axis=ca)) / np.expand_dims(var_plus, cm)
    rho = np.moveaxis(rho, cm, 0)  # (n, ...): the lags first
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
    return np.where(constant, float(total), ess)


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


def mcse_means(x: np.ndarray) -> np.ndarray:
    """:func:`mcse_mean` of each row of ``x`` (row, chain, draw), computed together: the
    same numbers as ``[mcse_mean(row) for row in x]`` bit for bit (tested), faster for many
    rows (one FFT call and one set of array operations for 16 rows: a third of the time
    at 4 x 1,000 draws, five sixths at 4 x 4,000; docs/speed.md).

    >>> import numpy as np
    >>> g = np.random.default_rng(3).uniform(size=(5, 4, 100))
    >>> bool(np.array_equal(mcse_means(g), [mcse_mean(row) for row in g]))
    True
    """
    x = np.ascontiguousarray(x, dtype=float)
    if x.ndim != 3:
        raise ValueError("x must have shape (row, chain, draw)")
    flat = x.reshape(x.shape[0], -1)
    sd = np.where(np.ptp(flat, axis=1) == 0, 0.0, flat.std(axis=1, ddof=1))
    return sd / np.sqrt(_ess_split(_split(x, chains_last=True), flat.shape[1],
                                   chains_last=True))


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
