r"""Every answer of one group's lots from its grid, vectorised over the lots.

The same answers as :func:`qualbayes.lot_grid_answers.answer_group` (which sums node by node,
one distinct lot at a time, and stays as the reference), computed for all distinct lots of
the group at once:

* P on the lot basis from the beta-binomial mixture sums of :mod:`qualbayes.lot_grid_sums`
  (one matrix product per lot size), on the process basis from one array of regularised
  incomplete betas;
* the defectives not inspected (median and bound) from the same sums on the summary nodes;
* the clean units to accept by the same doubling-and-bisection search as
  :func:`qualbayes.search.smallest_int`, run for every lot in lockstep
  (:func:`qualbayes.lot_grid_sums.smallest_many`), each step one array over nodes x lots;
* the outlier p-values (:func:`outlier_pvalues`) from the mixture sums of each inspected
  count.

Equal to the reference up to rounding: P to about 1e-12, its stated error and the outlier
p-values (differences of sums) to about 1e-10 absolute, every count and decision identical
except where a reweighted P would lie within rounding of the confidence level (tested in
tests/test_lot_grid_vector.py). Lots the sums cannot take (a scaled term that could
overflow, more counts than the reference sums exactly) are answered by the reference code.
"""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes import lot_grid_answers as qa
from qualbayes import lot_grid_sums as sums
from qualbayes.lot_decisions import LOT, MIN_WEIGHT_ESS, draws_g
from qualbayes.lot_decisions import MAX_PMF_TERMS as DRAW_TERMS
from qualbayes.lot_grid_bounds import mixture_quantiles
from qualbayes.models import lot_history_grid as grid
from qualbayes.questions import ACCEPT

_QUANTILE_COUNTS = 4096  # defectives-left quantiles past this count: the reference code


def _probs(ga, gb, gw, gh, cx, cn, cs, cl, spec):
    """P on the full and the half grid, and the exact flag, of every distinct lot."""
    k = len(cx)
    prob, half, exact = np.empty(k), np.empty(k), np.ones(k, bool)
    lot = (cl == 1) & (cs >= 0)
    proc = np.flatnonzero(~lot)
    if proc.size:
        vals = special.betainc(ga[:, None] + cx[proc], gb[:, None] + (cn - cx)[proc], spec)
        prob[proc], half[proc] = gw @ vals, gh @ vals
    with np.errstate(divide="ignore"):
        logw = np.log(np.stack([gw, gh]))
    rem = np.where(lot, cs - cn, 0).astype(int)
    kstar = np.where(lot, np.floor(spec * cs - cx + 1e-9), 0).astype(int)
    summed = lot & (rem > 0) & (kstar >= 0) & (kstar < rem) & (ga.size * (kstar + 1)
                                                               <= DRAW_TERMS)
    rest = list(np.flatnonzero(lot & ~summed))
    lh = sums.log_h(ga, gb, cx, cn) if summed.any() else None
    for size in np.unique(cs[summed]):
        sel = np.flatnonzero(summed & (cs == size))
        got = sums.lot_basis_probs(ga, gb, logw, cx[sel], cn[sel], int(size), kstar[sel],
                                   lh[:, sel])
        if got is None:
            rest += list(sel)
            continue
        prob[sel], half[sel] = got[0], got[1]
    for j in rest:
        size = int(cs[j])
        gv, ok = draws_g(ga, gb, cx[j], cn[j], size - int(cn[j]), spec, LOT, size)
        prob[j], half[j], exact[j] = float(gw @ gv), float(gh @ gv), ok
    return prob, half, exact


def _first_counts(start: int, remaining, rate_high) -> int:
    """The first number of counts summed for the defectives left of one lot size: the
    smallest of ``start``, 2 ``start``, 4 ``start``, ... (the counts the search doubles
    through) reaching R p + 2.5 sqrt(R p) + 3 for every lot, p its rate's upper interval
    end (above the confidence level's quantile), so that the search seldom needs to sum
    again; the answers do not depend on it."""
    mean = np.asarray(remaining, float) * np.asarray(rate_high, float)
    guess = float((mean + 2.5 * np.sqrt(mean) + 3.0).max(initial=0.0))
    d_max = start
    while d_max < min(guess, _QUANTILE_COUNTS):
        d_max *= 2
    return d_max


