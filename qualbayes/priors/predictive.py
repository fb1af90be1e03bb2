r"""What data each prior expects (prior predictive checks), so that an implausible prior shows.

* Beta(a, b) on a defect or failure probability: the number of defectives among n units is
  beta-binomial, :math:`\Pr(X = k) = \binom{n}{k} B(k + a, n - k + b) / B(a, b)`; reported:
  its central 90% range, :math:`\Pr(X = 0)`, and which observed lots fall outside the range
  for their own n (surprising under that prior).
* Gamma(a, b) on a failure rate: failures in a total time T are negative binomial,
  :math:`\Pr(X = k) = \frac{\Gamma(a + k)}{\Gamma(a)\,k!} q^a (1 - q)^k`, q = b / (b + T).
* Weibull priors with a proper shape and scale part: R(t) and the failures among n units run
  to the mission time, by simulation from the prior. Improper priors (the default scale
  prior, flat or Jeffreys priors) expect no particular data; that is said instead.

scipy.special only.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

LEVEL = 0.90


def _log_choose(n, k):
    return special.gammaln(n + 1) - special.gammaln(k + 1) - special.gammaln(n - k + 1)


def betabinom_cdf(k: int, n: int, a: float, b: float) -> float:
    """P(X <= k), X ~ BetaBinomial(n, a, b)."""
    if k < 0:
        return 0.0
    if k >= n:
        return 1.0
    ks = np.arange(k + 1)
    logpmf = _log_choose(n, ks) + special.betaln(ks + a, n - ks + b) - special.betaln(a, b)
    return float(min(1.0, np.exp(logpmf).sum()))


def betabinom_quantile(q: float, n: int, a: float, b: float) -> int:
    """The smallest k with P(X <= k) >= q."""
    from qualbayes.models.mixtures import betabinom_ppf  # noqa: PLC0415

    return int(betabinom_ppf(q, int(n), np.array([a]), np.array([b])))


def beta_expectations(a: float, b: float, n: int, level: float = LEVEL) -> dict:
    """The central ``level`` range of defectives among n units under Beta(a, b), P(X = 0)."""
    tail = (1.0 - level) / 2.0
    lo, hi = betabinom_quantile(tail, n, a, b), betabinom_quantile(1.0 - tail, n, a, b)
    p0 = math.exp(special.betaln(a, n + b) - special.betaln(a, b))
    return {"units": int(n), "level": level, "range": [lo, hi], "prob_none": p0,
            "mean": n * a / (a + b)}


def surprising(x: int, n: int, a: float, b: float, level: float = LEVEL) -> bool:
    """True when x defectives in n fall outside the prior's central ``level`` range
    (either tail beyond (1 - level)/2)."""
    tail = (1.0 - level) / 2.0
    below = betabinom_cdf(x, n, a, b)  # P(X <= x)
    above = 1.0 - betabinom_cdf(x - 1, n, a, b)  # P(X >= x)
    return below < tail or above < tail


def lots_predictive(a: float, b: float, lots: list[tuple[str, int, int]],
                    level: float = LEVEL) -> dict:
    """For a Beta prior and lots [(name, x, n)]: the range in a sample of the typical
    (median) size and the lots whose own result is outside their range."""
    n_typ = int(np.median([n for _, _, n in lots])) if lots else 0
    out = beta_expectations(a, b, max(n_typ, 1), level)
    seen: dict[tuple[int, int], bool] = {}  # lots repeat the same (x, n): judge each once
    for _, x, n in lots:
        if (int(x), int(n)) not in seen:
            seen[int(x), int(n)] = surprising(int(x), int(n), a, b, level)
    odd = [name for name, x, n in lots if seen[int(x), int(n)]]
    out.update(outside=odd, checked=len(lots))
    lo, hi = out["range"]
    out["words"] = (f"expects {lo} to {hi} defectives in a sample of {out['units']} "
                    f"({level:.0%} of its predictive), none with probability "
                    f"{out['prob_none']:.3g}; {len(odd)} of {len(lots)} lots fall outside "
                    "that range for their own sample size")
    return out


def plan_predictive(a: float, b: float, units: int, allowed: int,
                    level: float = LEVEL, noun: str = "failures") -> dict:
    """Failures (or defectives) among the ``units`` of a planned test or sample under
    Beta(a, b) on p, and the probability of at most ``allowed`` (the chance of passing, or
    of accepting, under that prior)."""
    out = beta_expectations(a, b, units, level)
    out["prob_pass"] = betabinom_cdf(allowed, units, a, b)
    lo, hi = out["range"]
    out["words"] = (f"expects {lo} to {hi} {noun} among {units} units ({level:.0%}); "
                    f"P(at most {allowed}) = {out['prob_pass']:.3g}")
    return out


def mixture_plan_predictive(a: np.ndarray, b: np.ndarray, units: int, allowed: int,
                            level: float = LEVEL, noun: str = "failures") -> dict:
    """:func:`plan_predictive` for an equal-weight mixture of Beta(a_d, b_d) (the history
    prior): the mixture beta-binomial's central range and P(at most ``allowed``)."""
    from qualbayes.models.mixtures import betabinom_pmf_matrix, betabinom_ppf  # noqa: PLC0415

    a, b = np.asarray(a, float), np.asarray(b, float)
    tail = (1.0 - level) / 2.0
    lo, hi = (betabinom_ppf(q, int(units), a, b) for q in (tail, 1.0 - tail))
    pmf = betabinom_pmf_matrix(min(allowed, units), int(units), a, b).mean(axis=0)
    out = {"units": int(units), "level": level, "range": [int(lo), int(hi)],
           "prob_none": float(pmf[0]), "mean": float(units * np.mean(a / (a + b))),
           "prob_pass": float(min(1.0, pmf.sum()))}
    out["words"] = (f"expects {lo} to {hi} {noun} among {units} units ({level:.0%}); "
                    f"P(at most {allowed}) = {out['prob_pass']:.3g}")
    return out


