"""Options shared by the commands, and emitting a finished run.

Commands run through :mod:`qualbayes.commands.pipeline`; the helpers below stay for callers
written against the earlier layout and go through the same safe target checks and writes.
"""

from __future__ import annotations

import argparse


class HelpFormatter(argparse.ArgumentDefaultsHelpFormatter):
    """Help that states each default once: "(default: X)" is added only when the help text
    does not already speak of its default and there is a default worth stating."""

    def _get_help_string(self, action):
        text = action.help or ""
        if "default" in text.lower() or action.default in (None, False, "", argparse.SUPPRESS):
            return text
        return super()._get_help_string(action)


LOTS_COLUMNS_EXAMPLE = "inspected=Checked Qty,lot=Batch"
#: what --sheet does for lots, life and suppliers (data/sheets.py picks the sheet when none
#: is named)
SHEET_HELP = ("xlsx sheet to read (default: the only visible sheet; among several, the one "
              "whose header holds the needed columns; if none or several do, the error "
              "lists the sheets)")
#: ... and for readers that take the first visible sheet (stress-life and fleet files)
FIRST_SHEET_HELP = "xlsx sheet to read (default: the first visible one)"


def add_input_options(p: argparse.ArgumentParser,
                      columns_example: str = LOTS_COLUMNS_EXAMPLE,
                      sheet_help: str = SHEET_HELP) -> None:
    p.add_argument("file", help="xlsx or csv export")
    p.add_argument("--sheet", help=sheet_help)
    p.add_argument("--columns", metavar="KEY=HEADER,...",
                   help="name columns whose headers are not recognised, "
                        f"e.g. --columns '{columns_example}'")
    p.add_argument("--max-rows", type=int, default=500_000,
                   help="refuse files with more data rows than this")


def add_output_options(p: argparse.ArgumentParser, *,
                       out_help: str = "write the evidence workbook into DIR",
                       confidence_help: str = "confidence C for bounds and decisions, "
                                              "strictly between 0.5 and 1") -> None:
    p.add_argument("--confidence", default="0.95", help=confidence_help)
    p.add_argument("--seed", type=int, default=20261202, help="random seed for the sampler")
    p.add_argument("--json", action="store_true", help="write one JSON document to stdout")
    p.add_argument("--out", metavar="DIR", help=out_help)
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
