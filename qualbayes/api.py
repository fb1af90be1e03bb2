"""The questions from Python: DataFrames (or files) in, result objects out.

Every argument after the data is keyword-only and checked on entry; a value that cannot be
used raises :class:`~qualbayes.errors.ParameterError` (a ``ValueError``) naming the
parameter. Bad rows in the data raise :class:`~qualbayes.errors.InputError` naming row and
column, exactly as for a file. No call changes the process: jax runs inside a float64 scope
that restores the caller's configuration (:func:`qualbayes.inference.run.jax_scope`).

>>> import pandas as pd
>>> lots = pd.DataFrame({"lot": ["L1", "L2"], "inspected": [300, 50], "defectives": [0, 3]})
>>> result = assess_lots(lots, spec="1%", confidence=0.9)
>>> result.to_frame()[["lot", "decision"]].values.tolist()
[['L1', 'accept'], ['L2', 'reject']]
>>> assess_lots(lots, spec=1.5)  # doctest: +ELLIPSIS
Traceback (most recent call last):
...
qualbayes.errors.ParameterError: spec=1.5: a defect-rate limit lies strictly between 0 and 1 ...
"""

from __future__ import annotations

import contextlib

from qualbayes import parameters as check
from qualbayes.errors import OptionError, ParameterError
from qualbayes.results import LifeResult, LotResult, PlanResult

#: the supplier scorecard, the at-use question and the returns forecast (api_more.py)
MORE = ("assess_suppliers", "assess_at_use", "forecast_returns")

HISTORY = "history"
DEFAULT_SEED = 20261202  # the command line's --seed default (SamplerSettings.seed)


# --------------------------------------------------------------------------- priors in

def _looks_like_statement(text: str) -> bool:
    return any(ch in text for ch in "<>=@")


def lot_prior(prior):
    """The lots question's prior from what a Python caller gives: "uniform", "jeffreys",
    "beta:A,B", "history", a statement ("p<0.5%@90%"), a Beta object or a BetaPrior."""
    from qualbayes.models.lot_prior import BetaPrior, parse_lot_prior  # noqa: PLC0415
    from qualbayes.priors.distributions import Beta  # noqa: PLC0415

    if isinstance(prior, BetaPrior):
        return prior
    if isinstance(prior, Beta):
        return prior.to_lot_prior()
    if isinstance(prior, str):
        if _looks_like_statement(prior):
            return _statement_prior(prior, "prior", Beta).to_lot_prior()
        try:
            return parse_lot_prior(prior)
        except OptionError:
            raise ParameterError("prior", prior, "choose 'uniform', 'jeffreys', 'beta:A,B', "
                                                 "'history', a statement such as "
                                                 "'p<0.5%@90%', or a qualbayes.priors.Beta"
                                 ) from None
    raise ParameterError("prior", prior, "expected text or a qualbayes.priors.Beta")


def _statement_prior(text: str, name: str, kind):
    from qualbayes.priors.build import from_statements  # noqa: PLC0415

    try:
        prior = from_statements(text)
    except ParameterError as err:
        raise ParameterError(name, text, err.reason) from None
    if not isinstance(prior, kind):
        raise ParameterError(name, text, f"this question needs a prior on "
                                         f"{'p' if kind.__name__ == 'Beta' else 'the rate'}, "
                                         f"not on {prior.variable}")
    return prior


def _rate_prior(prior, name: str):
    """A plan's prior on p (= 1 - R): None, a Beta, a BetaMixture, a RatePrior, text."""
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415
    from qualbayes.priors.distributions import Beta, BetaMixture  # noqa: PLC0415

    if prior is None or isinstance(prior, RatePrior):
        return prior
    if isinstance(prior, str):
        prior = _statement_prior(prior, name, Beta)
    if isinstance(prior, Beta | BetaMixture):
        return prior.to_rate_prior()
    raise ParameterError(name, prior, "expected a qualbayes.priors.Beta, a BetaMixture or a "
                                      "statement such as 'R>0.95@90%'")


def _gamma_prior(prior, name: str):
    from qualbayes.planning.mtbf import GammaPrior  # noqa: PLC0415
    from qualbayes.priors.distributions import Gamma  # noqa: PLC0415

    if prior is None or isinstance(prior, GammaPrior):
        return prior
    if isinstance(prior, str):
        prior = _statement_prior(prior, name, Gamma)
    if isinstance(prior, Gamma):
        return prior.to_gamma_prior()
    raise ParameterError(name, prior, "expected a qualbayes.priors.Gamma or a statement such "
                                      "as 'mtbf>1000@90%'")


