"""``qualbayes suppliers FILE --spec LIMIT [--period quarter]``: how does each supplier's
defect rate compare with the limit, with its own past, and with the other suppliers?"""

from __future__ import annotations

import argparse

from qualbayes.commands.common import add_input_options, emit
from qualbayes.commands.inputs import add_export_options, read_lot_inputs, source_evidence

WORKBOOK = "supplier_scorecard.xlsx"
RECORD = "supplier_scorecard.json"
FIGURE = "supplier_rates.png"


def register(sub) -> None:
    p = sub.add_parser(
        "suppliers", help="compare suppliers' defect rates: against the limit, over time and "
                          "with each other (hierarchical model, NUTS)",
        description="For each supplier (and each month or quarter): units inspected, "
                    "defectives, posterior defect rate (median, one-sided upper bound), "
                    "P(rate > limit), P(latest period worse than the earlier ones) and "
                    "P(this supplier is the worst), under a hierarchical model across "
                    "suppliers.",
        formatter_class=argparse.ArgumentDefaultsHelpFormatter)
    add_input_options(p)
    add_export_options(p)
    p.add_argument("--spec", required=True, help="defect-rate limit: 0.01, 1%% or 10000ppm")
    p.add_argument("--period", choices=("quarter", "month"),
                   help="also rate each supplier per quarter or month of the date column")
    p.add_argument("--confidence", default="0.95",
                   help="confidence C for bounds and calls (default 0.95)")
    p.add_argument("--seed", type=int, default=20261202, help="random seed for the sampler")
    p.add_argument("--json", action="store_true", help="write one JSON document to stdout")
    p.add_argument("--out", metavar="DIR",
                   help="write the workbook, run record and chart into DIR")
    p.add_argument("--force", action="store_true",
                   help="allow replacing files of an earlier run in --out")
    p.set_defaults(func=run, report=None)


def run(args) -> int:
    from pathlib import Path  # noqa: PLC0415

    from qualbayes.evidence.files import check_targets  # noqa: PLC0415
    from qualbayes.evidence.suppliers_record import (  # noqa: PLC0415
        suppliers_record,
        suppliers_text,
    )
    from qualbayes.provenance import command_line, versions  # noqa: PLC0415
    from qualbayes.questions import parse_probability, parse_rate  # noqa: PLC0415
    from qualbayes.scorecard import assess_suppliers, scorecard_cells  # noqa: PLC0415

    spec = parse_rate(args.spec)
    confidence = parse_probability(args.confidence, "--confidence")
    targets = [Path(args.out) / f for f in (WORKBOOK, RECORD, FIGURE)] if args.out else []
    check_targets(targets, args.force)
    data = read_lot_inputs(args)
    scorecard_cells(data, args.period)  # refuse missing suppliers or dates before sampling
    result = assess_suppliers(data, spec, confidence, period=args.period, seed=args.seed)
    record = suppliers_record(result, data, data.sources[0]["sha256"],
                              command_line(args.argv), versions())
    source_evidence(record, data, ["lot"])
    if targets:
        _write(record, targets, args.force)
    emit(args, record, "" if args.json else suppliers_text(record), targets)
    return 0


def _write(record, targets, force) -> None:
    """Workbook, run record and chart, written as one group (all or none)."""
    from qualbayes.evidence.files import write_group  # noqa: PLC0415
    from qualbayes.evidence.inputs_sheets import with_input_rows  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps, without_draws  # noqa: PLC0415
    from qualbayes.evidence.supplier_plots import figure_writer  # noqa: PLC0415
    from qualbayes.evidence.suppliers_record import suppliers_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    text = dumps(without_draws(record))
    write_group([(targets[0], workbook_writer(with_input_rows(suppliers_sheets(record),
                                                              record))),
                 (targets[1], lambda p: p.write_text(text, encoding="utf-8")),
                 (targets[2], figure_writer(record))], force=force)
