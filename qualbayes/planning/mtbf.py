r"""Constant failure rate (MTBF) demonstration tests, time-terminated.

Failures in a total unit-time T at a constant rate :math:`\lambda = 1/\theta` are
:math:`X \sim \mathrm{Poisson}(\lambda T)` (failed units repaired or replaced).

Classical test: allowing r failures, the test demonstrates :math:`\theta \ge M` at confidence C
when :math:`\Pr(X \le r \mid \theta = M) \le 1 - C`, which by the Poisson-chi-square identity
gives the test time

.. math:: T = M \, \chi^2_{C;\,2r+2} / 2

(NIST/SEMATECH e-Handbook of Statistical Methods, section 8.3.1.2; MIL-HDBK-781A).

Bayesian test: prior :math:`\lambda \sim \mathrm{Gamma}(a, b)` (shape a, rate b in hours: "a
failures' worth of evidence in b hours"); after r failures in T the posterior is
:math:`\mathrm{Gamma}(a + r, b + T)`. Asking :math:`\Pr(\theta \ge M \mid r, T) =
\Pr(\lambda \le 1/M) \ge C` gives

.. math:: T = M \, G^{-1}(C;\; a + r, 1) - b,

with G the unit-rate gamma CDF (NIST/SEMATECH e-Handbook, sections 8.3.1.5 and 8.4.6).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from qualbayes.planning.inputs import count, positive, probability

MAX_FAILURES = 10_000


@dataclass(frozen=True)
class GammaPrior:
    """lambda ~ Gamma(shape a, rate b); b in the same time unit as the MTBF."""

    a: float
    b: float

    def __post_init__(self):
        positive(self.a, "gamma prior shape a")
        positive(self.b, "gamma prior rate b (hours)")

    def describe(self) -> str:
        return (f"failure rate ~ Gamma(shape {self.a:g}, rate {self.b:g} h): as if "
                f"{self.a:g} failures had been seen in {self.b:g} h")

    def prob_mtbf_at_least(self, mtbf: float, failures: int = 0, time: float = 0.0) -> float:
        """P(MTBF >= M | r failures in T) = P(lambda <= 1/M)."""
        return float(special.gammainc(self.a + failures, (self.b + time) / mtbf))

    def sample(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return rng.gamma(self.a, 1.0 / self.b, size)


def chi2_factor(confidence: float, failures: int) -> float:
    """T / M = chi2(C; 2r + 2) / 2."""
    conf = probability(confidence, "confidence")
    r = count(failures, "allowed failures")
    return float(stats.chi2.ppf(conf, 2 * r + 2) / 2.0)


def classical_test_time(mtbf: float, confidence: float, failures: int) -> float:
    return positive(mtbf, "MTBF goal") * chi2_factor(confidence, failures)


def bayes_test_time(mtbf: float, confidence: float, failures: int,
                    prior: GammaPrior) -> float:
    """M G^-1(C; a + r, 1) - b, or 0 when the prior alone already demonstrates the goal."""
    m = positive(mtbf, "MTBF goal")
    conf = probability(confidence, "confidence")
    r = count(failures, "allowed failures")
    return max(0.0, m * float(special.gammaincinv(prior.a + r, conf)) - prior.b)


def test_time(mtbf: float, confidence: float, failures: int,
              prior: GammaPrior | None = None) -> float:
    if prior is None:
        return classical_test_time(mtbf, confidence, failures)
    return bayes_test_time(mtbf, confidence, failures, prior)


def passes(time: float, failures: int, mtbf: float, confidence: float,
           prior: GammaPrior | None = None) -> bool:
    """Whether r failures in total time T demonstrate the goal."""
    if prior is None:
        if time <= 0:
            return False
        return float(special.pdtr(failures, time / mtbf)) <= (1.0 - confidence) * (1 + 1e-12)
    return prior.prob_mtbf_at_least(mtbf, failures, time) >= confidence * (1 - 1e-12)


def allowed_failures(time: float, mtbf: float, confidence: float,
                     prior: GammaPrior | None = None) -> int:
    """The largest r for which a test of total time T still passes (-1 if none)."""
    r = -1
    while r + 1 <= MAX_FAILURES and passes(time, r + 1, mtbf, confidence, prior):
        r += 1
    return r


def posterior_mtbf(prior: GammaPrior, failures: int, time: float, confidence: float) -> dict:
    """Posterior of the MTBF after r failures in T: Gamma(a + r, b + T) on lambda."""
    r = count(failures, "failures")
    t = float(time)
    a, b = prior.a + r, prior.b + t
    post = stats.gamma(a, scale=1.0 / b)
    return {"shape": a, "rate": b,
            "median_mtbf": 1.0 / float(post.median()),
            "lower_bound_mtbf": 1.0 / float(post.ppf(confidence)),
            "mean_failure_rate": a / b}


def oc_curve(time: float, failures: int, mtbf_values: np.ndarray) -> np.ndarray:
    """P(at most r failures in T | true MTBF): the probability of passing."""
    return special.pdtr(failures, time / np.asarray(mtbf_values, dtype=float))


def table(mtbf: float, confidence: float, failures: list[int],
          prior: GammaPrior | None = None) -> list[dict]:
    rows = []
    for r in failures:
        row = {"failures": r, "factor": chi2_factor(confidence, r),
               "classical_time": classical_test_time(mtbf, confidence, r)}
        if prior is not None:
            row["bayes_time"] = bayes_test_time(mtbf, confidence, r, prior)
        rows.append(row)
    return rows
