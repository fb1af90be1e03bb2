"""Accelerated life: from units tested at raised stress to answers at the use condition (the
API behind ``qualbayes at-use``).

Answers at the use stress: R(mission), B1 and B10 lives, the characteristic (Weibull) or
median (lognormal) life, the acceleration factor of every tested level against use, the
relation's coefficients (activation energy, stress exponent), P(R(mission) >= target) with
its Monte Carlo standard error, and the decision ``meets`` / ``does-not-meet`` /
``undecided`` at confidence C, ``too-close-to-call`` when P lies within 3 MCSE of a
threshold after drawing more, or ``not-converged`` when the gate fails (no numbers).
A second fit with one shape per stress level checks the common-shape assumption.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from qualbayes.data.stress_life import StressLifeTable
from qualbayes.errors import InputError, OptionError
from qualbayes.inference.mcse import decide_within_error, mcse_mean
from qualbayes.life_question import check_question
from qualbayes.models import life_stress as ls
from qualbayes.questions import DOES_NOT_MEET, MEETS, NOT_CONVERGED, UNDECIDED

TOO_CLOSE = "too-close-to-call"
MORE_DRAWS = 4  # a close call is drawn again with this many times the draws
FAR_SPANS = 1.0  # use stress beyond the tested span by more than this: strong caution
CURVE_POINTS = 50


@dataclass
class AcceleratedAssessment:
    """The answer; ``result`` is a JSON-ready dict, ``theta`` the draws (chain, draw, k)."""

    result: dict
    mission: float
    target: float
    confidence: float
    distribution: str
    terms: tuple
    prior: ls.StressPrior
    seed: int
    theta: np.ndarray | None = None
    design: ls.Design | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def converged(self) -> bool:
        return self.result["diagnostics"]["passed"]

    def use_life_draws(self) -> tuple[np.ndarray, np.ndarray]:
        """(mu_use, sigma) draws, flattened, for forecasts at the use stress."""
        mu = ls.location(self.theta, self.design, use_transform(self.terms))[..., 0]
        return mu.reshape(-1), np.exp(self.theta[..., 0]).reshape(-1)


def use_transform(terms) -> np.ndarray:
    return np.array([[float(ls.transform(t.relation, t.use)) for t in terms]])


def stress_levels(stress: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct stress combinations (levels, stresses) and each unit's level index."""
    levels, index = np.unique(stress, axis=0, return_inverse=True)
    return levels, index.reshape(-1)


def check_identified(table: StressLifeTable, terms, kind: np.ndarray) -> None:
    """Refuse what the data and priors cannot answer, before any fitting: no failures at
    all; a flat-prior coefficient that the failures (exact or interval) cannot show."""
    failed = np.isin(kind, ("failure", "interval"))
    if not np.isin(kind, ("failure", "interval", "left")).any():
        raise InputError("no failures at any stress level: an accelerated test without "
                         "failures says nothing about the life-stress relation; test longer "
                         "or at higher stress", file=table.life.file, sheet=table.life.sheet)
    flat = [j for j, t in enumerate(terms) if t.prior is None]
    if flat:
        s = np.column_stack([ls.transform(t.relation, table.stress[:, j])
                             for j, t in enumerate(terms)])[failed]
        x = np.column_stack([np.ones(s.shape[0]), s - s.mean(axis=0)])
        if np.linalg.matrix_rank(x, tol=1e-9 * max(1.0, np.abs(x).max())) < x.shape[1]:
            names = ", ".join(repr(terms[j].column) for j in flat)
            raise OptionError(
                f"the failures do not span enough stress levels to estimate the effect of "
                f"{names}; with a flat prior on the coefficient the data must show it. State "
                "its range from engineering knowledge (--activation-energy LO,HI in eV, "
                "--exponent LO,HI, or --coefficient LO,HI) or test at more levels")


