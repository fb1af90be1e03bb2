r"""Attribute (pass/fail) demonstration plans.

Each of n units either survives the test (probability R) or fails, independently, so the
number of failures is :math:`X \sim \mathrm{Binomial}(n, 1 - R)`.

Classical plan, demonstrating :math:`R \ge R^*` at confidence C with at most c failures: the
smallest n with

.. math:: \Pr(X \le c \mid R = R^*) = \sum_{x=0}^{c} \binom{n}{x} (1-R^*)^x R^{*\,n-x} \le 1 - C,

so a product only as good as :math:`R^*` passes with probability at most 1 - C. For c = 0
this is the success-run size :math:`n = \lceil \ln(1-C) / \ln R^* \rceil`. Equivalently the
one-sided exact (Clopper-Pearson) lower confidence bound on R after c failures in n,
:math:`R_L = B^{-1}(1 - C;\; n - c,\; c + 1)`, is at least :math:`R^*`.

Bayesian plan with a prior on :math:`p = 1 - R` (a Beta, or a mixture of Betas learned from a
history): the smallest n such that, after at most c failures in n,
:math:`\Pr(R \ge R^* \mid X = c) \ge C`. The posterior probability falls as x rises and rises
with n (each extra survivor multiplies the density by R, a monotone likelihood ratio), so the
condition at x = c covers every x <= c and the search over n is a bisection.
"""

from __future__ import annotations

import math

from scipy import special

from qualbayes.planning.inputs import count, probability
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.search import smallest_int

MAX_UNITS = 10**8
_REL_TOL = 1e-12  # floating-point slack when comparing a risk with its limit


def success_run_units(reliability: float, confidence: float) -> int:
    """Zero-failure sample size :math:`\\lceil \\ln(1-C) / \\ln R \\rceil`."""
    r = probability(reliability, "reliability")
    c = probability(confidence, "confidence")
    x = math.log1p(-c) / math.log(r)
    n = math.ceil(x - 1e-9 * max(1.0, x))  # an exact integer ratio is not rounded up
    return max(n, 1)


def passes_classical(n: int, x: int, reliability: float, confidence: float) -> bool:
    """True when x failures in n demonstrate R at confidence C:
    ``P(X <= x | R) <= 1 - C``."""
    if x < 0 or n <= 0 or x >= n:
        return False
    risk = float(special.bdtr(x, n, 1.0 - reliability))
    return risk <= (1.0 - confidence) * (1.0 + _REL_TOL)


def units_for_failures(reliability: float, confidence: float, failures: int) -> int:
    """Smallest n with ``BinomCDF(c; n, 1 - R) <= 1 - C`` (classical, c allowed failures)."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    c = count(failures, "allowed failures")
    lo = max(success_run_units(r, conf), c + 1)
    return smallest_units(lambda n: passes_classical(n, c, r, conf), lo)


def lower_reliability_bound(n: int, failures: int, confidence: float) -> float:
    """One-sided exact lower confidence bound on R after c failures in n units."""
    n = count(n, "units", least=1)
    c = count(failures, "failures")
    if c >= n:
        return 0.0
    return float(special.betaincinv(n - c, c + 1, 1.0 - confidence))


def prob_demonstrated(prior: RatePrior, reliability: float, n: int, failures: int) -> float:
    """Posterior P(R >= R* | c failures in n) = P(p <= 1 - R*)."""
    return prior.prob_at_most(1.0 - reliability, n, failures)


def passes_bayes(prior: RatePrior, n: int, x: int, reliability: float,
                 confidence: float) -> bool:
    return x <= n and prob_demonstrated(prior, reliability, n, x) >= confidence


def bayes_units(prior: RatePrior, reliability: float, confidence: float,
                failures: int) -> int | None:
    """Smallest n >= c with ``P(R >= R* | c failures in n) >= C``; 0 when the prior alone
    already demonstrates R with no failures allowed; None if more than MAX_UNITS."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    c = count(failures, "allowed failures")
    return smallest_units(lambda n: passes_bayes(prior, n, c, r, conf), c)


def classical_table(reliability: float, confidence: float, failures: list[int]) -> list[dict]:
    """One row per allowed-failure count c: n, the exact lower bound at c failures."""
    rows = []
    for c in failures:
        n = units_for_failures(reliability, confidence, c)
        rows.append({"failures": c, "units": n,
                     "lower_bound_at_c": lower_reliability_bound(n, c, confidence),
                     "risk_at_goal": float(special.bdtr(c, n, 1.0 - reliability))})
    return rows


def bayes_table(prior: RatePrior, reliability: float, confidence: float,
                failures: list[int]) -> list[dict]:
    """One row per c: smallest n, P(R >= R*) and the lower credible bound at c failures,
    and the effective number of prior components left (mixture priors)."""
    rows = []
    for c in failures:
        n = bayes_units(prior, reliability, confidence, c)
        if n is None:
            rows.append({"failures": c, "units": None, "prob_demonstrated": None,
                         "lower_bound_at_c": None, "component_ess": None})
            continue
        rows.append({
            "failures": c, "units": n,
            "prob_demonstrated": prob_demonstrated(prior, reliability, n, c),
            "lower_bound_at_c": 1.0 - prior.quantile(confidence, n, c),
            "component_ess": prior.component_ess(n, c),
        })
    return rows


def smallest_units(ok, lo: int) -> int | None:
    """Smallest integer n >= lo with ok(n), for ok monotone (False then True)."""
    return smallest_int(ok, lo, MAX_UNITS)
