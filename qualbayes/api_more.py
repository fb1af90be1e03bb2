"""The supplier scorecard, the at-use question and the field-return forecast from Python
(re-exported by :mod:`qualbayes.api` and :mod:`qualbayes`).

As for the other questions: DataFrames (or paths) in, frozen result objects out; every
argument after the data is keyword-only and checked on entry (a
:class:`~qualbayes.errors.ParameterError` naming the parameter); the sampler runs inside a
float64 scope that restores the caller's jax configuration, and its fits are recorded for
the result's ``idata``. The numbers equal the command line's for the same data and seed.
"""

from __future__ import annotations

import contextlib
import math

from qualbayes import parameters as check
from qualbayes.errors import ParameterError
from qualbayes.results_more import AtUseResult, ForecastResult, SupplierResult

PERIODS = ("quarter", "month")
RELATIONS = ("arrhenius", "inverse-power", "log-linear")
DISTRIBUTIONS = ("weibull", "lognormal")
FORECAST_PERIODS = ("week", "month", "quarter", "year")
DEFAULT_SEED = 20261202


@contextlib.contextmanager
def sampling():
    """jax in a float64 scope, every fit recorded."""
    from qualbayes.inference.run import jax_scope, recording_fits  # noqa: PLC0415

    with jax_scope(), recording_fits() as fits:
        yield fits


def choice(value, name: str, options: tuple[str, ...], allow_none: bool = False):
    if value is None and allow_none:
        return None
    if not isinstance(value, str) or value not in options:
        raise ParameterError(name, value, "choose one of " + ", ".join(map(repr, options)))
    return value


def value_range(value, name: str) -> tuple[float, float] | None:
    """A (low, high) range of engineering knowledge (central 95%), or None."""
    if value is None:
        return None
    if not isinstance(value, list | tuple) or len(value) != 2:
        raise ParameterError(name, value, "expected (low, high), e.g. (1.5, 4)")
    lo, hi = check.number(value[0], name), check.number(value[1], name)
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise ParameterError(name, value, "expected finite low < high")
    return lo, hi


def _seeded(seed, settings, default=None):
    seed_value = check.seed(DEFAULT_SEED if seed is None else seed)
    if settings is None and default is not None:
        return seed_value, default(seed_value)
    return seed_value, check.settings_with_seed(settings, seed_value)


# --------------------------------------------------------------------------- suppliers

def assess_suppliers(data, *, spec, confidence=0.95, period: str | None = None,
                     columns=None, sheet: str | None = None, seed: int | None = None,
                     settings=None) -> SupplierResult:
    """How does each supplier's defect rate compare with the limit ``spec``, with its own
    past (``period``: "quarter" or "month" of the date column) and with the others?

    ``data``: lots with a supplier column (a DataFrame, a LotTable or the path of an
    export). ``seed`` (default 20261202, as the command line) wins over ``settings.seed``."""
    from qualbayes import scorecard  # noqa: PLC0415
    from qualbayes.data.frames import lots_table, source_sha256  # noqa: PLC0415
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415

    spec_value = check.rate(spec, "spec")
    conf = check.confidence(confidence)
    chosen = choice(period, "period", PERIODS, allow_none=True)
    seed_value, run_settings = _seeded(seed, settings, lambda s: SamplerSettings(
        seed=s, target_accept=scorecard.TARGET_ACCEPT))
    table = lots_table(data, columns=columns, sheet=sheet)
    scorecard.scorecard_cells(table, chosen)  # refuse missing suppliers or dates first
    with sampling() as fits:
        result = scorecard.assess_suppliers(table, spec_value, conf, period=chosen,
                                            seed=seed_value, settings=run_settings)
    shown = {"spec": spec_value, "confidence": conf, "period": chosen, "seed": seed_value}
    return SupplierResult(result.suppliers, result.periods, spec_value, conf, chosen,
                          result.seed, result, table, source_sha256(data), shown, tuple(fits))


# --------------------------------------------------------------------------- at use

def _listed(value, name: str) -> list:
    out = list(value) if isinstance(value, list | tuple) else [value]
    if not out:
        raise ParameterError(name, value, "give at least one")
    return out


