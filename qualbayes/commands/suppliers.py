"""``qualbayes suppliers FILE --spec LIMIT [--period quarter]``: how does each supplier's
defect rate compare with the limit, with its own past, and with the other suppliers?

Runs through the one pipeline (:mod:`qualbayes.commands.pipeline`): options converted first,
targets checked before any work, the exports read inside ``compute()``, the record stamped
and sealed, the ``--out`` evidence set rendered in memory and written as one group.
(``--report`` is not offered for this command yet: the audit report knows lots, life,
at-use and returns records.)"""

from __future__ import annotations

from qualbayes.commands.common import HelpFormatter, add_input_options, add_output_options
from qualbayes.commands.inputs import add_export_options

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
        formatter_class=HelpFormatter)
    add_input_options(p)
    add_export_options(p)
    p.add_argument("--spec", required=True, help="defect-rate limit: 0.01, 1%% or 10000ppm")
    p.add_argument("--period", choices=("quarter", "month"),
                   help="also rate each supplier per quarter or month of the date column")
    add_output_options(p, out_help="write the workbook, run record and chart into DIR",
                       confidence_help="confidence C for bounds and calls, strictly between "
                                       "0.5 and 1")
    p.set_defaults(func=run)


def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, execute  # noqa: PLC0415

    spec = convert.rate(args.spec)
    confidence = convert.shared(args)

    def compute() -> dict:
        from qualbayes.commands.inputs import read_lot_inputs, source_evidence  # noqa: PLC0415
        from qualbayes.evidence.numbers import rate_unit_of  # noqa: PLC0415
        from qualbayes.evidence.suppliers_record import suppliers_record  # noqa: PLC0415
        from qualbayes.provenance import command_line, versions  # noqa: PLC0415
        from qualbayes.scorecard import assess_suppliers, scorecard_cells  # noqa: PLC0415

        data = read_lot_inputs(args)  # FILE [MORE ...], --strict; each file hashed once
        scorecard_cells(data, args.period)  # refuse missing suppliers or dates before sampling
        result = assess_suppliers(data, spec, confidence, period=args.period, seed=args.seed)
        record = suppliers_record(result, data, data.sha256, command_line(args.argv),
                                  versions(), rate_unit=rate_unit_of(args.spec))
        source_evidence(record, data, ["lot"])
        return record

    def text(record: dict) -> str:
        from qualbayes.evidence.suppliers_record import suppliers_text  # noqa: PLC0415

        return suppliers_text(record)

    return execute(args, Command(compute, text, _evidence))


def _evidence(record: dict) -> dict:
    """The files of --out DIR: workbook, run record (with the draws) and chart, rendered from
    the record and written as one group by the pipeline."""
    from qualbayes.commands.pipeline import record_writer  # noqa: PLC0415
    from qualbayes.evidence.supplier_plots import figure_writer  # noqa: PLC0415
    from qualbayes.evidence.suppliers_record import suppliers_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    return {WORKBOOK: workbook_writer(suppliers_sheets(record)),
            RECORD: record_writer(record),
            FIGURE: figure_writer(record)}
