r"""Per-lot answers of the lot-history model from its exact grid posterior (no sampling).

The quadrature engine of the lots question (``engine="quadrature"``). Each group's
posterior of (mu, kappa) is the grid of :func:`qualbayes.models.lot_history_grid.posterior_grids`:
nodes :math:`(a_i, b_i) = (\mu_i\kappa_i, (1-\mu_i)\kappa_i)` with weights :math:`w_i`. A lot
(x of n, R units not inspected) has the conditional posterior
:math:`\sum_i w_i\,\mathrm{Beta}(a_i + x, b_i + n - x)`, and every answer is that mixture's:

* :math:`P = \sum_i w_i\, g(a_i, b_i)` with the same :math:`g` as the draws'
  (:func:`qualbayes.lot_decisions.draws_g`: the rate's CDF at the limit, or on the lot basis
  the beta-binomial CDF of the defectives left);
* its **quadrature error** :math:`\epsilon = 2\max|P - P_{1/2}| + m_{edge}`, the largest
  over the group's lots and its next lot, :math:`P_{1/2}` the same sum on the grid of every
  other point (half the points per side, same box) and :math:`m_{edge}` the mass on the
  grid's border and left out; the decision is accept when
  :math:`P \ge C`, reject when :math:`1 - P \ge C` and the lot has a defective, undecided
  otherwise, and *too close to call* (undecided) when C is within :math:`\epsilon` of P or
  of 1 - P: the rule of the draws with the Monte Carlo error replaced by the quadrature error;
* bounds, means, clean units to accept and defectives not inspected from the mixture over the
  grid of every other point (all but ``SUMMARY_TAIL`` of its mass; bounds within about 1% of
  the full grid's);
* the outlier check: the leave-one-out predictive p-value of each distinct (x, n), the grid
  reweighted by :math:`1/\mathrm{BB}(x_k \mid n_k, a_i, b_i)` (exact on the grid's points);
* the next lot: the mixture of the :math:`\mathrm{Beta}(a_i, b_i)`.

Deterministic: no seed, no Monte Carlo error; the same data give the same numbers in one
process or split over many (:mod:`qualbayes.lot_batch`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import special

from qualbayes.lot_decisions import LOT, MAX_EXTRA_UNITS, MIN_WEIGHT_ESS, PROCESS, draws_g
from qualbayes.lot_grid_bounds import mixture_quantiles
from qualbayes.models import lot_history_grid as grid
from qualbayes.questions import ACCEPT, REJECT, UNDECIDED
from qualbayes.search import smallest_int
from qualbayes.threads import cpus

GRID_SIZE = 160
SUMMARY_TAIL = 1e-5  # mass left out of the nodes used for bounds, means and counts
PRUNE = 1e-10  # grid points lighter than this in both grids are left out of P (mass in error)
MAX_PMF_TERMS = 2**22  # nodes x counts summed for the defectives left; beyond: continuous
METHOD = ("2-D quadrature of (logit mu, log(tau - tau_lo)) on a {size} x {size} grid; error "
          "of P: twice the group's largest |P - P on the grid of every other point| + mass "
          "on the border")


def combos(x, n, lot_size, basis) -> tuple[np.ndarray, np.ndarray]:
    """Distinct (x, n, lot size or -1, basis is lot) rows of one group, and each lot's row."""
    size = np.where(pd.isna(lot_size), -1.0, np.asarray(pd.array(lot_size, "Float64")
                                                        .fillna(-1.0), float))
    keys = np.stack([np.asarray(x, float), np.asarray(n, float), size,
                     (np.asarray(basis) == LOT).astype(float)], axis=1)
    uniq, index = np.unique(keys, axis=0, return_inverse=True)
    return uniq, index.ravel()


