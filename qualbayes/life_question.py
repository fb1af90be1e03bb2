"""Weibull life: from validated units to reliability answers per group (the API behind
``life``).

For every group: posterior of shape and scale (NUTS, gated), the derived B1 and B10 lives,
mean life and R(mission); the one-sided lower bound of R(mission) at confidence C;
P(R(mission) >= target) with its Monte Carlo error; and the decision ``meets`` /
``does-not-meet`` / ``undecided`` by the rule of :func:`qualbayes.questions.decide`, or
``not-converged`` when the gate fails. A call within 3 MCSE of C is sampled again with more
draws and, if still close, is ``undecided`` (:mod:`qualbayes.life_precision`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from qualbayes import cross_check
from qualbayes.data.life import LifeTable, frame_arrays
from qualbayes.errors import InputError, OptionError
from qualbayes.life_precision import Precision, settle
from qualbayes.models.weibull import (
    GroupStats,
    LifePrior,
    Mode,
    group_stats,
    posterior_mode,
    reported_mode,
)
from qualbayes.questions import DOES_NOT_MEET, MEETS, UNDECIDED, decide

MODEL = "weibull"  # the code of the model; evidence.life_words states it in symbols
PRIOR_SHARE_NOTE = 0.5  # posterior sd of log shape above this share of the prior sd: say so


@dataclass
class LifeAssessment:
    """Everything the life question produced, as numbers: ``groups`` holds one JSON-ready
    dict each (counts, posterior summaries, probabilities with their MCSE, the decision
    code, the gate, flags such as ``close_call``). No sentence and no plot curve: the
    evidence layer (:mod:`qualbayes.evidence.life_words`) words them and draws the curves
    from the draws."""

    groups: list[dict]
    mission: float
    target: float
    confidence: float
    prior: LifePrior
    units: str
    seed: int
    model: str = MODEL
    draws: dict[str, dict[str, np.ndarray]] = field(default_factory=dict)
    #: the other distributions fitted (``compare_models``), by family
    alternatives: tuple[str, ...] = ()
    alternatives_prior: object = None  # the lognormal prior they used (LognormalPrior)
    comparisons: list[dict] = field(default_factory=list)  # see qualbayes.life_compare

    @property
    def converged(self) -> bool:
        return all(g["diagnostics"]["passed"] for g in self.groups)


def check_question(mission: float, target: float, confidence: float) -> None:
    if not (isinstance(mission, int | float) and math.isfinite(mission) and mission > 0):
        raise OptionError(f"--mission {mission!r}: the mission time must be a positive number")
    if not 0 < target < 1:
        raise OptionError(f"--target {target!r}: the reliability target must lie strictly "
                          "between 0 and 1")
    if not 0 < confidence < 1:
        raise OptionError(f"--confidence {confidence!r}: must lie strictly between 0 and 1")


def group_data(table: LifeTable) -> dict[str, tuple[dict, GroupStats]]:
    """Each group's arrays and sufficient statistics, in file order."""
    out = {}
    for g in table.groups:
        arrays = frame_arrays(table.frame[table.frame["group"] == g])
        out[g] = (arrays, group_stats(**arrays))
    return out


def check_prior_use(table: LifeTable, stats: dict[str, GroupStats], prior: LifePrior) -> None:
    """Refuse the questions the data and prior cannot answer (nothing is fitted)."""
    for g, st in stats.items():
        label = "" if len(stats) == 1 else f"group {g!r}: "
        if st.failures == 0 and not prior.shape_given:
            raise OptionError(
                f"{label}no failures among {st.units} units. With zero failures the data say "
                "nothing about the Weibull shape, so the answer would rest on the default "
                "shape prior alone; state the shape from engineering knowledge of the failure "
                "mode, e.g. --shape-prior 1.5,4 (the range holding the shape with 95% "
                "probability)")
        if not st.anchored and prior.scale_kind in ("hazard", "flat"):
            raise InputError(
                f"{label}every unit is left-censored (found failed at its first inspection); "
                "the data bound the life only from above. Give a prior on a B-life or on "
                "R(t) (--blife-prior or --reliability-prior)", file=table.file,
                sheet=table.sheet)


