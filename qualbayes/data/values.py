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
#: tried (see qualbayes.data.numbers, where the one number parser lives).
MAX_NUMBER_CHARS = 64
#: Line breaks and tabs inside a label (a wrapped cell) read as one space.
_LINE_BREAKS = re.compile(r"[\t\n\r\v\f\x85\u2028\u2029]+")
#: Bidirectional embedding, override and isolate controls: they reorder how text is shown
#: (so two lot ids could look alike or a label could display in a misleading order).
_BIDI_CONTROLS = frozenset("\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")



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


def _style(decimal_comma):
    """The number style of the older keyword: True a decimal comma, False not decided (an
    ambiguous value is then refused), or a NumberStyle given as is."""
    from qualbayes.data.numbers import COMMA, UNDECIDED, NumberStyle  # noqa: PLC0415

    if isinstance(decimal_comma, NumberStyle):
        return decimal_comma
    return NumberStyle(COMMA, "the caller") if decimal_comma else UNDECIDED


def parse_real(value: object, decimal_comma=False) -> float:
    """A finite real number (see :mod:`qualbayes.data.numbers`); ``decimal_comma`` is True
    for a decimal comma, False when the file's style is not known, or a NumberStyle."""
    from qualbayes.data.numbers import parse_number  # noqa: PLC0415

    return parse_number(value, _style(decimal_comma))


def parse_count(value: object, decimal_comma=False) -> int:
    """A whole number of units (not checked for sign here)."""
    from qualbayes.data.numbers import parse_whole  # noqa: PLC0415

    return parse_whole(value, _style(decimal_comma))


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
    if (len(text) <= 200 and text.isascii() and text.isprintable() and text == text.strip()
            and not text.startswith(("#", "N/", "n/"))):
        return text  # plain ASCII: nothing to normalise, no control or format character
    if len(text) > 10_000:  # refuse before normalising megabytes of text
        raise ValueError("text is longer than 200 characters")
    text = unicodedata.normalize("NFC", _LINE_BREAKS.sub(" ", text)).strip()
    for ch in text:
        if ch == "\x00":
            raise ValueError("text contains a NUL character")
        if unicodedata.category(ch) in ("Cc", "Cf") or ch in _BIDI_CONTROLS:
            raise ValueError(f"text contains an invisible control or format character "
                             f"(U+{ord(ch):04X}), so two different labels could look the same; "
                             "retype the cell")
    from qualbayes.data.numbers import ERROR_VALUES  # noqa: PLC0415

    if text.upper() in ERROR_VALUES:
        raise ValueError(f"the cell holds the spreadsheet error value {text!r}, not a label; "
                         "correct the formula or type the label")
    if len(text) > 200:
        raise ValueError("text is longer than 200 characters")
    return text


_ISO = re.compile(r"^(\d{4})-(\d{1,2})-(\d{1,2})"
                  r"([ T]\d{1,2}:\d{2}(:\d{2}(\.\d{1,6})?)?(Z|[+-]\d{2}:?\d{2})?)?$")
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
