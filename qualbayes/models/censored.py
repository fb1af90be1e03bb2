r"""Censored life observations in the form every life distribution uses (numpy only).

One group's units become four kinds of distinct observations, each with a count ``w``
(identical observations merged, which is exact):

=========== ============ =====================================
kind        times        likelihood term
=========== ============ =====================================
exact       t            :math:`\log f(t)`
right       t            :math:`\log S(t)`
interval    (a, b]       :math:`\log(S(a) - S(b))`
left        b            :math:`\log F(b)`
=========== ============ =====================================

``t_ref`` is the largest exact, suspension or interval-start time (the largest
left-censoring time when every unit is left-censored), as in :mod:`qualbayes.models.weibull`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

KINDS = ("exact", "right", "interval", "left")


@dataclass(frozen=True)
class Observations:
    """Distinct observations of one group by kind, with their counts."""

    exact: np.ndarray
    w_exact: np.ndarray
    right: np.ndarray
    w_right: np.ndarray
    int_a: np.ndarray
    int_b: np.ndarray
    w_int: np.ndarray
    left: np.ndarray
    w_left: np.ndarray
    t_ref: float

    @property
    def failures(self) -> int:
        return int(self.w_exact.sum() + self.w_int.sum() + self.w_left.sum())

    @property
    def units(self) -> int:
        return int(self.failures + self.w_right.sum())

    @property
    def conjugate(self) -> bool:
        """Only exact failures and suspensions (no interval or left-censored units)."""
        return self.int_a.size == 0 and self.left.size == 0

    @property
    def longest(self) -> float:
        """The longest time the data reach (a failure, suspension or inspection)."""
        every = np.concatenate([self.exact, self.right, self.int_b, self.left])
        return float(every.max())

    def weights(self) -> np.ndarray:
        """Counts of the distinct observations in the order of :func:`pointwise` columns:
        exact, right, interval, left."""
        return np.concatenate([self.w_exact, self.w_right, self.w_int, self.w_left])


def observations(failures=(), suspensions=(), interval_lower=(), interval_upper=(),
                 left=()) -> Observations:
    """Distinct observations with counts from arrays of positive times (the keys of
    :func:`qualbayes.data.life.frame_arrays`)."""
    tf = np.asarray(failures, float)
    ts = np.asarray(suspensions, float)
    ia = np.asarray(interval_lower, float)
    ib = np.asarray(interval_upper, float)
    tl = np.asarray(left, float)
    anchors = np.concatenate([tf, ts, ia])
    if anchors.size == 0 and tl.size == 0:
        raise ValueError("no units")
    t_ref = float(anchors.max() if anchors.size else tl.max())
    ue, we = np.unique(tf, return_counts=True)
    ur, wr = np.unique(ts, return_counts=True)
    if ia.size:
        pairs, wi = np.unique(np.column_stack([ia, ib]), axis=0, return_counts=True)
    else:
        pairs, wi = np.zeros((0, 2)), np.zeros(0, int)
    ul, wl = np.unique(tl, return_counts=True)
    return Observations(ue, we.astype(float), ur, wr.astype(float), pairs[:, 0], pairs[:, 1],
                        wi.astype(float), ul, wl.astype(float), t_ref)


def pointwise(log_f, log_s, log_interval, log_cdf, obs: Observations) -> np.ndarray:
    """Log-likelihood of each distinct observation, columns in the order exact, right,
    interval, left: the given functions map times (n,) to log terms (draws, n)."""
    cols = []
    if obs.exact.size:
        cols.append(log_f(obs.exact))
    if obs.right.size:
        cols.append(log_s(obs.right))
    if obs.int_a.size:
        cols.append(log_interval(obs.int_a, obs.int_b))
    if obs.left.size:
        cols.append(log_cdf(obs.left))
    return np.concatenate(cols, axis=-1)


def pad(many: list[Observations]) -> dict[str, np.ndarray]:
    """(groups, width) arrays of every group's observations, padded with weight-0 entries
    whose times keep every term finite (t = 1, interval (1, 2])."""
    g = len(many)
    out: dict[str, np.ndarray] = {}

    def stack(name, *keys_fill):
        width = max(max(getattr(o, keys_fill[0][0]).size for o in many), 1)
        for key, fill in keys_fill:
            arr = np.full((g, width), fill, float)
            for j, o in enumerate(many):
                v = getattr(o, key)
                arr[j, : v.size] = v
            out[f"{name}_{key}"] = arr

    stack("e", ("exact", 1.0), ("w_exact", 0.0))
    stack("r", ("right", 1.0), ("w_right", 0.0))
    stack("i", ("int_a", 1.0), ("int_b", 2.0), ("w_int", 0.0))
    stack("l", ("left", 1.0), ("w_left", 0.0))
    return out


def arrays(obs: Observations) -> dict[str, np.ndarray]:
    """One group's observations in the keys of :func:`pad` (1-D arrays)."""
    return {k: v[0] for k, v in pad([obs]).items()}


def weighted_sum(terms: dict, obs: dict, xp=np):
    """The log-likelihood: each kind's terms (..., n_kind) times its counts, summed."""
    return (xp.sum(obs["e_w_exact"] * terms["exact"], axis=-1)
            + xp.sum(obs["r_w_right"] * terms["right"], axis=-1)
            + xp.sum(obs["i_w_int"] * terms["interval"], axis=-1)
            + xp.sum(obs["l_w_left"] * terms["left"], axis=-1))
