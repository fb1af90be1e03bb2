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
    from qualbayes.commands.common import add_input_options  # noqa: PLC0415

    p = sub.add_parser(
        "at-use", help="reliability at the use condition from an accelerated life test "
                       "(Arrhenius, inverse power or log-linear; Weibull or lognormal)",
        description="Fits life against stress with a shape common to all levels (checked), "
                    "and answers at the use condition: R(mission), B10 and B1 lives, the "
                    "acceleration factor of each tested level, the relation's coefficients, "
                    "P(R(mission) >= target) with its Monte Carlo error, and meets / "
                    "does-not-meet / undecided at the stated confidence.",
        formatter_class=argparse.ArgumentDefaultsHelpFormatter)
    add_input_options(p)  # FILE: one row per unit, as for 'life', plus the stress column(s)
    p.add_argument("--group", metavar="NAME", help="analyse only this group of the file")
    add_stress_options(p)
    p.add_argument("--mission", required=True, help="mission time at use, in the file's units")
    p.add_argument("--target", required=True, help="reliability required: 0.9 or 90%%")
    p.add_argument("--units", default="", help="time units for display: h, cycles, km")
    p.add_argument("--confidence", default="0.9", help="confidence C for bounds and decisions")
    p.add_argument("--seed", type=int, default=20261202, help="random seed for the sampler")
    p.add_argument("--json", action="store_true", help="write one JSON document to stdout")
    p.add_argument("--out", metavar="DIR", help="write workbook, run record and figure to DIR")
    p.add_argument("--force", action="store_true", help="allow replacing an earlier run's files")
    p.set_defaults(func=run)


def stress_terms(args, data_units: list[str | None] | None = None) -> list:
    """Typed stress terms from the options (use values converted; priors parsed)."""
    from qualbayes.data.stress_life import parse_use_temperature, parse_use_value  # noqa: PLC0415
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
        value = parse_use_temperature(use) if rel == "arrhenius" else parse_use_value(use)
        text = getattr(args, PRIOR_OPTIONS[rel])
        prior = rng = None
        if text is not None:
            option = f"--{PRIOR_OPTIONS[rel].replace('_', '-')}"
            rng = two_numbers(text, option, "0.3,1.1")
            prior = normal_from_range(*rng)
        terms.append(StressTerm(col, rel, value, prior=prior, prior_range=rng))
    return terms


def two_numbers(text: str, option: str, example: str) -> tuple[float, float]:
    """``LO,HI`` -> (lo, hi), finite and increasing."""
    import math  # noqa: PLC0415

    from qualbayes.errors import OptionError  # noqa: PLC0415

    try:
        lo, hi = (float(v) for v in str(text).replace(" ", "").split(","))
    except ValueError:
        raise OptionError(f"{option} {text!r}: write two numbers LO,HI, e.g. {example}") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise OptionError(f"{option} {text!r}: two finite numbers with LO < HI")
    return lo, hi


def positive_number(text: str, option: str, example: str) -> float:
    from qualbayes.data.values import parse_real  # noqa: PLC0415
    from qualbayes.errors import OptionError  # noqa: PLC0415

    try:
        value = parse_real(str(text))
    except ValueError:
        raise OptionError(f"{option} {text!r}: expected a positive number such as {example}"
                          ) from None
    if not value > 0:
        raise OptionError(f"{option} {text!r}: must be positive")
    return value


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
    from pathlib import Path  # noqa: PLC0415

    from qualbayes.accelerated_analysis import assess_at_use  # noqa: PLC0415
    from qualbayes.commands.common import emit  # noqa: PLC0415
    from qualbayes.data.life import parse_units  # noqa: PLC0415
    from qualbayes.evidence.accelerated_plots import stress_points  # noqa: PLC0415
    from qualbayes.evidence.accelerated_record import at_use_record, at_use_text  # noqa: PLC0415
    from qualbayes.evidence.files import check_targets  # noqa: PLC0415
    from qualbayes.provenance import command_line, sha256_file, versions  # noqa: PLC0415
    from qualbayes.questions import parse_probability  # noqa: PLC0415

    mission = positive_number(args.mission, "--mission", "20000")
    target = parse_probability(args.target, "--target")
    confidence = parse_probability(args.confidence, "--confidence")
    units = parse_units(args.units)
    terms = stress_terms(args)
    prior = stress_prior(args)
    targets = [Path(args.out) / n for n in (WORKBOOK, RECORD, FIGURE)] if args.out else []
    check_targets(targets, args.force)
    data = read_stress_data(args, args.file, args.sheet, args.columns, args.max_rows, units,
                            args.group)
    sha = sha256_file(args.file)
    result = assess_at_use(data, terms, mission, target, confidence, args.distribution, prior,
                           seed=args.seed)
    record = at_use_record(result, data, sha, command_line(args.argv), versions())
    record["points"] = stress_points(data)
    written = write_at_use(record, data, targets, args.force) if targets else []
    emit(args, record, "" if args.json else at_use_text(record), written)
    return 0


def write_at_use(record, data, targets, force) -> list:
    from qualbayes.evidence.accelerated_plots import draw_life_stress  # noqa: PLC0415
    from qualbayes.evidence.accelerated_record import at_use_sheets  # noqa: PLC0415
    from qualbayes.evidence.files import write_group  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps, without_draws  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    files = [(targets[0], workbook_writer(at_use_sheets(record, data))),
             (targets[1], lambda p: p.write_text(dumps(without_draws(record)), encoding="utf-8"))]
    if record["result"]["diagnostics"]["passed"]:
        fig = draw_life_stress(record, targets[2])
        files.append((targets[2], lambda p: fig.savefig(p, format="png")))
    return write_group(files, force)
