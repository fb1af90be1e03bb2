"""``qualbayes lots FILE --spec LIMIT``: can each lot be accepted against its limit?"""

from __future__ import annotations

from qualbayes.commands.common import HelpFormatter, add_input_options, add_output_options
from qualbayes.commands.inputs import add_export_options
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
    add_export_options(p)
    p.add_argument("--spec", required=True, help="defect-rate limit: 0.01, 1%% or 10000ppm")
    p.add_argument("--prior", default=None,
                   help="uniform | jeffreys | beta:A,B | history (hierarchical over the "
                        "lots of each group, NUTS; docs/lots.md) | history-phi-uniform (the "
                        "earlier history prior, not recommended) (default: uniform)")
    p.add_argument("--pool-by", default="part", metavar="COLUMNS",
                   help="with --prior history: the columns whose values make one history, "
                        "e.g. part, supplier or part,supplier")
    p.add_argument("--lot-spread", default=None, metavar="CV",
                   help="with --prior history: how much you expect lot rates to differ, as "
                        "the scale S of the lot-to-lot coefficient of variation (95%% prior "
                        "probability that it is below 1.96 S); default 0.5 (docs/lots.md)")
    p.add_argument("--decide-about", default="lot", choices=("lot", "process"),
                   help="lot: the lot's own fraction defective when its lot size is given "
                        "(else the rate); process: always the defect rate p of the process")
    p.add_argument("--engine", default="nuts", choices=("nuts", "quadrature"),
                   help="with --prior history: nuts (sampled, gated, the default) or "
                        "quadrature (the exact grid posterior of each group: deterministic, "
                        "for large batches; docs/lots.md, 'Which engine answers')")
    p.add_argument("--processes", default=None, metavar="N",
                   help="with --engine quadrature: split the groups over N processes on this "
                        "machine (needs the extra qualbayes[cluster])")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="with --engine quadrature: run the groups on a running Dask cluster, "
                        "e.g. tcp://10.0.0.5:8786 (needs qualbayes[cluster])")
    add_prior_options(p, "p", "lots")
    add_output_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, execute  # noqa: PLC0415

    spec = convert.rate(args.spec)
    confidence = convert.shared(args)

    def compute() -> dict:
        from qualbayes.commands.inputs import read_lot_inputs, source_evidence  # noqa: PLC0415
        from qualbayes.commands.prior_options import (  # noqa: PLC0415
            lot_prior,
            lot_prior_evidence,
        )
        from qualbayes.evidence.lot_record import lots_record  # noqa: PLC0415
        from qualbayes.evidence.numbers import rate_unit_of  # noqa: PLC0415
        from qualbayes.lot_question import assess_lots  # noqa: PLC0415
        from qualbayes.provenance import command_line, versions  # noqa: PLC0415

        prior, setup = lot_prior(args)  # --earlier is read here, after the target checks
        data = read_lot_inputs(args)  # FILE [MORE ...], --strict; each file hashed once
        result = assess_lots(data, spec, confidence, prior, seed=args.seed,
                             **_lot_options(args, prior), check_prior_conflict=setup is not None)
        record = lots_record(result, data, data.sha256, command_line(args.argv), versions())
        source_evidence(record, data, ["lot"])
        record.update(lot_prior_evidence(args, result, prior, setup, spec, confidence))
        record["question"]["rate_unit"] = rate_unit_of(args.spec)
        return record

    def text(record: dict) -> str:
        from qualbayes.evidence.lot_record import lots_text  # noqa: PLC0415

        return lots_text(record)

    return execute(args, Command(compute, text, lambda record: _evidence(record, args)))


def _lot_options(args, prior) -> dict:
    """--pool-by, --lot-spread and --decide-about as keyword arguments (checked: exit 2)."""
    from qualbayes.errors import OptionError  # noqa: PLC0415
    from qualbayes.models.lot_prior import HISTORY  # noqa: PLC0415

    cols = tuple(c.strip().lower() for c in str(args.pool_by).split(",") if c.strip())
    if not cols or any(c not in ("part", "supplier") for c in cols) or len(set(cols)) < len(
            cols):
        raise OptionError(f"--pool-by {args.pool_by!r}: name part, supplier or both "
                          "(e.g. part,supplier), each once")
    spread = None
    if args.lot_spread is not None:
        if prior != HISTORY:
            raise OptionError("--lot-spread is the spread of the history prior: use it with "
                              "--prior history")
        try:
            spread = float(args.lot_spread)
        except ValueError:
            spread = float("nan")
        if not 0.01 <= spread <= 10:
            raise OptionError(f"--lot-spread {args.lot_spread!r}: a coefficient of variation "
                              "between 0.01 and 10, e.g. 0.5")
    from qualbayes.commands.convert import engine_options  # noqa: PLC0415
    from qualbayes.models.lot_prior import HISTORY_PHI_UNIFORM  # noqa: PLC0415

    engine = engine_options(args.engine, args.processes, args.scheduler,
                            prior in (HISTORY, HISTORY_PHI_UNIFORM))
    if engine["engine"] == "quadrature" and getattr(args, "report", None):
        raise OptionError("--report with --engine quadrature is not available yet (the "
                          "report's figures are drawn from sampled draws): use --out DIR for "
                          "the workbook and run record, or --engine nuts for the report")
    # the command owns its process and guards its main module: a large quadrature batch
    # may run on local processes (qualbayes.lot_batch.local_processes)
    pool = {"local_pool": True} if engine["engine"] == "quadrature" else {}
    return {"group_by": cols, "decision_basis": args.decide_about, "lot_spread": spread,
            **{k: v for k, v in engine.items() if v is not None}, **pool}


def _evidence(record: dict, args) -> dict:
    """The files of --out DIR: the workbook, its run record and, with a prior option, the
    prior figure (all rendered from the record; written as one group)."""
    from qualbayes.commands.pipeline import record_writer  # noqa: PLC0415
    from qualbayes.commands.prior_options import figure_file, used  # noqa: PLC0415
    from qualbayes.evidence.inputs_sheets import with_input_rows  # noqa: PLC0415
    from qualbayes.evidence.lot_record import lots_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    files = {WORKBOOK: workbook_writer(with_input_rows(lots_sheets(record), record)),
             RECORD: record_writer(record, draws=True)}  # rebuilds the report (figures)
    if used(args):
        files[FIGURE] = figure_file(record)
    return files
