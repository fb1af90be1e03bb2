"""``qualbayes lots FILE --spec LIMIT``: can each lot be accepted against its limit?"""

from __future__ import annotations

import argparse

from qualbayes.commands.common import (
    add_input_options,
    add_output_options,
    check_report,
    emit,
    out_targets,
)
from qualbayes.commands.inputs import add_export_options, read_lot_inputs, source_evidence
from qualbayes.commands.prior_options import add_prior_options

WORKBOOK = "lot_decisions.xlsx"
RECORD = "lot_decisions.json"
FIGURE = "lot_prior.png"  # only with --believe, --earlier or --sensitivity


def register(sub) -> None:
    p = sub.add_parser(
        "lots", help="decide lot by lot whether the defect rate is within its limit",
        description="For each lot: posterior of the defect rate p, P(p <= spec | data), and "
                    "accept / reject / undecided at the stated confidence.",
        formatter_class=argparse.ArgumentDefaultsHelpFormatter)
    add_input_options(p)
    add_export_options(p)
    p.add_argument("--spec", required=True, help="defect-rate limit: 0.01, 1%% or 10000ppm")
    p.add_argument("--prior", default=None,
                   help="uniform | jeffreys | beta:A,B | history (hierarchical over the "
                        "lots of each part number, NUTS); default uniform")
    add_prior_options(p, "p", "lots")
    add_output_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from qualbayes.acceptance import assess_lots  # noqa: PLC0415
    from qualbayes.commands.prior_options import lot_prior, lot_prior_evidence  # noqa: PLC0415
    from qualbayes.evidence.files import check_targets  # noqa: PLC0415
    from qualbayes.evidence.lots_record import (  # noqa: PLC0415
        lots_record,
        lots_text,
    )
    from qualbayes.provenance import command_line, versions  # noqa: PLC0415
    from qualbayes.questions import parse_probability, parse_rate  # noqa: PLC0415

    spec = parse_rate(args.spec)
    confidence = parse_probability(args.confidence, "--confidence")
    prior, setup = lot_prior(args)
    targets = _targets(args)
    check_targets(targets, args.force)
    check_report(args)
    data = read_lot_inputs(args)
    result = assess_lots(data, spec, confidence, prior, seed=args.seed)
    record = lots_record(result, data, data.sources[0]["sha256"], command_line(args.argv),
                         versions())
    source_evidence(record, data, ["lot"])
    record.update(lot_prior_evidence(args, result, prior, setup, spec, confidence))
    if targets:
        _write(record, data, targets, args.force)
    emit(args, record, "" if args.json else lots_text(record), targets)
    return 0


def _targets(args):
    return out_targets(args, WORKBOOK, RECORD, FIGURE)


def _write(record, data, targets, force) -> None:
    """The workbook and its run record are written as one group: both complete under
    temporary names, then renamed into place, so a killed run never leaves a new workbook
    beside an old record."""
    from qualbayes.evidence.files import write_group  # noqa: PLC0415
    from qualbayes.evidence.inputs_sheets import with_input_rows  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps  # noqa: PLC0415
    from qualbayes.evidence.lots_record import lots_sheets, without_draws  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    text = dumps(without_draws(record))
    figure = []
    if len(targets) > 2:
        from qualbayes.commands.prior_options import figure_file  # noqa: PLC0415

        figure = [(targets[2], figure_file(record))]
    write_group([(targets[0], workbook_writer(
        with_input_rows(lots_sheets(record, data), record))),
                 (targets[1], lambda p: p.write_text(text, encoding="utf-8")), *figure],
                force=force)
