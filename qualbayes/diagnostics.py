r"""Convergence diagnostics of MCMC draws, vectorised over parameters (numpy and scipy only).

For draws of shape (chain, draw, \*rest) every function returns an array of shape ``rest``,
so one call judges every parameter of a fit. The definitions are those of Vehtari, Gelman,
Simpson, Carpenter & Buerkner (2021), "Rank-normalization, folding, and localization: an
improved R-hat", Bayesian Analysis 16:667:

* chains are split in halves (the middle draw of an odd length is dropped);
* rank normalisation: :math:`z = \Phi^{-1}((r - 3/8)/(S + 1/4))`, r the average rank of a
  draw among all S draws (Blom 1958);
* R-hat: the larger of the split R-hat of the rank-normalised draws and of the
  rank-normalised folded draws :math:`|x - \mathrm{median}(x)|`, with
  :math:`\hat R = \sqrt{(B/W + n - 1)/n}` (B/n the variance of chain means, W the mean
  within-chain variance, n draws per split chain);
* bulk ESS: the ESS of the mean of the rank-normalised draws; tail ESS: the smaller ESS of
  the indicators :math:`I(x \le q_{0.05})` and :math:`I(x \le q_{0.95})`; both through
  the autocorrelation estimate of eqs. (10)-(11) with Geyer's (1992) initial positive and
  initial monotone sequences, computed exactly as ArviZ does (including its last-pair term,
  so strongly autocorrelated chains agree too).

A quantity whose draws never vary is *constant*: its R-hat and ESS are undefined (NaN), and
:func:`constant` says so, so that a caller can report it as constant rather than as a
failed number. Checked against ArviZ to 1e-8 in tests/test_gate.py.

>>> import numpy as np
>>> x = np.random.default_rng(0).normal(size=(4, 500, 3))
>>> r = rhat(x)
>>> r.shape, bool(np.all(r < 1.01))
((3,), True)
"""

from __future__ import annotations

import numpy as np
from scipy import special, stats

TAIL_PROBS = (0.05, 0.95)


def _halves(x: np.ndarray) -> np.ndarray:
    """(chain, draw, ...) -> (chain, 2 * (draw // 2), ...): the draws the split keeps, in
    order, so that splitting the result again gives exactly the two halves."""
    half = x.shape[1] // 2
    return np.concatenate([x[:, :half], x[:, x.shape[1] - half:]], axis=1)


def _split(x: np.ndarray) -> np.ndarray:
    half = x.shape[1] // 2
    return np.concatenate([x[:, :half], x[:, x.shape[1] - half:]], axis=0)


