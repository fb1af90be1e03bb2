"""``qualbayes returns FLEET --life LIFE --usage U --horizon 24``: how many of the units in
service will fail in each coming period, and in total?

The life posterior comes from a life-data file: a plain Weibull fit (as ``life`` does), or,
with the stress options, the accelerated fit at the use condition.
"""

from __future__ import annotations

WORKBOOK = "returns_forecast.xlsx"
RECORD = "returns_forecast.json"
FIGURE = "returns_forecast.png"
MAX_GROUP_FIGURES = 20
#: keys of an installed-base sheet: unit, age, shipped, count, group (data/fleet.py)
FLEET_COLUMNS_EXAMPLE = "age=Hours Run,count=Units Fitted,group=Site"


def register(sub) -> None:
    from qualbayes.commands.at_use import add_stress_options  # noqa: PLC0415
    from qualbayes.commands.common import (  # noqa: PLC0415
        FIRST_SHEET_HELP,
        HelpFormatter,
        add_input_options,
        add_output_options,
    )

    p = sub.add_parser(
        "returns", help="forecast field failures per period of the units in service, from a "
                        "life posterior (plain or at the use stress)",
        description="For the installed base (ages or ship dates, from a sheet): the posterior "
                    "predictive number of failures in each coming period and in total over "
                    "the horizon, conditioned on every unit having survived to its present "
                    "age; per group and for all units.",
        formatter_class=HelpFormatter)
    add_input_options(p, FLEET_COLUMNS_EXAMPLE, FIRST_SHEET_HELP)  # FILE: the installed base
    p.add_argument("--life", required=True, metavar="LIFE_FILE",
                   help="life data (as for 'life', or with stress columns for 'at-use')")
    p.add_argument("--life-sheet", help="xlsx sheet of the life data")
    p.add_argument("--life-columns", metavar="KEY=HEADER,...", help="name life-data columns")
    p.add_argument("--life-group", metavar="NAME", help="use only this group of the life data")
    p.add_argument("--usage", required=True,
                   help="life units (h, cycles) a unit accumulates per period, e.g. 300")
    p.add_argument("--period", choices=("week", "month", "quarter", "year"), default="month",
                   help="length of one forecast period")
    p.add_argument("--horizon", type=int, default=24, help="number of periods to forecast")
    p.add_argument("--as-of", metavar="YYYY-MM-DD",
                   help="date the installed base was counted (needed with ship dates)")
    p.add_argument("--spares", type=int, help="spare units in stock: P(enough) is reported")
    add_stress_options(p)
    add_output_options(p)
    p.set_defaults(func=run, confidence="0.9")


def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, execute  # noqa: PLC0415

    usage = convert.positive(args.usage, "--usage", "300")
    horizon = convert.horizon(args.horizon)
    spares = convert.spares(args.spares)
    confidence = convert.shared(args)
    as_of = convert.as_of(args.as_of)
    accelerated = bool(args.stress_column or args.relation or args.use)
    terms = prior = None
    if accelerated:
        from qualbayes.commands.at_use import stress_prior, stress_terms  # noqa: PLC0415

        terms, prior = stress_terms(args), stress_prior(args)
    elif args.distribution != "weibull":
        from qualbayes.errors import OptionError  # noqa: PLC0415

        raise OptionError("--distribution lognormal needs the stress options (a plain life "
                          "fit is Weibull, as in 'life')")

    def compute() -> dict:
        import numpy as np  # noqa: PLC0415

        from qualbayes.data.fleet import read_fleet  # noqa: PLC0415
        from qualbayes.evidence.forecast_record import returns_record  # noqa: PLC0415
        from qualbayes.field_forecast import forecast_fleet  # noqa: PLC0415
        from qualbayes.provenance import command_line, sha256_file, versions  # noqa: PLC0415

        fleet = read_fleet(args.file, sheet=args.sheet, columns=args.columns,
                           max_rows=args.max_rows, as_of=as_of, usage=usage,
                           period=args.period)
        gate_time = float(np.median(fleet.ages)) + usage * horizon
        reach = float(np.max(fleet.ages)) + usage * horizon
        if accelerated:
            life = _accelerated_life(args, terms, prior, gate_time)
        else:
            life = _plain_life(args, gate_time, reach)
        draws = life.pop("draws")
        forecast = None
        if life["diagnostics"]["passed"]:
            forecast = forecast_fleet(fleet.ages, fleet.counts, fleet.groups, draws, usage,
                                      horizon, confidence, spares, seed=args.seed)
        sha = {"fleet": fleet.sha256 or sha256_file(args.file),
               "life": life.pop("sha256", "") or sha256_file(args.life)}
        question = {"horizon": horizon, "period": args.period, "usage": usage,
                    "confidence": confidence, "spares": spares}
        return returns_record(forecast, life, fleet, sha, command_line(args.argv),
                              versions(), question)

    def text(record: dict) -> str:
        from qualbayes.evidence.forecast_record import returns_text  # noqa: PLC0415

        return returns_text(record)

    from qualbayes.evidence.files import protect_inputs  # noqa: PLC0415

    protect_inputs(args.life)  # FILE is protected by the pipeline; the life data here
    return execute(args, Command(compute, text, _evidence))


