"""One pipeline for every command:

  options parsed (commands/convert.py, by the command)
  -> every input protected and every output target checked, before any computation
  -> compute (read the data, ask the question) -> the run record (stamped and sealed)
  -> render every file in memory -> one locked group write per output folder
  -> print the text (control characters escaped) or the JSON document.

A command supplies what differs: its inputs, its targets' contents and its text. Nothing is
written before the whole answer and every file of it exist; anything that fails before the
write leaves the disk as it was.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from qualbayes.errors import OptionError

Files = dict[str, Callable[[Path], None]]


@dataclass
class Command:
    """What one run needs from its command module."""

    compute: Callable[[], dict]                       # -> the run record (plain dict)
    text: Callable[[dict], str]                       # record -> terminal text
    evidence: Callable[[dict], Files] | None = None   # record -> files of --out DIR
    inputs: list = field(default_factory=list)        # paths read by the run
    json_document: Callable[[dict], dict] | None = None


def input_paths(args) -> list:
    """Every path the run reads: FILE and further exports (each may be written FILE:SHEET),
    --earlier (when it is a file), --history, RECORD."""
    names = [getattr(args, name, None) for name in ("file", "earlier", "history", "record")]
    names += list(getattr(args, "more", None) or [])
    found = []
    for value in names:
        if not isinstance(value, str) or not value:
            continue
        if not os.path.lexists(value) and ":" in value:
            value = value.rsplit(":", 1)[0]  # FILE:SHEET (data/combine.py parse_source)
        if value and os.path.lexists(value):
            found.append(value)
    return found


def check_outputs(args) -> dict[str, Path]:
    """Check --out and --report (exit 2 for a bad place, 3 for a folder that must not be
    replaced) before anything is computed; returns {option: folder}."""
    from qualbayes.evidence.files import protect_inputs  # noqa: PLC0415
    from qualbayes.evidence.output_set import check_target  # noqa: PLC0415

    protect_inputs(*input_paths(args))
    force = bool(getattr(args, "force", False))
    targets = {}
    for option in ("--out", "--report"):
        value = getattr(args, option[2:], None)
        if value:
            if "\x00" in value:
                raise OptionError(f"{option}: the folder name contains a NUL character")
            targets[option] = Path(value)
    if len(targets) == 2:
        a, b = (Path(os.path.abspath(p)) for p in targets.values())
        if a == b or a in b.parents or b in a.parents:
            raise OptionError("--out and --report must be two separate folders, neither "
                              "inside the other")
    for option, folder in targets.items():
        check_target(folder, force, option)
    return targets


def execute(args, command: Command) -> int:
    """Run a command through the pipeline; returns the exit status (0)."""
    from qualbayes.evidence.run_record import seal, stamp  # noqa: PLC0415

    targets = check_outputs(args)
    record = seal(stamp(command.compute(), getattr(args, "analyst", None)))
    shown = render_terminal(args, record, command)  # rendered before anything is written
    sets = render_sets(record, targets, command.evidence)
    written = write_sets(args, record, targets, sets)
    from qualbayes.evidence.terminal import print_text  # noqa: PLC0415

    print_text(shown, raw=bool(getattr(args, "json", False)))
    for line in ([] if getattr(args, "json", False) else written):
        print_text(line)
    return 0


def render_terminal(args, record: dict, command: Command) -> str:
    """The JSON document (sealed, without the draws) or the terminal text."""
    from qualbayes.evidence.jsonout import dumps_for_terminal, without_draws  # noqa: PLC0415
    from qualbayes.evidence.run_record import seal  # noqa: PLC0415

    if getattr(args, "json", False):
        document = command.json_document(record) if command.json_document else record
        if document is not record or "posterior_draws" in document:
            document = seal(without_draws(document))  # a different document: its own digest
        # else: the record itself, sealed once above (sealing a 200,000-lot record again
        # cost seconds for the same digest)
        return dumps_for_terminal(document)
    return command.text(record)


def render_sets(record: dict, targets: dict[str, Path],
                evidence: Callable[[dict], Files] | None) -> list[tuple]:
    """Every file of every output folder, rendered before any is written."""
    sets = []
    if "--out" in targets and evidence is not None:
        sets.append(("--out", "evidence", evidence(record), {}))
    if "--report" in targets:
        from qualbayes import progress  # noqa: PLC0415
        from qualbayes.evidence.report_folder import report_files  # noqa: PLC0415

        with progress.task("building the report (figures, HTML, PDF)"):
            files, info = report_files(record)
        sets.append(("--report", "report", files, info))
    return sets


def write_sets(args, record: dict, targets: dict[str, Path], sets: list[tuple]) -> list[str]:
    """Write each folder as one locked group; returns the lines saying what was written."""
    from qualbayes.evidence.output_set import write_set  # noqa: PLC0415

    force = bool(getattr(args, "force", False))
    lines = []
    for option, kind, files, info in sets:
        folder = targets[option]
        written = write_set(folder, files, force=force, option=option, kind=kind,
                            stamp={"report_id": record.get("report_id")})
        if kind == "report":
            lines.append(f"report written: {folder}/report.html, report.pdf "
                         f"({info.get('pages', 0)} PDF pages, {info.get('figures', 0)} "
                         "figures)")
        else:
            lines.append("evidence written: " + ", ".join(str(p) for p in written))
    return lines


def record_writer(record: dict, draws: bool = False) -> Callable[[Path], None]:
    """The writer of a record file: sealed again when the posterior draws are left out."""
    from qualbayes.evidence.jsonout import dumps, without_draws  # noqa: PLC0415
    from qualbayes.evidence.run_record import seal  # noqa: PLC0415

    text = dumps(record if draws else seal(without_draws(record)))
    return lambda p: p.write_text(text, encoding="utf-8")


def figure_writer(png: bytes) -> Callable[[Path], None]:
    return lambda p: p.write_bytes(png)