def gamma_expectations(a: float, b: float, time: float, allowed: int,
                       level: float = LEVEL) -> dict | None:
    """Failures in total time T under Gamma(a, b) on the rate (negative binomial); None
    for an improper prior (b = 0)."""
    if not b > 0:
        return None
    q = b / (b + time)
    tail = (1.0 - level) / 2.0

    def cdf(k):
        return float(special.betainc(a, k + 1, q)) if k >= 0 else 0.0  # NB CDF, real a

    def quantile(p):  # the smallest k with cdf(k) >= p: doubling, then bisection
        if cdf(0) >= p - 1e-12:
            return 0
        hi = 1
        while cdf(hi) < p - 1e-12 and hi < 2**40:
            hi *= 2
        lo = hi // 2
        while hi - lo > 1:
            mid = (lo + hi) // 2
            lo, hi = (lo, mid) if cdf(mid) >= p - 1e-12 else (mid, hi)
        return hi

    lo, hi = quantile(tail), quantile(1.0 - tail)
    out = {"time": time, "level": level, "range": [lo, hi], "prob_none": q**a,
           "mean": a * time / b, "prob_pass": cdf(allowed)}
    out["words"] = (f"expects {lo} to {hi} failures in {time:.4g} unit-time ({level:.0%}); "
                    f"P(at most {allowed}) = {out['prob_pass']:.3g}")
    return out


def life_expectations(shape_draws: np.ndarray, scale_draws: np.ndarray, mission: float,
                      units: int, level: float = LEVEL, seed: int = 20261202) -> dict:
    """From prior draws of (shape, scale): the central range of R(mission) and of the
    failures among ``units`` units each run to the mission time."""
    rng = np.random.default_rng(seed)
    rel = np.exp(-np.exp(shape_draws * (math.log(mission) - np.log(scale_draws))))
    fails = rng.binomial(units, 1.0 - rel)
    tail = (1.0 - level) / 2.0
    r_lo, r_hi = np.quantile(rel, [tail, 1.0 - tail])
    f_lo, f_hi = np.quantile(fails, [tail, 1.0 - tail], method="inverted_cdf")
    return {"units": int(units), "level": level, "mission": mission,
            "reliability_range": [float(r_lo), float(r_hi)],
            "range": [int(f_lo), int(f_hi)], "prob_none": float(np.mean(fails == 0)),
            "words": f"expects R({mission:g}) between {r_lo:.3g} and {r_hi:.3g} and "
                     f"{int(f_lo)} to {int(f_hi)} failures among {units} units run to "
                     f"{mission:g} ({level:.0%}; simulated from the prior)"}


def improper(reason: str) -> dict:
    return {"range": None, "words": f"improper prior ({reason}): it expects no particular "
                                    "data, so there is no predictive range to check"}
