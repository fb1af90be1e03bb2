"""Tables given from Python: a pandas DataFrame, a table already read, or a file path.

A DataFrame goes through exactly the validation a file does: it is turned into the cells of
a sheet (its column names as the header row, one row per record, missing values as empty
cells, numpy scalars as plain numbers, timestamps as dates) and handed to the same validator
as a spreadsheet (:func:`qualbayes.data.lot_table.validate_lots`,
:func:`qualbayes.data.life.validate_life`). Errors therefore read the same; rows are numbered
as in the sheet the frame would write with ``to_csv(index=False)``: the header is row 1, the
first record row 2.

Column names may be the canonical keys (``lot``, ``inspected``, ``defectives``, ``lot_size``,
``part``, ``supplier``, ``date``; ``unit``, ``time``, ``status``, ``seen_working``,
``found_failed``, ``group``), any spelling the file readers recognise, or named through
``columns={"inspected": "Qty checked"}``.

>>> import pandas as pd
>>> frame = pd.DataFrame({"lot": ["A1", "A2"], "inspected": [125, 80], "defectives": [0, 1]})
>>> lots_table(frame).frame[["lot", "inspected", "defectives", "row"]].values.tolist()
[['A1', 125, 0, 2], ['A2', 80, 1, 3]]
>>> lots_table(frame.assign(defectives=[0, 200]))  # doctest: +ELLIPSIS
Traceback (most recent call last):
...
qualbayes.errors.InputError: file DataFrame, row 3, column 'defectives': defectives (200) exceed ...
"""

from __future__ import annotations

import datetime as dt
import hashlib
import math
import os
from numbers import Integral, Real

import numpy as np

from qualbayes.data.readers import RawTable
from qualbayes.errors import ParameterError

FRAME_NAME = "DataFrame"


def _cell(value: object) -> object:
    """A frame value as a spreadsheet cell: None, bool, int, float, str or datetime."""
    if value is None:
        return None
    try:
        import pandas as pd  # noqa: PLC0415

        if value is pd.NA or value is pd.NaT:
            return None
        if isinstance(value, pd.Timestamp):
            return value.to_pydatetime()
    except ImportError:  # pragma: no cover - pandas is a dependency
        pass
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, Integral):
        return int(value)
    if isinstance(value, Real):
        x = float(value)
        return None if math.isnan(x) else x
    if isinstance(value, dt.datetime | dt.date | str):
        return value
    return str(value)


def raw_from_frame(frame, name: str = FRAME_NAME) -> RawTable:
    """The cells of ``frame`` as a sheet: header row 1, then one row per record."""
    import pandas as pd  # noqa: PLC0415

    if not isinstance(frame, pd.DataFrame):
        raise ParameterError("data", type(frame).__name__, "expected a pandas DataFrame")
    header = [str(c) for c in frame.columns]
    rows: list[list[object]] = [header]
    for record in frame.itertuples(index=False, name=None):
        rows.append([_cell(v) for v in record])
    return RawTable(name, None, rows, list(range(1, len(rows) + 1)))


def frame_sha256(frame) -> str:
    """SHA-256 of the frame written as CSV (no index): the bytes this run analysed."""
    return hashlib.sha256(frame.to_csv(index=False).encode("utf-8")).hexdigest()


def _mapping(columns) -> dict[str, str] | None:
    if columns is None:
        return None
    if isinstance(columns, str):
        from qualbayes.data.columns import parse_mapping  # noqa: PLC0415

        return parse_mapping(columns)
    if isinstance(columns, dict):
        return {str(k).lower(): str(v) for k, v in columns.items()}
    raise ParameterError("columns", columns, "give a mapping {key: column name}")


def _is_path(data) -> bool:
    return isinstance(data, str | os.PathLike)


def _no_sheet(sheet) -> None:
    if sheet is not None:
        raise ParameterError("sheet", sheet, "applies to an xlsx file, not to a table given "
                                             "from Python")


def lots_table(data, *, columns=None, sheet: str | None = None):
    """A validated :class:`~qualbayes.data.lot_table.LotTable` from a DataFrame, a LotTable or the
    path of an inspection export."""
    from qualbayes.data.lot_table import LotTable, read_lots, validate_lots  # noqa: PLC0415

    if isinstance(data, LotTable):
        return data
    if _is_path(data):
        return read_lots(data, sheet=sheet, columns=columns)
    _no_sheet(sheet)
    return validate_lots(raw_from_frame(data), _mapping(columns))


def life_table(data, *, columns=None, sheet: str | None = None, units: str = "",
               groups: list[str] | None = None):
    """A validated :class:`~qualbayes.data.life.LifeTable` from a DataFrame, a LifeTable or
    the path of a life-data export."""
    from qualbayes.data.life import LifeTable, read_life, validate_life  # noqa: PLC0415

    if isinstance(data, LifeTable):
        return data
    if _is_path(data):
        return read_life(data, sheet=sheet, columns=columns, units=units, groups=groups)
    _no_sheet(sheet)
    return validate_life(raw_from_frame(data), _mapping(columns), units=units, groups=groups)


def source_sha256(data) -> str | None:
    """SHA-256 of what was analysed: the file's bytes, or the frame as CSV."""
    import pandas as pd  # noqa: PLC0415

    if isinstance(data, pd.DataFrame):
        return frame_sha256(data)
    if _is_path(data):
        from qualbayes.provenance import sha256_file  # noqa: PLC0415

        return sha256_file(data)
    return None