def mixture_ppf(q: float, alpha, beta, w) -> np.ndarray:
    """The q-quantile of :math:`\\sum_i w_i \\mathrm{Beta}(\\alpha_{ik}, \\beta_{ik})` for
    each column k (alpha, beta of shape (nodes, K)): safeguarded Newton steps on the logit
    scale from the moment-matched Beta's quantile, bisection when a step leaves the bracket,
    to |F - q| <= 1e-10 (columns still open after 60 steps end by bisection)."""
    alpha, beta = np.atleast_2d(alpha), np.atleast_2d(beta)
    m = alpha / (alpha + beta)
    mean = w @ m
    var = np.maximum(w @ (m * (1 - m) / (alpha + beta + 1)) + w @ m**2 - mean**2, 1e-300)
    common = np.maximum(mean * (1 - mean) / var - 1.0, 1e-6)
    start = special.betaincinv(mean * common, (1 - mean) * common, q)
    t = special.logit(np.clip(start, 1e-300, 1 - 1e-16))
    lo, hi = np.full(t.shape, -745.0), np.full(t.shape, 37.0)
    log_norm = special.betaln(alpha, beta)
    open_ = np.ones(t.shape, bool)
    for step in range(200):
        k = np.flatnonzero(open_)
        if not k.size:
            break
        p = special.expit(t[k])
        f = w @ special.betainc(alpha[:, k], beta[:, k], p[None, :]) - q
        hi[k] = np.where(f > 0, t[k], hi[k])
        lo[k] = np.where(f > 0, lo[k], t[k])
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            dens = w @ np.exp(alpha[:, k] * np.log(p)[None, :] + beta[:, k]
                              * np.log1p(-p)[None, :] - log_norm[:, k])
            nxt = t[k] - f / dens
        bad = ~np.isfinite(nxt) | (nxt <= lo[k]) | (nxt >= hi[k]) | (step >= 60)
        nxt = np.where(bad, 0.5 * (lo[k] + hi[k]), nxt)
        done = (np.abs(f) <= 1e-10) | (hi[k] - lo[k] <= 1e-12 * np.maximum(1.0, np.abs(t[k])))
        t[k] = np.where(done, t[k], nxt)
        open_[k[done]] = False
    return special.expit(t)