def stress_terms(stress_column, relation, use, coefficient_prior=None):
    """Typed stress terms: one (column, relation, use value) per stress; ``use`` a number,
    or a temperature with its unit ("40C", "313.15K") for Arrhenius; ``coefficient_prior``
    {relation: (low, high)} the central 95% range of that relation's coefficient."""
    from qualbayes.data.stress_life import parse_use_temperature, parse_use_value  # noqa: PLC0415
    from qualbayes.errors import OptionError  # noqa: PLC0415
    from qualbayes.models.life_stress import StressTerm, normal_from_range  # noqa: PLC0415

    cols = [check.text(c, "stress_column") for c in _listed(stress_column, "stress_column")]
    rels = [choice(r, "relation", RELATIONS) for r in _listed(relation, "relation")]
    uses = _listed(use, "use")
    if not len(cols) == len(rels) == len(uses):
        raise ParameterError("relation", relation, f"give one relation and one use value for "
                                                   f"each of the {len(cols)} stress column(s)")
    if len(set(rels)) < len(rels):
        raise ParameterError("relation", relation, "each relation may serve one column only")
    priors = dict(coefficient_prior or {})
    for rel in priors:
        if rel not in rels:
            raise ParameterError("coefficient_prior", coefficient_prior,
                                 f"no stress uses the {rel!r} relation")
    terms = []
    for col, rel, u in zip(cols, rels, uses, strict=True):
        try:
            value = (parse_use_temperature(str(u), "use") if rel == "arrhenius"
                     else parse_use_value(str(u), "use"))
        except OptionError as err:
            raise ParameterError("use", u, str(err)) from None
        rng = value_range(priors.get(rel), "coefficient_prior")
        terms.append(StressTerm(col, rel, value, prior=None if rng is None else
                                normal_from_range(*rng), prior_range=rng))
    return terms


def assess_at_use(data, *, stress_column, relation, use, mission, target, confidence=0.9,
                  distribution: str = "weibull", shape=None, coefficient_prior=None,
                  temperature_unit=None, units: str = "", group: str | None = None,
                  columns=None, sheet: str | None = None, seed: int | None = None,
                  settings=None) -> AtUseResult:
    """Is P(R_use(mission) >= target | data) >= confidence, from units tested at raised
    stress? ``stress_column``, ``relation`` ("arrhenius", "inverse-power", "log-linear")
    and ``use`` (a number, or "40C" for a temperature) name one stress each (a value or a
    list); ``shape``: the Weibull shape's (or its lognormal equivalent's) central 95%
    range; ``temperature_unit``: "C" or "K" per Arrhenius column when its header does not
    say."""
    from qualbayes.accelerated_analysis import assess_at_use as answer  # noqa: PLC0415
    from qualbayes.data.frames import frame_sha256  # noqa: PLC0415
    from qualbayes.data.stress_life import read_stress_life  # noqa: PLC0415
    from qualbayes.models.life_stress import shape_prior_from_range  # noqa: PLC0415

    terms = stress_terms(stress_column, relation, use, coefficient_prior)
    mission_value = check.positive(mission, "mission")
    target_value = check.probability(target, "target")
    conf = check.confidence(confidence)
    dist = choice(distribution, "distribution", DISTRIBUTIONS)
    prior = shape_prior_from_range(value_range(shape, "shape"))
    seed_value, run_settings = _seeded(seed, settings)
    t_units = [None] * len(terms)
    given = [] if temperature_unit is None else _listed(temperature_unit, "temperature_unit")
    arr = [i for i, t in enumerate(terms) if t.relation == "arrhenius"]
    if len(given) > len(arr):
        raise ParameterError("temperature_unit", temperature_unit,
                             "given more often than there are Arrhenius stress columns")
    for i, u in zip(arr, given, strict=False):
        t_units[i] = choice(u, "temperature_unit", ("C", "K"))
    source, sha = _source(data, sheet)
    table = read_stress_life(source, [t.column for t in terms], [t.relation for t in terms],
                             t_units, sheet=sheet, columns=columns, units=units,
                             groups=[group] if group else None)
    if len(table.life.groups) > 1:
        raise ParameterError("group", group, "the data hold several groups ("
                             + ", ".join(map(repr, table.life.groups)) + "): choose one")
    with sampling() as fits:
        result = answer(table, terms, mission_value, target_value, conf, dist, prior,
                        seed=seed_value, settings=run_settings)
    shown = {"mission": mission_value, "target": target_value, "confidence": conf,
             "distribution": dist, "seed": seed_value}
    return AtUseResult(mission_value, target_value, conf, dist, result.result["decision"],
                       result, table, sha or table.life.sha256 or frame_sha256(data), shown,
                       tuple(fits))


