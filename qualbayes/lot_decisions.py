r"""Per-lot probabilities, Monte Carlo errors and decisions, vectorised over lots and draws.

A lot is summarised by its distinct combination (x defectives, n inspected, R = N - n units
not inspected, or no lot size); equal combinations of a group have equal answers, so every
function here works on arrays of distinct combinations and the caller broadcasts back.

Given draws d = 1..S of the lot's conditional posterior Beta(alpha_d, beta_d) (one draw for a
conjugate prior, alpha = a + x, beta = b + n - x), the probability that answers the question
is the average of g_d:

* ``process`` basis: :math:`g_d = I_s(\alpha_d, \beta_d)`, the probability that the lot's
  rate p is within spec s;
* ``lot`` basis (lot size N known): the lot's own fraction defective,
  :math:`g_d = P((x + D)/N \le s) = P(D \le \lfloor sN \rfloor - x)` with
  :math:`D \sim \mathrm{BetaBinomial}(R, \alpha_d, \beta_d)`; a fully inspected lot (R = 0)
  is decided exactly (g = 1 when x <= sN, else 0).

Decision at confidence C, with the Monte Carlo standard error of the average
(:mod:`qualbayes.inference.mcse`): ``accept`` when P >= C, ``reject`` when 1 - P >= C and the lot
has
at least one defective (a lot with none is never rejected: it is ``undecided`` with its
clean-unit count), else ``undecided``; a side of C within 3 MCSE is "too close to call".
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from qualbayes.inference.mcse import CLOSE_MCSE, mcse_means
from qualbayes.lot_draw_cdf import BLOCK_VALUES, betabinom_cdf, lot_cdfs
from qualbayes.lot_draw_sums import reweighted_prob
from qualbayes.questions import ACCEPT, REJECT, UNDECIDED
from qualbayes.search import smallest_int
from qualbayes.search_near import doubling_path, smallest_near
from qualbayes.threads import ordered_map

LOT, PROCESS = "lot", "process"
MIN_WEIGHT_ESS = 200.0  # below this the reweighted extra-units count is not trusted
MAX_PMF_TERMS = 2**24  # draws x counts summed exactly for one lot's P; beyond: continuous limit
MAX_EXTRA_UNITS = 10**9  # as qualbayes.models.lot_posterior
SURROGATE_TERMS = 2**14  # the clean-unit search's first guess sums one draw up to this count
TOO_CLOSE = "too close to call at this Monte Carlo precision"


def _lot_g(alpha, beta, k_star: int, remaining: int) -> tuple[np.ndarray, bool]:
    """P(D <= k_star) per draw, D ~ BetaBinomial(remaining, alpha_d, beta_d); exact flag."""
    if k_star < 0:
        return np.zeros_like(alpha), True
    if k_star >= remaining:
        return np.ones_like(alpha), True
    if alpha.size * (k_star + 1) > MAX_PMF_TERMS:
        # continuous limit: D = R p + O(sqrt(R p)); P(D <= k) ~ P(p <= (k + 1/2) / R)
        return special.betainc(alpha, beta, (k_star + 0.5) / remaining), False
    return np.minimum(betabinom_cdf(k_star, remaining, alpha, beta), 1.0), True


def draws_g(a0, b0, x: float, n: float, remaining: int | None, spec: float, basis: str,
            lot_size: int | None = None) -> tuple[np.ndarray, bool]:
    """g_d for one combination (see the module docstring); a0, b0 the prior draws."""
    alpha, beta = a0 + x, b0 + (n - x)
    if basis == PROCESS or remaining is None:
        return special.betainc(alpha, beta, spec), True
    k_star = int(np.floor(spec * lot_size - x + 1e-9))
    if remaining == 0:
        return np.full(alpha.shape, float(x <= spec * lot_size + 1e-12)), True
    return _lot_g(alpha, beta, k_star, remaining)


def probabilities(a0, b0, chains: int, combos, spec: float, basis: str,
                  reuse: dict | None = None, *, workers: int | None = None):
    """P, its MCSE and whether it is exact, for every combination (x, n, remaining or None,
    lot size or None). ``a0``, ``b0``: prior parameter draws, flat (chains * draws,).
    ``workers``: threads for the sums (None: the CPUs this process may use; the numbers do
    not depend on it).

    ``reuse``: a dict kept by the caller between calls on the draws of chains that are only
    continued (a close call's more draws): each combination's g_d of the draws seen so far
    (:data:`REUSE_VALUES` numbers at most), so that a later call computes g only for the
    new draws. g_d depends on its own draw only, so P and its MCSE are the same numbers as
    from all the draws at once (tested). Filled and updated here; its draws are checked to
    be the first ones of each chain now, else it is emptied and everything is computed."""
    k = len(combos)
    prob, err, exact = np.empty(k), np.zeros(k), np.ones(k, bool)
    a_ch, b_ch = np.asarray(a0, float).reshape(chains, -1), np.asarray(b0, float).reshape(
        chains, -1)
    seen = _seen(reuse, a_ch, b_ch)
    keep = reuse is not None and k * a_ch.size <= REUSE_VALUES
    cache = reuse.setdefault("g", {}) if keep else {}
    olds = [cache.get(c) if seen else None for c in combos]
    new = [old is not None and (basis == PROCESS or not c[2] or a_ch.size * (
        max(_k_star(c, spec), 0) + 1) <= MAX_PMF_TERMS) for c, old in zip(combos, olds,
                                                                          strict=True)]
    block: list[tuple[int, np.ndarray]] = []  # combinations waiting for their MCSE

    def settle() -> None:  # the same numbers as mcse_mean one by one (mcse_means)
        err[[j for j, _ in block]] = mcse_means(np.stack([g for _, g in block]))
        block.clear()

    for j, g, ok in _many_g(a_ch, b_ch, seen, combos, new, spec, basis, workers):
        c = combos[j]
        g = g.reshape(chains, -1)
        if new[j]:
            g, ok = np.concatenate([olds[j][0], g], axis=1), olds[j][1] and ok
        if keep:
            cache[c] = (g, ok)
        prob[j], exact[j] = float(g.mean()), ok
        if g.size > 1:
            block.append((j, g))
            if len(block) == MCSE_ROWS:
                settle()
    if block:
        settle()
    if keep:
        reuse["a"], reuse["b"] = a_ch, b_ch
    elif reuse is not None:
        reuse.clear()
    return prob, err, exact


def _k_star(combo, spec: float) -> int:
    x, _, _, size = combo
    return int(np.floor(spec * size - x + 1e-9))


def _many_g(a_ch, b_ch, seen: int, combos, new: list[bool], spec: float, basis: str,
            workers: int | None = None):
    """(j, g, exact) of every combination j, on the draws after the first ``seen`` of each
    chain where ``new[j]``, else on all: the lot-basis sums of the combinations that share
    (x, n) by :func:`qualbayes.lot_draw_cdf.lot_cdfs`, a block of lots at a time (at most
    BLOCK_VALUES numbers alive), the others one at a time (:func:`draws_g`); each number
    the same as :func:`draws_g` gives. A generator: the caller uses each g and lets it go.

    The blocks are summed on up to ``workers`` threads (default: the CPUs this process may
    use), at most ``workers + 1`` blocks ahead of the caller; each block's numbers do not
    depend on the thread (the same operations on the same values). Since the sums run a
    cache-sized pass at a time (:data:`qualbayes.lot_draw_cdf.PASS_VALUES`) two threads no
    longer slow each other: 40 groups of 25 lots x 4,000 draws took 0.76-0.88 s on two
    threads against 1.25-1.37 s on one (docs/speed.md)."""
    together: dict[tuple, list[int]] = {}
    for j, (x, n, rem, size) in enumerate(combos):
        ks = _k_star(combos[j], spec) if basis == LOT and rem else -1
        if 0 <= ks < rem and a_ch.size * (ks + 1) <= MAX_PMF_TERMS:
            together.setdefault((x, n, new[j]), []).append(j)
        else:
            da, db = (a_ch[:, seen:], b_ch[:, seen:]) if new[j] else (a_ch, b_ch)
            yield j, *draws_g(da.ravel(), db.ravel(), x, n, rem, spec, basis, size)
    tasks = []
    for (x, n, fresh), js in together.items():
        step = max(1, BLOCK_VALUES // max(a_ch[:, seen:].size if fresh else a_ch.size, 1))
        tasks += [(x, n, fresh, js[start:start + step]) for start in range(0, len(js), step)]

    def block_sums(task) -> tuple[list[int], np.ndarray]:
        x, n, fresh, block = task
        da, db = (a_ch[:, seen:], b_ch[:, seen:]) if fresh else (a_ch, b_ch)
        alpha, beta = da.ravel() + x, db.ravel() + (n - x)
        return block, lot_cdfs([_k_star(combos[j], spec) for j in block],
                               [combos[j][2] for j in block], alpha, beta)

    for block, cdf in ordered_map(block_sums, tasks, workers):
        for row, j in enumerate(block):
            yield j, np.minimum(cdf[row], 1.0), True


#: combinations whose MCSE is computed in one call (``mcse_means``; docs/speed.md)
MCSE_ROWS = 16
#: the largest number of g values (combinations x draws) that ``probabilities`` keeps for
#: reuse (128 MB); past it each call computes everything
REUSE_VALUES = 1 << 24


def _seen(reuse: dict | None, a_ch: np.ndarray, b_ch: np.ndarray) -> int:
    """How many draws of each chain ``reuse`` holds g for (0: none, or not the first draws of
    these chains: it is then emptied)."""
    if not reuse:
        return 0
    old_a, old_b = reuse.get("a"), reuse.get("b")
    n = 0 if old_a is None else old_a.shape[1]
    if (old_a is not None and old_a.shape[0] == a_ch.shape[0] and 0 < n <= a_ch.shape[1]
            and np.array_equal(old_a, a_ch[:, :n]) and np.array_equal(old_b, b_ch[:, :n])):
        return n
    reuse.clear()
    return 0


def decide(prob, mcse, x, confidence: float):
    """(decisions, too_close) arrays: accept / reject (needs a defective) / undecided; a side
    of C within CLOSE_MCSE Monte Carlo errors gives undecided and too_close True."""
    prob, mcse, x = (np.asarray(v, float) for v in (prob, mcse, x))
    near_accept = np.abs(prob - confidence) <= CLOSE_MCSE * mcse
    near_reject = (np.abs(1.0 - prob - confidence) <= CLOSE_MCSE * mcse) & (x > 0)
    too_close = (near_accept | near_reject) & (mcse > 0)
    accept = (prob >= confidence) & ~too_close
    reject = (1.0 - prob >= confidence) & (x > 0) & ~too_close
    out = np.where(accept, ACCEPT, np.where(reject, REJECT, UNDECIDED)).astype(object)
    return out, too_close


def could_settle(prob, mcse, x, confidence: float, draws, cap_draws: int) -> np.ndarray:
    """True for each lot too close to call now (:func:`decide`) that the draws up to the cap
    could still settle: no longer too close with the MCSE it would have at the cap,
    projected as mcse sqrt(draws / cap_draws) (an MCSE falling as one over the square root
    of the draws, the chains' autocorrelation unchanged). A lot within that projected error
    of a threshold would very likely still be too close at the cap, so the chains are not
    continued for it alone.

    The projection only decides whether to draw more, never a verdict: with the same seed,
    stopping earlier leaves some lots too close that more draws might have settled, and
    every verdict given is the one the rounds to the cap would have given, since a lot's P
    is final at the round where it is settled (:func:`qualbayes.lot_answers.
    settled_probabilities`). So this rule cannot accept or reject more lots than drawing to
    the cap whenever any lot is close.

    >>> could_settle([0.9500, 0.9505], [0.0002, 0.0002], [1, 1], 0.95, [4000, 4000], 16000)
    array([False,  True])
    """
    prob, mcse, x = (np.asarray(v, float) for v in (prob, mcse, x))
    projected = mcse * np.sqrt(np.asarray(draws, float) / float(cap_draws))
    return decide(prob, mcse, x, confidence)[1] & ~decide(prob, projected, x, confidence)[1]


def extra_clean_units(a0, b0, x, n, remaining, lot_size, spec, confidence, basis,
                      ess_cache: dict | None = None, lot_sums: np.ndarray | None = None):
    r"""Smallest number m of further defect-free units after which P >= C, or None.

    The m units reweight the draws by the change of the lot's marginal likelihood,
    :math:`w_d \propto B(\alpha_d, \beta_d + m) / B(\alpha_d, \beta_d)` (importance sampling;
    None when the weights' effective sample size falls below MIN_WEIGHT_ESS), and move the
    lot's conditional posterior to Beta(alpha_d, beta_d + m). On the lot basis m is at most
    the units not inspected, and m clean units leave R - m uninspected.

    The search starts from the moment-matched Beta's answer (:func:`_first_guess`) and
    steps by secant on the logit scale (:func:`qualbayes.search_near.smallest_near`), so
    4 or 5 sums over the draws find m where the doubling-and-bisection search from 0
    (:func:`qualbayes.search.smallest_int`, used before) took about 20. Both assume P
    increases with m, and under that assumption the answer is the same, including that
    search's rule that a weight ESS below MIN_WEIGHT_ESS at any count it tests gives None:
    those counts are known from the answer (:func:`qualbayes.search_near.doubling_path`)
    and checked (tests/test_lot_answers.py compares both on many cases). ``ess_cache``: the
    weights' ESS by m, shared between calls of the same (x, n) (the weights do not depend
    on the lot size). ``lot_sums``: the lot's log U(x + k) for k = 0..k* at least
    (:func:`qualbayes.lot_draw_sums.lot_sums`, several draws, lot basis): each count then
    costs one log-beta per draw instead of a beta-binomial sum per draw
    (:func:`qualbayes.lot_draw_sums.reweighted_prob`; the same P up to rounding).
    """
    alpha, beta = a0 + x, b0 + (n - x)
    lot = basis == LOT and remaining is not None
    if lot and x > spec * lot_size + 1e-12:
        return None  # the lot already holds more defectives than the limit allows
    base = special.betaln(alpha, beta)
    single = alpha.size == 1
    ess = {} if ess_cache is None else ess_cache
    cap = remaining if lot else MAX_EXTRA_UNITS

    def weight_ess(m: int) -> float:
        if m not in ess:
            logw = special.betaln(alpha, beta + m) - base
            w = np.exp(logw - logw.max())
            ess[m] = float(w.sum() ** 2 / (w**2).sum())
        return ess[m]

    k_star = int(np.floor(spec * lot_size - x + 1e-9)) if lot else -1
    summed = (lot and lot_sums is not None and not single and 0 <= k_star < len(lot_sums)
              and alpha.size * (k_star + 1) <= MAX_PMF_TERMS)

    def value(m: int) -> float:  # P after m clean units against C, on the logit scale
        if single:
            w = np.ones(1)
        else:
            logw = special.betaln(alpha, beta + m) - base
            top = float(logw.max())
            w = np.exp(logw - top)
            ess.setdefault(m, float(w.sum() ** 2 / (w**2).sum()))
        if summed:  # no more than k* units left (x <= sN here): within the limit for sure
            p = 1.0 if remaining - m <= k_star else reweighted_prob(
                lot_sums, k_star, remaining - m, top + math.log(float(w.mean())))
        elif lot:
            g, _ = draws_g(a0, b0 + m, x, n, remaining - m, spec, LOT, lot_size)
            p = float(np.average(g, weights=w))
        else:
            p = float(np.average(special.betainc(alpha, beta + m, spec), weights=w))
        v = _gap(p, confidence)
        if v < 0 and not single and weight_ess(_doubling_point(m, cap)) < MIN_WEIGHT_ESS:
            raise _Degenerate  # the doubling search tests that count (m is below the answer)
        return v

    try:
        start, true_at, slope = _first_guess(alpha, beta, x, remaining if lot else None,
                                             lot_size, spec, confidence, cap,
                                             surrogate=not summed)
        found = smallest_near(value, start, cap, true_at=true_at, slope=slope)
        if found is not None and not single and any(
                weight_ess(m) < MIN_WEIGHT_ESS for m in doubling_path(found, cap)):
            return None
    except _Degenerate:
        return None
    return found


class _Degenerate(Exception):
    pass


def _gap(p: float, c: float) -> float:
    """logit(p) - logit(c), with the sign of the comparison p >= c itself (never 0 when
    p < c): the search's value, nearly linear in the count of clean units where p - c
    saturates."""
    lp = special.logit(min(max(p, 1e-300), 1 - 1e-16)) if p == p else -np.inf
    v = float(lp - special.logit(c))
    return max(v, 0.0) if p >= c else min(v, -1e-300)


def _doubling_point(m: int, cap: int) -> int:
    """The smallest count 2^j - 1 above m (or the cap): the doubling search from 0 tests
    every count 0, 1, 3, 7, ... up to the first at or above its answer, so it tests this
    one whenever m is below the answer.

    >>> [_doubling_point(m, 100) for m in (0, 1, 2, 3, 6, 7, 64, 99)]
    [1, 3, 3, 7, 7, 15, 100, 100]
    """
    return min(cap, (1 << int(m + 1).bit_length()) - 1)


def _moment_beta(alpha, beta) -> tuple[float, float]:
    """The Beta(A, B) with the mean and variance of the mixture of Beta(alpha_d, beta_d)."""
    m = alpha / (alpha + beta)
    mean = float(m.mean())
    var = float(np.mean(m * (1 - m) / (alpha + beta + 1)) + m.var())
    if 0 < mean < 1 and 0 < var < mean * (1 - mean):
        common = mean * (1 - mean) / var - 1
        return mean * common, (1 - mean) * common
    return float(np.mean(alpha)), float(np.mean(beta))


def _first_guess(alpha, beta, x, remaining, lot_size, spec, confidence, cap,
                 surrogate: bool = True) -> tuple[int, int | None, float | None]:
    """(first guess of m, a count known to be enough or None, the value's slope there) from
    the Beta(A, B) with the draws' mean and variance of the rate (:func:`_moment_beta`), for
    which the answer is cheap: on the process basis B + m puts the C-quantile at s
    (``special.btdtrib``); on the lot basis a search over the one-draw sum, started from the
    continuous limit P(p <= (k* + 1/2) / (R - m)) = C. R - k* is always enough (no more
    than k* units left: the lot cannot exceed the limit)."""
    a, b = _moment_beta(alpha, beta)
    if remaining is None:
        with np.errstate(all="ignore"):
            need = float(special.btdtrib(a, confidence, spec)) - b
        guess = min(max(math.ceil(need) if math.isfinite(need) else 0, 0), cap)
        step = max(1, guess // 50)
        slope = (_gap(float(special.betainc(a, b + guess + step, spec)), confidence)
                 - _gap(float(special.betainc(a, b + guess, spec)), confidence)) / step
        return guess, None, slope if math.isfinite(slope) else None
    k_star = int(np.floor(spec * lot_size - x + 1e-9))
    enough = remaining - k_star if 0 <= k_star < remaining else None
    top = (enough if enough is not None else remaining) - 1
    if top <= 0:
        return 0, enough, None
    one_a, one_b = np.array([a]), np.array([b])

    def one(m: int) -> float:
        g, _ = draws_g(one_a, one_b + m, x, 0.0, remaining - m, spec, LOT, lot_size)
        return _gap(float(g[0]), confidence)

    def h(t: float) -> float:
        limit = min(1.0, (k_star + 0.5) / max(remaining - t, 1e-300))
        return _gap(float(special.betainc(a, b + t, limit)), confidence)

    if not np.isfinite(h(0.0)) or h(0.0) >= 0:
        start = 0
    elif not h(float(top)) >= 0:
        start = top
    else:  # the smallest whole count where the limit reaches C (h rises with t)
        start = smallest_int(lambda t: h(float(t)) >= 0, 0, top)
    step = max(1, start // 50)
    slope = (h(start + step) - h(start)) / step if start + step <= top else None
    if k_star >= SURROGATE_TERMS or not surrogate:  # the limit's root will do
        return start, enough, slope
    guess = smallest_near(one, start, remaining, true_at=enough, slope=slope)
    if guess is None:
        return top, enough, None
    step = max(1, guess // 50)
    low = max(guess - step, 0)
    slope = (one(guess) - one(low)) / (guess - low) if guess > low else None
    return guess, enough, slope


def tail_pvalue(x, n, a, b) -> np.ndarray:
    """Upper-tail predictive p-value P(X >= x) of x defectives in n under
    BetaBinomial(n, a, b) (more defectives than the prior makes plausible), vectorised over
    lots (one Beta for all)."""
    from qualbayes.models.lot_history_grid import betabinom_tails  # noqa: PLC0415

    x, n = (np.atleast_1d(np.asarray(v, float)) for v in (x, n))
    out = np.ones(len(x))
    for key in set(zip(x, n, strict=True)):
        up, _ = betabinom_tails(key[0], key[1], np.array([float(a)]), np.array([float(b)]))
        out[(x == key[0]) & (n == key[1])] = min(1.0, float(up[0]))
    return out
