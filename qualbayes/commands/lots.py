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
    p.add_argument("--spec", required=True, help="defect-rate limit: 0.01, 1%% or 10000ppm")
    p.add_argument("--prior", default=None,
                   help="uniform | jeffreys | beta:A,B | history (hierarchical over the "
                        "lots of each group, NUTS; docs/lots.md) | history-phi-uniform (the "
                        "earlier history prior, not recommended); default uniform")
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
    add_prior_options(p, "p", "lots")
    add_output_options(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from qualbayes.acceptance import assess_lots  # noqa: PLC0415
    from qualbayes.commands.prior_options import lot_prior, lot_prior_evidence  # noqa: PLC0415
    from qualbayes.data.lots import read_lots  # noqa: PLC0415
    from qualbayes.evidence.files import check_targets  # noqa: PLC0415
    from qualbayes.evidence.lots_record import (  # noqa: PLC0415
        lots_record,
        lots_text,
    )
    from qualbayes.provenance import command_line, sha256_file, versions  # noqa: PLC0415
    from qualbayes.questions import parse_probability, parse_rate  # noqa: PLC0415

    spec = parse_rate(args.spec)
    confidence = parse_probability(args.confidence, "--confidence")
    prior, setup = lot_prior(args)
    targets = _targets(args)
    check_targets(targets, args.force)
    check_report(args)
    data = read_lots(args.file, sheet=args.sheet, columns=args.columns, max_rows=args.max_rows)
    sha = sha256_file(args.file)
    result = assess_lots(data, spec, confidence, prior, seed=args.seed, **_lot_options(args, prior),
                         check_prior_conflict=setup is not None)
    record = lots_record(result, data, sha, command_line(args.argv), versions())
    record.update(lot_prior_evidence(args, result, prior, setup, spec, confidence))
    if targets:
        _write(record, data, targets, args.force)
    emit(args, record, "" if args.json else lots_text(record), targets)
    return 0


def _lot_options(args, prior) -> dict:
    """--pool-by, --lot-spread and --decide-about as keyword arguments (checked: exit 2)."""
    from qualbayes.errors import OptionError  # noqa: PLC0415
    from qualbayes.models.priors import HISTORY  # noqa: PLC0415

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
    return {"group_by": cols, "decision_basis": args.decide_about, "lot_spread": spread}


def _targets(args):
    return out_targets(args, WORKBOOK, RECORD, FIGURE)


def _write(record, data, targets, force) -> None:
    """The workbook and its run record are written as one group: both complete under
    temporary names, then renamed into place, so a killed run never leaves a new workbook
    beside an old record."""
    from qualbayes.evidence.files import write_group  # noqa: PLC0415
    from qualbayes.evidence.jsonout import dumps  # noqa: PLC0415
    from qualbayes.evidence.lots_record import lots_sheets, without_draws  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    text = dumps(without_draws(record))
    figure = []
    if len(targets) > 2:
        from qualbayes.commands.prior_options import figure_file  # noqa: PLC0415

        figure = [(targets[2], figure_file(record))]
    write_group([(targets[0], workbook_writer(lots_sheets(record, data))),
                 (targets[1], lambda p: p.write_text(text, encoding="utf-8")), *figure],
                force=force)
