r"""Single sampling plans by attributes: inspect n units of a lot, accept when at most c are
defective.

Probability of acceptance (the OC curve) at defect rate p: for a large lot or a process,
:math:`P_a(p) = \Pr(X \le c)` with :math:`X \sim \mathrm{Binomial}(n, p)`; for a lot of N units
holding :math:`D = \mathrm{round}(pN)` defectives, :math:`X \sim \mathrm{Hypergeometric}(N, D,
n)`.

The plan asked for protects both sides: :math:`P_a(\mathrm{AQL}) \ge 1 - \alpha` (producer's
risk) and :math:`P_a(\mathrm{LTPD}) \le \beta` (consumer's risk). For each c the consumer's
condition gives the least :math:`n_c` (:math:`P_a` falls as n rises); :math:`n_c` rises with c,
and a larger n only lowers :math:`P_a(\mathrm{AQL})`, so the first c whose :math:`n_c` also
meets the producer's condition gives the smallest plan.

Bayesian view, prior :math:`p \sim \mathrm{Beta}(a, b)` (or a mixture of them) on the quality
of the lots offered. Marginally :math:`X \sim \mathrm{BetaBinomial}(n, a, b)`, so

.. math::

    \Pr(\text{accept}) &= \sum_{x \le c} \mathrm{BB}(x; n, a, b), \\
    \Pr(p \le s \mid \text{accept}) &= \frac{\sum_{x \le c} \mathrm{BB}(x; n, a, b)\,
        I_s(a + x, b + n - x)}{\Pr(\text{accept})}.

For a lot of N units the defectives left among the N - n not inspected are, given x,
:math:`\mathrm{BetaBinomial}(N - n, a + x, b + n - x)`, which gives the probability that the
accepted lot itself holds at most :math:`sN` defectives.

Decision of the Bayesian view (our choice; a sampling plan has no confidence C of its own):
the plan *protects* the consumer at level :math:`\ell` (default :math:`1 - \beta`, the
plan's own consumer's risk read after the fact) when an accepted lot is within the limit s
(the spec, else the LTPD) with probability at least :math:`\ell`:
:math:`\Pr(p \le s \mid \text{accept}) \ge \ell`, or for a lot of N units
:math:`\Pr(D \le sN \mid \text{accept}) \ge \ell`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from qualbayes.errors import OptionError
from qualbayes.planning.inputs import count, probability
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.search import smallest_int

MAX_ACCEPTANCE_NUMBER = 5000


@dataclass(frozen=True)
class SamplingPlan:
    n: int
    c: int
    lot_size: int | None
    pa_aql: float
    pa_ltpd: float

    @property
    def method(self) -> str:
        return "binomial" if self.lot_size is None else "hypergeometric"


def defectives_in_lot(rate: float, lot_size: int) -> int:
    """D = round(p N), the number of defectives a lot of N at rate p holds."""
    return int(np.floor(rate * lot_size + 0.5))


def acceptance_probability(n: int, c: int, rate, lot_size: int | None = None):
    """P_a = P(X <= c) at defect rate(s) ``rate``."""
    rate = np.asarray(rate, dtype=float)
    if lot_size is None:
        out = special.bdtr(c, n, rate)
    else:
        d = np.floor(rate * lot_size + 0.5)
        out = stats.hypergeom.cdf(c, lot_size, d, n)
    return float(out) if out.ndim == 0 else out


def check_inputs(aql, alpha, ltpd, beta, lot_size):
    """The plan's inputs checked: probabilities, AQL < LTPD, a usable lot size."""
    aql = probability(aql, "AQL")
    ltpd = probability(ltpd, "LTPD")
    alpha = probability(alpha, "producer's risk alpha")
    beta = probability(beta, "consumer's risk beta")
    if aql >= ltpd:
        raise OptionError(f"AQL {aql:g} must be below LTPD {ltpd:g}: the plan has to tell "
                          "the two apart")
    if lot_size is not None:
        lot_size = count(lot_size, "lot size", least=2)
        d1, d2 = defectives_in_lot(aql, lot_size), defectives_in_lot(ltpd, lot_size)
        if d2 < 1 or d1 >= d2:
            raise OptionError(
                f"lot size {lot_size}: at AQL the lot holds {d1} defectives and at LTPD {d2}; "
                "the lot is too small to separate the two")
    return aql, alpha, ltpd, beta, lot_size


