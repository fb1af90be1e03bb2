"""``qualbayes report RUN.json --out DIR`` (or ``--report DIR``): rebuild a report from a saved
run record (lots, life, plan, at-use, returns and supplier scorecard records).

The record is read as untrusted input (:mod:`qualbayes.evidence.run_record`): file kind, size,
depth, every key the report uses, its digest, and every decision against its probability and
gate. A record written before records carried a digest rebuilds with an "unverified record"
banner at the top of the report.
"""

from __future__ import annotations


def register(sub) -> None:
    p = sub.add_parser("report", help="rebuild the audit report of a saved run record",
                       description="Rebuilds report.html, report.pdf, evidence.xlsx and the "
                                   "figures from run.json, with identical tables.")
    p.add_argument("record", help="run.json of an earlier run (in its report folder)")
    p.add_argument("--out", "--report", dest="out", required=True, metavar="DIR",
                   help="new report folder")
    p.add_argument("--force", action="store_true",
                   help="replace DIR if it holds an earlier qualbayes report")
    p.set_defaults(func=run)


def run(args) -> int:
    from pathlib import Path  # noqa: PLC0415

    from qualbayes.commands.pipeline import check_outputs  # noqa: PLC0415
    from qualbayes.errors import InputError  # noqa: PLC0415
    from qualbayes.evidence.output_set import write_set  # noqa: PLC0415
    from qualbayes.evidence.report_folder import KINDS, UNVERIFIED, report_files  # noqa: PLC0415
    from qualbayes.evidence.run_record import read_record  # noqa: PLC0415
    from qualbayes.evidence.terminal import print_text  # noqa: PLC0415

    source, out = Path(args.record).resolve(), Path(args.out).resolve()
    if source.parent == out or out in source.parents:
        raise InputError("the report folder holds the run record being rebuilt; choose "
                         "another --out folder (the record is never replaced)",
                         file=args.record)
    targets = check_outputs(args)  # before the record is even read
    record, verified = read_record(args.record, KINDS)
    banner = None if verified else UNVERIFIED
    from qualbayes import progress  # noqa: PLC0415

    try:
        with progress.task("rebuilding the report (figures, HTML, PDF)"):
            files, info = report_files(record, banner)
    except (KeyError, TypeError, ValueError, IndexError, AttributeError) as err:
        raise InputError(f"run record lacks what the report needs ({type(err).__name__}: "
                         f"{str(err)[:160]})", file=args.record) from None
    write_set(targets["--out"], files, force=args.force, option="--out", kind="report",
              stamp={"report_id": record.get("report_id")})
    print_text(f"report rebuilt in {args.out} ({info['pages']} PDF pages, "
               f"{info['figures']} figures)" + ("" if verified else
                                                 "; UNVERIFIED record (no digest)"))
    print_text(str(record.get("caution", "")))
    return 0
