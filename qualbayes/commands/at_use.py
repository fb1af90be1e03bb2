"""``qualbayes at-use FILE --stress-column COL --relation arrhenius --use 40C --mission T
--target R``: from units tested at raised stress, does the design meet its reliability
requirement at the use condition?"""

from __future__ import annotations

import argparse

WORKBOOK = "at_use_results.xlsx"
RECORD = "at_use_results.json"
FIGURE = "at_use_life_stress.png"
PRIOR_OPTIONS = {"arrhenius": "activation_energy", "inverse-power": "exponent",
                 "log-linear": "coefficient"}


def add_stress_options(p: argparse.ArgumentParser) -> None:
    """The stress options shared with ``returns``."""
    p.add_argument("--stress-column", action="append", metavar="HEADER",
                   help="the column holding a stress (repeat for several stresses)")
    p.add_argument("--relation", action="append",
                   choices=("arrhenius", "inverse-power", "log-linear"),
                   help="life-stress relation of each stress column, in the same order: "
                        "arrhenius (temperature), inverse-power (voltage, load), log-linear")
    p.add_argument("--use", action="append", metavar="VALUE",
                   help="the use condition of each stress, in the same order: temperatures "
                        "with their unit (40C or 313.15K), other stresses as numbers")
    p.add_argument("--temperature-unit", action="append", choices=("C", "K"),
                   help="unit of a temperature column whose header does not say (C or K)")
    p.add_argument("--distribution", choices=("weibull", "lognormal"), default="weibull",
                   help="life distribution, with one shape (sigma) common to all levels")
    p.add_argument("--activation-energy", metavar="LO,HI",
                   help="Arrhenius activation energy in eV from engineering knowledge: the "
                        "range holding it with 95%% probability, e.g. 0.3,1.1 (default: flat)")
    p.add_argument("--exponent", metavar="LO,HI",
                   help="inverse-power exponent n (life ~ stress^-n), 95%% range (default: "
                        "flat)")
    p.add_argument("--coefficient", metavar="LO,HI",
                   help="log-linear coefficient b (life ~ exp(-b x)), 95%% range (default: "
                        "flat)")
    p.add_argument("--shape-prior", metavar="LO,HI",
                   help="the Weibull shape (or 1/sigma) from engineering knowledge, 95%% range")


def register(sub) -> None:
    from qualbayes.commands.common import (  # noqa: PLC0415
        FIRST_SHEET_HELP,
        HelpFormatter,
        add_input_options,
        add_output_options,
    )

    p = sub.add_parser(
        "at-use", help="reliability at the use condition from an accelerated life test "
                       "(Arrhenius, inverse power or log-linear; Weibull or lognormal)",
        description="Fits life against stress with a shape common to all levels (checked), "
                    "and answers at the use condition: R(mission), B10 and B1 lives, the "
                    "acceleration factor of each tested level, the relation's coefficients, "
                    "P(R(mission) >= target) with its Monte Carlo error, and meets / "
                    "does-not-meet / undecided at the stated confidence.",
        formatter_class=HelpFormatter)
    from qualbayes.commands.life import LIFE_COLUMNS_EXAMPLE  # noqa: PLC0415

    # FILE: rows as for 'life', plus the stress (read from the first visible sheet)
    add_input_options(p, LIFE_COLUMNS_EXAMPLE, FIRST_SHEET_HELP)
    p.add_argument("--group", metavar="NAME", help="analyse only this group of the file")
    add_stress_options(p)
    p.add_argument("--mission", required=True, help="mission time at use, in the file's units")
    p.add_argument("--target", required=True, help="reliability required: 0.9 or 90%%")
    p.add_argument("--units", default="", help="time units for display: h, cycles, km")
    add_output_options(p)
    p.set_defaults(func=run, confidence="0.9")


def stress_terms(args) -> list:
    """Typed stress terms from the options (use values converted; priors parsed)."""
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.errors import OptionError  # noqa: PLC0415
    from qualbayes.models.life_stress import StressTerm, normal_from_range  # noqa: PLC0415

    cols, rels, uses = args.stress_column or [], args.relation or [], args.use or []
    if not cols:
        raise OptionError("--stress-column: name the column holding the stress")
    if not (len(cols) == len(rels) == len(uses)):
        raise OptionError(f"give one --relation and one --use for each --stress-column "
                          f"({len(cols)} column(s), {len(rels)} relation(s), {len(uses)} use "
                          "value(s)), in the same order")
    if len(set(rels)) < len(rels):
        raise OptionError("each relation may be used for one stress column only (the prior "
                          "options name a relation)")
    for rel, key in PRIOR_OPTIONS.items():
        if getattr(args, key) is not None and rel not in rels:
            raise OptionError(f"--{key.replace('_', '-')} is given but no stress uses the "
                              f"{rel} relation")
    terms = []
    for col, rel, use in zip(cols, rels, uses, strict=True):
        value = convert.stress_level(use, rel)
        text = getattr(args, PRIOR_OPTIONS[rel])
        prior = rng = None
        if text is not None:
            option = f"--{PRIOR_OPTIONS[rel].replace('_', '-')}"
            rng = convert.value_range(text, option, "0.3,1.1")
            prior = normal_from_range(*rng)
        terms.append(StressTerm(col, rel, value, prior=prior, prior_range=rng))
    return terms


