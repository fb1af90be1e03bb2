"""Sufficient statistics of one group's Weibull data, and binned Taylor moments for very
large groups (see :mod:`qualbayes.models.weibull`; numpy only)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class GroupStats:
    """One group's data in the form the log density uses (times relative to t_ref).

    Identical observations are merged into one entry with a count (``w_*``), which is exact.
    """

    log_tref: float
    n_f: int
    sum_log_tf: float  # sum of log t over exact failures
    sum_d_f: float  # sum of (log t - log t_ref) over exact failures
    d_exposed: np.ndarray  # log t - log t_ref of exact failures and suspensions (distinct)
    w_exposed: np.ndarray  # how many units share each value
    d_int_a: np.ndarray  # interval starts (distinct intervals)
    log_ratio_int: np.ndarray  # log(b / a) of the intervals (> 0)
    w_int: np.ndarray
    d_left: np.ndarray  # left-censored inspection times (distinct)
    w_left: np.ndarray
    counts: dict[str, int] = field(default_factory=dict)

    @property
    def anchored(self) -> bool:
        """True when some unit was seen working at a known time (exact, suspension or
        interval start): only then does the default scale prior give a proper posterior."""
        return self.counts["failure"] + self.counts["suspension"] + self.counts["interval"] > 0

    @property
    def failures(self) -> int:
        """Units known to have failed (exact, interval and left-censored)."""
        return self.counts["failure"] + self.counts["interval"] + self.counts["left"]

    @property
    def units(self) -> int:
        return sum(self.counts.values())


def group_stats(failures, suspensions, interval_lower=(), interval_upper=(),
                left=()) -> GroupStats:
    """Sufficient statistics of one group's times (arrays of positive times)."""
    tf = np.asarray(failures, float)
    ts = np.asarray(suspensions, float)
    ia = np.asarray(interval_lower, float)
    ib = np.asarray(interval_upper, float)
    tl = np.asarray(left, float)
    anchors = np.concatenate([tf, ts, ia])
    if anchors.size == 0 and tl.size == 0:
        raise ValueError("no units")
    # all left-censored: the data bound the life only from above (see ``anchored``)
    log_tref = float(np.log(anchors.max() if anchors.size else tl.max()))
    d_exp, w_exp = np.unique(np.concatenate([np.log(tf), np.log(ts)]) - log_tref,
                             return_counts=True)
    if ia.size:
        pairs, w_int = np.unique(np.column_stack([ia, ib]), axis=0, return_counts=True)
    else:
        pairs, w_int = np.zeros((0, 2)), np.zeros(0, int)
    d_left, w_left = np.unique(np.log(tl) - log_tref, return_counts=True)
    return GroupStats(
        log_tref=log_tref,
        n_f=int(tf.size),
        sum_log_tf=float(np.log(tf).sum()),
        sum_d_f=float((np.log(tf) - log_tref).sum()),
        d_exposed=d_exp, w_exposed=w_exp.astype(float),
        d_int_a=np.log(pairs[:, 0]) - log_tref,
        log_ratio_int=np.log(pairs[:, 1]) - np.log(pairs[:, 0]),
        w_int=w_int.astype(float),
        d_left=d_left, w_left=w_left.astype(float),
        counts={"failure": int(tf.size), "suspension": int(ts.size),
                "interval": int(ia.size), "left": int(tl.size)},
    )
TAYLOR_ORDER = 24
SHAPE_CAP_SD = 12.0  # the shape is capped this many Laplace sd above its mode


def binned_moments(d: np.ndarray, w: np.ndarray, beta_cap: float,
                   order: int = TAYLOR_ORDER) -> tuple[np.ndarray, np.ndarray]:
    r"""Bins of :math:`d` with centres :math:`c_j` and coefficients :math:`a_{jk} =
    \sum_{i \in j} w_i (d_i - c_j)^k / k!`, so that for :math:`\beta \le 2\beta_{cap}`

    .. math:: \sum_i w_i e^{\beta d_i} = \sum_j e^{\beta c_j} \sum_{k \le K} a_{jk}\beta^k

    up to a relative error below :math:`2^{K+1} e^2/(K+1)!` (about :math:`10^{-17}` for
    K = 24): bins are :math:`2/\beta_{cap}` wide, so :math:`|\beta(d_i - c_j)| \le 2`.
    """
    from math import factorial  # noqa: PLC0415

    half = 1.0 / beta_cap
    lo = float(d.min())
    idx = np.floor((d - lo) / (2 * half)).astype(int)
    nbins = int(idx.max()) + 1
    centres = lo + (np.arange(nbins) + 0.5) * 2 * half
    dev = d - centres[idx]
    coef = np.zeros((nbins, order + 1))
    power = w.astype(float).copy()
    for k in range(order + 1):
        coef[:, k] = np.bincount(idx, weights=power, minlength=nbins) / factorial(k)
        power = power * dev
    return centres, coef


def exposure_sum_binned(beta, centres, coef, xp=np):
    """The sum of w_i exp(beta d_i) from :func:`binned_moments`: one vectorised pass over
    bins x powers (|a_jk beta^k| <= n_j 2^k / k!, so no term is large and the sum loses
    nothing to cancellation)."""
    bb = beta[..., None]
    powers = bb[..., None] ** xp.arange(coef.shape[-1])
    poly = xp.sum(coef * powers, axis=-1)
    return xp.sum(xp.exp(bb * centres) * poly, axis=-1)