def _ess_split(y: np.ndarray) -> np.ndarray:
    """ESS of the mean of already split chains ``y`` (chain, draw, ...), vectorised."""
    m, n = y.shape[0], y.shape[1]
    centred = y - y.mean(axis=1, keepdims=True)
    size = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfft(centred, n=size, axis=1)
    acov = np.fft.irfft(f * np.conj(f), n=size, axis=1)[:, :n] / n
    mean_var = acov[:, 0].mean(axis=0) * n / (n - 1.0)
    var_plus = mean_var * (n - 1.0) / n
    if m > 1:
        var_plus = var_plus + y.mean(axis=1).var(axis=0, ddof=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = 1.0 - (mean_var - acov.mean(axis=0)) / var_plus  # (n, ...)
    rho[0] = 1.0
    pairs = (n - 1) // 2
    p = rho[: 2 * pairs : 2] + rho[1 : 2 * pairs : 2]  # pair sums P_0, P_1, ...
    bound = max((n - 3) // 2, 0)  # the last pair the sequence may reach
    nonpos = p <= 0
    first = np.where(nonpos.any(axis=0), nonpos.argmax(axis=0), p.shape[0])
    k = np.minimum(first, bound)  # pairs 0..k-1 are used; pair k gives the last term
    idx = np.arange(p.shape[0]).reshape(-1, *([1] * (p.ndim - 1)))
    mono = np.minimum.accumulate(np.where(idx < k, p, np.inf), axis=0)
    used = np.where(idx < k, mono, 0.0).sum(axis=0)
    last_even = np.take_along_axis(rho, (2 * k)[None], axis=0)[0]
    pk = np.take_along_axis(p, np.minimum(k, p.shape[0] - 1)[None], axis=0)[0]
    last = np.where((pk >= 0) | (last_even > 0), last_even, 0.0)
    tau = np.maximum(-1.0 + 2.0 * used + last, 1.0 / np.log10(m * n))
    return m * n / tau


def _z_scale(x: np.ndarray) -> np.ndarray:
    """Rank-normalise over all chains and draws, separately for every trailing index."""
    flat = x.reshape(x.shape[0] * x.shape[1], -1)
    ranks = stats.rankdata(flat, method="average", axis=0)
    z = special.ndtri((ranks - 0.375) / (flat.shape[0] + 0.25))
    return z.reshape(x.shape)


def _split_rhat(y: np.ndarray) -> np.ndarray:
    """R-hat of already split chains (chain, draw, ...)."""
    n = y.shape[1]
    between = n * y.mean(axis=1).var(axis=0, ddof=1)
    within = y.var(axis=1, ddof=1).mean(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.sqrt((between / within + n - 1) / n)


def _prepare(x) -> np.ndarray:
    x = np.asarray(x, dtype=float)
    if x.ndim < 2:
        raise ValueError("draws must have shape (chain, draw, ...)")
    if x.shape[1] < 8:
        raise ValueError("at least 8 draws per chain are needed for R-hat and ESS")
    return x


def constant(x) -> np.ndarray | bool:
    """True where every draw of every chain is the same value (R-hat and ESS undefined)."""
    x = _prepare(x)
    flat = x.reshape(x.shape[0] * x.shape[1], -1)
    out = (np.ptp(flat, axis=0) == 0) & np.all(np.isfinite(flat), axis=0)
    out = out.reshape(x.shape[2:])
    return bool(out) if out.ndim == 0 else out


def _undefined(x: np.ndarray, values: np.ndarray) -> np.ndarray:
    """NaN where the draws are constant or not all finite."""
    flat = x.reshape(x.shape[0] * x.shape[1], -1)
    bad = (np.ptp(flat, axis=0) == 0) | ~np.all(np.isfinite(flat), axis=0)
    out = np.where(bad.reshape(x.shape[2:]), np.nan, values)
    return float(out) if out.ndim == 0 else out


def rhat(x) -> np.ndarray | float:
    """Rank-normalised split R-hat (bulk and folded, the larger) of draws (chain, draw, ...)."""
    x = _prepare(x)
    if x.shape[0] * 2 < 2:
        raise ValueError("R-hat needs at least one chain")
    y = _split(x)
    with np.errstate(invalid="ignore"):
        bulk = _split_rhat(_z_scale(y))
        folded = np.abs(y - np.median(y.reshape(-1, *y.shape[2:]), axis=0))
        tail = _split_rhat(_z_scale(folded))
    return _undefined(x, np.maximum(bulk, tail))


def ess_bulk(x) -> np.ndarray | float:
    """Bulk effective sample size of draws (chain, draw, ...)."""
    x = _prepare(x)
    kept = _halves(x)
    return _undefined(x, _ess_split(_split(_z_scale(kept))))


def ess_tail(x) -> np.ndarray | float:
    """Tail effective sample size: the smaller ESS of I(x <= q05) and I(x <= q95)."""
    x = _prepare(x)
    flat = x.reshape(x.shape[0] * x.shape[1], *x.shape[2:])
    out = None
    for prob in TAIL_PROBS:
        q = np.quantile(flat, prob, axis=0)
        ess = _ess_split(_split(_halves((x <= q).astype(float))))
        out = ess if out is None else np.minimum(out, ess)
    return _undefined(x, out)


def summary(x) -> dict[str, np.ndarray]:
    """R-hat, bulk and tail ESS and the constant flag of draws (chain, draw, ...) at once."""
    return {"rhat": rhat(x), "ess_bulk": ess_bulk(x), "ess_tail": ess_tail(x),
            "constant": constant(x)}