def find_plan(aql: float, alpha: float, ltpd: float, beta: float,
              lot_size: int | None = None) -> SamplingPlan:
    """The smallest (n, c) with P_a(AQL) >= 1 - alpha and P_a(LTPD) <= beta."""
    aql, alpha, ltpd, beta, lot_size = check_inputs(aql, alpha, ltpd, beta, lot_size)
    for c in range(MAX_ACCEPTANCE_NUMBER + 1):
        n = _least_n(c, ltpd, beta, lot_size)
        if n is None:
            break
        pa1 = acceptance_probability(n, c, aql, lot_size)
        if pa1 >= 1.0 - alpha:
            return SamplingPlan(n, c, lot_size, pa1, acceptance_probability(n, c, ltpd,
                                                                            lot_size))
    where = "" if lot_size is None else f" within a lot of {lot_size}"
    raise OptionError(f"no single sampling plan{where} meets both risks (AQL {aql:g}, "
                      f"alpha {alpha:g}, LTPD {ltpd:g}, beta {beta:g}); consider 100% "
                      "inspection or wider risks")


def meets(n: int, c: int, aql, alpha, ltpd, beta, lot_size=None) -> bool:
    return (acceptance_probability(n, c, aql, lot_size) >= 1.0 - alpha
            and acceptance_probability(n, c, ltpd, lot_size) <= beta)


def _least_n(c: int, ltpd: float, beta: float, lot_size: int | None) -> int | None:
    """Smallest n > c with P_a(LTPD) <= beta (None if no n up to the lot size)."""

    def ok(n: int) -> bool:
        return acceptance_probability(n, c, ltpd, lot_size) <= beta

    return smallest_int(ok, c + 1, lot_size if lot_size is not None else 10**9)


def oc_curve(n: int, c: int, rates: np.ndarray, lot_size: int | None = None) -> np.ndarray:
    return np.asarray(acceptance_probability(n, c, rates, lot_size), dtype=float)


def _bb_logpmf(x, n, a, b):
    return (special.gammaln(n + 1) - special.gammaln(x + 1) - special.gammaln(n - x + 1)
            + special.betaln(x + a, n - x + b) - special.betaln(a, b))


def accepted_lot_quality(n: int, c: int, prior: RatePrior, spec: float,
                         lot_size: int | None = None) -> dict:
    """Prior-predictive acceptance and the quality of accepted and rejected lots."""
    n = count(n, "sample size", least=1)
    c = count(c, "acceptance number")
    spec = probability(spec, "spec")
    x = np.arange(c + 1)[:, None]
    a, b = prior.a[None, :], prior.b[None, :]
    pmf = np.exp(_bb_logpmf(x, n, a, b))  # (c+1, D)
    within = special.betainc(a + x, b + (n - x), spec)  # P(p <= s | x), per component
    p_acc = float(pmf.sum(axis=0).mean())
    prior_within = float(special.betainc(prior.a, prior.b, spec).mean())
    joint = float((pmf * within).sum(axis=0).mean())
    out = {
        "prob_accept": p_acc,
        "prob_within_spec_prior": prior_within,
        "prob_within_spec_if_accepted": joint / p_acc if p_acc > 0 else None,
        "prob_within_spec_if_rejected": ((prior_within - joint) / (1.0 - p_acc)
                                         if p_acc < 1 else None),
        "mean_rate_if_accepted": float((pmf * (a + x) / (a + b + n)).sum(axis=0).mean()
                                       / p_acc) if p_acc > 0 else None,
    }
    if lot_size is not None:
        out["lot_within_spec_if_accepted"] = _lot_within(n, c, prior, spec, lot_size, pmf,
                                                         p_acc)
    return out


def _lot_within(n, c, prior, spec, lot_size, pmf, p_acc) -> float | None:
    """P(D <= s N | accepted) for the whole lot of N, D the lot's defectives."""
    lot_size = count(lot_size, "lot size", least=n)
    rest = lot_size - n
    limit = np.floor(spec * lot_size + 1e-9)  # D <= s N
    total = 0.0
    for x in range(c + 1):
        k = int(limit) - x  # defectives allowed among the units not inspected
        if k < 0:
            continue
        cdf = (np.ones(prior.components) if rest == 0 or k >= rest else
               stats.betabinom.cdf(k, rest, prior.a + x, prior.b + n - x))
        total += float((pmf[x] * cdf).mean())
    return total / p_acc if p_acc > 0 else None


PROTECTED, NOT_PROTECTED = "protected", "not protected"


def accepted_within(n: int, c: int, prior: RatePrior, limit: float,
                    lot_size: int | None = None) -> float | None:
    """The key probability of the Bayesian view: P(p <= s | accepted), or for a lot of N
    units P(D <= sN | accepted). None when the prior gives acceptance no chance."""
    q = accepted_lot_quality(n, c, prior, limit, lot_size)
    return q["lot_within_spec_if_accepted" if lot_size is not None
             else "prob_within_spec_if_accepted"]


def protection(prob: float | None, level: float) -> str | None:
    """'protected' when an accepted lot is within the limit with probability >= level."""
    if prob is None:
        return None
    return PROTECTED if prob >= level * (1.0 - 1e-12) else NOT_PROTECTED