def assess_life(table: LifeTable, mission: float, target: float, confidence: float = 0.9,
                prior: LifePrior | None = None, seed: int = 20261202,
                settings=None, *, compare: list[str] | None = None,
                compare_models: bool = False, check_fit: bool = False,
                new_units: int | None = None) -> LifeAssessment:
    """Answer "is P(R(mission) >= target | data) >= confidence?" for every group.

    Then (:mod:`qualbayes.life_extras`): comparisons of every pair of groups (or the named
    pairs ``compare=["A,B"]``), the remaining test time of undecided groups (of the running
    units, or of ``new_units`` new ones), the extrapolation warning and the data-alone answer;
    with ``compare_models`` the lognormal and exponential fits and their PSIS-LOO comparison,
    with ``check_fit`` the posterior predictive check of failures in time bins.
    """
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415 - jax path
    from qualbayes.life_compare import pairs  # noqa: PLC0415
    from qualbayes.life_extras import add_extras  # noqa: PLC0415
    from qualbayes.models.life import fit_life  # noqa: PLC0415

    prior = prior or LifePrior()
    check_question(mission, target, confidence)
    data = group_data(table)
    stats = {g: st for g, (_, st) in data.items()}
    check_prior_use(table, stats, prior)
    names = list(stats)
    pairs(names, compare)  # a bad --compare is refused before any sampling
    modes = [posterior_mode(stats[g], prior) for g in names]
    settings = settings or SamplerSettings(seed=seed)
    fit = fit_life([stats[g] for g in names], modes, prior, settings, names, mission)
    fits = {g: (fit, j) for j, g in enumerate(names)}
    if not fit.gate.passed and len(names) > 1:
        # divergences belong to the joint sampler: refit each group alone so that one
        # difficult group does not take the others' answers with it
        for j, g in enumerate(names):
            fits[g] = (fit_life([stats[g]], [modes[j]], prior, settings, [g], mission), 0)
    groups, draws = [], {}
    for j, g in enumerate(names):
        fit_g, k = fits[g]
        gate = fit_g.gate.select(g)
        chains = {v: fit_g.draws[v][:, :, k] for v in ("log_shape", "log_scale")}

        def refit(more, j=j, g=g):
            again = fit_life([stats[g]], [modes[j]], prior, more, [g], mission)
            return ({v: again.draws[v][:, :, 0] for v in ("log_shape", "log_scale")},
                    again.gate.select(g))

        chains, gate, prec = settle(chains, gate, settings=settings, refit=refit,
                                    mission=mission, target=target, confidence=confidence)
        beta = np.exp(chains["log_shape"].reshape(-1))
        eta = np.exp(chains["log_scale"].reshape(-1))
        draws[g] = {"shape": beta, "scale": eta, "chains": chains}
        check = cross_check.life_group(stats[g], prior, modes[j], chains["log_shape"],
                                       chains["log_scale"], mission, target
                                       ) if gate.passed else None  # quadrature vs NUTS
        groups.append(group_result(g, stats[g], modes[j], beta, eta,
                                   cross_check.attach(gate.to_dict(), check),
                                   mission, target, confidence, prior, precision=prec))
    result = LifeAssessment(groups, mission, target, confidence, prior, table.units,
                            settings.seed, draws=draws)
    add_extras(result, {g: data[g][0] for g in names}, compare=compare,
               compare_models=compare_models, check_fit=check_fit, new_units=new_units,
               settings=settings)
    return result


# --------------------------------------------------------------------------- summaries

def weibull_quantities(beta: np.ndarray, eta: np.ndarray, mission: float) -> dict:
    """Draws of the derived quantities."""
    return {
        "shape": beta,
        "scale": eta,
        "b1": eta * (-np.log1p(-0.01)) ** (1.0 / beta),
        "b10": eta * (-np.log1p(-0.10)) ** (1.0 / beta),
        "mean_life": eta * np.exp(special.gammaln(1.0 + 1.0 / beta)),
        "reliability_at_mission": np.exp(-np.exp(beta * (math.log(mission) - np.log(eta)))),
    }


def summarise(x: np.ndarray, confidence: float) -> dict:
    tail = (1.0 - confidence) / 2.0
    lo, med, hi = np.quantile(x, [tail, 0.5, 1.0 - tail])
    return {"median": float(med), "interval": [float(lo), float(hi)]}


def group_result(name: str, st: GroupStats, mode: Mode, beta, eta,
                 diagnostics: dict, mission: float, target: float, confidence: float,
                 prior: LifePrior, *, precision: Precision) -> dict:
    ok = diagnostics["passed"]
    q = weibull_quantities(beta, eta, mission)
    r = q["reliability_at_mission"]
    prob, mcse = precision.prob, precision.mcse
    decision = decide(prob, confidence, ok, labels=(MEETS, DOES_NOT_MEET))
    if ok and precision.close_call:
        decision = UNDECIDED  # too close to call at this Monte Carlo precision
    out = {
        "group": name,
        "units": st.units,
        "failures": st.failures,
        "exact_failures": st.counts["failure"],
        "suspensions": st.counts["suspension"],
        "interval_censored": st.counts["interval"],
        "left_censored": st.counts["left"],
        "reference_time": math.exp(st.log_tref),
        "posterior_mode": dict(zip(("shape", "scale"), reported_mode(st, prior, mode),
                                   strict=True)),
    }
    for key in ("shape", "scale", "b1", "b10", "mean_life"):
        out[key] = summarise(q[key], confidence) if ok else None
    rel = summarise(r, confidence) | {"lower_bound": float(np.quantile(r, 1.0 - confidence))}
    out["reliability_at_mission"] = rel if ok else None
    out["prob_meets_target"] = prob if ok else None
    out["prob_meets_target_mcse"] = mcse if ok else None
    out["prob_meets_target_mc_error"] = mcse if ok else None  # the earlier name, kept
    out["close_call"] = bool(ok and precision.close_call)
    out["monte_carlo"] = precision.to_dict()
    out["decision"] = decision
    out["diagnostics"] = diagnostics
    # how far the data moved the shape from its prior: posterior sd of log shape as a share
    # of the prior's (the evidence layer says so above PRIOR_SHARE_NOTE)
    out["shape_prior_share"] = (float(np.std(np.log(beta))) / prior.shape[1]
                                if ok and prior.shape is not None else None)
    return out
