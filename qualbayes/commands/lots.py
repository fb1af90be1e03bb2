"""``qualbayes lots FILE --spec LIMIT``: can each lot be accepted against its limit?"""

from __future__ import annotations

from qualbayes.commands.common import HelpFormatter, add_input_options, add_output_options
from qualbayes.commands.prior_options import add_prior_options

WORKBOOK = "lot_decisions.xlsx"
RECORD = "lot_decisions.json"
FIGURE = "lot_prior.png"  # only with --believe, --earlier or --sensitivity


def register(sub) -> None:
    p = sub.add_parser(
        "lots", help="decide lot by lot whether the defect rate is within its limit",
        description="For each lot: posterior of the defect rate p, P(p <= spec | data), and "
                    "accept / reject / undecided at the stated confidence.",
        formatter_class=HelpFormatter)
    add_input_options(p)
    p.add_argument("--spec", required=True, help="defect-rate limit: 0.01, 1%% or 10000ppm")
    p.add_argument("--prior", default=None,
                   help="uniform | jeffreys | beta:A,B | history (hierarchical over the "
                        "lots of each part number, NUTS) (default: uniform)")
    add_prior_options(p, "p", "lots")
    add_output_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, execute  # noqa: PLC0415

    spec = convert.rate(args.spec)
    confidence = convert.confidence(args.confidence)
    convert.seed(args.seed)
    convert.max_rows(args.max_rows)

    def compute() -> dict:
        from qualbayes.acceptance import assess_lots  # noqa: PLC0415
        from qualbayes.commands.prior_options import (  # noqa: PLC0415
            lot_prior,
            lot_prior_evidence,
        )
        from qualbayes.data.lots import read_lots  # noqa: PLC0415
        from qualbayes.evidence.lots_record import lots_record  # noqa: PLC0415
        from qualbayes.evidence.numbers import rate_unit_of  # noqa: PLC0415
        from qualbayes.provenance import command_line, sha256_file, versions  # noqa: PLC0415

        prior, setup = lot_prior(args)  # --earlier is read here, after the target checks
        data = read_lots(args.file, sheet=args.sheet, columns=args.columns,
                         max_rows=args.max_rows)
        sha = data.sha256 or sha256_file(args.file)  # the hash of the bytes parsed
        result = assess_lots(data, spec, confidence, prior, seed=args.seed)
        record = lots_record(result, data, sha, command_line(args.argv), versions())
        record.update(lot_prior_evidence(args, result, prior, setup, spec, confidence))
        record["question"]["rate_unit"] = rate_unit_of(args.spec)
        return record

    def text(record: dict) -> str:
        from qualbayes.evidence.lots_record import lots_text  # noqa: PLC0415

        return lots_text(record)

    return execute(args, Command(compute, text, lambda record: _evidence(record, args)))


def _evidence(record: dict, args) -> dict:
    """The files of --out DIR: the workbook, its run record and, with a prior option, the
    prior figure (all rendered from the record; written as one group)."""
    from qualbayes.commands.pipeline import record_writer  # noqa: PLC0415
    from qualbayes.commands.prior_options import figure_file, used  # noqa: PLC0415
    from qualbayes.evidence.lots_record import lots_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    files = {WORKBOOK: workbook_writer(lots_sheets(record)),
             RECORD: record_writer(record, draws=True)}  # rebuilds the report (figures)
    if used(args):
        files[FIGURE] = figure_file(record)
    return files
