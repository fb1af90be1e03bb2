r"""Assurance: the prior-predictive probability that a planned test will pass.

Following Wilson & Farrow (2019), "Assurance for sample size determination in reliability
demonstration testing" (arXiv:1905.08659), the test is judged by its pass rule (classical, or
an *analysis* prior's posterior), while the chance of passing is averaged over a *design*
prior that says what the engineer believes about the product now; the two priors may differ.

Attribute test of n units, pass when at most :math:`c^*(n)` fail, design prior
:math:`p = 1 - R \sim \frac1D\sum_d \mathrm{Beta}(a_d, b_d)`: failures are beta-binomial, so

.. math:: A(n) = \frac1D \sum_d \sum_{x=0}^{c^*(n)} \mathrm{BB}(x;\, n, a_d, b_d).

Constant-rate test of total time T, design prior :math:`\lambda \sim \mathrm{Gamma}(a_D,
b_D)`: failures are negative binomial, :math:`A(T) = \mathrm{NB}(X \le r^*(T);\; a_D,\;
b_D / (b_D + T))`.

test with the time scaled by an assumed Weibull shape (n units, L mission times each): the
per-unit failure probability over
the test is :math:`1 - R^{L^\beta}`, and :math:`A = E_{R,\beta}[\Pr(X \le c)]`, integrated
adaptively over the design prior of R(t) (and Gauss-Hermite over the shape prior).

Smallest plan for a wanted assurance. Each pass rule has thresholds :math:`s_0 < s_1 < \dots`
(units :math:`n_c`, times :math:`T_c` or :math:`L_c`): a plan of size s allows
:math:`c^*(s) = \max\{c : s_c \le s\}` failures. Between two thresholds the allowance is fixed
and the assurance falls as the test grows, so the assurance is highest at the thresholds and
the smallest plan reaching a target is :math:`s_c` for the first c with
:math:`A(s_c) \ge` target.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy import integrate, special

from qualbayes.planning import attribute, mtbf, weibull
from qualbayes.planning.inputs import count, positive, probability
from qualbayes.planning.mtbf import GammaPrior
from qualbayes.planning.rate_prior import RatePrior

MAX_ALLOWED_FAILURES = 2000
DEFAULT_MAX_UNITS = 100_000


# --------------------------------------------------------------------------- building blocks

def betabinom_cdf(c: int, n: int, design: RatePrior) -> float:
    """P(X <= c), X ~ BetaBinomial(n, a_d, b_d) mixed over the design prior's components."""
    if c < 0:
        return 0.0
    if c >= n:
        return 1.0
    x = np.arange(c + 1)[:, None]
    a, b = design.a[None, :], design.b[None, :]
    logpmf = (special.gammaln(n + 1) - special.gammaln(x + 1) - special.gammaln(n - x + 1)
              + special.betaln(x + a, n - x + b) - special.betaln(a, b))
    return float(min(1.0, np.exp(logpmf).sum(axis=0).mean()))


def _first_reaching(threshold: Callable[[int], float | None],
                    assurance_at: Callable[[float, int], float], target: float,
                    max_size: float, max_failures: int = MAX_ALLOWED_FAILURES) -> dict | None:
    """Walk c = 0, 1, ...: the first threshold plan whose assurance reaches the target."""
    best = None
    for c in range(max_failures + 1):
        size = threshold(c)
        if size is None or size > max_size:
            break
        a = assurance_at(size, c)
        if best is None or a > best["assurance"]:
            best = {"size": size, "failures": c, "assurance": a}
        if a >= target:
            return {"size": size, "failures": c, "assurance": a, "reached": True}
    if best is not None:
        best["reached"] = False
    return best


def classical_ceiling(prob_better: float, confidence: float) -> float:
    """An upper bound on any classical plan's assurance: the design probability that the
    goal is met, plus 1 - C times the probability that it is not (a product at or below the
    goal passes with probability at most 1 - C)."""
    return prob_better + (1.0 - confidence) * (1.0 - prob_better)


# --------------------------------------------------------------------------- attribute

def attribute_threshold(reliability: float, confidence: float,
                        analysis: RatePrior | None) -> Callable[[int], int | None]:
    """c -> the least n whose pass rule allows c failures."""
    if analysis is None:
        return lambda c: attribute.units_for_failures(reliability, confidence, c)
    return lambda c: attribute.bayes_units(analysis, reliability, confidence, c)


def allowed_failures_attribute(n: int, reliability: float, confidence: float,
                               analysis: RatePrior | None) -> int:
    """c*(n): the most failures among n that still pass (-1 if none)."""
    c = -1
    while c + 1 <= n:
        ok = (attribute.passes_classical(n, c + 1, reliability, confidence) if analysis is None
              else attribute.passes_bayes(analysis, n, c + 1, reliability, confidence))
        if not ok:
            break
        c += 1
    return c