def _shape(shape, name: str = "shape", *, plan: bool):
    """A Weibull shape: a number (plans only), (low, high) as a central 95% range, or a
    LogNormal on the shape."""
    from qualbayes.priors.distributions import LogNormal  # noqa: PLC0415

    if isinstance(shape, tuple | list) and len(shape) == 2:
        shape = LogNormal.from_range(shape[0], shape[1], variable="shape")
    if isinstance(shape, LogNormal):
        return shape.to_shape_prior() if plan else shape
    if plan:
        return check.positive(shape, name)
    raise ParameterError(name, shape, "give the shape's range (low, high) holding it with 95% "
                                      "probability, or a qualbayes.priors.LogNormal")


# --------------------------------------------------------------------------- lots

@contextlib.contextmanager
def _sampling(active: bool):
    """jax in a float64 scope, and every fit recorded, when ``active``."""
    if not active:
        yield []
        return
    from qualbayes.inference.run import jax_scope, recording_fits  # noqa: PLC0415

    with jax_scope(), recording_fits() as fits:
        yield fits


def assess_lots(data, *, spec, confidence=0.95, prior="uniform", columns=None,
                sheet: str | None = None, seed: int | None = None, settings=None,
                **options) -> LotResult:
    """Is P(p <= spec | data) >= confidence, lot by lot?

    ``data``: a DataFrame with columns lot, inspected, defectives (and optionally lot_size,
    part, supplier, date), or named through ``columns={"inspected": "Qty"}``; a LotTable; or
    the path of an xlsx/csv export. ``spec``: 0.01, "1%" or "10000ppm". ``prior``: see
    :func:`lot_prior`; ``"history"`` fits the hierarchical model per part with NUTS
    (``seed`` and ``settings`` control the sampler; ``seed`` wins over ``settings.seed``).
    Other keywords go to :func:`qualbayes.lot_question.assess_lots`: ``decision_basis``
    ("lot": the lot's own fraction defective when its size is given, the default; "process":
    the rate p), ``group_by`` (columns whose values make one history, default ("part",)),
    ``lot_spread`` (scale of the lot-to-lot spread prior, default 0.5)."""
    from qualbayes import lot_question  # noqa: PLC0415
    from qualbayes.data.frames import lots_table, source_sha256  # noqa: PLC0415

    spec_value = check.rate(spec, "spec")
    conf = check.confidence(confidence)
    chosen = lot_prior(prior)
    seed_value = None if seed is None else check.seed(seed)
    history = chosen == HISTORY
    # No settings given: the question's own sampler defaults, exactly as the command runs
    # (the history fit's target acceptance is its own, not SamplerSettings' default).
    run_settings = (check.settings_with_seed(settings, seed_value)
                    if history and settings is not None else None)
    run_seed = (run_settings.seed if run_settings is not None
                else seed_value if seed_value is not None else DEFAULT_SEED)
    table = lots_table(data, columns=columns, sheet=sheet)
    sampled = history and options.get("engine", "nuts") != "quadrature"
    with _sampling(sampled) as fits:
        result = lot_question.assess_lots(table, spec_value, conf, chosen, seed=run_seed,
                                        settings=run_settings, **options)
    shown = {"spec": spec_value, "confidence": conf, "prior": prior if isinstance(prior, str)
             else result.prior, "seed": seed_value}
    return LotResult(result.lots, spec_value, conf, result.prior, result.model, result.seed,
                     tuple(result.notes), result.diagnostics, result.next_lot, result, table,
                     source_sha256(data), shown, tuple(fits))


# --------------------------------------------------------------------------- life

def life_prior(prior, shape):
    """The life model's prior from ``prior`` (None, a LifePrior, statements on the shape)
    and ``shape`` (a (low, high) range or a LogNormal on the shape)."""
    from qualbayes.models.weibull import LifePrior  # noqa: PLC0415
    from qualbayes.priors.distributions import LogNormal  # noqa: PLC0415

    if isinstance(prior, str):
        prior = _statement_prior(prior, "prior", LogNormal)
        if prior.variable != "shape":
            raise ParameterError("prior", prior, "statements here are on the Weibull shape, "
                                                 "e.g. '1.5<shape<3@90%'")
    if isinstance(prior, LogNormal):
        shape, prior = prior if shape is None else shape, None
    if prior is not None and not isinstance(prior, LifePrior):
        raise ParameterError("prior", prior, "expected a qualbayes.models.weibull.LifePrior")
    base = prior or LifePrior()
    if shape is None:
        return base
    return _shape(shape, plan=False).to_life_prior(base)


