r"""Plotting positions for a Weibull probability plot with suspensions (numpy only).

Adjusted ranks (Johnson's method; L. G. Johnson, The Statistical Treatment of Fatigue
Experiments, Elsevier 1964 — cited from memory). Sort all n units by time, failures before
suspensions at equal times. For the j-th failure, with reverse rank
:math:`k_j` (the number of units, itself included, whose time is not below it):

.. math:: r_j = r_{j-1} + \frac{n + 1 - r_{j-1}}{1 + k_j}, \qquad r_0 = 0.

Without suspensions :math:`r_j = j`. The median rank of an adjusted rank r is taken by
Bernard's approximation :math:`F \approx (r - 0.3)/(n + 0.4)` (Bernard & Bos-Levenbach,
1953, Statistica Neerlandica 7 — cited from memory) of the exact median of
Beta(r, n - r + 1).

Interval-censored failures are plotted at the midpoint of their interval and left-censored
ones at their inspection time; this is for the picture only (the fit uses the exact interval
likelihood).
"""

from __future__ import annotations

import numpy as np


def adjusted_ranks(times, failed) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(failure times in order, adjusted ranks, reverse ranks) of the failures."""
    t = np.asarray(times, float)
    f = np.asarray(failed, bool)
    n = t.size
    order = np.lexsort((~f, t))  # by time; at ties, failures first
    t, f = t[order], f[order]
    reverse = n - np.arange(n)  # units at or after each position
    ranks = []
    prev = 0.0
    for k in reverse[f]:
        prev = prev + (n + 1 - prev) / (1 + k)
        ranks.append(prev)
    return t[f], np.asarray(ranks), reverse[f]


def bernard(rank, n: int) -> np.ndarray:
    """Bernard's approximation to the median rank."""
    return (np.asarray(rank, float) - 0.3) / (n + 0.4)


def weibull_y(prob) -> np.ndarray:
    """The ordinate of Weibull probability paper: ln(-ln(1 - F))."""
    p = np.asarray(prob, float)
    return np.log(-np.log1p(-p))


def plotting_positions(failures, suspensions, interval_lower=(), interval_upper=(),
                       left=()) -> dict[str, np.ndarray]:
    """Times, median ranks and the kind of each plotted failure (0 exact, 1 interval,
    2 left-censored), ordered by plotted time."""
    tf = np.asarray(failures, float)
    ts = np.asarray(suspensions, float)
    ia = np.asarray(interval_lower, float)
    ib = np.asarray(interval_upper, float)
    tl = np.asarray(left, float)
    fail_times = np.concatenate([tf, 0.5 * (ia + ib), tl])
    kinds = np.concatenate([np.zeros(tf.size), np.ones(ia.size), np.full(tl.size, 2)])
    times = np.concatenate([fail_times, ts])
    failed = np.concatenate([np.ones(fail_times.size, bool), np.zeros(ts.size, bool)])
    n = times.size
    if fail_times.size == 0:
        return {"time": np.zeros(0), "rank": np.zeros(0), "median_rank": np.zeros(0),
                "kind": np.zeros(0, int), "n": n}
    order = np.lexsort((~failed, times))
    kind_sorted = np.concatenate([kinds, np.full(ts.size, -1)])[order]
    t_fail, ranks, _ = adjusted_ranks(times, failed)
    return {"time": t_fail, "rank": ranks, "median_rank": bernard(ranks, n),
            "kind": kind_sorted[failed[order]].astype(int), "n": n}