def assess_at_use(table: StressLifeTable, terms, mission: float, target: float,
                  confidence: float = 0.9, distribution: str = "weibull",
                  prior: ls.StressPrior | None = None, seed: int = 20261202,
                  settings=None, check_shape: bool = True) -> AcceleratedAssessment:
    """Answer "is P(R_use(mission) >= target | data) >= confidence?"."""
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415 - jax path
    from qualbayes.models.accelerated import fit_accelerated  # noqa: PLC0415

    check_question(mission, target, confidence)
    terms = tuple(terms)
    prior = prior or ls.StressPrior()
    settings = settings or SamplerSettings(seed=seed)
    design, laplace = prepare(table, terms, distribution, prior)
    gate_on = gate_quantities(design, terms, mission)
    s_use = use_transform(terms)
    f = table.life.frame
    kind = f["kind"].to_numpy()
    failed = np.isin(kind, ("failure", "interval", "left"))
    lower, upper = f["lower"].to_numpy(float), f["upper"].to_numpy(float)
    fit = fit_accelerated(design, laplace, prior, terms, settings, gate_on)
    theta = fit.draws["theta"]
    decision_info = decide_at_use(theta, design, s_use, mission, target, confidence,
                                  distribution, fit.gate.passed)
    if decision_info["close"] and fit.gate.passed:
        more = SamplerSettings(settings.num_chains, settings.num_warmup,
                               MORE_DRAWS * settings.num_samples, settings.target_accept,
                               settings.max_tree_depth, settings.seed + 17, False)
        fit2 = fit_accelerated(design, laplace, prior, terms, more, gate_on)
        if fit2.gate.passed:
            fit, theta = fit2, fit2.draws["theta"]
            decision_info = decide_at_use(theta, design, s_use, mission, target,
                                          confidence, distribution, True)
            decision_info["drew_more"] = True
    gate = fit.gate.to_dict()
    levels, level_of = stress_levels(table.stress)
    result = {
        "units": int(len(f)), "failures": int(failed.sum()),
        "counts": {k: int((kind == k).sum()) for k in ("failure", "suspension", "interval",
                                                         "left")},
        "diagnostics": gate,
        "posterior_mode": _mode_summary(laplace.center, design, terms),
    }
    ok = gate["passed"]
    notes = []
    if ok:
        result.update(_answers(theta, design, terms, levels, level_of, kind, mission,
                               confidence, distribution))
        result.update(decision_info)
    else:
        result.update(decision=NOT_CONVERGED, prob_meets_target=None,
                      prob_meets_target_mc_error=None)
        notes.append("the sampler did not pass the convergence gate: no answer and no "
                     "decision are given (see diagnostics)")
    result["extrapolation"] = extrapolation(table.stress, terms)
    notes += result["extrapolation"]["notes"]
    if decision_info.get("decision") == TOO_CLOSE:
        notes.append(f"P(R >= target) = {decision_info['prob_meets_target']:.4f} lies within "
                     "3 Monte Carlo standard errors of a decision threshold even after "
                     "drawing more: too close to call at this Monte Carlo precision")
    if check_shape:
        from qualbayes.accelerated_check import common_shape_check  # noqa: PLC0415

        result["shape_check"] = common_shape_check(kind, lower, upper, level_of, levels,
                                                   distribution, prior, settings, confidence)
        notes += result["shape_check"]["notes"]
    result["notes"] = notes
    return AcceleratedAssessment(result, mission, target, confidence, distribution, terms,
                                 prior, settings.seed, theta if ok else None, design, notes)


def prepare(table: StressLifeTable, terms, distribution: str, prior: ls.StressPrior):
    """Refuse what cannot be answered, build the design and find the posterior mode."""
    kind = table.life.frame["kind"].to_numpy()
    check_identified(table, terms, kind)
    s = np.column_stack([ls.transform(t.relation, table.stress[:, j])
                         for j, t in enumerate(terms)])
    f = table.life.frame
    design = ls.build_design(kind, f["lower"].to_numpy(float), f["upper"].to_numpy(float), s,
                             distribution)
    laplace = ls.posterior_mode(design, prior, terms)
    if not laplace.converged:
        raise InputError("the posterior mode could not be found: the data do not pin down "
                         "the life-stress relation (too few failures, or failures at one "
                         "level only); state the coefficient's range or test at more levels",
                         file=table.life.file, sheet=table.life.sheet)
    return design, laplace


