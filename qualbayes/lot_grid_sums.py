r"""Beta-binomial mixtures over a group's grid nodes, summed for many lots at once.

For grid nodes :math:`(a_i, b_i)` with weights :math:`w_i` and a lot of lot size N with x
defectives among n inspected (R = N - n units not inspected), the defectives D among the R
units have at node i

.. math::

    P_i(D = d) = \binom{R}{d} \frac{B(a_i + x + d,\ b_i + N - x - d)}{B(a_i + x,\ b_i + n - x)},

so the weighted sum over nodes factorises through :math:`T = x + d`:

.. math::

    \sum_i w_i P_i(D = d) = \binom{R}{d}\, U(x + d, \text{lot}), \qquad
    U(T, \text{lot}) = \sum_i w_i \frac{G_i(T)}{H_i(\text{lot})},

with :math:`G_i(T) = B(a_i + T, b_i + N - T)` depending on the lot size only and
:math:`H_i = B(a_i + x, b_i + n - x)` on the lot's own counts. U of every lot of one lot
size is one matrix product (nodes x T against nodes x lots), and the log-betas along T come
from one log-beta per node and then logarithms of ratios,
:math:`\log B(a+T+1, b+N-T-1) = \log B(a+T, b+N-T) + \log\frac{a+T}{b+N-T-1}`. The same
numbers as summing each node's beta-binomial probabilities (as
:func:`qualbayes.lot_decisions.betabinom_cdf` does, lot by lot), up to rounding (relative
differences about 1e-13, tested).

The further clean units of a lot reweight the nodes by :math:`B(\alpha_i, \beta_i + m) /
B(\alpha_i, \beta_i)` (:math:`\alpha = a + x`, :math:`\beta = b + n - x`) and leave R - m
units: the reweighted probability is :math:`\sum_{d \le k}\binom{R-m}{d} U(x+d) / Z(m)`,
:math:`Z(m) = \sum_i w_i B(\alpha_i, \beta_i + m)/B(\alpha_i, \beta_i)`: U is reused for
every m, only Z is summed again.

>>> import numpy as np
>>> a, b, w = np.array([2.0, 3.0]), np.array([200.0, 250.0]), np.log([0.4, 0.6])
>>> lu, _ = log_u(a, b, w[None, :], np.array([1]), np.array([50]), 400, 350)
>>> total = np.exp(log_choose(np.array([350]), np.arange(351)) + lu[0, 0]).sum()
>>> bool(abs(total - 1.0) < 1e-12)  # the defectives left: every count 0..R, probability 1
True
"""

from __future__ import annotations

import numpy as np
from scipy import special

#: the largest exponent of a scaled node term (e^690 times some 10^4 nodes stays finite)
GUARD = 690.0


def log_choose(r, d) -> np.ndarray:
    """log C(r, d), broadcasting; -inf where d > r or d < 0."""
    r = np.asarray(r, float)
    d = np.asarray(d, float)
    ok = (d >= 0) & (d <= r)
    dd = np.where(ok, d, 0.0)
    out = special.gammaln(r + 1.0) - special.gammaln(dd + 1.0) - special.gammaln(r - dd + 1.0)
    return np.where(ok, out, -np.inf)


def log_beta_path(a, b, total: int, t0: int, t1: int) -> np.ndarray:
    """log B(a + T, b + total - T) for T = t0..t1 (nodes x (t1 - t0 + 1)): one log-beta
    per node, then cumulative logarithms of the ratios (a view of :func:`_path_rows`)."""
    return _path_rows(a, b, total, t0, t1).T


def _path_rows(a, b, total: int, t0: int, t1: int) -> np.ndarray:
    """:func:`log_beta_path` with T along the rows ((t1 - t0 + 1) x nodes): the running
    sums then add whole rows of nodes (the same additions in the same order)."""
    first = special.betaln(a + t0, b + (total - t0))
    out = np.empty((max(t1 - t0, 0) + 1, a.size))
    out[0] = first
    if t1 > t0:
        t = np.arange(t0, t1, dtype=float)[:, None]
        _running(np.log((a[None, :] + t) / (b[None, :] + (total - t - 1.0))), out[1:],
                 np.add)
        out[1:] += first
    return out


