"""Parsing single cell values from untrusted spreadsheets.

Each parser takes the raw cell (str, int, float, datetime, bool or None) and returns a
clean Python value or raises ``ValueError`` with a short reason; the caller adds the
file/sheet/row/column.
"""

from __future__ import annotations

import datetime as dt
import math
import re
import unicodedata

#: No number needs more characters than this; longer text is refused before any pattern is
#: tried (the patterns below backtrack quadratically on long digit runs).
MAX_NUMBER_CHARS = 64
#: Line breaks and tabs inside a label (a wrapped cell) read as one space.
_LINE_BREAKS = re.compile(r"[\t\n\r\v\f\x85\u2028\u2029]+")
#: Bidirectional embedding, override and isolate controls: they reorder how text is shown
#: (so two lot ids could look alike or a label could display in a misleading order).
_BIDI_CONTROLS = frozenset("\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")

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
    if isinstance(value, str):
        text = repr(value[:60])
    elif isinstance(value, int) and not isinstance(value, bool) and abs(value) >= 10**40:
        text = f"an integer of about {int(value.bit_length() * math.log10(2)) + 1:,} digits"
    else:
        text = str(value)
    return text if len(text) <= 40 else text[:37] + "..."


def parse_real(value: object, decimal_comma: bool = False) -> float:
    """A finite real number; ``decimal_comma`` reads an ambiguous ``1,234`` as 1.234."""
    if isinstance(value, bool):
        raise ValueError(f"expected a number, found {describe(value)}")
    if isinstance(value, int | float):
        try:
            x = float(value)
        except OverflowError:  # an integer cell with hundreds of digits
            raise ValueError(f"the number ({describe(value)}) is too large") from None
    elif isinstance(value, str):
        text = value.strip()
        if len(text) > MAX_NUMBER_CHARS:
            raise ValueError(f"expected a number, found {describe(value)} "
                             f"({len(text):,} characters)")
        x = _parse_real_text(text, decimal_comma)
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
    text = value.strip() if isinstance(value, str) else ""
    if len(text) > MAX_NUMBER_CHARS:
        x = parse_real(value)  # refuses it, naming the length
    elif _THOUSANDS.match(text):
        # "1,200" in a count column is a thousands separator, whatever the decimal mark
        x = float(re.sub(r"[,\u00a0\u202f' ]", "", text))
    elif decimal_comma and _THOUSANDS_DOTS.match(text):
        x = float(text.replace(".", ""))  # "12.000" or "1.000.000" in a decimal-comma file
    else:
        x = parse_real(value, decimal_comma=decimal_comma and isinstance(value, str))
    if x != math.floor(x):
        raise ValueError(f"expected a whole number of units, found {describe(value)}")
    if abs(x) > 2**53:
        raise ValueError(f"count {describe(value)} is too large")
    return int(x)


def parse_text(value: object) -> str:
    """A label (lot id, part, supplier); numbers like 1234.0 become '1234'.

    Text is put in Unicode normal form NFC (so a label typed with a combining accent equals
    the same label typed precomposed), line breaks and tabs inside it become one space, and
    other control characters and bidirectional overrides are refused.
    """
    if isinstance(value, dt.datetime):
        return value.isoformat(sep=" ")
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) >= 10**200:
        raise ValueError("text is longer than 200 characters")
    if isinstance(value, float) and math.isfinite(value) and value == math.floor(value):
        text = str(int(value))
    else:
        text = str(value)
    if len(text) > 10_000:  # refuse before normalising megabytes of text
        raise ValueError("text is longer than 200 characters")
    text = unicodedata.normalize("NFC", _LINE_BREAKS.sub(" ", text)).strip()
    for ch in text:
        if ch == "\x00":
            raise ValueError("text contains a NUL character")
        if unicodedata.category(ch) == "Cc" or ch in _BIDI_CONTROLS:
            raise ValueError(f"text contains an invisible control character "
                             f"(U+{ord(ch):04X}); retype the cell")
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
