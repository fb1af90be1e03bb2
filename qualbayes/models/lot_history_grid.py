r"""Exact, deterministic 2-D quadrature of the lot-history posterior (numpy/scipy only).

The twin of :mod:`qualbayes.models.lot_history` (NUTS): the same model and hyperprior
(:mod:`qualbayes.models.lot_spread`), integrated on a grid instead of sampled. For one
group with distinct terms :math:`(x_k, n_k)` seen :math:`w_k` times,

.. math::

    \log \pi(u, v) = \sum_k w_k \log \mathrm{BB}(x_k \mid n_k, \mu\kappa, (1-\mu)\kappa)
        + \log \mu(1-\mu) + \log p(\tau\mid\mu) + v

in :math:`u = \mathrm{logit}\,\mu` and :math:`v = \log(\tau - \tau_{lo}(\mu))`,
:math:`\kappa = 1/(\mu(1-\mu)\tau^2)` (the coordinates NUTS uses; the last terms are
the priors with their Jacobians). A coarse grid over a wide box finds where the
mass is; a fine grid over that region gives the weights. Lot answers are the
posterior-weighted mixtures of the conditional Betas
:math:`\mathrm{Beta}(\mu\kappa + x, (1-\mu)\kappa + n - x)`, as with the draws.

Uses: checking the NUTS fit (tests), operating-characteristics studies (thousands of
simulated histories in seconds), the per-lot outlier check (exact leave-one-out), and a
cross-check of NUTS answers.

>>> g = posterior_grid([0, 0, 1], [80, 80, 80])
>>> bool(0.0 < float(prob_within(g, [0], [80], 0.01)[0]) < 1.0)
True
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from qualbayes.models.lot_spread import HistoryPrior, kappa_of, spread_floor

_COARSE = 90
_BOX_U = (-32.0, 14.0)
_BOX_V = (-25.0, 12.0)
_KEEP = 40.0  # log-density range kept from the coarse pass


@dataclass
class GridPosterior:
    """Grid points with mass: mu, kappa and normalised weights (1-D arrays)."""

    mu: np.ndarray
    kappa: np.ndarray
    weight: np.ndarray
    edge_mass: float  # mass on the fine grid's border (should be negligible)
    #: weights of the grid of every other point (the same box, half the points per side),
    #: renormalised, 0 off it: the quadrature error of a sum is estimated from the difference
    weight_half: np.ndarray | None = None

    @property
    def a(self) -> np.ndarray:
        return self.mu * self.kappa

    @property
    def b(self) -> np.ndarray:
        return (1.0 - self.mu) * self.kappa


def _terms(x, n, w=None):
    x = np.asarray(x, float)
    n = np.asarray(n, float)
    w = np.ones_like(x) if w is None else np.asarray(w, float)
    pairs, inv = np.unique(np.stack([x, n], 1), axis=0, return_inverse=True)
    counts = np.bincount(inv.ravel(), weights=w, minlength=len(pairs))
    return pairs[:, 0], pairs[:, 1], counts


def _log_post(u, v, x, n, w, prior):
    mu = special.expit(u)
    tau = spread_floor(mu) + np.exp(v)
    kappa = kappa_of(mu, tau)
    a, b = mu * kappa, (1.0 - mu) * kappa
    logp = np.log(mu) + np.log1p(-mu) + prior.log_tau_density(tau, mu) + v
    base = special.betaln(a, b)
    for xk, nk, wk in zip(x, n, w, strict=True):
        logp = logp + wk * (special.betaln(a + xk, b + (nk - xk)) - base)
    return logp, mu, kappa


def posterior_grid(x, n, w=None, prior=None, size: int = 160) -> GridPosterior:
    """The posterior of (mu, kappa) for one group's lots (x defectives of n inspected, each
    seen w times), on a ``size`` x ``size`` grid."""
    prior = prior or HistoryPrior()
    xs, ns, ws = _terms(x, n, w)
    u = np.linspace(*_BOX_U, _COARSE)
    v = np.linspace(*_BOX_V, _COARSE)
    uu, vv = np.meshgrid(u, v, indexing="ij")
    lp, _, _ = _log_post(uu, vv, xs, ns, ws, prior)
    keep = lp >= np.nanmax(lp) - _KEEP
    iu, iv = np.flatnonzero(keep.any(1)), np.flatnonzero(keep.any(0))
    du, dv = u[1] - u[0], v[1] - v[0]
    u_f = np.linspace(u[iu[0]] - du, u[iu[-1]] + du, size)
    v_f = np.linspace(v[iv[0]] - dv, v[iv[-1]] + dv, size)
    uu, vv = np.meshgrid(u_f, v_f, indexing="ij")
    lp, mu, kappa = _log_post(uu, vv, xs, ns, ws, prior)
    wgt = np.exp(lp - np.nanmax(lp))
    wgt = np.where(np.isfinite(wgt), wgt, 0.0)
    wgt /= wgt.sum()
    edge = float(wgt[0].sum() + wgt[-1].sum() + wgt[:, 0].sum() + wgt[:, -1].sum())
    keep = wgt.ravel() > 1e-13
    return GridPosterior(mu.ravel()[keep], kappa.ravel()[keep], wgt.ravel()[keep] /
                         wgt.ravel()[keep].sum(), edge)


def term_loglik(a, b, xs, ns, ws) -> np.ndarray:
    r"""Sum over distinct terms of :math:`w_k \log \mathrm{BB}(x_k \mid n_k, a, b)` (the
    binomial coefficient left out), broadcasting over ``a``, ``b``: per term
    :math:`\sum_{j<x}\log(a+j) + \ln\Gamma(b+n-x) - \ln\Gamma(b) - \ln\Gamma(a+b+n)
    + \ln\Gamma(a+b)`, the log-gamma differences in ``x`` as sums of logarithms (a few
    log-gamma calls per distinct n instead of two log-beta calls per term; equal to the
    log-beta form to about 1e-5 in the log density, checked in the tests)."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    xs, ns, ws = (np.asarray(v, float) for v in (xs, ns, ws))
    out = np.zeros(np.broadcast(a, b).shape)
    if xs.size == 0:
        return out
    ab = a + b
    base = ws.sum() * (special.gammaln(ab) - special.gammaln(b))
    small = xs <= _LOG_SUM_MAX
    cum_a = np.zeros_like(out)  # sum_{j < x} log(a + j), built up in x
    for j in range(int(xs[small].max(initial=0.0))):
        cum_a = cum_a + np.log(a + j)
        hit = ws[small & (xs == j + 1)].sum()
        if hit:
            out = out + hit * cum_a
    for x, w in zip(xs[~small], ws[~small], strict=True):
        out = out + w * (special.gammaln(a + x) - special.gammaln(a))
    for nv in np.unique(ns):
        sel = ns == nv
        lg_bn = special.gammaln(b + nv)
        out = out - ws[sel].sum() * special.gammaln(ab + nv)
        cum_b = lg_bn  # ln Gamma(b + n - x), built down in x
        done = 0
        for x, w in sorted(zip(xs[sel], ws[sel], strict=True)):
            if x - done > _LOG_SUM_MAX:
                cum_b, done = special.gammaln(b + nv - x), x
            while done < x:
                cum_b = cum_b - np.log(b + nv - done - 1.0)
                done += 1
            out = out + w * cum_b
    return out + base