def _plain_life(args, gate_time: float, reach: float) -> dict:
    from qualbayes.data.life import read_life  # noqa: PLC0415
    from qualbayes.errors import InputError  # noqa: PLC0415
    from qualbayes.forecast_life import weibull_life_with_prior  # noqa: PLC0415
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415
    from qualbayes.models.weibull import make_prior  # noqa: PLC0415

    prior = make_prior(args.shape_prior)
    table = read_life(args.life, sheet=args.life_sheet, columns=args.life_columns,
                      groups=[args.life_group] if args.life_group else None)
    if len(table.groups) > 1:
        names = ", ".join(repr(g) for g in table.groups)
        raise InputError(f"the life data hold several groups ({names}); choose one with "
                         "--life-group", file=table.file)
    return weibull_life_with_prior(table, prior, SamplerSettings(seed=args.seed), gate_time,
                                   reach)


def _accelerated_life(args, terms, prior, gate_time: float) -> dict:
    import numpy as np  # noqa: PLC0415

    from qualbayes.accelerated_analysis import extrapolation, posterior_at_use  # noqa: PLC0415
    from qualbayes.commands.at_use import read_stress_data  # noqa: PLC0415
    from qualbayes.evidence.accelerated_record import show_stress  # noqa: PLC0415
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415

    data = read_stress_data(args, args.life, args.life_sheet, args.life_columns, 500_000, "",
                            args.life_group)
    draws, gate = posterior_at_use(data, terms, args.distribution, prior,
                                   SamplerSettings(seed=args.seed), gate_time)
    extra = extrapolation(data.stress, terms)
    return {"file": data.life.file, "sha256": data.life.sha256,
            "source": f"accelerated fit ({args.distribution}) at the use condition "
                      + ", ".join(f"{t.column} {show_stress(t.use, t.relation, tu)}"
                                  for t, tu in zip(terms, data.temperature_units, strict=True)),
            "prior": [prior.describe(args.distribution), *[t.describe_prior() for t in terms]],
            "diagnostics": gate,
            "summary": {"median log-life location at use": float(np.median(draws.mu)),
                        "median sigma": float(np.median(draws.sigma)),
                        "units": len(data.life.frame)},
            "notes": extra["notes"], "draws": draws}


def _evidence(record: dict) -> dict:
    """The files of --out DIR: workbook, run record and the forecast figures (all units,
    then up to MAX_GROUP_FIGURES groups), rendered before the group write."""
    from qualbayes.commands.pipeline import figure_writer, record_writer  # noqa: PLC0415
    from qualbayes.evidence.forecast_record import forecast_figures, returns_sheets  # noqa: PLC0415
    from qualbayes.evidence.html import png_bytes  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    files = {WORKBOOK: workbook_writer(returns_sheets(record)),
             RECORD: record_writer(record)}
    import matplotlib.pyplot as plt  # noqa: PLC0415

    for k, (_, fig) in enumerate(forecast_figures(record, MAX_GROUP_FIGURES)):
        try:
            files[FIGURE if k == 0 else f"returns_forecast_{k}.png"] = figure_writer(
                png_bytes(fig))
        finally:
            plt.close(fig)
    return files