def _remaining(a, b, w, cx, cn, cs, spec, confidence, rate_high=None):
    """(median, bound, exact) of the defectives not inspected, and log U and log H per lot
    size for the clean-unit search: {size: (lots, log U, log H)}. ``rate_high``: each
    lot's upper interval end of its rate, where to start summing (:func:`_first_counts`)."""
    k = len(cx)
    med, up = np.full(k, -1), np.full(k, -1)
    exact = np.ones(k, bool)
    tables = {}
    logw = np.log(w)[None, :]
    cap = max(64, qa.MAX_PMF_TERMS // max(1, a.size))
    fallback = []
    lh = sums.log_h(a, b, cx, cn) if (cs >= 0).any() else None
    for size in np.unique(cs[cs >= 0]):
        sel = np.flatnonzero(cs == size)
        rem = int(size) - cn[sel].astype(int)
        d_max = max(64, int(np.floor(spec * size - cx[sel] + 1e-9).max()))
        if rate_high is not None:
            d_max = _first_counts(d_max, rem, rate_high[sel])
        while True:
            got = sums.log_u(a, b, logw, cx[sel], cn[sel], int(size), d_max, lh[:, sel])
            if got is None:
                break
            q = sums.remaining_quantiles(got[0][0], int(size), cx[sel], cn[sel],
                                         (0.5, confidence), d_max)
            if (q >= 0).all() or d_max >= _QUANTILE_COUNTS:
                break
            d_max *= 2
        if got is None:
            fallback += list(sel)
            continue
        tables[int(size)] = (sel, got[0][0], got[1])
        for i, j in enumerate(sel):
            r = int(rem[i])
            if r <= 0:
                med[j], up[j] = 0, 0
            elif q[0, i] < 0 or q[1, i] < 0 or max(q[0, i], q[1, i]) > sums.reachable(r, cap):
                fallback.append(j)
            else:
                med[j], up[j] = q[0, i], q[1, i]
    for j in fallback:
        rem = int(cs[j]) - int(cn[j])
        (med[j], e1), (up[j], e2) = qa.betabinom_quantiles((0.5, confidence), rem, a + cx[j],
                                                           b + cn[j] - cx[j], w)
        exact[j] = e1 and e2
    return med, up, exact, tables


def _extra_lot(a, b, w, cx, cn, size, spec, confidence, lots, table):
    """Clean units to accept of lot-basis lots ``lots`` (indices into the size's table)."""
    sel, lu, lh = table
    x, n = cx[sel][lots], cn[sel][lots]
    rem = (size - n).astype(np.int64)
    kstar = np.floor(spec * size - x + 1e-9).astype(int)
    kmax = int(kstar.max())
    if kmax + 1 > lu.shape[1]:
        return None
    logw = np.log(w)
    lu, lh = lu[lots, :kmax + 1], lh[:, lots]
    d = np.arange(kmax + 1)[None, :]

    def ok(idx, m):
        q = logw[:, None] + special.betaln(a[:, None] + x[idx], b[:, None] + (n - x)[idx] + m) \
            - lh[:, idx]
        top = q.max(axis=0)
        e = np.exp(q - top)
        s1, s2 = e.sum(axis=0), (e * e).sum(axis=0)
        rm = rem[idx] - m
        lc = np.where(d <= kstar[idx][:, None], sums.log_choose(rm[:, None], d), -np.inf)
        num = special.logsumexp(lc + lu[idx], axis=1)
        p = np.exp(num - top - np.log(s1))
        p = np.where((rm == 0) | (kstar[idx] >= rm), 1.0, p)
        return p >= confidence, s1 * s1 / s2 < MIN_WEIGHT_ESS

    return sums.smallest_many(ok, rem)


def _extra_process(a, b, w, cx, cn, spec, confidence):
    logw = np.log(w)

    def ok(idx, m):
        al, be = a[:, None] + cx[idx], b[:, None] + (cn - cx)[idx]
        q = logw[:, None] + special.betaln(al, be + m) - special.betaln(al, be)
        e = np.exp(q - q.max(axis=0))
        s1, s2 = e.sum(axis=0), (e * e).sum(axis=0)
        p = (e * special.betainc(al, be + m, spec)).sum(axis=0) / s1
        return p >= confidence, s1 * s1 / s2 < MIN_WEIGHT_ESS

    return sums.smallest_many(ok, np.full(len(cx), qa.MAX_EXTRA_UNITS, np.int64))


def _extra(a, b, w, uniq, dec, close, spec, confidence, tables):
    cx, cn, cs, cl = uniq.T
    k = len(cx)
    extra = np.full(k, -1, np.int64)
    extra[dec == ACCEPT] = 0
    need = (dec != ACCEPT) & ~close
    lot = (cl == 1) & (cs >= 0)
    over = need & lot & (cx > spec * cs + 1e-12)  # more defectives than the limit allows
    need &= ~over
    slow = list(np.flatnonzero(need & lot & ((a.size * (np.floor(spec * cs - cx + 1e-9) + 1))
                                             > DRAW_TERMS)))
    for size in np.unique(cs[need & lot]):
        table = tables.get(int(size))
        js = np.flatnonzero(need & lot & (cs == size))
        js = np.setdiff1d(js, slow)
        if table is None:
            slow += list(js)
            continue
        where = {j: i for i, j in enumerate(table[0])}
        got = _extra_lot(a, b, w, cx, cn, int(size), spec, confidence,
                         np.array([where[j] for j in js], int), table) if js.size else None
        if js.size and got is None:
            slow += list(js)
        elif js.size:
            extra[js] = got
    proc = np.flatnonzero(need & ~lot)
    if proc.size:
        extra[proc] = _extra_process(a, b, w, cx[proc], cn[proc], spec, confidence)
    out = np.where(extra >= 0, extra, None).astype(object)
    for j in slow:
        size = int(cs[j])
        out[j] = qa.extra_clean_units(a, b, w, cx[j], cn[j], size - int(cn[j]), size, spec,
                                      confidence, LOT)
    return out


def answer_group_vector(g: grid.GridPosterior, x, n, lot_size, basis, spec: float,
                        confidence: float) -> dict[str, np.ndarray]:
    """Every answer column for the lots of one group (arrays in the lots' order): the
    columns of :func:`qualbayes.lot_grid_answers.answer_group`, vectorised over the lots."""
    uniq, index = qa.combos(x, n, lot_size, basis)
    cx, cn, cs, cl = uniq.T
    heavy = (g.weight > qa.PRUNE) | (g.weight_half > qa.PRUNE)
    dropped = max(float(g.weight[~heavy].sum()), float(g.weight_half[~heavy].sum()))
    ga, gb, gw, gh = g.a[heavy], g.b[heavy], g.weight[heavy], g.weight_half[heavy]
    prob, half, exact = _probs(ga, gb, gw, gh, cx, cn, cs, cl, spec)
    nxt = special.betainc(ga, gb, spec)
    spread = max(float(np.abs(prob - half).max(initial=0.0)), abs(float(gw @ nxt - gh @ nxt)))
    err = np.full(len(cx), qa.group_error(spread, g.edge_mass + dropped))
    prob = np.clip(prob, 0.0, 1.0)
    dec, close = qa.decide(prob, err, cx, confidence)
    a, b, w = qa.summary_nodes(g)
    rates, rate_index = np.unique(uniq[:, :2], axis=0, return_inverse=True)
    alpha = a[:, None] + rates[:, 0][None, :]
    beta = b[:, None] + (rates[:, 1] - rates[:, 0])[None, :]
    tail = (1.0 - confidence) / 2.0
    levels = (tail, 1.0 - tail, confidence)
    quantiles = mixture_quantiles(levels, alpha, beta, w)
    bounds = {q: quantiles[i][rate_index.ravel()] for i, q in enumerate(levels)}
    mean = (w @ (alpha / (alpha + beta)))[rate_index.ravel()]
    med, up, q_exact, tables = _remaining(a, b, w, cx, cn, cs, spec, confidence,
                                          quantiles[1][rate_index.ravel()])
    extra = _extra(a, b, w, uniq, dec, close, spec, confidence, tables)
    known = cs >= 0
    exact &= q_exact
    rem_units = np.where(known, cs - cn, 0).astype(np.int64)

    def ints(v):
        return np.where(known, v, None).astype(object)

    return {
        "posterior_mean": mean[index], "interval_low": bounds[tail][index],
        "interval_high": bounds[1.0 - tail][index], "upper_bound": bounds[confidence][index],
        "prob_within_spec": prob[index], "prob_within_spec_error": err[index],
        "decision": dec[index], "too_close": close[index],
        "extra_clean_units_to_accept": extra[index],
        "remaining_units": ints(rem_units)[index],
        "remaining_defectives_median": ints(med)[index],
        "remaining_defectives_upper": ints(up)[index],
        "_approximate": ~exact[index],
    }


def outlier_pvalues(g: grid.GridPosterior, x, n) -> np.ndarray:
    """:func:`qualbayes.lot_grid_answers.outlier_pvalues`, the lower-side sums of every
    distinct term of one inspected count from one matrix product (the reference code for
    terms past the middle of their count, or when the sums could overflow)."""
    xs, ns, ws = grid.group_terms(x, n)
    pv = np.ones(len(xs))
    if ws.sum() >= 2:
        heavy = g.weight > qa.PRUNE
        a, b = g.a[heavy], g.b[heavy]
        logw = np.log(g.weight[heavy])[None, :]
        lb = special.betaln(a, b)
        rest = []
        for nv in np.unique(ns):
            sel = np.flatnonzero((ns == nv) & (xs + 1 <= nv - xs + 1)
                                 & ((xs + 1) * a.size <= grid.MAX_TAIL_TERMS))
            rest += list(np.setdiff1d(np.flatnonzero(ns == nv), sel))
            if not sel.size:
                continue
            pv[sel] = _lower_side(a, b, lb, logw, xs[sel], int(nv), sel, rest)
        if rest:
            logw_full = np.log(g.weight[heavy]) + lb
            for k in rest:
                pv[k] = qa.outlier_pvalue(a, b, logw_full, xs[k], ns[k])
    lookup = {(p, q): v for p, q, v in zip(xs, ns, pv, strict=True)}
    return np.array([lookup[(float(p), float(q))] for p, q in
                     zip(np.asarray(x, float), np.asarray(n, float), strict=True)])


def _lower_side(a, b, lb, logw, xk, nv: int, sel, rest):
    """P(X >= x_k | other lots) for terms x_k of one count n: the node weights w_i B(a_i,
    b_i) / B(a_i + x_k, b_i + n - x_k) (leave one out), X ~ BB(n, a_i, b_i) summed on the
    lower side: 1 - P(X <= x_k) + P(X = x_k)."""
    xk = xk.astype(int)
    t1 = int(xk.max())
    lg = sums.log_beta_path(a, b, nv, 0, t1)  # log B(a + j, b + n - j), j = 0..max x
    lh = lg[:, xk]
    ref = int(np.argmax(logw[0]))
    rows = np.concatenate([lg, lb[:, None]], axis=1)  # the last row: B(a, b)
    rel = rows - rows[ref]
    z = rel.max(axis=1)
    expo = z[:, None] - (lh - lh[ref]) + logw[0][:, None]
    if np.nanmax(expo) > sums.GUARD:
        rest += list(sel)
        return np.ones(len(xk))
    s = np.exp(rel - z[:, None]).T @ np.exp(expo)  # (rows, terms)
    with np.errstate(divide="ignore"):
        ls = np.log(s) + (rows[ref][:, None] - lh[ref][None, :])
    j = np.arange(t1 + 1)[:, None]
    lc = sums.log_choose(nv, j)
    lower = np.where(j <= xk[None, :], np.exp(lc + ls[:-1]), 0.0).sum(axis=0)
    at_k = np.exp(lc[xk, 0] + ls[xk, np.arange(len(xk))])
    total = np.exp(ls[-1])
    return np.minimum(1.0, (total - lower + at_k) / total)
