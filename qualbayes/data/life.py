"""Life-test and field-return tables: one row per unit.

Each unit ends up as one of four kinds of observation:

``failure``    failed at a known time t                     (lower = upper = t)
``suspension`` still running (right-censored) at time t     (lower = t, upper = inf)
``interval``   seen working at a > 0, found failed at b > a (lower = a, upper = b)
``left``       found failed at b, never seen working after 0 (lower = 0, upper = b)

How a row is read (the optional interval columns are "last seen working" and "found failed"):

* status failed, "found failed" filled: an inspection failure. "last seen working" blank or 0
  makes it left-censored; equal to "found failed" makes it an exact failure. A time given in
  the time column must then lie inside the interval.
* status failed, "found failed" blank: an exact failure at the time column.
* status suspended: a suspension at the time column, or at "last seen working" when the time
  is blank. A "found failed" time on a suspended unit is a contradiction and an error.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from qualbayes.data.columns import (
    Column,
    cell,
    locate,
    number_style,
    parse_mapping,
    unused_note,
)
from qualbayes.data.notes import leave_out, skipped_note
from qualbayes.data.readers import DEFAULT_MAX_ROWS, RawTable
from qualbayes.data.sheets import read_sheet
from qualbayes.data.status import StatusMap
from qualbayes.data.values import describe, is_blank, parse_real, parse_text
from qualbayes.errors import InputError, OptionError

FAILURE, SUSPENSION, INTERVAL, LEFT = "failure", "suspension", "interval", "left"
KINDS = (FAILURE, SUSPENSION, INTERVAL, LEFT)
NO_GROUP = "(all units)"

LIFE_COLUMNS: tuple[Column, ...] = (
    Column("unit", ("Unit", "Unit ID", "Serial", "Serial No.", "Serial Number", "SN", "S/N",
                    "Specimen", "Sample ID", "Unit No.", "ID")),
    Column("time", ("Time", "Hours", "Cycles", "Running Time", "Time to Failure", "TTF",
                    "Life", "Age", "Operating Hours", "Run Time", "Test Time", "km",
                    "Mileage", "Duration")),
    Column("status", ("Status", "State", "Failed", "Failure", "Censored", "Event",
                      "F/S", "Outcome", "Result")),
    Column("seen_working", ("Last Seen Working", "Last Good", "Last Inspection",
                            "Last OK", "Seen Working", "Last Seen OK", "Interval Start",
                            "From"), required=False),
    Column("found_failed", ("Found Failed", "Time Found Failed", "Found Failed At",
                            "Failure Found", "Interval End", "To"), required=False),
    Column("group", ("Group", "Design Revision", "Revision", "Rev", "Design", "Supplier",
                     "Plant", "Batch", "Lot", "Variant", "Build"), required=False),
)

#: Status spellings, after lower-casing and stripping. Anything else is an error.
FAILED_WORDS = ("f", "fail", "failed", "failure", "1")
SUSPENDED_WORDS = ("s", "suspended", "suspension", "running", "censored", "right-censored",
                   "survived", "0")


@dataclass
class LifeTable:
    """Validated units, with where they came from.

    ``frame`` columns: unit, group, kind, lower, upper, row (spreadsheet row number).
    """

    frame: pd.DataFrame
    file: str
    sheet: str | None
    header_row: int
    headers: dict[str, str]
    notes: list[str]
    units: str = ""
    sha256: str = ""  # of exactly the bytes read ("" for a table built in memory)
    #: rows left out because the unit has no result yet: {"row", "unit", "reason"}
    skipped: list[dict] = field(default_factory=list)
    unused_columns: tuple[str, ...] = ()  # headers in the file that were not read
    #: with several input files: {"file", "sheet", "sha256", "header_row", "units"} each
    sources: list[dict] = field(default_factory=list)

    @property
    def groups(self) -> list[str]:
        return list(dict.fromkeys(self.frame["group"]))

    def counts(self, group: str) -> dict[str, int]:
        kinds = self.frame.loc[self.frame["group"] == group, "kind"]
        return {k: int((kinds == k).sum()) for k in KINDS}


def parse_status(value: object) -> str:
    """'F'/'failed'/1 -> failure, 'S'/'running'/'censored'/0 -> suspension."""
    if isinstance(value, bool):
        return FAILURE if value else SUSPENSION
    if isinstance(value, int | float) and not isinstance(value, bool):
        if value == 1:
            return FAILURE
        if value == 0:
            return SUSPENSION
        raise ValueError(f"status {describe(value)} is not 1 (failed) or 0 (suspended)")
    text = str(value).strip().lower()
    if text in FAILED_WORDS:
        return FAILURE
    if text in SUSPENDED_WORDS:
        return SUSPENSION
    raise ValueError(
        f"unknown status {describe(value)}; write F, failed or 1 for a failure and S, "
        "suspended, running, censored or 0 for a unit still running")


def read_life(path, sheet: str | None = None, columns: str | dict | None = None,
              max_rows: int = DEFAULT_MAX_ROWS, units: str = "",
              groups: list[str] | None = None, strict: bool = False,
              status: StatusMap | None = None) -> LifeTable:
    """Read and validate a life-data export; raises :class:`InputError` on the first fault.

    ``groups`` keeps only the named groups (each must have units in the file). A unit whose
    time and status are both blank has no result yet: it is left out and listed, or refused
    when ``strict``. ``status`` reads the plant's own status words (every use is noted).
    """
    mapping = parse_mapping(columns) if isinstance(columns, str | type(None)) else dict(columns)
    table = read_sheet(path, LIFE_COLUMNS, mapping, sheet, max_rows)
    return validate_life(table, mapping, units=units, groups=groups, strict=strict,
                         status=status)


def validate_life(table: RawTable, mapping: dict[str, str] | None = None, units: str = "",
                  groups: list[str] | None = None, strict: bool = False,
                  status: StatusMap | None = None) -> LifeTable:
    loc = locate(table, LIFE_COLUMNS, mapping)
    headers = {k: v[1] for k, v in loc.columns.items()}
    style = number_style(table, loc, ("time", "seen_working", "found_failed"))
    has_group = "group" in loc.columns
    records = []
    skipped: list[dict] = []
    status_map = status if status is not None else StatusMap({})
    seen: dict[tuple[str, str], int] = {}
    for i in range(loc.first_data, len(table.rows)):
        rownum = table.row_numbers[i]

        def fail(msg: str, key: str, rownum: int = rownum) -> InputError:
            return table.error(msg, row=rownum, column=headers.get(key, key))

        def get(key: str, i: int = i):
            return cell(table, loc, i, key)

        unit_raw = get("unit")
        if is_blank(unit_raw):
            if all(is_blank(get(k)) for k in ("time", "status", "seen_working",
                                               "found_failed")):
                continue  # a spacer or a trailing note
            raise fail("unit id is empty", "unit")
        try:
            unit = parse_text(unit_raw)
        except ValueError as err:
            raise fail(str(err), "unit") from None
        group = NO_GROUP
        if has_group:
            raw = get("group")
            if is_blank(raw):
                raise fail(f"the group of unit {unit!r} is empty; every unit needs its group "
                           "(or name no group column)", "group")
            try:
                group = parse_text(raw)
            except ValueError as err:
                raise fail(str(err), "group") from None
        if (group, unit) in seen:
            raise fail(f"unit {unit!r} appears twice (rows {seen[(group, unit)]} and "
                       f"{rownum})", "unit")
        seen[(group, unit)] = rownum
        status_raw = get("status")
        if is_blank(status_raw) and all(is_blank(get(k)) for k in (
                "time", "seen_working", "found_failed")):
            leave_out(skipped, strict=strict, fail=fail, label="unit", ident=unit, row=rownum,
                      blank="time and status blank", column="status")
            continue
        if is_blank(status_raw):
            raise fail(f"status of unit {unit!r} is empty; write F (failed) or S "
                       "(suspended, still running)", "status")
        try:
            state = status_map.read(status_raw, rownum) or parse_status(status_raw)
        except ValueError as err:
            raise fail(str(err), "status") from None
        times = {k: _time(get(k), style, fail, k, allow_zero=k == "seen_working")
                 for k in ("time", "seen_working", "found_failed")}
        kind, lower, upper = _classify(state, times, fail)
        records.append((unit, group, kind, lower, upper, rownum))
    if not records:
        what = f" ({len(skipped)} without a result left out)" if skipped else ""
        raise table.error(f"no units found below the header{what}", row=loc.header_row)
    frame = pd.DataFrame.from_records(
        records, columns=["unit", "group", "kind", "lower", "upper", "row"])
    notes = [*table.notes, *([style.note()] if style.note() else []), *unused_note(loc.unused),
             *status_map.notes(), *skipped_note(skipped, "unit")]
    if groups:
        present = set(frame["group"])
        for g in groups:
            if g not in present:
                where = f"column {headers['group']!r}" if has_group else "no group column"
                names = ", ".join(repr(p) for p in dict.fromkeys(frame["group"]))
                raise InputError(f"group {g!r} has no units in the file ({where}; groups "
                                 f"present: {names})", file=table.file, sheet=table.sheet)
        frame = frame[frame["group"].isin(groups)].reset_index(drop=True)
    return LifeTable(frame, table.file, table.sheet, loc.header_row, headers, notes, units,
                     table.sha256, skipped, loc.unused)


def _time(raw, style, fail, key: str, allow_zero: bool) -> float | None:
    if is_blank(raw):
        return None
    try:
        t = parse_real(raw, style)
    except ValueError as err:
        raise fail(str(err), key) from None
    if t < 0:
        raise fail(f"{key.replace('_', ' ')} is negative ({describe(raw)}); times must be "
                   "positive", key)
    if t == 0 and not allow_zero:
        raise fail(f"{key.replace('_', ' ')} is zero; a unit's time must be positive (remove "
                   "units that never ran)", key)
    if not math.isfinite(t) or t > 1e15:
        raise fail(f"{key.replace('_', ' ')} {describe(raw)} is not a usable time", key)
    return t


def _classify(status: str, times: dict, fail) -> tuple[str, float, float]:
    t, a, b = times["time"], times["seen_working"], times["found_failed"]
    if status == SUSPENSION:
        if b is not None:
            raise fail(f"the unit is marked suspended (still running) but has a found-failed "
                       f"time ({b:g}); correct the status or the time", "found_failed")
        if t is None:
            if a is None or a == 0:
                raise fail("a suspended unit needs its running time (time column, or last "
                           "seen working)", "time")
            t = a
        elif a is not None and a > t:
            raise fail(f"last seen working ({a:g}) is after the unit's running time ({t:g})",
                       "seen_working")
        return SUSPENSION, t, math.inf
    if b is None:  # exact failure
        if t is None:
            raise fail("failure time is empty (time column, or found failed for an "
                       "inspection failure)", "time")
        if a is not None and a > t:
            raise fail(f"last seen working ({a:g}) is after the failure time ({t:g})",
                       "seen_working")
        return FAILURE, t, t
    if a is not None and a > b:
        raise fail(f"the interval runs backwards: last seen working ({a:g}) is after found "
                   f"failed ({b:g})", "seen_working")
    lo = 0.0 if a is None else a
    if t is not None and not (lo <= t <= b):
        raise fail(f"time {t:g} lies outside the inspection interval ({lo:g}, {b:g}]", "time")
    if lo == b:
        return FAILURE, b, b
    if lo == 0.0:
        return LEFT, 0.0, b
    return INTERVAL, lo, b


def frame_arrays(frame: pd.DataFrame) -> dict[str, np.ndarray]:
    """The times of one group by kind: failures, suspensions, interval (a, b), left (b)."""
    kind = frame["kind"].to_numpy()
    lo = frame["lower"].to_numpy(float)
    hi = frame["upper"].to_numpy(float)
    return {
        "failures": lo[kind == FAILURE],
        "suspensions": lo[kind == SUSPENSION],
        "interval_lower": lo[kind == INTERVAL],
        "interval_upper": hi[kind == INTERVAL],
        "left": hi[kind == LEFT],
    }


def parse_units(text: str | None) -> str:
    """A display label for the time axis ('h', 'cycles', 'km'); plain text, short."""
    if text is None:
        return ""
    t = text.strip()
    if len(t) > 20 or any(ch in t for ch in "\n\r\t\x00"):
        raise OptionError(f"--units {text!r}: give a short label such as h, cycles or km")
    return t
