"""Options shared by the commands, and emitting a finished run.

Commands run through :mod:`qualbayes.commands.pipeline`; the helpers below stay for callers
written against the earlier layout and go through the same safe target checks and writes.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from qualbayes.caution import CAUTION


class HelpFormatter(argparse.ArgumentDefaultsHelpFormatter):
    """Help that states each default once: "(default: X)" is added only when the help text
    does not already speak of its default and there is a default worth stating."""

    def _get_help_string(self, action):
        text = action.help or ""
        if "default" in text.lower() or action.default in (None, False, "", argparse.SUPPRESS):
            return text
        return super()._get_help_string(action)


LOTS_COLUMNS_EXAMPLE = "inspected=Checked Qty,lot=Batch"


def add_input_options(p: argparse.ArgumentParser,
                      columns_example: str = LOTS_COLUMNS_EXAMPLE) -> None:
    p.add_argument("file", help="xlsx or csv export")
    p.add_argument("--sheet", help="xlsx sheet to read (default: the first visible one)")
    p.add_argument("--columns", metavar="KEY=HEADER,...",
                   help="name columns whose headers are not recognised, "
                        f"e.g. --columns '{columns_example}'")
    p.add_argument("--max-rows", type=int, default=500_000,
                   help="refuse files with more data rows than this")


def add_output_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--confidence", default="0.95",
                   help="confidence C for bounds and decisions, strictly between 0.5 and 1")
    p.add_argument("--seed", type=int, default=20261202, help="random seed for the sampler")
    p.add_argument("--json", action="store_true", help="write one JSON document to stdout")
    p.add_argument("--out", metavar="DIR", help="write the evidence workbook into DIR")
    p.add_argument("--report", metavar="DIR",
                   help="write the audit report (HTML, PDF, workbook, run record, figures) "
                        "into the new folder DIR")
    p.add_argument("--force", action="store_true",
                   help="allow replacing files of an earlier run in --out or --report")
    add_analyst_option(p)


def add_analyst_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--analyst", metavar="NAME",
                   help="who prepared the analysis: recorded in the run record and shown in "
                        "the report's sign-off block")


def stamp(record: dict, args) -> dict:
    """Add the run metadata (UTC time, report id, tool version, analyst) to ``record``."""
    from qualbayes.evidence.report_common import run_metadata  # noqa: PLC0415

    record.update(run_metadata(record, getattr(args, "analyst", None)))
    return record


def check_report(args) -> None:
    """Refuse before any work if the --report folder holds an earlier report."""
    if getattr(args, "report", None):
        from qualbayes.evidence.report_folder import check_report_target  # noqa: PLC0415

        check_report_target(args.report, args.force)


def write_report(args, record: dict) -> str | None:
    if not getattr(args, "report", None):
        return None
    from qualbayes import progress  # noqa: PLC0415
    from qualbayes.evidence.report_folder import write_report_folder  # noqa: PLC0415

    with progress.task("building the report (figures, HTML, PDF)"):
        write_report_folder(args.report, record, force=args.force)
    return f"report written: {args.report}/report.html, report.pdf"


def print_text(text: str) -> None:
    """Print to the terminal with control characters escaped."""
    from qualbayes.evidence.terminal import print_text as _print  # noqa: PLC0415

    _print(text)


def caution_line() -> str:
    return CAUTION


def out_path(args, filename: str) -> Path | None:
    return Path(args.out) / filename if getattr(args, "out", None) else None


def emit(args, record: dict, text: str, written: list) -> None:
    """Finish a run: write the report if asked, then print the JSON document (without the
    posterior draws) or the text with the files written."""
    from qualbayes.evidence.jsonout import dumps_for_terminal, without_draws  # noqa: PLC0415
    from qualbayes.evidence.terminal import print_text as _print  # noqa: PLC0415

    report_note = write_report(args, record)
    if args.json:
        _print(dumps_for_terminal(without_draws(record)), raw=True)
        return
    print_text(text)
    if written:
        print_text(f"evidence written: {', '.join(str(t) for t in written)}")
    if report_note:
        print_text(report_note)


def out_targets(args, workbook: str, record: str, prior_figure: str) -> list:
    """Files ``--out DIR`` will hold: the workbook, the run record, and the prior figure
    when a prior option was used."""
    from pathlib import Path  # noqa: PLC0415

    from qualbayes.commands.prior_options import used  # noqa: PLC0415

    if not args.out:
        return []
    figure = [Path(args.out) / prior_figure] if used(args) else []
    return [Path(args.out) / workbook, Path(args.out) / record, *figure]
