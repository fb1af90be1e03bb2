r"""Prior sensitivity of the Weibull life question (NUTS; imports jax: the sampler path only).

The set of :mod:`qualbayes.priors.prior_set`, made concrete for the Weibull model:

* **as run** - the analysis itself (not rerun);
* **default** - log shape ~ N(0, 1), uniform on the cumulative hazard at t_ref;
* **uniform** - flat on (log shape, log scale): the reference prior 1/(shape x scale);
* **Jeffreys** - the Jeffreys rule prior of the complete-sample Weibull, 1/scale
  (:mod:`qualbayes.models.weibull`);
* **stated** - the elicited shape and/or scale prior (on the default for the other part);
* **earlier data at weights 0, 0.5, 1** - the power prior on the prior as run (without its
  own earlier-data term);
* **sceptical** - the default prior plus one failure at the mission time.

The flat and Jeffreys priors are improper; their posterior is proper only when a group has
at least two distinct exact failure times, so for other groups those rows are marked
"not usable" and left out of the count.

Every prior is one NUTS run of all groups (the same vectorised, Laplace-preconditioned
sampler as :mod:`qualbayes.models.life`), each gated on its own: a run that fails the gate
gives ``not-converged`` for that prior and no probability. So that the runs share compiled
code, the prior's numbers (means and sds of the shape and scale parts, the weights of the
earlier-data and sceptical terms) are arguments of one model function, not constants: runs
of the same prior structure (which parts are flat, the scale kind and its q or T) compile
once, and jax's persistent compilation cache (:func:`qualbayes.inference.run.configure_process`)
serves
the rest.
"""

from __future__ import annotations

import math
from dataclasses import replace
from functools import partial

import jax.numpy as jnp  # noqa: E402
import numpy as np
import numpyro  # noqa: E402

from qualbayes import progress
from qualbayes.inference.run import SamplerSettings, jax_scope, run_nuts
from qualbayes.models.weibull import (
    FLAT,
    LifePrior,
    data_arrays,
    group_stats,
    log_likelihood,
    log_prior,
    posterior_mode,
)
from qualbayes.priors.predictive import improper, life_expectations
from qualbayes.priors.prior_set import (
    NOT_USABLE,
    WEIGHTS,
    PriorRow,
    item_summary,
    section,
)
from qualbayes.questions import DOES_NOT_MEET, MEETS, decide

JEFFREYS = LifePrior(shape=None, scale_kind="jeffreys")
PREDICTIVE_DRAWS = 20_000


# --------------------------------------------------------------------------- the density

KINDS = ("hazard", "flat", "jeffreys", "blife", "reliability")


def structure_of(priors: list[LifePrior]) -> tuple[tuple[str, float], ...]:
    """What must be compiled in for a set of priors: each scale kind with its q (blife) or T
    (reliability). Everything else is an argument."""
    kinds = {("hazard", 0.0), ("flat", 0.0), ("jeffreys", 0.0)}
    for p in priors:
        if p.scale_kind in ("blife", "reliability"):
            kinds.add((p.scale_kind, float(p.scale_args[0])))
    return tuple(sorted(kinds))


def hyper_of(prior: LifePrior, structure) -> dict[str, np.ndarray]:
    """The prior's numbers, passed to the model as arguments: whether the shape part is
    normal (1) or flat (0), its mean and sd, the one-hot choice of the scale part, and its
    mean and sd."""
    m, s = prior.shape if prior.shape is not None else (0.0, 1.0)
    fixed = float(prior.scale_args[0]) if prior.scale_kind in ("blife", "reliability") else 0.0
    onehot = np.array([1.0 if (k, f) == (prior.scale_kind, fixed) else 0.0
                       for k, f in structure])
    if onehot.sum() != 1.0:
        raise ValueError(f"scale prior {prior.scale_kind!r} is not in the compiled structure")
    _, sm, ss = prior.scale_args
    return {"shape_on": np.float64(prior.shape is not None), "shape_m": np.float64(m),
            "shape_s": np.float64(s), "scale_w": onehot, "scale_m": np.float64(sm),
            "scale_s": np.float64(ss if ss > 0 else 1.0)}


