"""The installed base: units in service, one row per unit or per batch of units, with their
present age (in the life data's units) or their ship/installation date.

Columns (matched by their usual spellings; ``--columns`` names others): ``unit`` (optional),
``age`` or ``shipped`` (one of them), ``count`` (optional: units on the row, default 1) and
``group`` (optional: region, model, customer). A ship date becomes an age through the
as-of date and the usage rate: age = (as_of - shipped) in periods x usage per period.
Only units still in service belong in the sheet (returned units are not at risk).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np

from qualbayes.data.columns import Column, cell, locate, parse_mapping
from qualbayes.data.readers import DEFAULT_MAX_ROWS, read_table
from qualbayes.data.values import (
    describe,
    is_blank,
    parse_count,
    parse_date,
    parse_real,
    parse_text,
)
from qualbayes.errors import InputError, OptionError

PERIOD_DAYS = {"week": 7.0, "month": 365.25 / 12.0, "quarter": 365.25 / 4.0, "year": 365.25}

FLEET_COLUMNS: tuple[Column, ...] = (
    Column("unit", ("Unit", "Unit ID", "Serial", "Serial No.", "Serial Number", "SN", "S/N",
                    "ID"), required=False),
    Column("age", ("Age", "Hours", "Operating Hours", "Running Time", "Cycles", "Time in Service",
                   "Hours in Service", "Usage"), required=False),
    Column("shipped", ("Ship Date", "Shipped", "Date Shipped", "Shipping Date", "Install Date",
                       "Installed", "In Service Since", "Commissioned"), required=False),
    Column("count", ("Count", "Units", "Quantity", "Qty", "Number of Units"), required=False),
    Column("group", ("Group", "Region", "Model", "Variant", "Customer", "Market", "Product"),
           required=False),
)


@dataclass
class FleetTable:
    """Ages (life units) and unit counts per row, with groups and where they came from."""

    ages: np.ndarray
    counts: np.ndarray
    groups: np.ndarray | None
    rows: np.ndarray
    file: str
    sheet: str | None
    headers: dict[str, str]
    notes: list[str]
    sha256: str = ""  # of exactly the bytes read


def parse_as_of(text: str | None) -> dt.date | None:
    if text is None:
        return None
    try:
        return parse_date(str(text))
    except ValueError as err:
        raise OptionError(f"--as-of {text!r}: {err}") from None


def read_fleet(path, sheet=None, columns: str | None = None, max_rows: int = DEFAULT_MAX_ROWS,
               as_of: dt.date | None = None, usage: float | None = None,
               period: str = "month") -> FleetTable:
    """Read and validate an installed-base sheet; raises InputError naming row and column."""
    table = read_table(path, sheet=sheet, max_rows=max_rows)
    mapping = parse_mapping(columns)
    loc = locate(table, FLEET_COLUMNS, mapping)
    headers = {k: v[1] for k, v in loc.columns.items()}
    has_age, has_ship = "age" in headers, "shipped" in headers
    where = dict(file=table.file, sheet=table.sheet, row=loc.header_row)
    if has_age == has_ship:
        raise InputError("the sheet needs exactly one of an age column (e.g. 'Age', 'Hours') "
                         "or a ship-date column (e.g. 'Ship Date'); name it with --columns "
                         "age=HEADER or shipped=HEADER" + (" (both were found)" if has_age
                                                           else ""), **where)
    if has_ship and as_of is None:
        raise OptionError("ship dates need --as-of YYYY-MM-DD (the date the fleet was counted)")
    if has_ship and usage is None:
        raise OptionError("ship dates need --usage (life units a unit accumulates per period)")
    ages, counts, groups, rows = [], [], [], []
    for i in range(loc.first_data, len(table.rows)):
        rownum = table.row_numbers[i]
        raw = {k: cell(table, loc, i, k) for k in headers}
        if all(is_blank(v) for v in raw.values()):
            continue

        def fail(msg: str, key: str, rownum: int = rownum) -> InputError:
            return table.error(msg, row=rownum, column=headers[key])

        key = "age" if has_age else "shipped"
        if is_blank(raw[key]):
            raise fail(f"the {'age' if has_age else 'ship date'} is empty", key)
        if has_age:
            try:
                age = parse_real(raw["age"], table.decimal_comma)
            except ValueError as err:
                raise fail(str(err), "age") from None
            if not (np.isfinite(age) and age >= 0):
                raise fail(f"age {describe(raw['age'])} must be zero or positive", "age")
        else:
            try:
                shipped = parse_date(raw["shipped"])
            except ValueError as err:
                raise fail(str(err), "shipped") from None
            if shipped > as_of:
                raise fail(f"ship date {shipped.isoformat()} is after --as-of "
                           f"{as_of.isoformat()}", "shipped")
            age = (as_of - shipped).days / PERIOD_DAYS[period] * usage
        n = 1
        if "count" in headers:
            if is_blank(raw["count"]):
                raise fail("the unit count is empty", "count")
            try:
                n = parse_count(raw["count"], table.decimal_comma)
            except ValueError as err:
                raise fail(str(err), "count") from None
            if n <= 0:
                raise fail("the unit count must be at least 1", "count")
        if "group" in headers:
            if is_blank(raw["group"]):
                raise fail("the group is empty; every row needs its group (or name no group "
                           "column)", "group")
            try:
                groups.append(parse_text(raw["group"]))
            except ValueError as err:
                raise fail(str(err), "group") from None
        ages.append(age)
        counts.append(n)
        rows.append(rownum)
    if not ages:
        raise table.error("no units found below the header", row=loc.header_row)
    notes = list(table.notes)
    if has_ship:
        notes.append(f"ages from ship dates as of {as_of.isoformat()}, at {usage:g} life units "
                     f"per {period}")
    return FleetTable(np.array(ages), np.array(counts, float),
                      np.array(groups, dtype=object) if groups else None, np.array(rows),
                      table.file, table.sheet, headers, notes, table.sha256)