def _zero_failure_groups(table) -> list[str]:
    kinds = table.frame.groupby("group", sort=False)["kind"]
    return [str(g) for g, k in kinds if not (k != "suspension").any()]


def assess_life(data, *, mission, target, confidence=0.9, prior=None, shape=None,
                units: str = "", groups: list[str] | None = None, columns=None,
                sheet: str | None = None, seed: int | None = None, settings=None,
                **options) -> LifeResult:
    """Is P(R(mission) >= target | data) >= confidence, group by group (Weibull, NUTS)?

    ``data``: a DataFrame with columns unit, time, status (and optionally seen_working,
    found_failed, group), a LifeTable, or the path of an export. ``shape``: the Weibull
    shape's central 95% range (low, high) from engineering knowledge (needed when a group
    has no failure). Other keywords go to :func:`qualbayes.life_question.assess_life`."""
    from qualbayes import life_question  # noqa: PLC0415
    from qualbayes.data.frames import life_table, source_sha256  # noqa: PLC0415

    mission_value = check.positive(mission, "mission")
    target_value = check.probability(target, "target")
    conf = check.confidence(confidence)
    chosen = life_prior(prior, shape)
    seed_value = None if seed is None else check.seed(seed)
    run_settings = check.settings_with_seed(settings, seed_value)
    table = life_table(data, columns=columns, sheet=sheet, units=units, groups=groups)
    if not chosen.shape_given and (none := _zero_failure_groups(table)):
        raise ParameterError("shape", shape, f"group(s) {', '.join(none)} have no failures: "
                                             "the data say nothing about the Weibull shape; "
                                             "give its range from engineering knowledge, e.g. "
                                             "shape=(1.5, 4)")
    with _sampling(True) as fits:
        result = life_question.assess_life(table, mission_value, target_value, conf, chosen,
                                           seed=run_settings.seed, settings=run_settings,
                                           **options)
    shown = {"mission": mission_value, "target": target_value, "confidence": conf,
             "seed": seed_value}
    from qualbayes.evidence.life_words import run_notes  # noqa: PLC0415

    return LifeResult(tuple(result.groups), mission_value, target_value, conf,
                      tuple(chosen.describe(units)), result.seed, tuple(run_notes(result)),
                      result, table, source_sha256(data), shown, tuple(fits))


# --------------------------------------------------------------------------- plans

def _history(history, part, seed, settings, fits: list):
    """The prior learned from a lot history (NUTS); its fit is appended to ``fits``."""
    if history is None:
        return None
    from qualbayes.planning.history import learn_prior  # noqa: PLC0415

    seed_value = None if seed is None else check.seed(seed)
    run_settings = check.settings_with_seed(settings, seed_value)
    with _sampling(True) as recorded:
        learned = learn_prior(history, part=part, seed=run_settings.seed,
                              settings=run_settings)
    fits += [(learned.part, f) for f in recorded]
    return learned


def _plan_prior(prior, history, name: str):
    if prior == HISTORY or (prior is None and history is not None and name == "prior"):
        if history is None:
            raise ParameterError(name, prior, "a 'history' prior needs history=DATA (the "
                                              "lots to learn it from)")
        return HISTORY
    return _rate_prior(prior, name)


def plan_attribute(*, reliability, confidence, failures=0, prior=None, design=None,
                   assurance=None, history=None, part: str | None = None,
                   max_units: int | None = None, seed: int | None = None,
                   settings=None) -> PlanResult:
    """How many units must pass, allowing c failures, to show R >= reliability?

    ``prior``: None (classical), a Beta on p = 1 - R (or a statement such as
    'R>0.95@90%'), or "history" with ``history`` the lots (DataFrame or file) it is learned
    from. ``design``: the prior for the assurance; ``assurance``: a wanted assurance."""
    from qualbayes.planning import plans  # noqa: PLC0415
    from qualbayes.planning.assurance import DEFAULT_MAX_UNITS  # noqa: PLC0415

    kw = {"reliability": check.probability(reliability, "reliability"),
          "confidence": check.confidence(confidence),
          "failures": check.counts(failures, "failures"),
          "assurance": None if assurance is None else check.probability(assurance,
                                                                          "assurance"),
          "max_units": DEFAULT_MAX_UNITS if max_units is None else check.count(max_units,
                                                                              "max_units", 1)}
    analysis = _plan_prior(prior, history, "prior")
    design_prior = _plan_prior(design, history if design == HISTORY else None, "design")
    if history is not None and HISTORY not in (analysis, design_prior):
        raise ParameterError("history", type(history).__name__, "given, but neither prior "
                                                                "uses it (prior='history' or "
                                                                "design='history')")
    fits: list = []
    learned = _history(history, part, seed, settings, fits)
    record = plans.plan_attribute(analysis=analysis, design=design_prior, history=learned,
                                  **kw)
    if analysis == HISTORY:
        analysis = learned.prior
    return PlanResult.from_record(record, analysis=analysis, fits=tuple(fits))