def _running(rows, out, op) -> None:
    """The running sum or product of ``rows`` (op np.add or np.multiply) into ``out``, row
    by row: the same operations in the same order as np.cumsum / np.cumprod along axis 0,
    each a whole row of nodes at once (numpy accumulates along axis 0 node by node)."""
    out[0] = rows[0]
    for j in range(1, rows.shape[0]):
        op(out[j - 1], rows[j], out=out[j])


def _ratio_products(a, b, total: int, t0: int, t1: int, ref: int):
    """(log B(a + t0, b + total - t0) per node, products over t0 <= t < T of the ratio
    ((a + t)/(b + total - t - 1)) / (the same at node ``ref``), T = t0..t1, as rows (T x
    nodes)): the log-betas along T relative to the reference node, without a logarithm per
    element."""
    first = special.betaln(a + t0, b + (total - t0))
    prod = np.ones((max(t1 - t0, 0) + 1, a.size))
    if t1 > t0:
        t = np.arange(t0, t1, dtype=float)
        ratio = a[None, :] + t[:, None]
        np.divide(ratio, b[None, :] + (total - t[:, None] - 1.0), out=ratio)
        ratio /= ((a[ref] + t) / (b[ref] + (total - t - 1.0)))[:, None]  # its own column
        with np.errstate(over="ignore"):  # an overflow is seen by the caller (not finite)
            _running(ratio, prod[1:], np.multiply)
    return first, prod


def log_h(a, b, x, n) -> np.ndarray:
    """log B(a_i + x_c, b_i + n_c - x_c) (nodes x lots, a view of a lots x nodes array):
    one log-beta per node and distinct n, then the path over x."""
    x = np.asarray(x, int)
    n = np.asarray(n, int)
    rows = np.empty((len(x), a.size))
    for nv in np.unique(n):
        sel = np.flatnonzero(n == nv)
        xs = x[sel]
        rows[sel] = _path_rows(a, b, int(nv), int(xs.min()), int(xs.max()))[xs - xs.min()]
    return rows.T


def log_u(a, b, logw, x, n, size: int, d_max: int, lh=None):
    """(log U, log H): log U[w, c, d] = log U_w(x_c + d, lot c) for d = 0..d_max (-inf past
    the lot size), weights ``exp(logw[w])``; log H[i, c] = log B(a_i + x_c, b_i + n_c - x_c)
    (:func:`log_h`, computed here unless given). None when a scaled term could overflow (the
    caller then sums node by node)."""
    x = np.asarray(x, int)
    n = np.asarray(n, int)
    c = len(x)
    ref = int(np.argmax(logw[0]))
    t0, t1 = int(x.min()), int(min(size, int(x.max()) + d_max))
    lg0, prod = _ratio_products(a, b, size, t0, t1, ref)
    top = prod.max(axis=0)
    if not (np.isfinite(top).all() and top.max() < 1e300 and prod.min() >= 0.0):
        return None
    e = prod / top[None, :]  # G_i(T) / G_ref(T), scaled by node to at most 1 (T x nodes)
    lh = log_h(a, b, x, n) if lh is None else lh
    # log G_ref(T): the reference node's own path
    lg_ref = _path_rows(a[ref:ref + 1], b[ref:ref + 1], size, t0, t1)[:, 0]
    rows = x[:, None] + np.arange(d_max + 1)[None, :] - t0
    inside = rows <= t1 - t0
    rows = np.minimum(rows, t1 - t0)
    cols = np.broadcast_to(np.arange(c)[:, None], rows.shape)
    scale = lg_ref[rows] - lh[ref][:, None]
    out = np.full((len(logw), c, d_max + 1), -np.inf)
    base = (np.log(top) + lg0 - lg0[ref])[:, None] - (lh - lh[ref])
    for k, lw in enumerate(logw):
        on = np.isfinite(lw)  # the grid of every other point: a quarter of the nodes
        if not on.any():
            continue
        expo = base[on] + lw[on, None] if not on.all() else base + lw[:, None]
        if np.nanmax(expo) > GUARD:
            return None
        s = (e[:, on] if not on.all() else e) @ np.exp(expo)
        with np.errstate(divide="ignore"):
            out[k] = np.where(inside, np.log(s[rows, cols]) + scale, -np.inf)
    return out, lh


