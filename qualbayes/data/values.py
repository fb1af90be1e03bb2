"""Parsing single cell values from untrusted spreadsheets.

Each parser takes the raw cell (str, int, float, datetime, bool or None) and returns a
clean Python value or raises ``ValueError`` with a short reason; the caller adds the
file/sheet/row/column.
"""

from __future__ import annotations

import datetime as dt
import math
import re

_THOUSANDS = re.compile(r"^[+-]?\d{1,3}([,\u00a0\u202f' ]\d{3})+$")
_THOUSANDS_DOT = re.compile(r"^[+-]?\d{1,3}(\.\d{3})+,\d+$")  # 1.234,5
_THOUSANDS_COMMA = re.compile(r"^[+-]?\d{1,3}(,\d{3})+\.\d+$")  # 1,234.5
_THOUSANDS_DOTS = re.compile(r"^[+-]?\d{1,3}(\.\d{3})+$")  # 12.000 in a decimal-comma file
_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+$")
_PLAIN = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def is_blank(value: object) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "") or (
        isinstance(value, float) and math.isnan(value)
    )


def describe(value: object) -> str:
    """Short, safe rendering of a cell for an error message."""
    text = repr(value) if isinstance(value, str) else str(value)
    return text if len(text) <= 40 else text[:37] + "..."


def parse_real(value: object, decimal_comma: bool = False) -> float:
    """A finite real number; ``decimal_comma`` reads an ambiguous ``1,234`` as 1.234."""
    if isinstance(value, bool):
        raise ValueError(f"expected a number, found {describe(value)}")
    if isinstance(value, int | float):
        x = float(value)
    elif isinstance(value, str):
        x = _parse_real_text(value.strip(), decimal_comma)
    else:
        raise ValueError(f"expected a number, found {describe(value)}")
    if not math.isfinite(x):
        raise ValueError(f"expected a finite number, found {describe(value)}")
    return x


def _parse_real_text(text: str, decimal_comma: bool) -> float:
    t = text.replace("\u2212", "-")
    if _PLAIN.match(t):
        return float(t)
    if _THOUSANDS_DOT.match(t):
        return float(t.replace(".", "").replace(",", "."))
    if _THOUSANDS_COMMA.match(t):
        return float(t.replace(",", ""))
    if decimal_comma and _DECIMAL_COMMA.match(t):
        return float(t.replace(",", "."))
    if _THOUSANDS.match(t):
        return float(re.sub(r"[,\u00a0\u202f' ]", "", t))
    if _DECIMAL_COMMA.match(t):
        return float(t.replace(",", "."))
    raise ValueError(f"expected a number, found {describe(text)}")


def parse_count(value: object, decimal_comma: bool = False) -> int:
    """A whole number of units (not checked for sign here)."""
    x = parse_real(value, decimal_comma=False if not isinstance(value, str) else decimal_comma)
    if isinstance(value, str) and _THOUSANDS.match(value.strip()):
        # "1,200" in a count column is a thousands separator, whatever the decimal mark
        x = float(re.sub(r"[,\u00a0\u202f' ]", "", value.strip()))
    elif isinstance(value, str) and decimal_comma and _THOUSANDS_DOTS.match(value.strip()):
        x = float(value.strip().replace(".", ""))
    if x != math.floor(x):
        raise ValueError(f"expected a whole number of units, found {describe(value)}")
    if abs(x) > 2**53:
        raise ValueError(f"count {describe(value)} is too large")
    return int(x)


def parse_text(value: object) -> str:
    """A label (lot id, part, supplier); numbers like 1234.0 become '1234'."""
    if isinstance(value, float) and value == math.floor(value) and math.isfinite(value):
        return str(int(value))
    if isinstance(value, dt.datetime):
        return value.isoformat(sep=" ")
    text = str(value).strip()
    if "\x00" in text:
        raise ValueError("text contains a NUL character")
    if len(text) > 200:
        raise ValueError("text is longer than 200 characters")
    return text


_ISO = re.compile(r"^(\d{4})-(\d{1,2})-(\d{1,2})([ T].*)?$")
_DOTTED = re.compile(r"^(\d{1,2})\.(\d{1,2})\.(\d{4})$")
_SLASHED = re.compile(r"^(\d{1,2})/(\d{1,2})/(\d{4})$")


def parse_date(value: object) -> dt.date:
    """ISO dates, spreadsheet date cells, and day.month.year; slashed dates only when
    they cannot be misread (one part above 12)."""
    if isinstance(value, dt.datetime):
        return value.date()
    if isinstance(value, dt.date):
        return value
    if not isinstance(value, str):
        raise ValueError(f"expected a date, found {describe(value)}")
    t = value.strip()
    try:
        if m := _ISO.match(t):
            return dt.date(int(m[1]), int(m[2]), int(m[3]))
        if m := _DOTTED.match(t):
            return dt.date(int(m[3]), int(m[2]), int(m[1]))
        if m := _SLASHED.match(t):
            a, b, y = int(m[1]), int(m[2]), int(m[3])
            if a > 12 >= b:
                return dt.date(y, b, a)
            if b > 12 >= a:
                return dt.date(y, a, b)
            raise ValueError(
                f"date {describe(value)} could be day/month or month/day; write it as YYYY-MM-DD"
            )
    except ValueError as err:
        if "could be" in str(err):
            raise
        raise ValueError(f"{describe(value)} is not a valid date") from None
    raise ValueError(f"expected a date (YYYY-MM-DD), found {describe(value)}")
