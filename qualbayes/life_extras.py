"""The questions after "does it meet?": group comparisons, remaining test time, other
distributions (PSIS-LOO), checks of fit, extrapolation and the data-alone answer. Each adds
numbers to the group results of :func:`qualbayes.life_question.assess_life` (the words are
the evidence layer's: :mod:`qualbayes.evidence.life_words`); the costly ones
(``compare_models``, ``check_fit``) run only when asked.
"""

from __future__ import annotations

import numpy as np

from qualbayes.inference.mcse import mcse_mean
from qualbayes.life_checks import check_fit as fit_check
from qualbayes.life_checks import compare, extrapolation, loo
from qualbayes.life_compare import compare_groups, pairs
from qualbayes.life_models import FAMILIES, fit_alternatives, max_likelihood, reliability
from qualbayes.life_remaining import remaining_time
from qualbayes.models.censored import observations
from qualbayes.models.lognormal import LognormalPrior, sigma_from_shape_range
from qualbayes.questions import DOES_NOT_MEET, MEETS, UNDECIDED, decide

PRIOR_SHARE = 0.5  # as life_question.PRIOR_SHARE_NOTE: the prior dominates the shape


def add_extras(result, arrays: dict[str, dict], *, compare: list[str] | None = None,
               compare_models: bool = False, check_fit: bool = False,
               new_units: int | None = None, settings=None) -> None:
    """Fill ``result.comparisons`` and each group's ``remaining_test``, ``extrapolation``,
    ``max_likelihood``, ``models`` and ``fit_check`` (in place)."""
    names = [g["group"] for g in result.groups]
    usable = [g["group"] for g in result.groups if g["diagnostics"]["passed"]]
    chains = {g: d["chains"] for g, d in result.draws.items()}
    wanted = pairs(names, compare)
    result.comparisons = compare_groups(chains, usable, wanted, result.mission,
                                        result.confidence)
    obs = {g: observations(**arrays[g]) for g in names}
    alt = {}
    if compare_models and usable:
        prior = (sigma_from_shape_range(*result.prior.shape_range)
                 if result.prior.shape_given and result.prior.shape_range else LognormalPrior())
        alt = fit_alternatives([obs[g] for g in usable], usable, result.mission, settings,
                               prior)
        result.alternatives = tuple(alt)
        result.alternatives_prior = prior
    rng = np.random.default_rng(result.seed)
    for g in result.groups:
        name = g["group"]
        ok = g["diagnostics"]["passed"]
        for key in ("remaining_test", "max_likelihood", "models", "fit_check"):
            g.setdefault(key, None)
        g.setdefault("data_alone", False)
        g["extrapolation"] = extrapolation(obs[name], result.mission)
        if not ok:
            continue
        ch = chains[name]
        if g["decision"] == UNDECIDED:
            rt = remaining_time(ch, arrays[name]["suspensions"], result.mission,
                                result.target, result.confidence, new_units=new_units,
                                longest=obs[name].longest)
            g["remaining_test"] = rt
        share = _prior_share(ch, result.prior)
        dominated = obs[name].failures == 0 or (share is not None and share > PRIOR_SHARE)
        if dominated or g["extrapolation"]["beyond"]:
            g["max_likelihood"] = max_likelihood(obs[name], arrays[name], result.mission)
        g["data_alone"] = bool(dominated)  # the data-alone answer is worth stating
        per_family = {"weibull": ch} | {f: alt[f][name][0] for f in alt if name in alt[f]}
        if alt:
            g["models"] = _models(g, per_family, {f: alt[f][name][1] for f in alt},
                                  obs[name], result)
        if g["extrapolation"]["beyond"]:
            g["extrapolation"] = extrapolation(obs[name], result.mission,
                                               extrapolation_values(g))
        if check_fit:
            converged = {f: d for f, d in per_family.items()
                         if f == "weibull" or alt[f][name][1]["passed"]}
            g["fit_check"] = [c for f, d in converged.items()
                              if (c := fit_check(f, d, obs[name], result.confidence, rng))]


def _prior_share(ch: dict, prior) -> float | None:
    if prior.shape is None:
        return None
    return float(np.std(ch["log_shape"])) / prior.shape[1]


def extrapolation_values(g: dict) -> dict[str, float | None]:
    """R(mission) under each distribution: the Bayesian medians when they were fitted, else
    the maximum-likelihood fits (the basis is ``"posterior"`` when ``g["models"]``)."""
    if g.get("models"):
        return {m["family"]: (m["reliability_at_mission"]["median"] if m["passed"] else None)
                for m in g["models"]["by_model"]}
    ml = g.get("max_likelihood") or {}
    return {f: v["reliability_at_mission"] for f, v in ml.items() if v.get("fitted")}


def _models(g: dict, per_family: dict, gates: dict, obs, result) -> dict:
    """R(mission), P(R >= target) and the decision under each distribution, with the LOO
    comparison."""
    rows, loos = [], {}
    gates = {"weibull": g["diagnostics"]} | gates
    for f in FAMILIES:
        d = per_family.get(f)
        if d is None:
            continue
        passed = bool(gates[f]["passed"])
        r = reliability(f, d, result.mission)
        good = (r >= result.target).astype(float)
        p, mc = float(good.mean()), float(mcse_mean(good))
        tail = (1.0 - result.confidence) / 2.0
        lo, med, hi = np.quantile(r.reshape(-1), [tail, 0.5, 1.0 - tail])
        rows.append({"family": f, "passed": passed,  # no numbers from a failed gate
                     "reliability_at_mission": {"median": float(med),
                                                "interval": [float(lo), float(hi)]}
                     if passed else None,
                     "prob_meets_target": p if passed else None,
                     "prob_meets_target_mc_error": mc if passed else None,
                     "decision": decide(p, result.confidence, passed,
                                        labels=(MEETS, DOES_NOT_MEET))})
        if passed:
            loos[f] = loo(f, d, obs)
    comparison = compare(loos, obs.weights()) if len(loos) > 1 else None
    return {"by_model": rows, "loo": comparison}