def attribute_assurance(n: int, reliability: float, confidence: float,
                        analysis: RatePrior | None, design: RatePrior) -> float:
    n = count(n, "units")
    c = allowed_failures_attribute(n, reliability, confidence, analysis)
    return 1.0 if n == 0 and c >= 0 else betabinom_cdf(c, n, design)


def smallest_attribute_plan(reliability: float, confidence: float, analysis: RatePrior | None,
                            design: RatePrior, target: float,
                            max_units: int = DEFAULT_MAX_UNITS) -> dict:
    """The smallest n (with its allowed failures) whose assurance reaches ``target``."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    target = probability(target, "wanted assurance")
    limit = design.prob_at_most(1.0 - r)  # design P(R >= R*)
    out = {"target": target, "design_prob_goal_met": limit}
    if analysis is None and target > classical_ceiling(limit, conf):
        return out | {"reached": False, "units": None, "failures": None, "assurance": None,
                      "reason": "unreachable: above the ceiling "
                                f"{classical_ceiling(limit, conf):.4g} of any classical plan"}
    found = _first_reaching(attribute_threshold(r, conf, analysis),
                            lambda n, c: (1.0 if n == 0 else betabinom_cdf(c, int(n), design)),
                            target, max_units)
    if found is None:
        return out | {"reached": False, "units": None, "failures": None, "assurance": None,
                      "reason": f"no plan within {max_units} units"}
    res = out | {"units": int(found["size"]), "failures": found["failures"],
                 "assurance": found["assurance"], "reached": found["reached"]}
    if not found["reached"]:
        res["reason"] = (f"not reached within {max_units} units or "
                         f"{MAX_ALLOWED_FAILURES} failures; best plan shown")
    return res


def attribute_assurance_curve(reliability: float, confidence: float,
                              analysis: RatePrior | None, design: RatePrior,
                              max_units: int, points: int = 2000) -> dict:
    """A(n) for n = 0..max_units (every n up to ``points`` values, else evenly spaced)."""
    threshold = attribute_threshold(reliability, confidence, analysis)
    cuts = []
    for c in range(MAX_ALLOWED_FAILURES + 1):
        t = threshold(c)
        if t is None or t > max_units:
            break
        cuts.append(t)
    n = np.unique(np.linspace(0, max_units, min(points, max_units + 1)).round().astype(int))
    allowed = np.searchsorted(np.asarray(cuts, dtype=float), n, side="right") - 1
    values = [1.0 if (k == 0 and c >= 0) else betabinom_cdf(int(c), int(k), design)
              for k, c in zip(n, allowed, strict=True)]
    return {"units": n.tolist(), "allowed_failures": allowed.tolist(), "assurance": values}


# --------------------------------------------------------------------------- constant rate

def mtbf_assurance(time: float, goal: float, confidence: float, analysis: GammaPrior | None,
                   design: GammaPrior) -> float:
    """A(T) = NB(X <= r*(T); a_D, b_D / (b_D + T))."""
    r = mtbf.allowed_failures(time, goal, confidence, analysis)
    return _nb_cdf(r, time, design)


def _nb_cdf(r: int, time: float, design: GammaPrior) -> float:
    if r < 0:
        return 0.0
    # P(X <= r) = I_q(a, r + 1), q = b / (b + T): valid for a real shape a (special.nbdtr
    # would truncate a to an integer)
    return float(special.betainc(design.a, r + 1, design.b / (design.b + time)))


def smallest_mtbf_plan(goal: float, confidence: float, analysis: GammaPrior | None,
                       design: GammaPrior, target: float,
                       max_failures: int = MAX_ALLOWED_FAILURES) -> dict:
    """The shortest total test time (with its allowed failures) reaching ``target``."""
    goal = positive(goal, "MTBF goal")
    conf = probability(confidence, "confidence")
    target = probability(target, "wanted assurance")
    limit = float(special.gammainc(design.a, design.b / goal))  # design P(MTBF > goal)
    out = {"target": target, "design_prob_goal_met": limit}
    if analysis is None and target > classical_ceiling(limit, conf):
        return out | {"reached": False, "time": None, "failures": None, "assurance": None,
                      "reason": "unreachable: above the ceiling "
                                f"{classical_ceiling(limit, conf):.4g} of any classical plan"}
    found = _first_reaching(lambda c: mtbf.test_time(goal, conf, c, analysis),
                            lambda t, c: _nb_cdf(c, t, design), target, math.inf,
                            max_failures)
    res = out | {"time": found["size"], "failures": found["failures"],
                 "assurance": found["assurance"], "reached": found["reached"]}
    if not found["reached"]:
        res["reason"] = f"not reached within {max_failures} allowed failures; best plan shown"
    return res


def mtbf_assurance_curve(goal: float, confidence: float, analysis: GammaPrior | None,
                         design: GammaPrior, max_time: float, points: int = 400) -> dict:
    cuts = []
    for c in range(MAX_ALLOWED_FAILURES + 1):
        t = mtbf.test_time(goal, confidence, c, analysis)
        if t > max_time:
            break
        cuts.append(t)
    times = np.linspace(0.0, max_time, points)
    allowed = np.searchsorted(np.asarray(cuts), times, side="right") - 1
    values = [_nb_cdf(int(r), float(t), design) for t, r in zip(times, allowed, strict=True)]
    return {"time": times.tolist(), "allowed_failures": allowed.tolist(), "assurance": values}


# --------------------------------------------------------------------------- Weibull extended

def life_assurance(units: int, ratio: float, failures: int, shape: weibull.Shape,
                   design: RatePrior) -> float:
    """E over the design prior of R(t) (and the shape prior) of P(X <= c)."""
    n = count(units, "units", least=1)
    c = count(failures, "allowed failures")
    if c >= n:
        return 1.0
    betas, w = weibull.shape_nodes(shape)
    k = ratio ** betas  # L^beta per shape node

    def integrand(u: float, a: float, b: float) -> float:
        p = float(special.betaincinv(a, b, u))  # failure probability by the mission time
        q = -np.expm1(k * math.log1p(-p)) if p < 1.0 else np.ones_like(k)
        return float(np.dot(w, special.bdtr(c, n, q)))

    total = 0.0
    for a, b in zip(design.a, design.b, strict=True):
        val, _err = integrate.quad(integrand, 0.0, 1.0, args=(float(a), float(b)),
                                   epsabs=1e-9, epsrel=1e-9, limit=200)
        total += val
    return min(1.0, total / design.components)


def life_threshold(reliability: float, confidence: float, units: int, shape: weibull.Shape,
                   analysis: RatePrior | None) -> Callable[[int], float | None]:
    """c -> the least L whose pass rule allows c failures among n units."""
    from qualbayes.planning import life_bayes  # noqa: PLC0415

    if analysis is None:
        return lambda c: (weibull.time_ratio(reliability, confidence, units, shape, c)
                          if c < units else None)
    return lambda c: life_bayes.time_ratio(analysis, reliability, confidence, units, shape, c)


def smallest_life_plan(reliability: float, confidence: float, units: int,
                       shape: weibull.Shape, design: RatePrior, target: float,
                       max_failures: int = 200, analysis: RatePrior | None = None) -> dict:
    """For n units: the shortest test time per unit (as L mission times, with its allowed
    failures) whose assurance reaches ``target``; the pass rule is classical, or the
    posterior under ``analysis``."""
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    n = count(units, "units", least=1)
    target = probability(target, "wanted assurance")
    limit = design.prob_at_most(1.0 - r)  # design P(R(t) >= R*)
    out = {"target": target, "design_prob_goal_met": limit}
    if analysis is None and target > classical_ceiling(limit, conf):
        return out | {"reached": False, "ratio": None, "failures": None, "assurance": None,
                      "reason": "unreachable: above the ceiling "
                                f"{classical_ceiling(limit, conf):.4g} of any classical plan"}
    found = _first_reaching(
        life_threshold(r, conf, n, shape, analysis),
        lambda L, c: 1.0 if L == 0 else life_assurance(n, L, c, shape, design), target,
        math.inf, min(max_failures, n - 1))
    if found is None:
        return out | {"reached": False, "ratio": None, "failures": None, "assurance": None,
                      "reason": "no test time within the searched range"}
    res = out | {"ratio": found["size"], "failures": found["failures"],
                 "assurance": found["assurance"], "reached": found["reached"]}
    if not found["reached"]:
        res["reason"] = (f"not reached with up to {min(max_failures, n - 1)} allowed failures "
                         f"on {n} units; best plan shown")
    return res


def life_assurance_curve(reliability: float, confidence: float, units: int,
                         shape: weibull.Shape, design: RatePrior, max_ratio: float,
                         points: int = 120, analysis: RatePrior | None = None) -> dict:
    threshold = life_threshold(reliability, confidence, units, shape, analysis)
    cuts = []
    for c in range(min(units - 1, MAX_ALLOWED_FAILURES) + 1):
        t = threshold(c)
        if t is None or t > max_ratio:
            break
        cuts.append(t)
    ratios = np.linspace(max_ratio / points, max_ratio, points)
    allowed = np.searchsorted(np.asarray(cuts), ratios, side="right") - 1
    values = [0.0 if c < 0 else life_assurance(units, float(L), int(c), shape, design)
              for L, c in zip(ratios, allowed, strict=True)]
    return {"ratio": ratios.tolist(), "allowed_failures": allowed.tolist(),
            "assurance": values}
