"""JSON documents: plain types only, NaN written as null."""

from __future__ import annotations

import datetime as dt
import json
import math

import numpy as np

_AS_IS = frozenset({str, int, bool, type(None)})


class PlainRows(list):
    """A list whose items were built JSON-plain (str, int, finite float, bool, None, and
    lists and str-keyed dicts of those), e.g. a record's 200,000 lot rows built column by
    column: :func:`plain` keeps it as it is instead of walking every value again. A value
    that is not plain after all still cannot pass unseen: the canonical JSON of the seal
    (``allow_nan=False``, no default encoder) refuses NaN and numpy or pandas scalars."""

    __slots__ = ()


def plain(value):
    """Recursively convert numpy/pandas values to JSON-ready Python values."""
    kind = type(value)  # the commonest exact types first (a record of 200,000 lots)
    if kind in _AS_IS or kind is PlainRows:
        return value
    if kind is float:
        return value if math.isfinite(value) else None
    if kind is dict:
        return {str(k): plain(v) for k, v in value.items()}
    if kind is list:
        return [plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        if value.dtype.kind in "biu" or (value.dtype.kind == "f" and np.isfinite(value).all()):
            return value.tolist()  # Python bools, ints and finite floats already (the draws)
        return [plain(v) for v in value.tolist()]
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating | float):
        f = float(value)
        return f if math.isfinite(f) else None
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, dt.date | dt.datetime):
        return value.isoformat()
    if value is None or isinstance(value, str | int | bool):
        return value
    try:
        import pandas as pd  # noqa: PLC0415

        if value is pd.NA or value is pd.NaT:
            return None
    except ImportError:  # pragma: no cover
        pass
    return str(value)


def dumps(document: dict) -> str:
    return json.dumps(plain(document), indent=2, ensure_ascii=False, allow_nan=False)


def without_draws(record: dict) -> dict:
    """A run record for --json: everything but the posterior draws (kept in run.json, where
    the report's figures need them)."""
    return {k: v for k, v in record.items() if k != "posterior_draws"}


def _json_escape(m) -> str:
    b = m.group().encode("utf-16-be")
    return "".join(f"\\u{int.from_bytes(b[i:i + 2], 'big'):04x}" for i in range(0, len(b), 2))


def dumps_for_terminal(document: dict) -> str:
    """JSON for stdout: like :func:`dumps`, with C1 controls, bidirectional controls and
    other invisible format characters written as \\u escapes (the same JSON value)."""
    from qualbayes.evidence.terminal import _CONTROLS  # noqa: PLC0415

    return _CONTROLS.sub(_json_escape, dumps(document))
