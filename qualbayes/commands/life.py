"""``qualbayes life FILE --mission T --target R``: does the design meet its reliability
requirement at the mission time?"""

from __future__ import annotations

from qualbayes.commands.common import HelpFormatter, add_input_options, add_output_options
from qualbayes.commands.inputs import add_export_options, status_map
from qualbayes.commands.prior_options import add_prior_options

LIFE_COLUMNS_EXAMPLE = "time=Op Hours,status=Condition,unit=Tag No"
WORKBOOK = "life_results.xlsx"
RECORD = "life_results.json"
FIGURE = "life_prior.png"  # only with --believe, --earlier or --sensitivity


def register(sub) -> None:
    p = sub.add_parser(
        "life", help="reliability at the mission time from life tests and field returns "
                     "(Weibull, with suspensions and inspection intervals)",
        description="For each group of units: Weibull posterior of shape and scale, B1 and "
                    "B10 lives, mean life, R(mission) with its one-sided lower bound, "
                    "P(R(mission) >= target), and meets / does-not-meet / undecided at the "
                    "stated confidence.",
        formatter_class=HelpFormatter)
    add_input_options(p, LIFE_COLUMNS_EXAMPLE)
    add_export_options(p, life=True)
    p.add_argument("--mission", required=True, help="mission time, in the units of the file")
    p.add_argument("--target", required=True,
                   help="reliability required at the mission time: 0.9 or 90%%")
    p.add_argument("--shape-prior", metavar="LO,HI",
                   help="the Weibull shape from engineering knowledge: the range holding it "
                        "with 95%% probability, e.g. 1.5,4 (needed when a group has no "
                        "failures)")
    p.add_argument("--blife-prior", metavar="Q:LO,HI",
                   help="prior knowledge of a B-life, e.g. 10:2000,8000 for 'B10 between "
                        "2000 and 8000' (95%%)")
    p.add_argument("--reliability-prior", metavar="T:LO,HI",
                   help="prior knowledge of R(T), e.g. 5000:0.8,0.99 (95%%)")
    p.add_argument("--units", default="", help="time units for display: h, cycles, km, ...")
    p.add_argument("--group", action="append", metavar="NAME",
                   help="analyse only this group (repeat for several)")
    p.add_argument("--compare", action="append", metavar="A,B",
                   help="compare group A with group B (repeat for several pairs; default: "
                        "every pair): P(R_A(mission) > R_B(mission)), the ratio of B10 "
                        "lives and the shape difference")
    p.add_argument("--new-units", type=int, metavar="N",
                   help="for an undecided group, the further test time N new units would "
                        "need without failure (default: the suspended units kept running)")
    p.add_argument("--compare-models", action="store_true",
                   help="also fit lognormal and exponential lives: PSIS-LOO comparison in "
                        "words and the decision under each distribution (slower)")
    p.add_argument("--check-fit", action="store_true",
                   help="posterior predictive check: observed against predicted failures "
                        "in time bins, respecting censoring, with a figure per group")
    add_prior_options(p, "life", "life")
    add_output_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, execute  # noqa: PLC0415
    from qualbayes.errors import OptionError  # noqa: PLC0415
    from qualbayes.models.weibull import make_prior  # noqa: PLC0415

    mission = convert.mission(args.mission)
    target = convert.probability(args.target, "--target")
    confidence = convert.shared(args)
    base_prior = make_prior(args.shape_prior, args.blife_prior, args.reliability_prior)
    units = convert.units(args.units)
    status = status_map(args)
    if args.new_units is not None and args.new_units < 1:
        raise OptionError(f"--new-units {args.new_units}: give a positive number of units")

    def compute() -> dict:
        from qualbayes.commands.inputs import read_life_inputs, source_evidence  # noqa: PLC0415
        from qualbayes.commands.prior_options import (  # noqa: PLC0415
            life_prior,
            life_prior_evidence,
        )
        from qualbayes.evidence.life_record import life_record  # noqa: PLC0415
        from qualbayes.life_question import assess_life, check_prior_use, group_data  # noqa: PLC0415
        from qualbayes.provenance import command_line, versions  # noqa: PLC0415

        prior, setup = life_prior(args, base_prior)  # --earlier read after the target checks
        data = read_life_inputs(args, units, status)  # FILE [MORE ...], --strict, --status
        stats = {g: st for g, (_, st) in group_data(data).items()}
        check_prior_use(data, stats, prior)  # refuse before the sampler starts
        result = assess_life(data, mission, target, confidence, prior, seed=args.seed,
                             compare=args.compare, compare_models=args.compare_models,
                             check_fit=args.check_fit, new_units=args.new_units)
        record = life_record(result, data, data.sha256, command_line(args.argv), versions())
        source_evidence(record, data, ["group", "unit"])
        record.update(life_prior_evidence(args, result, data, prior, setup))
        return record

    def text(record: dict) -> str:
        from qualbayes.evidence.life_record import life_text  # noqa: PLC0415

        return life_text(record)

    return execute(args, Command(compute, text, lambda record: _evidence(record, args)))


def _evidence(record: dict, args) -> dict:
    """The files of --out DIR: workbook, run record, both figures of every group with an
    answer and, with a prior option, the prior figure; written as one group."""
    from qualbayes.commands.pipeline import record_writer  # noqa: PLC0415
    from qualbayes.commands.prior_options import figure_file, used  # noqa: PLC0415
    from qualbayes.evidence.inputs_sheets import with_input_rows  # noqa: PLC0415
    from qualbayes.evidence.life_plots import (  # noqa: PLC0415
        draw_fit_check,
        draw_probability,
        draw_reliability,
        figure_names,
    )
    from qualbayes.evidence.life_record import life_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    files = {WORKBOOK: workbook_writer(with_input_rows(life_sheets(record), record)),
             RECORD: record_writer(record, draws=True)}  # rebuilds the report (figures)
    q = record["question"]
    checked = any(g.get("fit_check") for g in record["groups"])
    names = figure_names([g["group"] for g in record["groups"]], checked)
    for group, (_, prob_name, rel_name, *more) in zip(record["groups"], names, strict=True):
        if group["plot"] is None:
            continue
        files[prob_name] = lambda p, g=group: draw_probability(g, q, p, force=True)
        files[rel_name] = lambda p, g=group: draw_reliability(g, q, p, force=True)
        if group.get("fit_check"):
            files[more[0]] = lambda p, g=group: draw_fit_check(g, q, p, force=True)
    if used(args):
        files[FIGURE] = figure_file(record)
    return files