_LOG_SUM_MAX = 48  # x beyond this: log-gamma calls instead of sums of logarithms


def _prior_terms(u, v, prior):
    mu = special.expit(u)
    tau = spread_floor(mu) + np.exp(v)
    kappa = kappa_of(mu, tau)
    return mu, kappa, np.log(mu) + np.log1p(-mu) + prior.log_tau_density(tau, mu) + v


def _fine_box(lp, u, v):
    keep = lp >= np.nanmax(lp) - _KEEP
    iu, iv = np.flatnonzero(keep.any(1)), np.flatnonzero(keep.any(0))
    du, dv = u[1] - u[0], v[1] - v[0]
    return ((u[iu[0]] - du, u[iu[-1]] + du), (v[iv[0]] - dv, v[iv[-1]] + dv))


def _weights(lp, mu, kappa, size) -> GridPosterior:
    wgt = np.exp(lp - np.nanmax(lp))
    wgt = np.where(np.isfinite(wgt), wgt, 0.0)
    wgt /= wgt.sum()
    edge = float(wgt[0].sum() + wgt[-1].sum() + wgt[:, 0].sum() + wgt[:, -1].sum())
    half = np.zeros_like(wgt)
    half[::2, ::2] = wgt[::2, ::2]
    half /= half.sum()
    keep = (wgt.ravel() > 1e-13) | (half.ravel() > 1e-13)
    w = wgt.ravel()[keep]
    return GridPosterior(mu.ravel()[keep], kappa.ravel()[keep], w / w.sum(), edge,
                         half.ravel()[keep])