def log_density(b, u, data, log_tref, hyper, extra, structure, xp=np):
    r"""log prior + log likelihood + :math:`\sum_k w_k \log L(\text{extra data}_k)` (numpy or
    jax). The prior is :func:`qualbayes.models.weibull.log_prior` itself: its shape part (a
    Jeffreys scale part adds nothing) and each scale kind of ``structure``, mixed by the
    one-hot weights of ``hyper``, so one compiled function serves every prior of a set."""
    shape_only = LifePrior(shape=(hyper["shape_m"], hyper["shape_s"]), scale_kind="jeffreys")
    lp = hyper["shape_on"] * log_prior(b, u, shape_only, log_tref, xp)
    for k, (kind, fixed) in enumerate(structure):
        scale_only = LifePrior(shape=None, scale_kind=kind,
                               scale_args=(fixed, hyper["scale_m"], hyper["scale_s"]))
        lp = lp + hyper["scale_w"][k] * log_prior(b, u, scale_only, log_tref, xp)
    lp = lp + log_likelihood(b, u, data, xp)
    for k in range(len(extra["w"])):
        u0 = u + xp.exp(b) * (extra["log_tref"][k] - log_tref)
        lp = lp + extra["w"][k] * log_likelihood(b, u0, extra["data"][k], xp)
    return lp


def sensitivity_model(data, log_tref, center, chol, hyper, extra, *, structure):
    """The life model of :mod:`qualbayes.models.life` with the prior's numbers as
    arguments: (b, u) = mode + L z per group, target :func:`log_density`."""
    from qualbayes.models.life import whitened_sites  # noqa: PLC0415

    b, u = whitened_sites(log_tref, center, chol)
    numpyro.factor("log_posterior",
                   jnp.sum(log_density(b, u, data, log_tref, hyper, extra, structure, jnp)))


_MODELS: dict = {}


def _model(structure):
    """One model object per structure, so repeated runs present the same function."""
    if structure not in _MODELS:
        _MODELS[structure] = partial(sensitivity_model, structure=structure)
    return _MODELS[structure]


# --------------------------------------------------------------------------- the set

class LifeRow:
    """A prior of the set: its record row, the LifePrior (without data terms) and the
    weights of the earlier-data and sceptical terms. ``as_run`` marks the analysis itself,
    whose answers are taken from the analysis rather than rerun."""

    def __init__(self, row: PriorRow, prior: LifePrior, w_earlier: float = 0.0,
                 w_sceptic: float = 0.0, needs_failures: bool = False, as_run: bool = False):
        self.row, self.prior = row, prior
        self.w_earlier, self.w_sceptic = w_earlier, w_sceptic
        self.needs_failures, self.as_run = needs_failures, as_run

    def signature(self):
        p = self.prior
        return (p.shape, p.scale_kind, p.scale_args, self.w_earlier, self.w_sceptic)


def _row(key, label, prior_text, why, phrase, **extra) -> PriorRow:
    return PriorRow(key, label, "weibull", {}, prior_text, why, phrase, extra)


def life_rows(as_run: LifePrior, stated: LifePrior | None, earlier, units: str = ""
              ) -> list[LifeRow]:
    """The set for the life question. ``as_run``: the analysis prior (with its earlier-data
    term, if any, which must come from ``earlier``); ``stated``: the elicited prior (None if
    none); ``earlier``: a :class:`~qualbayes.priors.power_prior.EarlierLife` or None. The
    power-prior rows use the prior as run without its earlier-data term as the initial
    prior."""
    base = replace(as_run, earlier=())
    if as_run.earlier and (earlier is None or as_run.earlier[0][1] is not earlier.stats):
        raise ValueError("the prior as run borrows from data other than ``earlier``")
    w_run = float(as_run.earlier[0][0]) if as_run.earlier else 0.0
    rows = [LifeRow(_row("as-run", "as run", "; ".join(as_run.describe(units)),
                         "The prior the analysis used.", "the prior as run"), base,
                    w_earlier=w_run, as_run=True),
            LifeRow(_row("default", "default", "; ".join(LifePrior().describe(units)),
                         "The tool's default (weakly informative).", "the default prior"),
                    LifePrior()),
            LifeRow(_row("uniform", "uniform", "flat on log shape and log scale (the reference "
                         "prior 1/(shape x scale); improper)", "Uniform on the log scales.",
                         "the uniform prior"), FLAT, needs_failures=True),
            LifeRow(_row("jeffreys", "Jeffreys", "density proportional to 1/scale (Jeffreys "
                         "rule prior of the complete-sample Weibull; improper)",
                         "Jeffreys rule prior.", "the Jeffreys prior"), JEFFREYS,
                    needs_failures=True)]
    if stated is not None:
        rows.append(LifeRow(_row("stated", "stated", "; ".join(stated.describe(units)),
                                 "Elicited from your statements.", "the stated prior"),
                            replace(stated, earlier=())))
    if earlier is not None:
        for w in WEIGHTS:
            rows.append(LifeRow(_row(
                f"earlier-{w:g}", f"earlier data, weight {w:g}",
                "; ".join(base.describe(units)) + f"; times the likelihood of the earlier data "
                f"({earlier.words()}) to the power {w:g}",
                f"Power prior on the prior as run, weight {w:g}.",
                f"the earlier data at weight {w:g}"), base, w_earlier=w))
    rows.append(LifeRow(_row("sceptical", "sceptical", "; ".join(LifePrior().describe(units))
                             + "; plus one failure at the mission time",
                             "Deliberately sceptical: the default prior plus one failure at "
                             "the mission time.", "the sceptical prior"), LifePrior(),
                        w_sceptic=1.0))
    return _merge(rows)