def gate_quantities(design: ls.Design, terms, time_at_use: float):
    """The gate's quantities: log sigma, gamma0, each coefficient and the standardised log
    time z = (log t - mu_use)/sigma at use (a monotone, non-saturating image of R(t))."""
    s_use = use_transform(terms)
    log_t = math.log(time_at_use)

    def gate_on(draws):
        th = draws["theta"]
        nat = ls.natural(th, design)
        mu_u = ls.location(th, design, s_use)[..., 0]
        out = {"log_sigma[model]": th[..., 0], "gamma0[model]": nat["gamma0"]}
        for j, t in enumerate(terms):
            out[f"coefficient {t.column}[model]"] = nat["coef"][..., j]
        out["z_use_mission[model]"] = (log_t - mu_u) / nat["sigma"]
        return out

    return gate_on


def posterior_at_use(table: StressLifeTable, terms, distribution: str = "weibull",
                     prior: ls.StressPrior | None = None, settings=None,
                     time_at_use: float = 1.0):
    """Draws of (mu_use, sigma) as a forecast needs them: returns (LifeDraws, gate dict)."""
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415 - jax path
    from qualbayes.models.accelerated import fit_accelerated  # noqa: PLC0415
    from qualbayes.models.forecast import LifeDraws  # noqa: PLC0415

    terms = tuple(terms)
    prior = prior or ls.StressPrior()
    design, laplace = prepare(table, terms, distribution, prior)
    fit = fit_accelerated(design, laplace, prior, terms, settings or SamplerSettings(),
                          gate_quantities(design, terms, time_at_use))
    th = fit.draws["theta"]
    mu = ls.location(th, design, use_transform(terms))[..., 0]
    return LifeDraws(mu, np.exp(th[..., 0]), distribution), fit.gate.to_dict()


def decide_at_use(theta, design, s_use, mission, target, confidence, distribution,
                  ok) -> dict:
    """P(R_use(mission) >= target) from draws (chain, draw, k), its MCSE, and the decision
    within Monte Carlo error (``too-close-to-call`` within 3 MCSE of a threshold)."""
    nat = ls.natural(theta, design)
    mu_u = ls.location(theta, design, s_use)[..., 0]
    rel = ls.reliability(mission, mu_u, nat["sigma"], distribution)
    hit = (rel >= target).astype(float)
    prob = float(hit.mean())
    mcse = float(mcse_mean(hit))
    verdict = decide_within_error(prob, mcse, confidence)
    decision = {"accept": MEETS, "reject": DOES_NOT_MEET, "undecided": UNDECIDED,
                "too-close": TOO_CLOSE}[verdict] if ok else NOT_CONVERGED
    return {"prob_meets_target": prob, "prob_meets_target_mc_error": mcse,
            "decision": decision, "close": verdict == "too-close", "drew_more": False}


def summarise(x: np.ndarray, confidence: float) -> dict:
    tail = (1.0 - confidence) / 2.0
    lo, med, hi = np.quantile(x, [tail, 0.5, 1.0 - tail])
    return {"median": float(med), "interval": [float(lo), float(hi)]}


def _answers(theta, design, terms, levels, level_of, kind, mission, confidence,
             distribution) -> dict:
    nat = ls.natural(theta, design)
    sigma = nat["sigma"].reshape(-1)
    s_use = use_transform(terms)
    mu_u = ls.location(theta, design, s_use)[..., 0].reshape(-1)
    rel = ls.reliability(mission, mu_u, sigma, distribution)
    s_levels = np.column_stack([ls.transform(t.relation, levels[:, j])
                                for j, t in enumerate(terms)])
    mu_levels = ls.location(theta, design, s_levels).reshape(-1, levels.shape[0])
    af = np.exp(mu_u[:, None] - mu_levels)
    out = {
        "shape" if distribution == "weibull" else "sigma":
            summarise(1.0 / sigma if distribution == "weibull" else sigma, confidence),
        "characteristic_life_at_use" if distribution == "weibull" else "median_life_at_use":
            summarise(np.exp(mu_u), confidence),
        "b1_at_use": summarise(ls.quantile_life(0.01, mu_u, sigma, distribution), confidence),
        "b10_at_use": summarise(ls.quantile_life(0.10, mu_u, sigma, distribution), confidence),
        "reliability_at_mission": summarise(rel, confidence) | {
            "lower_bound": float(np.quantile(rel, 1.0 - confidence))},
        "coefficients": [{"stress": t.column, "relation": t.relation,
                          "name": ls.COEF_NAMES[t.relation],
                          **summarise(nat["coef"][..., j].reshape(-1), confidence)}
                         for j, t in enumerate(terms)],
        "levels": [{"stress": [float(v) for v in levels[i]],
                    "units": int((level_of == i).sum()),
                    "failures": int(np.isin(kind[level_of == i],
                                            ("failure", "interval", "left")).sum()),
                    "acceleration_factor": summarise(af[:, i], confidence)}
                   for i in range(levels.shape[0])],
        "curve": life_curve(theta, design, terms, levels, confidence, distribution),
    }
    return out