def lot_basis_probs(a, b, logw, x, n, size: int, k, lh=None) -> np.ndarray | None:
    """sum_i w_i P_i(D <= k_c) for lots c of one lot size (0 <= k_c < R_c), one row per
    weight vector; None when the scaled sums could overflow."""
    k = np.asarray(k, int)
    got = log_u(a, b, logw, x, n, size, int(k.max()), lh)
    if got is None:
        return None
    lu, _ = got
    d = np.arange(int(k.max()) + 1)[None, :]
    lc = log_choose((size - np.asarray(n, int))[:, None], d)
    lc = np.where(d <= k[:, None], lc, -np.inf)
    return np.exp(lc[None] + lu).sum(axis=2)


def reachable(remaining: int, cap: int) -> int:
    """The largest count that :func:`qualbayes.lot_grid_answers.betabinom_quantiles` sums
    exactly (its blocks of 64, 128, ... counts start at most at min(remaining, cap))."""
    limit, start, block = min(remaining, cap), 0, 64
    while start + block <= limit:
        start, block = start + block, block * 2
    return min(remaining, start + block - 1)


def remaining_quantiles(lu, size: int, x, n, qs, d_max: int):
    """Per lot, the ``qs`` quantiles of its defectives not inspected from log U (one weight
    vector, lots x (d_max + 1)); -1 where the sum would need counts past d_max."""
    x = np.asarray(x, int)
    n = np.asarray(n, int)
    r = size - n
    d = np.arange(d_max + 1)[None, :]
    pmf = np.exp(log_choose(r[:, None], d) + lu)
    cdf = np.cumsum(pmf, axis=1)
    out = np.full((len(qs), len(x)), -1)
    for j, q in enumerate(qs):
        hit = cdf >= q - 1e-12
        first = np.argmax(hit, axis=1)
        found = hit.any(axis=1)
        out[j] = np.where(found, first, np.where(r <= d_max, r, -1))
    return out


def smallest_many(ok, cap) -> np.ndarray:
    """:func:`qualbayes.search.smallest_int` (lower end 0) for many monotone conditions at
    once, each evaluated at the same points as the one-at-a-time search; ``ok(idx, m)``
    returns (condition, degenerate) arrays for the conditions ``idx`` at ``m`` (a
    degenerate evaluation ends that search with no answer). Returns -1 for no answer."""
    cap = np.asarray(cap, np.int64)
    k = cap.size
    res = np.full(k, -1, np.int64)
    lo = np.zeros(k, np.int64)
    hi = np.zeros(k, np.int64)
    step = np.ones(k, np.int64)
    phase = np.zeros(k, np.int8)  # 0: at lo = 0; 1: doubling at hi; 2: bisecting at mid
    m = np.zeros(k, np.int64)
    live = cap >= 0
    while live.any():
        idx = np.flatnonzero(live)
        good, degen = ok(idx, m[idx])
        good, degen = np.asarray(good, bool), np.asarray(degen, bool)
        live[idx[degen]] = False
        keep = ~degen
        idx, good = idx[keep], good[keep]
        ph = phase[idx]
        # phase 0: ok(0) answers 0; else start doubling from lo = 0 with step 1
        p0 = idx[ph == 0]
        g0 = good[ph == 0]
        res[p0[g0]] = 0
        live[p0[g0]] = False
        s0 = p0[~g0]
        hi[s0] = np.minimum(cap[s0], lo[s0] + step[s0])
        phase[s0] = 1
        m[s0] = hi[s0]
        # phase 1: doubling
        p1 = idx[ph == 1]
        g1 = good[ph == 1]
        found = p1[g1]
        phase[found] = 2
        miss = p1[~g1]
        end = miss[hi[miss] >= cap[miss]]
        live[end] = False
        on = miss[hi[miss] < cap[miss]]
        lo[on] = hi[on]
        step[on] *= 2
        hi[on] = np.minimum(cap[on], lo[on] + step[on])
        m[on] = hi[on]
        # phase 2: bisection (entered from the doubling just now, or continued)
        p2 = idx[ph == 2]
        g2 = good[ph == 2]
        hi[p2[g2]] = m[p2[g2]]
        lo[p2[~g2]] = m[p2[~g2]]
        bis = np.concatenate([found, p2])
        done = bis[hi[bis] - lo[bis] <= 1]
        res[done] = hi[done]
        live[done] = False
        more = bis[hi[bis] - lo[bis] > 1]
        m[more] = (lo[more] + hi[more]) // 2
    return res