def _source(data, sheet):
    """What a reader takes: a path as it is, a DataFrame as the cells of a sheet."""
    import pandas as pd  # noqa: PLC0415

    from qualbayes.data.frames import frame_sha256, raw_from_frame  # noqa: PLC0415

    if isinstance(data, pd.DataFrame):
        if sheet is not None:
            raise ParameterError("sheet", sheet, "applies to an xlsx file, not to a table "
                                                 "given from Python")
        return raw_from_frame(data), frame_sha256(data)
    if isinstance(data, str | bytes) or hasattr(data, "__fspath__"):
        return data, None
    raise ParameterError("data", type(data).__name__, "expected a DataFrame or a path")


# --------------------------------------------------------------------------- returns

def forecast_returns(fleet, *, life, usage, horizon=24, period: str = "month",
                     confidence=0.9, spares=None, as_of=None, shape=None,
                     life_group: str | None = None, columns=None, life_columns=None,
                     sheet: str | None = None, life_sheet: str | None = None,
                     seed: int | None = None, settings=None) -> ForecastResult:
    """How many units in service will fail in each of the next ``horizon`` periods, and in
    total? ``fleet``: the installed base (ages, or ship dates with ``as_of`` and ``usage``);
    ``life``: the life-test data of one group (a Weibull fit as ``assess_life``);
    ``usage``: life units a unit accumulates per period; ``spares``: stock to judge."""
    import datetime as dt  # noqa: PLC0415

    import numpy as np  # noqa: PLC0415

    from qualbayes.data.fleet import read_fleet  # noqa: PLC0415
    from qualbayes.data.frames import life_table, source_sha256  # noqa: PLC0415
    from qualbayes.field_forecast import forecast_fleet  # noqa: PLC0415
    from qualbayes.forecast_life import weibull_life  # noqa: PLC0415

    usage_value = check.positive(usage, "usage")
    horizon_value = check.count(horizon, "horizon", 1)
    chosen = choice(period, "period", FORECAST_PERIODS)
    conf = check.confidence(confidence)
    stock = None if spares is None else check.count(spares, "spares", 0)
    if as_of is not None and not isinstance(as_of, dt.date):
        raise ParameterError("as_of", as_of, "expected a datetime.date")
    shape_range = value_range(shape, "shape")
    seed_value, run_settings = _seeded(seed, settings)
    source, sha = _source(fleet, sheet)
    fleet_table = read_fleet(source, sheet=sheet, columns=columns, as_of=as_of,
                             usage=usage_value, period=chosen)
    table = life_table(life, columns=life_columns, sheet=life_sheet,
                       groups=[life_group] if life_group else None)
    if len(table.groups) > 1:
        raise ParameterError("life_group", life_group, "the life data hold several groups ("
                             + ", ".join(map(repr, table.groups)) + "): choose one")
    gate_time = float(np.median(fleet_table.ages)) + usage_value * horizon_value
    reach = float(np.max(fleet_table.ages)) + usage_value * horizon_value
    with sampling() as fits:
        life_part = weibull_life(table, shape_range, run_settings, gate_time, reach)
    draws = life_part.pop("draws")
    forecast = None
    if life_part["diagnostics"]["passed"]:
        forecast = forecast_fleet(fleet_table.ages, fleet_table.counts, fleet_table.groups,
                                  draws, usage_value, horizon_value, conf, stock,
                                  seed=seed_value)
    hashes = {"fleet": sha or fleet_table.sha256 or "",
              "life": life_part.pop("sha256", "") or source_sha256(life) or ""}
    question = {"horizon": horizon_value, "period": chosen, "usage": usage_value,
                "confidence": conf, "spares": stock}
    shown = {"usage": usage_value, "horizon": horizon_value, "period": chosen,
             "confidence": conf, "seed": seed_value}
    return ForecastResult(horizon_value, chosen, usage_value, conf, forecast, life_part,
                          question, fleet_table, hashes, shown, tuple(fits), table)
