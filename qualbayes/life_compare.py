r"""Is group A better than group B? Posterior comparisons of two groups' Weibull fits.

The groups are fitted with independent priors and disjoint data, so their joint posterior is
the product of the two: draw s of A paired with draw s of B is a draw of the pair. For each
pair (a, b):

* :math:`P(R_a(T) > R_b(T) \mid \text{data})` with its Monte Carlo standard error
  (:mod:`qualbayes.inference.mcse`), and the statement it supports at confidence C (within 3 MCSE of
  C or 1 - C: too close to call at this Monte Carlo precision), as the code ``call``:
  ``accept`` (A better), ``reject`` (B better), ``undecided``, ``too-close`` or
  ``not-converged`` (the evidence layer words it);
* the posterior of the ratio :math:`B10_a / B10_b` (median, central C interval,
  :math:`P(\text{ratio} > 1)`);
* the posterior of the shape difference :math:`\beta_a - \beta_b` (median, central C
  interval): a change of failure mode shows as a shape difference away from 0.
"""

from __future__ import annotations

import math
from itertools import combinations

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.inference.mcse import decide_within_error, mcse_mean

LN_R10 = math.log(-math.log1p(-0.10))


def pairs(names: list[str], requested: list[str] | None) -> list[tuple[str, str]]:
    """Every pair of groups, or the named pairs ``["A,B", ...]`` (each group must exist)."""
    if not requested:
        return list(combinations(names, 2))
    out = []
    for text in requested:
        parts = [p.strip() for p in str(text).split(",")]
        if len(parts) != 2 or parts[0] == parts[1]:
            raise OptionError(f"--compare {text!r}: name two different groups, e.g. "
                              "--compare 'Rev C,Rev B'")
        for p in parts:
            if p not in names:
                raise OptionError(f"--compare {text!r}: there is no group {p!r} among the "
                                  f"groups analysed ({', '.join(names)})")
        out.append((parts[0], parts[1]))
    return out


def _interval(x: np.ndarray, confidence: float) -> dict:
    tail = (1.0 - confidence) / 2.0
    lo, med, hi = np.quantile(x.reshape(-1), [tail, 0.5, 1.0 - tail])
    return {"median": float(med), "interval": [float(lo), float(hi)]}


def _same_length(x: dict, y: dict) -> tuple[dict, dict]:
    """The groups are independent, so any pairing of their draws is valid; a group sampled
    with more draws (a close call, a retry) is thinned evenly, chain by chain, to the other's
    length."""
    n = min(x["log_shape"].shape[1], y["log_shape"].shape[1])

    def thin(d: dict) -> dict:
        m = d["log_shape"].shape[1]
        take = np.linspace(0, m - 1, n).round().astype(int)
        return d if m == n else {k: v[:, take] for k, v in d.items()}

    return thin(x), thin(y)


def compare_pair(a: str, b: str, chains_a: dict, chains_b: dict, mission: float,
                 confidence: float) -> dict:
    """One comparison from (chain, draw) arrays of ``log_shape`` and ``log_scale``."""
    chains_a, chains_b = _same_length(chains_a, chains_b)
    lt = math.log(mission)
    ba, bb = np.exp(chains_a["log_shape"]), np.exp(chains_b["log_shape"])
    # log R = -H; R_a > R_b  <=>  H_a < H_b  <=>  log H_a < log H_b
    lh_a = ba * (lt - chains_a["log_scale"])
    lh_b = bb * (lt - chains_b["log_scale"])
    better = (lh_a < lh_b).astype(float)
    p, mc = float(better.mean()), float(mcse_mean(better))
    log_ratio = (chains_a["log_scale"] + LN_R10 / ba) - (chains_b["log_scale"] + LN_R10 / bb)
    ratio_gt = (log_ratio > 0).astype(float)
    call = decide_within_error(p, mc, confidence)  # accept, reject, undecided, too-close
    ratio = _interval(np.exp(log_ratio), confidence)
    return {
        "a": a, "b": b,
        "prob_a_more_reliable": p, "prob_a_more_reliable_mcse": mc,
        "call": call,
        "b10_ratio": ratio | {"prob_above_1": float(ratio_gt.mean()),
                              "prob_above_1_mcse": float(mcse_mean(ratio_gt))},
        "shape_difference": _interval(ba - bb, confidence),
    }


def compare_groups(chains: dict[str, dict], usable: list[str], wanted: list[tuple[str, str]],
                   mission: float, confidence: float) -> list[dict]:
    """Comparisons of the wanted pairs; a pair with a group that has no answer (failed gate)
    gets no numbers."""
    out = []
    for a, b in wanted:
        if a not in usable or b not in usable:
            out.append({"a": a, "b": b, "prob_a_more_reliable": None,
                        "call": "not-converged"})
            continue
        out.append(compare_pair(a, b, chains[a], chains[b], mission, confidence))
    return out
