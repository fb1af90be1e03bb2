"""Operating characteristics of the lot decision rules under fixed true rates (numpy/scipy).

For a scenario (lots with fixed true defect rates and sample sizes) the study simulates
many inspection histories, decides every lot as the tool does (accept when
P(p <= spec) >= C; reject when P(p > spec) >= C and the lot has a defective) and counts:

* consumer's risk: the frequency of ``accept`` among lots whose true rate is above spec;
* producer's risk: the frequency of ``reject`` among lots whose true rate is within spec;
* for the history prior, the frequency with which the outlier check flags each lot.

The history prior is evaluated by exact quadrature (:mod:`qualbayes.models.lot_history_grid`),
which the tests show NUTS reproduces; histories with the same data are evaluated once.
The uniform and Jeffreys priors are closed form. Used by tests/test_calibration.py and
bench/lot_oc.py (which prints the table of docs/calibration.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from qualbayes.models import lot_history_grid as grid
from qualbayes.models.lot_spread import HistoryPrior


@dataclass(frozen=True)
class Scenario:
    key: str
    words: str
    spec: float
    rates: tuple[float, ...]  # true rate of each lot
    sizes: tuple[int, ...]  # units inspected in each lot
    confidence: float = 0.95


def scenarios() -> list[Scenario]:
    """The four scenarios of the study (issue 11 item 2)."""
    return [
        Scenario("a", "20 lots x 80 units, all at 2 x spec (200 ppm), spec 100 ppm", 1e-4,
                 (2e-4,) * 20, (80,) * 20),
        Scenario("b", "20 lots x 125 units, all at 0.3 x spec (0.3%), spec 1%", 0.01,
                 (0.003,) * 20, (125,) * 20),
        Scenario("c", "18 lots at 0.3 x spec (0.3%) and 2 at 3 x spec (3%), 200 units each, "
                 "spec 1%", 0.01, (0.003,) * 18 + (0.03,) * 2, (200,) * 20),
        Scenario("d", "a single lot of 300 units at 2 x spec (2%), spec 1%", 0.01, (0.02,),
                 (300,)),
    ]


def decide(prob, x, confidence):
    """accept / reject / undecided as the tool decides (reject needs a defective)."""
    prob = np.asarray(prob, float)
    x = np.asarray(x)
    return np.where(prob >= confidence, "accept",
                    np.where((1 - prob >= confidence) & (x > 0), "reject", "undecided"))


def _probs_conjugate(x, n, spec, a, b):
    return special.betainc(a + x, b + (n - x), spec)


def _probs_history(x, n, spec, prior, outliers: bool):
    g = grid.posterior_grid(x, n, prior=prior)
    xs, ns = np.unique(np.stack([x, n], 1), axis=0).T
    p = grid.prob_within(g, xs, ns, spec)
    lookup = {(a, b): v for a, b, v in zip(xs, ns, p, strict=True)}
    probs = np.array([lookup[(a, b)] for a, b in zip(x, n, strict=True)])
    flags = np.zeros(len(x), bool)
    if outliers:
        lx, ln, pv = grid.loo_pvalues(x, n, prior=prior, g=g)
        flagged = {(a, b) for a, b, v in zip(lx, ln, pv, strict=True) if v < grid.OUTLIER_LEVEL}
        flags = np.array([(a, b) in flagged for a, b in zip(x, n, strict=True)])
    return probs, flags


PRIORS = {"uniform": (1.0, 1.0), "jeffreys": (0.5, 0.5)}


def run(scenario: Scenario, histories: int, seed: int, priors: dict | None = None,
        outliers: bool = True) -> dict:
    """Simulate ``histories`` histories of the scenario and decide each lot under each prior.

    ``priors``: name -> (a, b) for a Beta prior or a HistoryPrior. Returns name ->
    {"decisions": (H, L) array, "flagged": (H, L) bool or None}, plus "x" (H, L)."""
    priors = priors or {**PRIORS, "history": HistoryPrior()}
    rng = np.random.default_rng(seed)
    rates = np.asarray(scenario.rates)
    n = np.asarray(scenario.sizes, float)
    x = rng.binomial(n.astype(int)[None, :], rates[None, :],
                     size=(histories, len(rates))).astype(float)
    out: dict = {"x": x}
    for name, pr in priors.items():
        dec = np.empty(x.shape, dtype=object)
        flags = None if isinstance(pr, tuple) else np.zeros(x.shape, bool)
        cache: dict = {}
        for h in range(histories):
            if isinstance(pr, tuple):
                probs = _probs_conjugate(x[h], n, scenario.spec, *pr)
            else:
                order = np.lexsort((n, x[h]))
                key = tuple(zip(x[h][order], n[order], strict=True))
                if key not in cache:
                    cache[key] = _probs_history(x[h][order], n[order], scenario.spec, pr,
                                                outliers and len(rates) > 1)
                p_sorted, f_sorted = cache[key]
                probs = np.empty(len(order))
                probs[order] = p_sorted
                flags[h, order] = f_sorted
            dec[h] = decide(probs, x[h], scenario.confidence)
        out[name] = {"decisions": dec, "flagged": flags}
    return out


def risks(scenario: Scenario, result: dict, name: str) -> dict:
    """Consumer's and producer's risk (with binomial Monte Carlo standard errors over
    histories) and flag rates for one prior."""
    dec = result[name]["decisions"]
    bad = np.asarray(scenario.rates) > scenario.spec
    out = {}
    for label, cols, what in (("consumer", bad, "accept"), ("producer", ~bad, "reject")):
        if cols.any():
            per_history = (dec[:, cols] == what).mean(axis=1)
            h = len(per_history)
            out[label] = (float(per_history.mean()),
                          float(per_history.std(ddof=1) / np.sqrt(h)) if h > 1 else 0.0)
    flags = result[name]["flagged"]
    if flags is not None and len(scenario.rates) > 1:
        if bad.any() and (~bad).any():
            out["flag_bad"] = float(flags[:, bad].mean())
            out["flag_good"] = float(flags[:, ~bad].mean())
        else:
            out["flag_any"] = float(flags.mean())
    return out