def group_terms(x, n, w=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Distinct (x, n) of one group's lots and how often each is seen (sorted)."""
    return _terms(x, n, w)


#: coarse rows kept across calls at most (8,100 floats each: about 33 MB); further distinct
#: (x, n) are evaluated per chunk as without a keep
COARSE_KEPT = 512


def posterior_grids(terms, prior=None, size: int = 160, chunk: int = 64,
                    coarse: dict | None = None) -> list[GridPosterior]:
    r"""The posterior grids of many groups at once; ``terms``: one (x, n, count) triple of
    arrays per group (:func:`group_terms`). The coarse pass shares its box among the groups:
    each distinct (x, n) is evaluated once on it and each group adds its own terms (the
    same arithmetic, in the same order, whatever the chunk: a group's answer does not
    depend on the others). ``coarse``: a dict kept by the caller across calls (and
    threads) holding each (x, n)'s coarse row, so that batches of groups evaluate each
    distinct (x, n) once in all (the rows do not depend on the prior; at most
    ``COARSE_KEPT`` rows are kept). The fine pass evaluates each group's terms with
    :func:`term_loglik`. Memory: 8,100 floats per distinct (x, n) of a chunk and per kept
    row for the coarse pass, and a few ``size`` x ``size`` arrays per group.
    """
    prior = prior or HistoryPrior()
    u = np.linspace(*_BOX_U, _COARSE)
    v = np.linspace(*_BOX_V, _COARSE)
    uu, vv = np.meshgrid(u, v, indexing="ij")
    mu_c, kappa_c, lp_prior = _prior_terms(uu, vv, prior)
    a_c, b_c = mu_c * kappa_c, (1.0 - mu_c) * kappa_c
    out: list[GridPosterior] = []
    for start in range(0, len(terms), chunk):
        block = terms[start:start + chunk]
        kept = {} if coarse is None else coarse
        table = {}  # this chunk's rows: the kept ones, and the others while the keep is full
        for xs, ns, _ in block:
            for key in zip(map(float, xs), map(float, ns), strict=True):
                if key in table:
                    continue
                row = kept.get(key)
                if row is None:
                    row = term_loglik(a_c, b_c, [key[0]], [key[1]], [1.0])
                    if coarse is not None and len(coarse) < COARSE_KEPT:
                        coarse[key] = row
                table[key] = row
        for xs, ns, ws in block:
            lp = lp_prior.copy()
            for x, n, w in zip(xs, ns, ws, strict=True):
                lp = lp + w * table[(float(x), float(n))]
            (u0, u1), (v0, v1) = _fine_box(lp, u, v)
            uf, vf = np.meshgrid(np.linspace(u0, u1, size), np.linspace(v0, v1, size),
                                 indexing="ij")
            mu, kappa, lpf = _prior_terms(uf, vf, prior)
            lpf = lpf + term_loglik(mu * kappa, (1.0 - mu) * kappa, xs, ns, ws)
            out.append(_weights(lpf, mu, kappa, size))
    return out


def _post_ab(g: GridPosterior, x, n):
    x = np.atleast_1d(np.asarray(x, float))[None, :]
    n = np.atleast_1d(np.asarray(n, float))[None, :]
    return g.a[:, None] + x, g.b[:, None] + (n - x)


def prob_within(g: GridPosterior, x, n, spec: float) -> np.ndarray:
    """P(p_lot <= spec | all lots) for lots (x, n) of the group (vectorised over lots)."""
    a, b = _post_ab(g, x, n)
    return g.weight @ special.betainc(a, b, spec)


def mean_rate(g: GridPosterior, x, n) -> np.ndarray:
    a, b = _post_ab(g, x, n)
    return g.weight @ (a / (a + b))


def upper_bound(g: GridPosterior, x, n, q: float) -> np.ndarray:
    """The q-quantile of each lot's rate (weighted mixture; bisection on the logit scale)."""
    a, b = _post_ab(g, x, n)
    lo = np.full(a.shape[1], -60.0)
    hi = np.full(a.shape[1], 40.0)
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        below = g.weight @ special.betainc(a, b, special.expit(mid)[None, :]) >= q
        hi = np.where(below, mid, hi)
        lo = np.where(below, lo, mid)
    return special.expit(hi)


def next_lot_prob(g: GridPosterior, spec: float) -> float:
    """P(p <= spec) for the next lot of the group."""
    return float(g.weight @ special.betainc(g.a, g.b, spec))


def _betabinom_logpmf(k, n, a, b):
    return (special.gammaln(n + 1) - special.gammaln(k + 1) - special.gammaln(n - k + 1)
            + special.betaln(a + k, b + n - k) - special.betaln(a, b))


MAX_TAIL_TERMS = 2**24


def betabinom_tails(k, n, a, b) -> tuple[np.ndarray, np.ndarray]:
    """(P(X >= k), P(X <= k)) for X ~ BetaBinomial(n, a, b), broadcasting over a, b (one
    k, n). Sums the side with fewer terms; when that would take more than 2^24 terms in all,
    the continuous limit X = n p (p ~ Beta(a, b)) with a half-unit correction."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    k, n = int(k), int(n)
    low_side = k + 1 <= n - k + 1
    terms = (k + 1) if low_side else (n - k + 1)
    if terms * a.size > MAX_TAIL_TERMS:
        lower = special.betainc(a, b, min(1.0, (k + 0.5) / n))
        upper = 1.0 - special.betainc(a, b, max(0.0, (k - 0.5) / n))
        return upper, lower
    kk = np.arange(0, k + 1) if low_side else np.arange(k, n + 1)
    pmf = np.exp(_betabinom_logpmf(kk[None, :].astype(float), float(n), a[:, None],
                                   b[:, None]))
    side = pmf.sum(1)
    at_k = pmf[:, -1] if low_side else pmf[:, 0]
    other = np.clip(1.0 - side + at_k, 0.0, 1.0)
    side = np.minimum(side, 1.0)
    return (other, side) if low_side else (side, other)


#: a lot is flagged when its leave-one-out predictive p-value P(X >= x | other lots) is below
#: this: it has more defectives than the others make plausible (chosen with the OC study:
#: docs/calibration.md; a homogeneous history is flagged at most at this rate per lot)
OUTLIER_LEVEL = 0.05


def loo_pvalues(x, n, w=None, prior=None, g: GridPosterior | None = None,
                exact_terms: int = 40) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""Leave-one-out predictive p-value of each distinct lot (x_k, n_k) of one group.

    The p-value is the upper tail :math:`P(X \ge x_k)`, X the defectives of a new lot of n_k
    units predicted from the other lots: a lot worse than its group is what makes pooling
    optimistic for the others (a lot better than its group is not flagged; its own-data
    decision shows the difference). Returns (x_k, n_k, p_k) over distinct terms.

    The posterior given the other lots, :math:`\pi_{-k} \propto \pi / \mathrm{BB}(x_k \mid
    n_k, a, b)`, is integrated on one grid shared by every term (:func:`_loo_shared`): the
    group's log density is evaluated once on a box holding every leave-one-out posterior and
    the left-out term is subtracted, the grid at least as fine in each term's own box as
    the earlier per-term 100 x 100 grid (:func:`loo_pvalues_per_term`, kept as the
    reference; against finer per-term grids the shared grid is at least as close as the
    reference, with the same flags: tests/test_outlier_check.py, bench/bench_outliers.py);
    a term whose box is much smaller than the others' gets its own grid. With more than
    ``exact_terms`` distinct terms and a full grid ``g`` given, ``g`` is reweighted instead
    (exact on its points, used by the OC study).

    >>> xs, ns, p = loo_pvalues([0] * 9 + [9], [125] * 9 + [80])
    >>> bool(p[xs == 9][0] < OUTLIER_LEVEL < p[xs == 0][0])
    True
    """
    prior = prior or HistoryPrior()
    xs, ns, ws = _terms(x, n, w)
    out = np.ones(len(xs))
    if ws.sum() < 2:  # a single lot has no others to be compared with
        return xs, ns, out
    if len(xs) > exact_terms and g is not None:
        for k, (xk, nk) in enumerate(zip(xs, ns, strict=True)):
            lw = np.log(g.weight) - _betabinom_logpmf(xk, nk, g.a, g.b)
            out[k] = _tail_p(lw, xk, nk, g.a, g.b)
        return xs, ns, out
    return xs, ns, _loo_shared(xs, ns, ws, prior)


#: points per side of the reference's per-term grid; the shared grid is at least this fine
#: inside each term's own box
LOO_REF_SIZE = 100
#: the shared grid's largest side; a term needing more (its box much smaller than the union
#: of all terms' boxes, e.g. leaving out the one outlier) gets its own LOO_REF_SIZE grid
LOO_SHARED_MAX = 220


def _tail_p(lw, xk, nk, a, b) -> float:
    """P(X >= x_k) under the nodes (a, b) with unnormalised log weights ``lw`` (nodes whose
    normalised weight is below 1e-13 dropped, as :func:`posterior_grid` does)."""
    wl = np.exp(lw - np.max(lw))
    wl = np.where(np.isfinite(wl), wl, 0.0)
    wl /= wl.sum()
    keep = wl > 1e-13
    up, _ = betabinom_tails(xk, nk, a[keep], b[keep])
    return min(1.0, float(wl[keep] @ up / wl[keep].sum()))


def _loo_shared(xs, ns, ws, prior) -> np.ndarray:
    """Leave-one-out p-values of every term on one shared grid (see :func:`loo_pvalues`).

    Coarse pass: each distinct term's log-likelihood once on the 90 x 90 box; term k's
    leave-one-out density is the sum less term k, and its box is found as
    :func:`posterior_grid` finds it. Fine pass: the union of those boxes at a side chosen
    so that every term's box holds at least ``LOO_REF_SIZE`` points per side; the whole
    group's log density once, and per term the density less its term."""
    u = np.linspace(*_BOX_U, _COARSE)
    v = np.linspace(*_BOX_V, _COARSE)
    uu, vv = np.meshgrid(u, v, indexing="ij")
    mu, kappa, lp_prior = _prior_terms(uu, vv, prior)
    a, b = mu * kappa, (1.0 - mu) * kappa
    table = _term_tables(a.ravel(), b.ravel(), xs, ns).reshape(len(xs), *a.shape)
    full = lp_prior + np.tensordot(ws, table, 1)
    boxes = np.array([np.ravel(_fine_box(full - t, u, v)) for t in table])  # (K, 4)
    lo_u, hi_u = boxes[:, 0].min(), boxes[:, 1].max()
    lo_v, hi_v = boxes[:, 2].min(), boxes[:, 3].max()
    need = 1 + np.ceil((LOO_REF_SIZE - 1) * np.maximum(
        (hi_u - lo_u) / (boxes[:, 1] - boxes[:, 0]),
        (hi_v - lo_v) / (boxes[:, 3] - boxes[:, 2])) - 1e-9).astype(int)
    shared = need <= LOO_SHARED_MAX
    out = np.ones(len(xs))
    if shared.any():
        side = int(need[shared].max())
        # the union of the shared terms' boxes only (a term with its own grid may widen it)
        lo_u, hi_u = boxes[shared, 0].min(), boxes[shared, 1].max()
        lo_v, hi_v = boxes[shared, 2].min(), boxes[shared, 3].max()
        uf, vf = np.meshgrid(np.linspace(lo_u, hi_u, side), np.linspace(lo_v, hi_v, side),
                             indexing="ij")
        mu, kappa, lp = _prior_terms(uf, vf, prior)
        a, b = (mu * kappa).ravel(), ((1.0 - mu) * kappa).ravel()
        table = _term_tables(a, b, xs, ns)
        lp = lp.ravel() + ws @ table
        for k in np.flatnonzero(shared):
            out[k] = _tail_p(lp - table[k], xs[k], ns[k], a, b)
    for k in np.flatnonzero(~shared):
        w_rest = ws.copy()
        w_rest[k] -= 1
        gk = posterior_grid(xs, ns, w_rest, prior, size=LOO_REF_SIZE)
        up, _ = betabinom_tails(xs[k], ns[k], gk.a, gk.b)
        out[k] = min(1.0, float(gk.weight @ up))
    return out


def _term_tables(a, b, xs, ns) -> np.ndarray:
    r"""(terms, points): :math:`\log \mathrm{BB}(x_k \mid n_k, a, b)` less the binomial
    coefficient, one row per distinct term, sharing the log-gamma calls: lnGamma(a + b) and
    lnGamma(b) once, lnGamma(a + b + n) once per distinct n, the rising factorial of a in x
    as a running sum of logarithms (the same values as :func:`term_loglik`)."""
    ab = a + b
    shared = special.gammaln(ab) - special.gammaln(b)
    out = np.empty((len(xs), a.size))
    rising: dict[float, np.ndarray] = {0.0: np.zeros_like(a)}  # x -> sum_{j<x} log(a + j)
    top = 0.0
    for x in sorted(set(xs.tolist())):
        if x > _LOG_SUM_MAX:
            rising[x] = special.gammaln(a + x) - special.gammaln(a)
            continue
        while top < x:
            rising[top + 1] = rising[top] + np.log(a + top)
            top += 1
    by_n = {nv: special.gammaln(ab + nv) for nv in set(ns.tolist())}
    for k, (x, nv) in enumerate(zip(xs.tolist(), ns.tolist(), strict=True)):
        out[k] = rising[x] + special.gammaln(b + (nv - x)) - by_n[nv] + shared
    return out


def loo_pvalues_per_term(x, n, w=None, prior=None, size: int = LOO_REF_SIZE) -> tuple:
    """The reference for :func:`loo_pvalues`: each term's leave-one-out posterior on its own
    ``size`` x ``size`` grid (:func:`posterior_grid` with the term's count less one), as the
    outlier check computed it before the shared grid (about 0.6 s for a part of 20 lots)."""
    prior = prior or HistoryPrior()
    xs, ns, ws = _terms(x, n, w)
    out = np.ones(len(xs))
    if ws.sum() < 2:
        return xs, ns, out
    for k, (xk, nk) in enumerate(zip(xs, ns, strict=True)):
        w_rest = ws.copy()
        w_rest[k] -= 1
        gk = posterior_grid(xs, ns, w_rest, prior, size=size)
        up, _ = betabinom_tails(xk, nk, gk.a, gk.b)
        out[k] = min(1.0, float(gk.weight @ up))
    return xs, ns, out
