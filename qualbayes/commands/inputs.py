"""Options for reading real exports, shared by ``lots``, ``life`` and ``suppliers``:
several input files, ``--strict`` and (life data) ``--status``."""

from __future__ import annotations

import argparse


def add_export_options(p: argparse.ArgumentParser, life: bool = False) -> None:
    p.add_argument("more", nargs="*", metavar="FILE[:SHEET]",
                   help="further exports read with the first one (each may name its sheet as "
                        "FILE:SHEET); a 'source' column says where each row came from")
    noun = "units with time and status blank" if life else "open lots (defectives blank)"
    p.add_argument("--strict", action="store_true",
                   help=f"refuse rows without a result yet ({noun}) instead of leaving them "
                        "out with a note")
    if life:
        p.add_argument("--status", action="append", metavar="TEXT=KIND",
                       help="read a status word of the file as failed or suspended, e.g. "
                            "--status \"Removed (NFF)=suspended\" (repeat for several)")


def input_names(args) -> list[str]:
    return [args.file, *(getattr(args, "more", None) or [])]


def read_lot_inputs(args):
    from qualbayes.data.combine import read_lots_files  # noqa: PLC0415

    return read_lots_files(input_names(args), sheet=args.sheet, columns=args.columns,
                           max_rows=args.max_rows, strict=args.strict)


def status_map(args):
    """--status TEXT=KIND as a StatusMap (checked before any work: exit 2)."""
    from qualbayes.data.status import StatusMap  # noqa: PLC0415

    return StatusMap.parse(args.status)


def read_life_inputs(args, units: str, status=None):
    from qualbayes.data.combine import read_life_files  # noqa: PLC0415

    return read_life_files(input_names(args), sheet=args.sheet, columns=args.columns,
                           max_rows=args.max_rows, units=units, groups=args.group,
                           strict=args.strict,
                           status=status if status is not None else status_map(args))


def source_evidence(record: dict, data, key: str) -> None:
    """Add the inputs' provenance to a run record: each file with its SHA-256, the rows
    left out, the columns not used, and each row's source when there are several files."""
    from qualbayes.data.combine import input_sha256  # noqa: PLC0415

    inp = record["input"]
    inp["sha256"] = input_sha256(data.sources)
    inp["sources"] = data.sources
    inp["rows_skipped"] = data.skipped
    inp["columns_not_used"] = list(data.unused_columns)
    if len(data.sources) > 1 and "source" in data.frame:
        where = {tuple(k): s for *k, s in data.frame[[*key, "source"]].itertuples(index=False)}
        for entry in record.get(_ENTRIES[key[-1]], []):
            entry["source"] = where.get(tuple(entry.get(k) for k in key))


_ENTRIES = {"lot": "lots", "unit": "units"}
