"""Several exports in one run: ``qualbayes lots a.xlsx b.xlsx:Returns ...``.

Each input is read by the ordinary reader (its own header, spellings, notes and checks), its
bytes are hashed, and the validated tables are stacked with a ``source`` column naming the
file (and sheet) each row came from. Nothing is re-numbered: every row keeps the spreadsheet
row it had in its own file, so an error or a result points at the right place. A lot id (or
a unit of a group) that appears in two inputs is refused, as it is within one file.

An input is written ``FILE`` or ``FILE:SHEET``; a name that exists as a file is always taken
whole (so a path with a colon in it still works).

>>> parse_source("export.xlsx:Lots")   # no such file here: read as file and sheet
('export.xlsx', 'Lots')
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd

from qualbayes.data.life import LifeTable, read_life
from qualbayes.data.lot_table import LotTable, read_lots
from qualbayes.errors import InputError, OptionError
from qualbayes.provenance import sha256_file


def parse_source(text: str) -> tuple[str, str | None]:
    """``FILE`` or ``FILE:SHEET`` -> (file, sheet or None)."""
    if Path(text).exists() or ":" not in text:
        return text, None
    file, sheet = text.rsplit(":", 1)
    if not file or not sheet.strip():
        return text, None
    return file, sheet


def label(file: str, sheet: str | None) -> str:
    return f"{file}:{sheet}" if sheet else file


def source_paths(inputs: list[str]) -> list[str]:
    """The files named by ``inputs`` (to protect them from being overwritten)."""
    return [parse_source(t)[0] for t in inputs]


def _inputs(inputs: list[str], sheet: str | None) -> list[tuple[str, str | None]]:
    if not inputs:
        raise OptionError("give at least one input file")
    parsed = [parse_source(t) for t in inputs]
    if sheet is not None:
        if len(parsed) > 1:
            raise OptionError("--sheet: with several input files name each file's sheet as "
                              "FILE:SHEET")
        if parsed[0][1] is not None:
            raise OptionError(f"--sheet {sheet!r}: the sheet is named twice (also in "
                              f"{inputs[0]!r}); give it once")
        parsed = [(parsed[0][0], sheet)]
    seen: dict[tuple[str, str | None], str] = {}
    for (file, sh), text in zip(parsed, inputs, strict=True):
        key = (str(Path(file).resolve()), sh)
        if key in seen:
            raise OptionError(f"{text!r} is given twice (its rows would count twice)")
        seen[key] = text
    return parsed


def _source(table, file: str, sha: str, count_name: str) -> dict:
    return {"file": file, "sheet": table.sheet, "sha256": sha, "header_row": table.header_row,
            count_name: len(table.frame), "skipped": len(table.skipped),
            "columns": dict(table.headers)}


def read_lots_files(inputs: list[str], sheet: str | None = None, **options) -> LotTable:
    """Read one or several inspection exports as one :class:`LotTable` (options as for
    :func:`qualbayes.data.lot_table.read_lots`); ``sources`` lists each file with its SHA-256."""
    tables = []
    for file, sh in _inputs(inputs, sheet):
        table = read_lots(file, sheet=sh, **options)
        table.sources = [_source(table, file, table.sha256 or sha256_file(file), "lots")]
        tables.append(table)
    return tables[0] if len(tables) == 1 else _stack(tables, ["lot"], LotTable)


def read_life_files(inputs: list[str], sheet: str | None = None, **options) -> LifeTable:
    """Read one or several life-data exports as one :class:`LifeTable` (options as for
    :func:`qualbayes.data.life.read_life`)."""
    tables = []
    for file, sh in _inputs(inputs, sheet):
        table = read_life(file, sheet=sh, **options)
        table.sources = [_source(table, file, table.sha256 or sha256_file(file), "units")]
        tables.append(table)
    if len(tables) == 1:
        return tables[0]
    combined = _stack(tables, ["group", "unit"], LifeTable)
    combined.units = tables[0].units
    return combined


def _stack(tables: list, key: list[str], cls):
    frames, skipped, notes, unused = [], [], [], []
    first: dict[tuple, str] = {}
    for t in tables:
        src = t.sources[0]
        name = label(src["file"], t.sheet)
        frame = t.frame.assign(source=name)
        for values, row in zip(frame[key].itertuples(index=False), frame["row"], strict=True):
            k = tuple(values)
            if k in first:
                what = " ".join(f"{c} {v!r}" for c, v in zip(key, k, strict=True))
                raise InputError(f"{what} appears in two inputs ({first[k]} and this file); "
                                 "each must be counted once", file=src["file"],
                                 sheet=t.sheet, row=int(row))
            first[k] = f"{name} row {row}"
        frames.append(frame)
        skipped += [{**s, "source": name} for s in t.skipped]
        notes += [f"[{name}] {n}" for n in t.notes]
        unused += [h for h in t.unused_columns if h not in unused]
    headers: dict[str, str] = {}
    for t in tables:
        for k, h in t.headers.items():
            if h not in headers.get(k, "").split(" | "):
                headers[k] = f"{headers[k]} | {h}" if k in headers else h
    files = " + ".join(label(t.sources[0]["file"], t.sheet) for t in tables)
    frame = pd.concat(frames, ignore_index=True)
    if "lot_size" in frame:
        frame["lot_size"] = frame["lot_size"].astype("Int64")
    out = cls(frame, files, None, tables[0].header_row, headers, notes)
    out.skipped, out.unused_columns = skipped, tuple(unused)
    out.sources = [t.sources[0] for t in tables]
    out.sha256 = input_sha256(out.sources)
    return out


def input_sha256(sources: list[dict]) -> str:
    """The input's SHA-256: the file's own for one file; for several, the SHA-256 of the
    lines ``"<sha256>  <file>[:<sheet>]"`` (each file's digest is in the record too)."""
    if len(sources) == 1:
        return sources[0]["sha256"]
    text = "".join(f"{s['sha256']}  {label(s['file'], s['sheet'])}\n" for s in sources)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()
