"""``qualbayes life FILE --mission T --target R``: does the design meet its reliability
requirement at the mission time?"""

from __future__ import annotations

import argparse

from qualbayes.commands.common import (
    add_input_options,
    add_output_options,
    check_report,
    emit,
    out_targets,
)
from qualbayes.commands.inputs import add_export_options, read_life_inputs, source_evidence
from qualbayes.commands.prior_options import add_prior_options

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
        formatter_class=argparse.ArgumentDefaultsHelpFormatter)
    add_input_options(p)
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
    add_prior_options(p, "life", "life")
    add_output_options(p)
    p.set_defaults(func=run)


def _mission(text: str) -> float:
    from qualbayes.data.values import parse_real  # noqa: PLC0415
    from qualbayes.errors import OptionError  # noqa: PLC0415

    try:
        value = parse_real(str(text))
    except ValueError:
        raise OptionError(f"--mission {text!r}: expected a positive number such as 5000"
                          ) from None
    if value <= 0:
        raise OptionError(f"--mission {text!r}: the mission time must be positive")
    return value


def run(args) -> int:
    from qualbayes.commands.prior_options import life_prior, life_prior_evidence  # noqa: PLC0415
    from qualbayes.data.life import parse_units  # noqa: PLC0415
    from qualbayes.evidence.files import check_targets  # noqa: PLC0415
    from qualbayes.evidence.life_plots import figure_names  # noqa: PLC0415
    from qualbayes.evidence.life_record import life_record, life_text  # noqa: PLC0415
    from qualbayes.life_analysis import assess_life, check_prior_use, group_data  # noqa: PLC0415
    from qualbayes.models.weibull import make_prior  # noqa: PLC0415
    from qualbayes.provenance import command_line, versions  # noqa: PLC0415
    from qualbayes.questions import parse_probability  # noqa: PLC0415

    mission = _mission(args.mission)
    target = parse_probability(args.target, "--target")
    confidence = parse_probability(args.confidence, "--confidence")
    prior = make_prior(args.shape_prior, args.blife_prior, args.reliability_prior)
    units = parse_units(args.units)
    prior, setup = life_prior(args, prior)  # --believe, --earlier (file read here)
    targets = _targets(args)
    check_targets(targets, args.force)
    check_report(args)
    data = read_life_inputs(args, units)
    stats = {g: st for g, (_, st) in group_data(data).items()}
    check_prior_use(data, stats, prior)  # refuse before the sampler starts
    figures = []
    if targets:
        from pathlib import Path  # noqa: PLC0415

        for _, prob_name, rel_name in figure_names(data.groups):
            figures += [Path(args.out) / prob_name, Path(args.out) / rel_name]
        check_targets(figures, args.force)
    result = assess_life(data, mission, target, confidence, prior, seed=args.seed)
    record = life_record(result, data, data.sources[0]["sha256"], command_line(args.argv),
                         versions())
    source_evidence(record, data, ["group", "unit"])
    record.update(life_prior_evidence(args, result, data, prior, setup))
    written = _write(record, data, targets, args.force) if targets else []
    emit(args, record, "" if args.json else life_text(record), written)
    return 0


def _targets(args):
    return out_targets(args, WORKBOOK, RECORD, FIGURE)


def _write(record, data, targets, force) -> list:
    from qualbayes.evidence.files import write_text_atomic  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps, without_draws  # noqa: PLC0415
    from qualbayes.evidence.life_plots import draw_all  # noqa: PLC0415
    from qualbayes.evidence.life_record import life_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import write_workbook  # noqa: PLC0415

    figures = draw_all(record, targets[0].parent, force)
    if len(targets) > 2:  # the prior figure
        from qualbayes.commands.prior_options import figure_file  # noqa: PLC0415
        from qualbayes.evidence.files import write_atomic  # noqa: PLC0415

        write_atomic(targets[2], figure_file(record), force)
    from qualbayes.evidence.inputs_sheets import with_input_rows  # noqa: PLC0415

    write_workbook(targets[0], with_input_rows(life_sheets(record, data), record), force=force)
    write_text_atomic(targets[1], dumps(without_draws(record)), force=force)
    return [*targets, *figures]