def _merge(rows: list[LifeRow]) -> list[LifeRow]:
    out: list[LifeRow] = []
    for r in rows:
        for k, kept in enumerate(out):
            if kept.signature() == r.signature():
                row = kept.row
                out[k] = LifeRow(PriorRow(row.key, f"{row.label} = {r.row.label}", row.family,
                                          row.params, row.prior, f"{row.why} {r.row.why}",
                                          row.phrase, row.extra),
                                 kept.prior, kept.w_earlier, kept.w_sceptic,
                                 kept.needs_failures, kept.as_run)
                break
        else:
            out.append(r)
    return out


def usable(distinct_failures: int, row: LifeRow) -> bool:
    """The improper flat and Jeffreys priors need two distinct exact failure times."""
    return not row.needs_failures or distinct_failures >= 2


# --------------------------------------------------------------------------- running

def _extra(earlier, mission: float) -> dict:
    """The two weighted data terms: the earlier data (or a placeholder) and the sceptic's
    one failure at the mission time."""
    sceptic = group_stats([mission], [])
    first = earlier.stats if earlier is not None else sceptic
    return {"stats": (first, sceptic),
            "data": tuple({k: jnp.asarray(v) for k, v in data_arrays(st).items()}
                          for st in (first, sceptic)),
            "log_tref": jnp.asarray([first.log_tref, sceptic.log_tref])}


def numpy_prior(row: LifeRow, extra: dict) -> LifePrior:
    """The row's prior with its weighted data terms as one LifePrior (for the mode, and for a
    separate run of :func:`qualbayes.life_question.assess_life` with that prior)."""
    terms = []
    for w, st, label in ((row.w_earlier, extra["stats"][0], "earlier data"),
                         (row.w_sceptic, extra["stats"][1], "one failure at the mission time")):
        if w > 0:
            terms.append((w, st, label))
    return replace(row.prior, earlier=tuple(terms))


def run_row(row: LifeRow, stats: list, names: list[str], mission: float, extra: dict,
            settings: SamplerSettings, structure) -> dict:
    """One NUTS run of the given groups under one prior: name -> (R(mission) draws, gate)."""
    from qualbayes.models.life import gate_dims, sampler_inputs  # noqa: PLC0415

    prior_np = numpy_prior(row, extra)
    modes = [posterior_mode(st, prior_np) for st in stats]
    base_args, init = sampler_inputs(stats, modes, settings)
    log_t = float(np.log(mission))
    extra_args = {"w": jnp.asarray([row.w_earlier, row.w_sceptic]), "data": extra["data"],
                  "log_tref": extra["log_tref"]}
    hyper = {k: jnp.asarray(v) for k, v in hyper_of(row.prior, structure).items()}
    args = (*base_args, hyper, extra_args)
    fit = run_nuts(_model(structure), args, settings, init_params=init, **gate_dims(names))
    out = {}
    for j, name in enumerate(names):
        b = fit.draws["log_shape"][:, :, j].reshape(-1)
        log_eta = fit.draws["log_scale"][:, :, j].reshape(-1)
        out[name] = (np.exp(-np.exp(np.exp(b) * (log_t - log_eta))), fit.gate.select(name))
    return out