def temperature_units(args) -> list[str | None]:
    from qualbayes.errors import OptionError  # noqa: PLC0415

    rels = args.relation or []
    given = list(args.temperature_unit or [])
    n_temp = sum(r == "arrhenius" for r in rels)
    if len(given) > n_temp:
        raise OptionError("--temperature-unit is given more often than there are Arrhenius "
                          "stress columns")
    out, k = [], 0
    for r in rels:
        if r == "arrhenius" and k < len(given):
            out.append(given[k])
            k += 1
        else:
            out.append(None)
    return out


def read_stress_data(args, file, sheet, columns, max_rows, units, group):
    from qualbayes.data.stress_life import read_stress_life  # noqa: PLC0415
    from qualbayes.errors import InputError  # noqa: PLC0415

    data = read_stress_life(file, args.stress_column, args.relation, temperature_units(args),
                            sheet=sheet, columns=columns, max_rows=max_rows, units=units,
                            groups=[group] if group else None)
    if len(data.life.groups) > 1:
        names = ", ".join(repr(g) for g in data.life.groups)
        raise InputError(f"the file holds several groups ({names}); an accelerated fit takes "
                         "one design at a time: choose one with --group", file=data.life.file)
    return data


def stress_prior(args):
    from qualbayes.models.life_stress import shape_prior_from_range  # noqa: PLC0415
    from qualbayes.models.weibull import parse_shape_prior  # noqa: PLC0415

    parsed = parse_shape_prior(args.shape_prior)
    return shape_prior_from_range(None if parsed is None else parsed[1])


def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, execute  # noqa: PLC0415

    mission = convert.mission(args.mission)
    target = convert.probability(args.target, "--target")
    confidence = convert.shared(args)
    units = convert.units(args.units)
    terms = stress_terms(args)
    prior = stress_prior(args)
    read = {}  # the table read, for the workbook's "Inputs as read" sheet

    def compute() -> dict:
        from qualbayes.accelerated_analysis import assess_at_use  # noqa: PLC0415
        from qualbayes.evidence.accelerated_plots import stress_points  # noqa: PLC0415
        from qualbayes.evidence.accelerated_record import at_use_record  # noqa: PLC0415
        from qualbayes.provenance import command_line, sha256_file, versions  # noqa: PLC0415

        data = read_stress_data(args, args.file, args.sheet, args.columns, args.max_rows,
                                units, args.group)
        read["data"] = data
        sha = data.life.sha256 or sha256_file(args.file)  # the hash of the bytes parsed
        result = assess_at_use(data, terms, mission, target, confidence, args.distribution,
                               prior, seed=args.seed)
        record = at_use_record(result, data, sha, command_line(args.argv), versions())
        record["points"] = stress_points(data)
        return record

    def text(record: dict) -> str:
        from qualbayes.evidence.accelerated_record import at_use_text  # noqa: PLC0415

        return at_use_text(record)

    return execute(args, Command(compute, text,
                                 lambda record: _evidence(record, read.get("data"))))


def _evidence(record: dict, data) -> dict:
    """The files of --out DIR: workbook (with the units as read), run record and, when the
    gate passed, the life-stress figure; all rendered before the group write."""
    from qualbayes.commands.pipeline import figure_writer, record_writer  # noqa: PLC0415
    from qualbayes.evidence.accelerated_plots import life_stress_figure  # noqa: PLC0415
    from qualbayes.evidence.accelerated_record import at_use_sheets  # noqa: PLC0415
    from qualbayes.evidence.html import png_bytes  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    files = {WORKBOOK: workbook_writer(at_use_sheets(record, data)),
             RECORD: record_writer(record)}
    if record["result"]["diagnostics"]["passed"]:
        import matplotlib.pyplot as plt  # noqa: PLC0415

        fig = life_stress_figure(record)
        try:
            files[FIGURE] = figure_writer(png_bytes(fig))
        finally:
            plt.close(fig)
    return files
