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
from scipy import special

TAIL_PROBS = (0.05, 0.95)


def _params_first(x) -> np.ndarray:
    """(chain, draw, *rest) -> (K, chain, draw), contiguous: every parameter's draws in one
    row, so that sorting and FFTs run along the last, contiguous axis."""
    x = np.asarray(x, dtype=float)
    if x.ndim < 2:
        raise ValueError("draws must have shape (chain, draw, ...)")
    if x.shape[1] < 8:
        raise ValueError("at least 8 draws per chain are needed for R-hat and ESS")
    flat = x.reshape(x.shape[0], x.shape[1], -1)
    return np.ascontiguousarray(np.moveaxis(flat, -1, 0))


def _split(y: np.ndarray) -> np.ndarray:
    """(K, chain, draw) -> (K, 2 chain, draw // 2): each chain in halves (the middle draw
    of an odd length dropped)."""
    half = y.shape[2] // 2
    return np.concatenate([y[:, :, :half], y[:, :, y.shape[2] - half:]], axis=1)


def _ess(y: np.ndarray) -> np.ndarray:
    """ESS of the mean of already split chains ``y`` (K, chain, draw)."""
    m, n = y.shape[1], y.shape[2]
    centred = y - y.mean(axis=2, keepdims=True)
    size = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfft(centred, n=size, axis=2)
    acov = np.fft.irfft(f * np.conj(f), n=size, axis=2)[:, :, :n] / n
    mean_var = acov[:, :, 0].mean(axis=1) * n / (n - 1.0)
    var_plus = mean_var * (n - 1.0) / n
    if m > 1:
        var_plus = var_plus + y.mean(axis=2).var(axis=1, ddof=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = 1.0 - (mean_var[:, None] - acov.mean(axis=1)) / var_plus[:, None]  # (K, n)
    rho[:, 0] = 1.0
    pairs = (n - 1) // 2
    p = rho[:, : 2 * pairs : 2] + rho[:, 1 : 2 * pairs : 2]  # pair sums P_0, P_1, ...
    bound = max((n - 3) // 2, 0)  # the last pair the sequence may reach
    nonpos = p <= 0
    first = np.where(nonpos.any(axis=1), nonpos.argmax(axis=1), p.shape[1])
    k = np.minimum(first, bound)  # pairs 0..k-1 are used; pair k gives the last term
    used_mask = np.arange(p.shape[1])[None, :] < k[:, None]
    mono = np.minimum.accumulate(np.where(used_mask, p, np.inf), axis=1)
    used = np.where(used_mask, mono, 0.0).sum(axis=1)
    last_even = np.take_along_axis(rho, (2 * k)[:, None], axis=1)[:, 0]
    pk = np.take_along_axis(p, np.minimum(k, p.shape[1] - 1)[:, None], axis=1)[:, 0]
    last = np.where((pk >= 0) | (last_even > 0), last_even, 0.0)
    tau = np.maximum(-1.0 + 2.0 * used + last, 1.0 / np.log10(m * n))
    return m * n / tau


def _z_scale(y: np.ndarray) -> np.ndarray:
    """Rank-normalise (K, ...) over all chains and draws of each parameter."""
    flat = y.reshape(y.shape[0], -1)
    ranks = average_ranks(flat)
    return special.ndtri((ranks - 0.375) / (flat.shape[1] + 0.25)).reshape(y.shape)


def average_ranks(a: np.ndarray) -> np.ndarray:
    """Ranks 1..n along the last axis of a 2-D array, ties given their average rank (as
    ``scipy.stats.rankdata(a, method="average", axis=1)``, tested against it; numpy only, so
    that the gate does not import scipy.stats, about 1 CPU s of every command's start).

    >>> average_ranks(np.array([[3.0, 1.0, 3.0, 2.0]])).tolist()
    [[3.5, 1.0, 3.5, 2.0]]
    """
    rows, n = a.shape
    order = np.argsort(a, axis=1, kind="stable")
    ordered = np.take_along_axis(a, order, axis=1)
    new = np.ones((rows, n), dtype=bool)
    new[:, 1:] = ordered[:, 1:] != ordered[:, :-1]
    group = (np.cumsum(new, axis=1) - 1 + (np.arange(rows) * n)[:, None]).ravel()
    position = np.tile(np.arange(1.0, n + 1.0), rows)
    mean = np.bincount(group, position) / np.maximum(np.bincount(group), 1)
    out = np.empty((rows, n))
    np.put_along_axis(out, order, mean[group].reshape(rows, n), axis=1)
    return out


def _split_rhat(y: np.ndarray) -> np.ndarray:
    """R-hat of already split chains (K, chain, draw)."""
    n = y.shape[2]
    between = n * y.mean(axis=2).var(axis=1, ddof=1)
    within = y.var(axis=2, ddof=1).mean(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.sqrt((between / within + n - 1) / n)


def _shape_back(x, values: np.ndarray, bad: np.ndarray):
    rest = np.shape(x)[2:]
    out = np.where(bad, np.nan, values).reshape(rest)
    return float(out) if out.ndim == 0 else out


def _bad(y: np.ndarray) -> np.ndarray:
    flat = y.reshape(y.shape[0], -1)
    return (np.ptp(flat, axis=1) == 0) | ~np.all(np.isfinite(flat), axis=1)


def constant(x) -> np.ndarray | bool:
    """True where every draw of every chain is the same value (R-hat and ESS undefined)."""
    y = _params_first(x)
    flat = y.reshape(y.shape[0], -1)
    out = ((np.ptp(flat, axis=1) == 0) & np.all(np.isfinite(flat), axis=1))
    out = out.reshape(np.shape(x)[2:])
    return bool(out) if out.ndim == 0 else out


def _rhat(s: np.ndarray, z: np.ndarray) -> np.ndarray:
    """R-hat from split draws ``s`` and their rank-normalised values ``z``."""
    with np.errstate(invalid="ignore"):
        folded = np.abs(s - np.median(s.reshape(s.shape[0], -1), axis=1)[:, None, None])
        return np.maximum(_split_rhat(z), _split_rhat(_z_scale(folded)))


def _ess_tail(y: np.ndarray) -> np.ndarray:
    """Tail ESS of draws ``y`` (K, chain, draw): the smaller ESS of I(x <= q05) and
    I(x <= q95), the quantiles taken over every draw, the indicators then split."""
    flat = y.reshape(y.shape[0], -1)
    out = None
    for prob in TAIL_PROBS:
        q = np.quantile(flat, prob, axis=1)
        ess = _ess(_split((y <= q[:, None, None]).astype(float)))
        out = ess if out is None else np.minimum(out, ess)
    return out


def rhat(x) -> np.ndarray | float:
    """Rank-normalised split R-hat (bulk and folded, the larger) of draws (chain, draw, ...)."""
    s = _split(_params_first(x))
    return _shape_back(x, _rhat(s, _z_scale(s)), _bad(s))


def ess_bulk(x) -> np.ndarray | float:
    """Bulk effective sample size of draws (chain, draw, ...)."""
    s = _split(_params_first(x))
    return _shape_back(x, _ess(_z_scale(s)), _bad(s))


def ess_tail(x) -> np.ndarray | float:
    """Tail effective sample size: the smaller ESS of I(x <= q05) and I(x <= q95)."""
    y = _params_first(x)
    return _shape_back(x, _ess_tail(y), _bad(y))


def summary(x) -> dict:
    """R-hat, bulk and tail ESS and the constant flag of draws (chain, draw, ...) at once
    (the rank normalisation and the split are computed once)."""
    y = _params_first(x)
    s = _split(y)
    z = _z_scale(s)
    bad = _bad(y)
    with np.errstate(invalid="ignore", divide="ignore"):
        return {"rhat": _shape_back(x, _rhat(s, z), bad),
                "ess_bulk": _shape_back(x, _ess(z), bad),
                "ess_tail": _shape_back(x, _ess_tail(y), bad),
                "constant": constant(x)}