def _gate_summary(gate) -> dict:
    d = gate.to_dict()
    return {k: d[k] for k in ("passed", "max_rhat", "min_ess_bulk", "min_ess_tail",
                              "divergences", "attempts", "reasons")}


@jax_scope()
def life_sensitivity(result, data: dict, rows: list[LifeRow], earlier=None,
                     settings: SamplerSettings | None = None) -> dict:
    """Every group under every prior of ``rows``. ``result`` is the
    :class:`~qualbayes.life_question.LifeAssessment` of the analysis (the as-run row);
    ``data`` maps each group to (arrays, GroupStats) as
    :func:`qualbayes.life_question.group_data` gives them."""
    stats = {g: st for g, (_, st) in data.items()}
    distinct = {g: int(np.unique(arrays["failures"]).size) for g, (arrays, _) in data.items()}
    settings = settings or SamplerSettings(seed=result.seed)
    mission, target, conf = result.mission, result.target, result.confidence
    names = [g["group"] for g in result.groups]
    extra = _extra(earlier, mission)
    structure = structure_of([r.prior for r in rows])
    per_row: list[dict] = []
    for row in progress.steps(rows, "prior sensitivity: the question under each prior"):
        if row.as_run:
            per_row.append({g["group"]: {"prob": g["prob_meets_target"],
                                         "decision": g["decision"]} for g in result.groups})
            continue
        ok = [n for n in names if usable(distinct[n], row)]
        res = {n: {"prob": None, "decision": NOT_USABLE,
                   "reason": "improper prior: needs two distinct exact failure times"}
               for n in names if n not in ok}
        if ok:
            fitted = run_row(row, [stats[n] for n in ok], ok, mission, extra, settings,
                             structure)
            if len(ok) > 1 and not all(g.passed for _, g in fitted.values()):
                # as in the analysis: a failed joint fit is redone group by group
                fitted = {n: run_row(row, [stats[n]], [n], mission, extra, settings,
                                     structure)[n] for n in ok}
            for n, (rel, gate) in fitted.items():
                prob = float(np.mean(rel >= target))
                res[n] = {"prob": prob if gate.passed else None,
                          "decision": decide(prob, conf, gate.passed, (MEETS, DOES_NOT_MEET)),
                          "gate": _gate_summary(gate)}
                if not gate.passed:
                    res[n]["reason"] = ("convergence gate failed, no answer under this prior: "
                                        + "; ".join(gate.reasons()))
        per_row.append(res)
    items = []
    for n in names:
        results = [{"prior": row.row.key, **per_row[k][n]} for k, row in enumerate(rows)]
        text, depends = item_summary(results, [r.row for r in rows])
        items.append({"name": n, "results": results, "summary": text, "depends": depends})
    sizes = [int(stats[n].units) for n in names]
    predictive = [life_predictive(r, mission, int(np.median(sizes)), settings.seed)
                  for r in rows]
    q = f"P(R({mission:g}) >= {target:g} | data) >= {conf:g}?"
    out = section(q, conf, [r.row for r in rows], items, "group", predictive)
    out["sampler"] = {"num_chains": settings.num_chains, "num_warmup": settings.num_warmup,
                          "num_samples": settings.num_samples, "seed": settings.seed}
    return out


def life_predictive(row: LifeRow, mission: float, units: int, seed: int) -> dict:
    """Prior predictive of a row, where the prior is proper and simulable."""
    p = row.prior
    if row.w_earlier > 0 or row.w_sceptic > 0:
        return {"range": None, "words": "built on data (earlier data or the sceptic's "
                                        "failure): what it expects is those data"}
    if p.shape is None:
        return improper("flat on log shape")
    if p.scale_kind not in ("blife", "reliability"):
        return improper("the default scale prior is uniform on the cumulative hazard")
    rng = np.random.default_rng(seed)
    beta = np.exp(rng.normal(p.shape[0], p.shape[1], PREDICTIVE_DRAWS))
    fixed, m, sd = p.scale_args
    z = rng.normal(m, sd, PREDICTIVE_DRAWS)
    if p.scale_kind == "blife":  # z = log B_q
        log_eta = z - math.log(-math.log1p(-fixed)) / beta
    else:  # z = log H(T), H(T) = (T / eta)^beta
        log_eta = math.log(fixed) - z / beta
    return life_expectations(beta, np.exp(log_eta), mission, units, seed=seed)
