"""``qualbayes report RUN.json --out DIR``: rebuild a report from a saved run record."""

from __future__ import annotations


def register(sub) -> None:
    p = sub.add_parser("report", help="rebuild the audit report of a saved run record",
                       description="Rebuilds report.html, report.pdf, evidence.xlsx and the "
                                   "figures from run.json, with identical tables.")
    p.add_argument("record", help="run.json of an earlier run (in its report folder)")
    p.add_argument("--out", required=True, metavar="DIR", help="new report folder")
    p.add_argument("--force", action="store_true", help="replace DIR if it exists")
    p.set_defaults(func=run)


def run(args) -> int:
    import json  # noqa: PLC0415

    from qualbayes.commands.common import print_text  # noqa: PLC0415
    from qualbayes.errors import InputError  # noqa: PLC0415
    from qualbayes.evidence.report_folder import KINDS, write_report_folder  # noqa: PLC0415

    try:
        with open(args.record, encoding="utf-8") as fh:
            record = json.load(fh)
    except FileNotFoundError:
        raise InputError("file not found", file=args.record) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as err:
        raise InputError(f"not a run record (invalid JSON: {err})", file=args.record) from None
    if not isinstance(record, dict) or record.get("kind") not in KINDS:
        raise InputError("not a qualbayes run record (no known 'kind')", file=args.record)
    from pathlib import Path  # noqa: PLC0415

    source = Path(args.record).resolve()
    if source.parent == Path(args.out).resolve() or Path(args.out).resolve() in source.parents:
        raise InputError("the report folder holds the run record being rebuilt; choose "
                         "another --out folder (the record is never replaced)",
                         file=args.record)
    from qualbayes import progress  # noqa: PLC0415

    with progress.task("rebuilding the report (figures, HTML, PDF)"):
        info = write_report_folder(args.out, record, force=args.force)
    print_text(f"report rebuilt in {info['folder']} ({info['pages']} PDF pages, "
               f"{info['figures']} figures)")
    print_text(record["caution"])
    return 0
