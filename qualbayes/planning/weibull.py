r"""Life demonstration: a binomial test with the test time scaled by an assumed Weibull shape.

Units fail by a Weibull law with shape :math:`\beta`; reliability at the mission time t is
:math:`R = \exp(-(t/\eta)^\beta)`. Testing each unit for :math:`L t` instead of t gives a
survival probability :math:`R^{L^\beta}` over the test, so the number of failures among n
units is :math:`X \sim \mathrm{Binomial}(n,\; 1 - R^{L^\beta})`. The test demonstrates
:math:`R(t) \ge R^*` at confidence C when :math:`\Pr(X \le c \mid R^*) \le 1 - C`.

Known shape, closed forms. Units for a given L: the attribute plan for the reliability
:math:`R^{*\,L^\beta}` (zero failures: :math:`n = \ln(1-C) / (L^\beta \ln R^*)`). Test-time
ratio for n units: with :math:`R_L = B^{-1}(1-C;\; n-c,\; c+1)` the exact lower bound on the
test-period reliability, :math:`L = (\ln R_L / \ln R^*)^{1/\beta}`. L = 1 gives back the
attribute plan.

Shape range: :math:`\ln\beta \sim N(m, s^2)` with the stated range as its central 95%
(:math:`m` the mid-point of the logs, :math:`s = (\ln\beta_{hi} - \ln\beta_{lo}) / (2 \cdot
1.95996)`). The consumer's risk at the goal is averaged over that prior,
:math:`\bar\rho(L) = E_\beta[\Pr(X \le c \mid R^*, \beta)]`, and the plan asks
:math:`\bar\rho \le 1 - C`; :math:`\bar\rho` falls as L or n rises, so L is found by root
search and n by bisection. The expectation is a Gauss-Hermite sum over :math:`\ln\beta`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special, stats

from qualbayes.errors import OptionError
from qualbayes.planning import attribute
from qualbayes.planning.inputs import count, positive, probability

HERMITE_NODES = 48
Z95 = float(stats.norm.ppf(0.975))


@dataclass(frozen=True)
class ShapePrior:
    """ln(shape) ~ Normal(log_median, log_sd**2)."""

    log_median: float
    log_sd: float

    @classmethod
    def from_range(cls, low: float, high: float, coverage: float = 0.95) -> ShapePrior:
        low = positive(low, "shape range low end")
        high = positive(high, "shape range high end")
        if not low < high:
            raise OptionError(f"shape range {low:g},{high:g}: the low end must be below the "
                              "high end (give a single --shape for a known shape)")
        z = float(stats.norm.ppf(0.5 + coverage / 2.0))
        return cls(0.5 * (math.log(low) + math.log(high)),
                   (math.log(high) - math.log(low)) / (2.0 * z))

    @property
    def median(self) -> float:
        return math.exp(self.log_median)

    def interval(self, coverage: float = 0.95) -> tuple[float, float]:
        z = float(stats.norm.ppf(0.5 + coverage / 2.0))
        return (math.exp(self.log_median - z * self.log_sd),
                math.exp(self.log_median + z * self.log_sd))

    def nodes(self, k: int = HERMITE_NODES) -> tuple[np.ndarray, np.ndarray]:
        """Shapes and weights with sum w_i f(beta_i) ~= E[f(beta)] (Gauss-Hermite)."""
        z, w = np.polynomial.hermite.hermgauss(k)
        return np.exp(self.log_median + math.sqrt(2.0) * self.log_sd * z), w / math.sqrt(math.pi)

    def sample(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return np.exp(rng.normal(self.log_median, self.log_sd, size))

    def describe(self) -> str:
        lo, hi = self.interval()
        return (f"ln(shape) ~ Normal({self.log_median:.4g}, {self.log_sd:.4g}^2): "
                f"median {self.median:.3g}, central 95% {lo:.3g} to {hi:.3g}")


Shape = float | ShapePrior


def shape_nodes(shape: Shape) -> tuple[np.ndarray, np.ndarray]:
    if isinstance(shape, ShapePrior):
        return shape.nodes()
    return np.array([positive(shape, "shape")]), np.ones(1)


def consumer_risk(n: int, ratio: float, failures: int, reliability: float,
                  shape: Shape) -> float:
    """P(X <= c | R(t) = R*) for n units tested L = ratio mission times each, averaged over
    the shape prior when a range is given."""
    betas, w = shape_nodes(shape)
    surv = np.exp(math.log(reliability) * ratio ** betas)  # R*^(L^beta)
    return float(np.dot(w, special.bdtr(failures, n, 1.0 - surv)))


def units_needed(reliability: float, confidence: float, ratio: float, shape: Shape,
                 failures: int = 0) -> int | None:
    """Smallest n for a test of L = ``ratio`` mission times per unit."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    ratio = positive(ratio, "test-time ratio")
    c = count(failures, "allowed failures")
    if not isinstance(shape, ShapePrior):
        r_test = r ** (ratio ** positive(shape, "shape"))
        if not 0.0 < r_test < 1.0:
            return None  # outside floating point: the test period is far too short or long
        return attribute.units_for_failures(r_test, conf, c)
    limit = (1.0 - conf) * (1.0 + 1e-12)
    return attribute.smallest_units(
        lambda n: consumer_risk(n, ratio, c, r, shape) <= limit, c + 1)


def time_ratio(reliability: float, confidence: float, units: int, shape: Shape,
               failures: int = 0) -> float:
    """Test time per unit as a multiple L of the mission time, for n units and c failures."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    c = count(failures, "allowed failures")
    n = count(units, "units", least=1)
    if n <= c:
        raise OptionError(f"units {n}: need more units on test than allowed failures ({c})")
    if not isinstance(shape, ShapePrior):
        beta = positive(shape, "shape")
        r_low = attribute.lower_reliability_bound(n, c, conf)
        return (math.log(r_low) / math.log(r)) ** (1.0 / beta)

    def f(log_ratio: float) -> float:
        return consumer_risk(n, math.exp(log_ratio), c, r, shape) - (1.0 - conf)

    lo, hi = -5.0, 5.0
    while f(lo) < 0:
        lo -= 5.0
        if lo < -200:
            raise OptionError("no test time found: the shape range is too wide for this plan")
    while f(hi) > 0:
        hi += 5.0
        if hi > 200:
            raise OptionError("no test time found: the shape range is too wide for this plan")
    return math.exp(optimize.brentq(f, lo, hi, xtol=1e-12, rtol=1e-12))


def life_plan(reliability: float, confidence: float, mission: float, units: int,
              shape: Shape, failures: int = 0) -> dict:
    """Test time per unit for n units and c allowed failures, with the total unit-time."""
    mission = positive(mission, "mission time")
    ratio = time_ratio(reliability, confidence, units, shape, failures)
    return {"units": int(units), "failures": int(failures), "ratio": ratio,
            "test_time": ratio * mission, "total_time": ratio * mission * units,
            "risk_at_goal": consumer_risk(units, ratio, failures, reliability, shape)}


def tradeoff(reliability: float, confidence: float, mission: float, units: list[int],
             shape: Shape, failures: list[int]) -> list[dict]:
    """One row per (units, allowed failures) with n > c."""
    return [life_plan(reliability, confidence, mission, n, shape, c)
            for n in units for c in failures if n > c]


def oc_curve(units: int, ratio: float, failures: int, shape: Shape,
             reliabilities: np.ndarray) -> np.ndarray:
    """P(test passes | true R(t)) over a grid of R(t)."""
    return np.array([consumer_risk(units, ratio, failures, float(r), shape)
                     for r in reliabilities])