def plan_life(*, reliability, confidence, mission, units, shape, failures=0, prior=None,
              design=None, assurance=None) -> PlanResult:
    """With ``units`` on test, how long must each run (c failures allowed) to show
    R(mission) >= reliability? ``shape``: a known Weibull shape, or its (low, high) range."""
    from qualbayes.planning import plans  # noqa: PLC0415

    unit_list = check.counts(units, "units", 1)
    record = plans.plan_life(
        check.probability(reliability, "reliability"), check.confidence(confidence),
        check.positive(mission, "mission"), unit_list, _shape(shape, plan=True),
        check.counts(failures, "failures"), design=_rate_prior(design, "design"),
        assurance=None if assurance is None else check.probability(assurance, "assurance"),
        analysis=_rate_prior(prior, "prior"))
    return PlanResult.from_record(record, analysis=_rate_prior(prior, "prior"))


def plan_mtbf(*, goal, confidence, failures=0, prior=None, design=None,
              assurance=None) -> PlanResult:
    """How much total test time, allowing r failures, shows MTBF >= goal? ``prior``: None
    (classical chi-square), a Gamma on the failure rate, or a statement ('mtbf>500@90%')."""
    from qualbayes.planning import plans  # noqa: PLC0415

    analysis = _gamma_prior(prior, "prior")
    record = plans.plan_mtbf(
        check.positive(goal, "goal"), check.confidence(confidence),
        check.counts(failures, "failures"), analysis, _gamma_prior(design, "design"),
        None if assurance is None else check.probability(assurance, "assurance"))
    return PlanResult.from_record(record, analysis=analysis)


def plan_sampling(*, aql, alpha, ltpd, beta, lot_size: int | None = None, prior=None,
                  spec=None, level=None, history=None, part: str | None = None,
                  seed: int | None = None, settings=None) -> PlanResult:
    """Which single sampling plan (n, c) accepts lots at the AQL with probability >=
    1 - alpha and lots at the LTPD with probability <= beta? With a prior on the lots'
    defect rate (a Beta, a statement, or "history" learned from ``history``): how good are
    accepted lots?"""
    from qualbayes.planning import plans  # noqa: PLC0415

    aql_v, ltpd_v = check.rate(aql, "aql"), check.rate(ltpd, "ltpd")
    if not aql_v < ltpd_v:
        raise ParameterError("ltpd", ltpd, f"must exceed the AQL ({aql_v:g})")
    chosen = _plan_prior(prior, history, "prior")
    if history is not None and chosen != HISTORY:
        raise ParameterError("history", type(history).__name__, "given, but the prior does not "
                                                                "use it (prior='history')")
    fits: list = []
    learned = _history(history, part, seed, settings, fits) if chosen == HISTORY else None
    record = plans.plan_sampling(
        aql_v, check.probability(alpha, "alpha"), ltpd_v, check.probability(beta, "beta"),
        None if lot_size is None else check.count(lot_size, "lot_size", 1),
        None if chosen == HISTORY else chosen,
        None if spec is None else check.rate(spec, "spec"), learned,
        None if level is None else check.probability(level, "level"))
    analysis = learned.prior if chosen == HISTORY else chosen
    return PlanResult.from_record(record, analysis=analysis, fits=tuple(fits))


def __getattr__(name: str):
    """``qualbayes.api.assess_suppliers`` and the others of :mod:`qualbayes.api_more`."""
    if name in MORE:
        from qualbayes import api_more  # noqa: PLC0415

        return getattr(api_more, name)
    raise AttributeError(f"module 'qualbayes.api' has no attribute {name!r}")
