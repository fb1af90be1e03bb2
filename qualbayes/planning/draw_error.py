r"""Monte Carlo error of plan answers that rest on a learned history prior.

The learned prior (:mod:`qualbayes.planning.history`) is a mixture over the D posterior draws
:math:`(\mu_d, \kappa_d)` of the lot history. Every plan number computed from it is *exact
given the draws* (closed forms and sums over the components, no further sampling), but the
draws are a Monte Carlo sample of the posterior, so each number carries the Monte Carlo error
of that sample. Two forms occur:

* a plain mean over the draws, :math:`\hat A = \frac1D\sum_d v_d` (the assurance
  :math:`P(X \le c)`, the prior mean defect rate :math:`\frac1D\sum_d\mu_d`, P(accept)):
  :math:`\mathrm{MCSE} = \mathrm{sd}(v)/\sqrt{\mathrm{ESS}(v)}`;
* a ratio of means, :math:`\hat P = \sum_d u_d / \sum_d v_d` (a posterior probability after
  a test, :math:`P(p \le p^* \mid x, n) = \sum_d L_d F_d / \sum_d L_d` with :math:`L_d` the
  component's marginal likelihood; :math:`P(p \le s \mid \text{accepted})`): by the delta
  method :math:`\mathrm{MCSE}(\hat P) = \mathrm{MCSE}\big((u_d - \hat P v_d)/\bar v\big)`
  (the self-normalised importance-sampling error, as in Vehtari et al. 2024, PSIS, eq. 6).

The ESS is that of the per-draw sequence over the chains
(:func:`qualbayes.inference.mcse.ess_mean`):
the components are stored chain after chain, so ``chains`` restores the (chain, draw) shape.

>>> import numpy as np
>>> v = np.random.default_rng(0).uniform(size=4000)
>>> m, e = mean_mcse(v, chains=4)
>>> bool(abs(e - v.std() / np.sqrt(v.size)) < 0.002)
True
"""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.inference.mcse import CLOSE_MCSE, mcse_mean


def _by_chain(v, chains: int) -> np.ndarray:
    v = np.asarray(v, dtype=float).reshape(-1)
    chains = chains if chains > 0 and v.size % chains == 0 else 1
    return v.reshape(chains, -1)


def mean_mcse(v, *, chains: int) -> tuple[float, float]:
    """(mean of the per-draw values, its MCSE)."""
    x = _by_chain(v, chains)
    return float(x.mean()), float(mcse_mean(x))


def ratio_mcse(u, v, *, chains: int) -> tuple[float | None, float | None]:
    """(sum u / sum v, its delta-method MCSE); (None, None) when sum v is 0."""
    u, v = _by_chain(u, chains), _by_chain(v, chains)
    if not v.sum() > 0:
        return None, None
    p = float(u.sum() / v.sum())
    return p, float(mcse_mean((u - p * v) / v.mean()))


def prob_at_most(prior, p_star: float, n: int, x: int, *, chains: int):
    """P(p <= p_star | x failures in n) of a mixture prior, and its MCSE."""
    logl = special.betaln(prior.a + x, prior.b + (n - x)) - special.betaln(prior.a, prior.b)
    like = np.exp(logl - logl.max())
    cdf = special.betainc(prior.a + x, prior.b + (n - x), p_star)
    return ratio_mcse(like * cdf, like, chains=chains)


def pass_probability(prior, c: int, n: int, *, chains: int):
    """The assurance P(X <= c), X ~ BetaBinomial(n, a_d, b_d) over the draws, and its MCSE."""
    if n == 0 or c >= n:
        return 1.0, 0.0
    return mean_mcse(_pmf(prior, c, n).sum(axis=0), chains=chains)


def _pmf(prior, c: int, n: int) -> np.ndarray:
    """P(X = x) for x = 0..c under each component: shape (c + 1, D)."""
    from qualbayes.planning.sampling import _bb_logpmf  # noqa: PLC0415

    return np.exp(_bb_logpmf(np.arange(c + 1)[:, None], n, prior.a[None, :], prior.b[None, :]))


def close_words(p, mcse, level: float, what: str) -> list[str]:
    """A note when a deciding probability lies within 3 MCSE of its level."""
    if p is None or mcse is None or abs(p - level) > CLOSE_MCSE * mcse:
        return []
    return [f"{what} = {p:.4f} lies within {CLOSE_MCSE:g} Monte Carlo errors ({mcse:.4f}) "
            f"of {level:g}: with other posterior draws of the history this plan could differ "
            "by a unit or its verdict could change; too close to call at this Monte Carlo "
            "precision (refit the history with more draws)"]


ATTRIBUTE_COLUMNS = ["allowed failures c", "units n", "P(R >= goal | c of n)",
                     "MCSE of P", "assurance", "MCSE of assurance"]


def attribute_errors(history, analysis, design, reliability: float, confidence: float,
                     plans: list[tuple[int, int | None]]) -> tuple[list[list], list[str]]:
    """Rows of the "Monte Carlo error" table of an attribute plan and its notes: the MCSE of
    P(R >= goal | c of n) where the analysis prior is the learned one, and of the assurance
    where the design prior is."""
    rows, notes = [], []
    for c, n in plans:
        if n is None:
            continue
        p = mc = a = amc = None
        if analysis is history.prior:
            p, mc = prob_at_most(analysis, 1.0 - reliability, n, c, chains=history.chains)
            notes += close_words(p, mc, confidence, f"c = {c}, n = {n}: P(R >= goal | c of n)")
        if design is history.prior:
            a, amc = pass_probability(design, c, n, chains=history.chains)
        rows.append([c, n, p, mc, a, amc])
    return rows, notes


SAMPLING_COLUMNS = ["spec s", "P(accept)", "MCSE of P(accept)", "P(within s | accepted)",
                    "MCSE of P(within s | accepted)"]


def sampling_errors(history, n: int, c: int, spec: float, level: float,
                    lot_size: int | None = None) -> tuple[list[list], list[str]]:
    """The "Monte Carlo error" row of a sampling plan under the learned prior: P(accept)
    (a mean over draws) and P(within s | accepted) (a ratio), the latter for the lot of N
    when ``lot_size`` is given, as in :func:`qualbayes.planning.sampling.accepted_lot_quality`.
    """
    from scipy import stats  # noqa: PLC0415

    prior, k = history.prior, history.chains
    pmf = _pmf(prior, c, n)  # (c + 1, D)
    if lot_size is None:
        x = np.arange(c + 1)[:, None]
        within = special.betainc(prior.a[None, :] + x, prior.b[None, :] + (n - x), spec)
    else:
        rest, limit = lot_size - n, int(np.floor(spec * lot_size + 1e-9))
        within = np.zeros_like(pmf)
        for xi in range(c + 1):
            left = limit - xi
            if left >= 0:
                within[xi] = (1.0 if rest == 0 or left >= rest else
                              stats.betabinom.cdf(left, rest, prior.a + xi, prior.b + n - xi))
    acc, acc_mc = mean_mcse(pmf.sum(axis=0), chains=k)
    p, mc = ratio_mcse((pmf * within).sum(axis=0), pmf.sum(axis=0), chains=k)
    return [[spec, acc, acc_mc, p, mc]], close_words(p, mc, level, "P(within s | accepted)")