def _mode_summary(center, design, terms) -> dict:
    nat = ls.natural(center, design)
    return {"sigma": float(nat["sigma"]), "shape": float(1.0 / nat["sigma"]),
            "log_life_at_mean_stress": float(nat["gamma0"]),
            "coefficients": {t.column: float(nat["coef"][j]) for j, t in enumerate(terms)}}


def extrapolation(stress: np.ndarray, terms) -> dict:
    """Where the use stress lies against the tested range, on each relation's own scale."""
    notes, rows = [], []
    for j, t in enumerate(terms):
        s = ls.transform(t.relation, stress[:, j])
        su = float(ls.transform(t.relation, t.use))
        lo, hi = float(s.min()), float(s.max())
        span = hi - lo
        beyond = max(lo - su, su - hi, 0.0)
        spans = beyond / span if span > 0 else math.inf if beyond > 0 else 0.0
        rows.append({"stress": t.column, "tested": [float(stress[:, j].min()),
                                                    float(stress[:, j].max())],
                     "use": t.use, "outside": beyond > 0, "spans_beyond": spans})
        if beyond > 0:
            far = spans > FAR_SPANS
            notes.append(
                f"{'EXTRAPOLATION CAUTION' if far else 'extrapolation'}: the use value of "
                f"{t.column} lies outside the tested range, {spans:.2g} tested span(s) beyond "
                f"it on the {t.relation} scale. The answer assumes the same failure mechanism "
                "and the same relation hold down to use; "
                + ("this far out, confirm the mechanism (e.g. failure analysis of the test "
                   "units) before relying on it." if far else "confirm it holds."))
    return {"terms": rows, "notes": notes}


def life_curve(theta, design, terms, levels, confidence, distribution) -> dict:
    """Posterior median and band of the B10 and the characteristic (or median) life along
    the first stress (others at their use values), from use to the highest tested level."""
    t0 = terms[0]
    lo = min(float(levels[:, 0].min()), t0.use)
    hi = max(float(levels[:, 0].max()), t0.use)
    grid = np.linspace(lo, hi, CURVE_POINTS)
    pts = np.tile(np.array([t.use for t in terms], float), (CURVE_POINTS, 1))
    pts[:, 0] = grid
    s = np.column_stack([ls.transform(t.relation, pts[:, j]) for j, t in enumerate(terms)])
    flat = theta.reshape(-1, theta.shape[-1])
    take = np.linspace(0, flat.shape[0] - 1, min(flat.shape[0], 2000)).astype(int)
    mu = ls.location(flat[take], design, s)
    sigma = np.exp(flat[take, 0])[:, None]
    tail = (1.0 - confidence) / 2.0
    out = {"stress": grid.tolist(), "band": f"central {confidence:.0%} credible band"}
    for key, q in (("b10", 0.10), ("b63", 1 - math.exp(-1.0) if distribution == "weibull"
                                    else 0.5)):
        life = ls.quantile_life(q, mu, sigma, distribution)
        lo_, med, hi_ = np.quantile(life, [tail, 0.5, 1 - tail], axis=0)
        out[key] = {"median": med.tolist(), "low": lo_.tolist(), "high": hi_.tolist()}
    return out