def betabinom_quantiles(qs, remaining: int, alpha, beta, w) -> list[tuple[int, bool]]:
    """Quantiles of the defectives among ``remaining`` units, D ~ sum_i w_i
    BetaBinomial(remaining, alpha_i, beta_i), summed in blocks of counts until the mixture's
    CDF reaches the highest level (exact), or past MAX_PMF_TERMS terms the continuous limit
    ceil(R p_q), p_q the rate's quantile (not exact)."""
    if remaining <= 0:
        return [(0, True) for _ in qs]
    k_cap = max(64, MAX_PMF_TERMS // max(1, alpha.size))
    log_next = special.betaln(alpha, beta + remaining) - special.betaln(alpha, beta)
    out: dict[int, tuple[int, bool]] = {}
    total, k0, block = 0.0, 0, 64
    while k0 <= min(remaining, k_cap) and len(out) < len(qs):
        k = np.arange(k0, min(k0 + block, remaining + 1), dtype=float)[None, :]
        with np.errstate(divide="ignore", invalid="ignore"):
            steps = (np.log((remaining - k) / (k + 1.0))
                     + np.log((alpha[:, None] + k) / (beta[:, None] + remaining - k - 1.0)))
        steps[:, -1] = np.where(k[0, -1] < remaining, steps[:, -1], -np.inf)
        cum = log_next[:, None] + np.concatenate([np.zeros((len(alpha), 1)),
                                                  np.cumsum(steps, 1)], 1)
        cdf = total + np.cumsum(w @ np.exp(cum[:, :-1]))
        for i, q in enumerate(qs):
            hit = np.flatnonzero(cdf >= q - 1e-12)
            if i not in out and hit.size:
                out[i] = (k0 + int(hit[0]), True)
        total, log_next, k0 = float(cdf[-1]), cum[:, -1], k0 + k.shape[1]
        block *= 2
    for i, q in enumerate(qs):
        if i not in out:
            if k0 > remaining:
                out[i] = (int(remaining), True)
            else:
                p = float(mixture_ppf(q, alpha[:, None], beta[:, None], w)[0])
                out[i] = (min(int(remaining), int(np.ceil(remaining * p - 1e-9))), False)
    return [out[i] for i in range(len(qs))]


def extra_clean_units(a, b, w, x, n, rem, size, spec, confidence, basis) -> int | None:
    """Smallest m of further defect-free units after which P >= C (the grid reweighted by
    B(alpha, beta + m) / B(alpha, beta), exact on its points), or None (none suffices, or
    the reweighted grid keeps fewer than MIN_WEIGHT_ESS effective points)."""
    alpha, beta = a + x, b + (n - x)
    lot = basis == LOT and rem is not None
    if lot and x > spec * size + 1e-12:
        return None
    base = special.betaln(alpha, beta)
    logw0 = np.log(np.maximum(w, 1e-300))

    def ok(m: int) -> bool:
        lw = logw0 + special.betaln(alpha, beta + m) - base
        wm = np.exp(lw - lw.max())
        wm /= wm.sum()
        if 1.0 / (wm**2).sum() < MIN_WEIGHT_ESS:
            raise _Degenerate
        if lot:
            g, _ = draws_g(a, b + m, x, n, rem - m, spec, LOT, size)
        else:
            g = special.betainc(alpha, beta + m, spec)
        return bool(wm @ g >= confidence)

    try:
        return smallest_int(ok, 0, rem if lot else MAX_EXTRA_UNITS)
    except _Degenerate:
        return None


class _Degenerate(Exception):
    pass


def decide(prob, err, x, confidence: float):
    """(decisions, too_close): the draws' rule with the quadrature error as the margin."""
    prob, err, x = (np.asarray(v, float) for v in (prob, err, x))
    close = (np.abs(prob - confidence) <= err) | ((np.abs(1.0 - prob - confidence) <= err)
                                                  & (x > 0))
    accept = (prob >= confidence) & ~close
    reject = (1.0 - prob >= confidence) & (x > 0) & ~close
    return np.where(accept, ACCEPT, np.where(reject, REJECT, UNDECIDED)).astype(object), close


def group_error(spread: float, lost_mass: float) -> float:
    """The stated quadrature error of every P of a group: twice the largest difference
    between the grid and the grid of every other point over the group's P and its next
    lot's, plus the mass on the border and left out. The largest, not each P's own
    difference: one P's two grids can agree by chance (docs/lots.md)."""
    return 2.0 * spread + lost_mass


def summary_nodes(g: grid.GridPosterior):
    """(a, b, w) of the grid of every other point, without the lightest SUMMARY_TAIL of its
    mass: the mixture behind bounds, means and counts (a quarter of the points; bounds
    within about 1% of the full grid's, as precise as the 1,000 thinned draws NUTS uses)."""
    on = np.flatnonzero(g.weight_half > 0)
    order = on[np.argsort(g.weight_half[on])[::-1]]
    keep = order[: int(np.searchsorted(np.cumsum(g.weight_half[order]),
                                       1.0 - SUMMARY_TAIL)) + 1]
    w = g.weight_half[keep]
    return g.a[keep], g.b[keep], w / w.sum()


def answer_group(g: grid.GridPosterior, x, n, lot_size, basis, spec: float,
                 confidence: float) -> dict[str, np.ndarray]:
    """Every answer column for the lots of one group (arrays in the lots' order)."""
    uniq, index = combos(x, n, lot_size, basis)
    k = len(uniq)
    prob, half, exact = np.empty(k), np.empty(k), np.ones(k, bool)
    heavy = (g.weight > PRUNE) | (g.weight_half > PRUNE)  # the rest: at most their mass
    dropped = max(float(g.weight[~heavy].sum()), float(g.weight_half[~heavy].sum()))
    ga, gb, gw, gh = g.a[heavy], g.b[heavy], g.weight[heavy], g.weight_half[heavy]
    for j, (cx, cn, cs, cl) in enumerate(uniq):
        size = None if cs < 0 else int(cs)
        rem = None if size is None else size - int(cn)
        gv, ok = draws_g(ga, gb, cx, cn, rem, spec, LOT if cl else PROCESS, size)
        prob[j], half[j], exact[j] = float(gw @ gv), float(gh @ gv), ok
    nxt = special.betainc(ga, gb, spec)
    spread = max(float(np.abs(prob - half).max(initial=0.0)), abs(float(gw @ nxt - gh @ nxt)))
    err = np.full(k, group_error(spread, g.edge_mass + dropped))
    prob = np.clip(prob, 0.0, 1.0)
    dec, close = decide(prob, err, uniq[:, 0], confidence)
    a, b, w = summary_nodes(g)
    rates, rate_index = np.unique(uniq[:, :2], axis=0, return_inverse=True)
    alpha = a[:, None] + rates[:, 0][None, :]
    beta = b[:, None] + (rates[:, 1] - rates[:, 0])[None, :]
    tail = (1.0 - confidence) / 2.0
    bounds = {q: mixture_ppf(q, alpha, beta, w)[rate_index.ravel()]
              for q in (tail, 1.0 - tail, confidence)}
    mean = (w @ (alpha / (alpha + beta)))[rate_index.ravel()]
    extra = [None] * k
    rem_units, med, up = [None] * k, [None] * k, [None] * k
    for j, (cx, cn, cs, cl) in enumerate(uniq):
        size = None if cs < 0 else int(cs)
        rem = None if size is None else size - int(cn)
        if dec[j] == ACCEPT:
            extra[j] = 0
        elif not close[j]:
            extra[j] = extra_clean_units(a, b, w, cx, cn, rem, size, spec, confidence,
                                         LOT if cl else PROCESS)
        if rem is not None:
            rem_units[j] = rem
            (med[j], e1), (up[j], e2) = betabinom_quantiles((0.5, confidence), rem, a + cx,
                                                            b + cn - cx, w)
            exact[j] = exact[j] and e1 and e2
    return {
        "posterior_mean": mean[index], "interval_low": bounds[tail][index],
        "interval_high": bounds[1.0 - tail][index], "upper_bound": bounds[confidence][index],
        "prob_within_spec": prob[index], "prob_within_spec_error": err[index],
        "decision": dec[index], "too_close": close[index],
        "extra_clean_units_to_accept": np.asarray(extra, object)[index],
        "remaining_units": np.asarray(rem_units, object)[index],
        "remaining_defectives_median": np.asarray(med, object)[index],
        "remaining_defectives_upper": np.asarray(up, object)[index],
        "_approximate": ~exact[index],
    }


def outlier_pvalues(g: grid.GridPosterior, x, n) -> np.ndarray:
    """Each lot's leave-one-out predictive p-value P(X >= x | the other lots), the grid
    reweighted by 1 / BB(x | n, a, b) (its points heavier than PRUNE); 1 for a group of one
    lot."""
    xs, ns, ws = grid.group_terms(x, n)
    pv = np.ones(len(xs))
    if ws.sum() >= 2:
        heavy = g.weight > PRUNE
        a, b = g.a[heavy], g.b[heavy]
        logw = np.log(g.weight[heavy]) + special.betaln(a, b)
        for k, (xk, nk) in enumerate(zip(xs, ns, strict=True)):
            pv[k] = outlier_pvalue(a, b, logw, xk, nk)
    lookup = {(a, b): v for a, b, v in zip(xs, ns, pv, strict=True)}
    return np.array([lookup[(float(a), float(b))] for a, b in
                     zip(np.asarray(x, float), np.asarray(n, float), strict=True)])


def outlier_pvalue(a, b, logw, xk, nk) -> float:
    """One distinct lot's leave-one-out p-value from nodes (a, b) with log weights ``logw``
    (the grid's log weights plus log B(a, b))."""
    lw = logw - special.betaln(a + xk, b + nk - xk)
    wl = np.exp(lw - lw.max())
    up, _ = grid.betabinom_tails(xk, nk, a, b)
    return min(1.0, float(wl @ up / wl.sum()))


def next_lot(g: grid.GridPosterior, spec: float, confidence: float, error: float) -> dict:
    """The next lot's rate, sum_i w_i Beta(a_i, b_i): median, bound, mean and P with the
    group's quadrature error."""
    p = float(g.weight @ special.betainc(g.a, g.b, spec))
    a, b, w = summary_nodes(g)
    median, bound = mixture_quantiles((0.5, confidence), a[:, None], b[:, None], w)[:, 0]
    return {
        "median": float(median),
        "upper_bound": float(bound),
        "mean": float(w @ (a / (a + b))),
        "prob_within_spec": p, "prob_within_spec_mcse": None,
        "prob_within_spec_error": error,
        "mean_note": "the mean can exceed the one-sided bound: a few points of the posterior "
                     "allow very bad lots, and the mean weighs them by their size",
    }


#: groups whose grids are computed together (sharing the coarse pass) and handed to one thread
BLOCK = 32


def threads() -> int:
    """Threads for the groups of one process: the CPUs this process may use (numpy releases
    the interpreter lock inside its array loops, so blocks of groups run side by side)."""
    return cpus()


def _answer_block(labels, groups, x_all, n_all, sizes, basis, spec, confidence, prior,
                  size, coarse=None) -> dict[str, dict]:
    from qualbayes.lot_grid_vector import answer_group_vector, outlier_pvalues  # noqa: PLC0415

    grids = grid.posterior_grids([grid.group_terms(x_all[groups[k]], n_all[groups[k]])
                                  for k in labels], prior, size=size, coarse=coarse)
    out = {}
    for label, g in zip(labels, grids, strict=True):
        idx = groups[label]
        cols = answer_group_vector(g, x_all[idx], n_all[idx], sizes[idx], basis[idx], spec,
                                   confidence)
        cols["outlier_p"] = outlier_pvalues(g, x_all[idx], n_all[idx])
        err = float(cols["prob_within_spec_error"][0])
        out[label] = {"columns": cols, "next_lot": next_lot(g, spec, confidence, err),
                      "accuracy": {"method": METHOD.format(size=size), "max_error": err,
                                   "edge_mass": g.edge_mass,
                                   "grid_points": int(g.weight.size)}}
    return out


def answer_groups(frame: pd.DataFrame, groups: dict[str, np.ndarray], spec: float,
                  confidence: float, prior, size: int = GRID_SIZE,
                  workers: int | None = None) -> dict[str, dict]:
    """label -> {"columns", "next_lot", "accuracy"} for each group (rows ``groups[label]``
    of ``frame``). The unit of work that :mod:`qualbayes.lot_batch` sends to workers. The
    groups are answered in blocks of BLOCK (:mod:`qualbayes.lot_grid_vector`, the same
    numbers as :func:`answer_group` up to rounding), on ``workers`` threads (default: the
    CPUs available); the answers do not depend on the blocks or the threads."""
    from qualbayes.progress import task  # noqa: PLC0415

    x_all = frame["defectives"].to_numpy(float)
    n_all = frame["inspected"].to_numpy(float)
    sizes = frame["lot_size"].to_numpy(object)
    basis = frame["decision_basis"].to_numpy(object)
    labels = list(groups)
    blocks = [labels[i:i + BLOCK] for i in range(0, len(labels), BLOCK)]
    workers = min(len(blocks), threads() if workers is None else int(workers))

    coarse: dict = {}  # each distinct (x, n)'s coarse row, shared by the blocks

    def work(block):
        return _answer_block(block, groups, x_all, n_all, sizes, basis, spec, confidence,
                             prior, size, coarse)

    out: dict[str, dict] = {}
    with task("quadrature answers", total=len(labels)) as t:
        if workers > 1:
            from concurrent.futures import ThreadPoolExecutor  # noqa: PLC0415

            with ThreadPoolExecutor(workers) as pool:
                for block, done in zip(blocks, pool.map(work, blocks), strict=True):
                    out.update(done)
                    t.advance(len(block))
        else:
            for block in blocks:
                out.update(work(block))
                t.advance(len(block))
    return out
