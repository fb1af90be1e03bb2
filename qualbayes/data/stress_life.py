"""Life data with stress columns (accelerated tests): the ``life`` reader plus one or more
numeric stress columns (temperature, voltage, load, humidity, ...).

The units are read and validated by :func:`qualbayes.data.life.validate_life` (every
censoring type, every check); each stress column is then found by its header and every cell
of every unit is parsed with the same number rule. Temperatures are converted to kelvin;
their unit comes from the header ("Temp (C)", "Temperature [K]", "degC") or from the
engineer, and a temperature with no stated unit is refused (40 could be degrees C or K).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from qualbayes.data.columns import Located, cell, locate, normalise, parse_mapping
from qualbayes.data.life import LIFE_COLUMNS, LifeTable, validate_life
from qualbayes.data.readers import DEFAULT_MAX_ROWS, read_table
from qualbayes.data.values import describe, is_blank, parse_real
from qualbayes.errors import InputError, OptionError
from qualbayes.models.life_stress import KELVIN_OFFSET

_TEMP_UNIT = re.compile(
    r"(?:[\(\[]\s*(?:°|deg\s*)?([CK])\s*[\)\]])|(?:°\s*([CK]))|(?:deg\s*([CK]))\b",
    re.IGNORECASE)
_USE_TEMP = re.compile(r"^\s*([+-]?\d+(?:\.\d+)?)\s*(?:°|deg\s*)?\s*([CK])\s*$", re.IGNORECASE)


@dataclass
class StressLifeTable:
    """Validated units and their stresses. ``stress`` is (units, stresses) in the units the
    model uses (kelvin for temperatures), aligned with ``life.frame``."""

    life: LifeTable
    columns: list[str]  # the stress headers as written
    stress: np.ndarray
    temperature_units: list[str | None]  # 'C' or 'K' as read, None for other stresses


def header_temperature_unit(header: str) -> str | None:
    """'C' or 'K' when the header states it ("Temp (C)", "T [K]", "Temp degC", "T °C")."""
    m = _TEMP_UNIT.search(str(header))
    if not m:
        return None
    return next(g for g in m.groups() if g).upper()


def parse_use_temperature(text: str, option: str = "--use") -> float:
    """'40C', '40 °C', '313.15K' -> kelvin. A bare number is refused (C or K?)."""
    m = _USE_TEMP.match(str(text))
    if not m:
        raise OptionError(f"{option} {text!r}: write a temperature with its unit, e.g. 40C or "
                          "313.15K (a bare number could be degrees C or kelvin)")
    value = float(m[1])
    kelvin = value + KELVIN_OFFSET if m[2].upper() == "C" else value
    if not kelvin > 0:
        raise OptionError(f"{option} {text!r}: below absolute zero")
    return kelvin


def parse_use_value(text: str, option: str = "--use") -> float:
    """A positive number (voltage, load, humidity, ...)."""
    try:
        value = parse_real(str(text).strip())
    except ValueError:
        raise OptionError(f"{option} {text!r}: expected a number such as 12 (the use stress "
                          "in the units of its column)") from None
    if not (math.isfinite(value) and value > 0):
        raise OptionError(f"{option} {text!r}: the use stress must be a positive number")
    return value


def to_kelvin(value: float, unit: str) -> float:
    return value + KELVIN_OFFSET if unit == "C" else value


def read_stress_life(path, stress_columns: list[str], relations: list[str],
                     temperature_units: list[str | None] | None = None, sheet=None,
                     columns: str | dict | None = None, max_rows: int = DEFAULT_MAX_ROWS,
                     units: str = "", groups: list[str] | None = None) -> StressLifeTable:
    """Read the units (as ``life`` does) and the named stress columns."""
    table = read_table(path, sheet=sheet, max_rows=max_rows)
    mapping = parse_mapping(columns) if isinstance(columns, str | type(None)) else dict(columns)
    life = validate_life(table, mapping, units=units, groups=groups)
    temperature_units = list(temperature_units or [None] * len(stress_columns))
    known = {c.key for c in LIFE_COLUMNS}
    loc = _find_stress_columns(table, life.header_row, stress_columns)
    used = {v[0] for v in locate(table, LIFE_COLUMNS, {k: v for k, v in mapping.items()
                                                       if k in known}).columns.values()}
    index = {rownum: i for i, rownum in enumerate(table.row_numbers)}
    out = np.zeros((len(life.frame), len(stress_columns)))
    units_read: list[str | None] = []
    for j, name in enumerate(stress_columns):
        key = f"stress{j}"
        col_index, header = loc.columns[key]
        if col_index in used:
            raise OptionError(f"--stress-column {name!r} is also read as a life column; name a "
                              "column that holds only the stress")
        temp_unit = None
        if relations[j] == "arrhenius":
            stated = temperature_units[j]
            from_header = header_temperature_unit(header)
            if stated and from_header and stated != from_header:
                raise OptionError(f"--temperature-unit {stated} contradicts the header "
                                  f"{header!r} ({from_header})")
            temp_unit = stated or from_header
            if temp_unit is None:
                raise InputError(f"the temperature column {header!r} does not say C or K; "
                                 "put the unit in the header, e.g. 'Temp (C)', or give "
                                 "--temperature-unit C", file=table.file, sheet=table.sheet,
                                 row=loc.header_row, column=header)
        units_read.append(temp_unit)
        for k, rownum in enumerate(life.frame["row"]):
            raw = cell(table, loc, index[int(rownum)], key)
            out[k, j] = _stress_value(raw, table, int(rownum), header, relations[j], temp_unit)
    return StressLifeTable(life, [loc.columns[f"stress{j}"][1] for j in
                                  range(len(stress_columns))], out, units_read)


def _find_stress_columns(table, header_row: int, names: list[str]) -> Located:
    """The stress columns, by their headers, in the life data's header row."""
    i = table.row_numbers.index(header_row)
    row = table.rows[i]
    norm = [normalise(h) for h in row]
    found = {}
    for j, name in enumerate(names):
        hits = [k for k, h in enumerate(norm) if h and h == normalise(name)]
        if not hits:
            heads = ", ".join(repr(str(h)) for h in row if h is not None)
            raise InputError(f"no column headed {name!r} for --stress-column (headers: "
                             f"{heads})", file=table.file, sheet=table.sheet, row=header_row)
        if len(hits) > 1:
            raise InputError(f"two columns are headed {name!r}; rename one", file=table.file,
                             sheet=table.sheet, row=header_row, column=name)
        found[f"stress{j}"] = (hits[0], str(row[hits[0]]).strip())
    return Located(header_row, found, i + 1)


def _stress_value(raw, table, rownum: int, header: str, relation: str,
                  temp_unit: str | None) -> float:
    def fail(msg: str) -> InputError:
        return table.error(msg, row=rownum, column=header)

    if is_blank(raw):
        raise fail("the stress is empty; every unit needs the stress it was tested at")
    try:
        value = parse_real(raw, table.decimal_comma)
    except ValueError as err:
        raise fail(str(err)) from None
    if not math.isfinite(value):
        raise fail(f"stress {describe(raw)} is not a usable number")
    if relation == "arrhenius":
        kelvin = to_kelvin(value, temp_unit or "K")
        if kelvin < 100.0:
            raise fail(f"temperature {describe(raw)} {temp_unit} is {kelvin:.1f} K, below "
                       "-173 C; is the unit right?")
        return kelvin
    if relation == "inverse-power" and value <= 0:
        raise fail(f"stress {describe(raw)} must be positive for the inverse power relation")
    return value
