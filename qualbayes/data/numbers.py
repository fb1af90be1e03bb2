"""One number parser for every reader: the decimal mark of a file is decided from all its
number cells, once, and stated in the run's notes.

Written numbers fall in three kinds:

* **plain**: ``125``, ``0.5``, ``1e3``, ``-3`` - no separator that could be misread;
* **telling**: the form shows which mark is the decimal one - ``12,5`` or ``0,500`` or
  ``1234,567`` (a decimal comma: a thousands group has exactly three digits and never
  follows a leading 0 or a group of four), ``1.234,5``, ``1.234.567`` (dots group, so commas
  are decimal); and the mirror images for a decimal point; spaces, no-break spaces and
  apostrophes (``1 250``, ``1'250``) always group digits;
* **ambiguous**: one mark followed by exactly three digits, ``1.000``, ``12.159``, ``1,250``:
  a thousands separator or a decimal mark.

:func:`decide` looks at every cell of a file's number columns: telling cells fix the decimal
mark (two kinds of telling cells that disagree are refused, naming both), and ambiguous cells
are read by it. With no telling cell, an ambiguous cell is refused with its row and column
(never guessed, from the delimiter or anything else). Integers beyond 2**53 (not held exactly
by a float) and spreadsheet error values (``#N/A``, ``#REF!``, ...) are refused.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable
from dataclasses import dataclass

from qualbayes.data.values import describe

POINT, COMMA = ".", ","
EXACT_INTEGER = 2**53
MAX_NUMBER_CHARS = 64
#: Error values a spreadsheet shows in place of a value (common practice, no source).
ERROR_VALUES = frozenset({"#N/A", "#REF!", "#VALUE!", "#DIV/0!", "#NAME?", "#NULL!", "#NUM!",
                          "#GETTING_DATA", "#SPILL!", "#CALC!", "#FIELD!", "#BLOCKED!",
                          "#CONNECT!", "#BUSY!", "#UNKNOWN!", "N/A"})

_SPACES = re.compile(r"(?<=\d)[ \u00a0\u202f\u2009'’](?=\d{3}(?:\D|$))")
_SIGN = r"[+-]?"
_PLAIN = re.compile(_SIGN + r"(\d+|\d*\.\d+|\d+\.)([eE][+-]?\d+)?")
# one separator followed by exactly three digits: the ambiguous form
_AMBIGUOUS = re.compile(_SIGN + r"[1-9]\d{0,2}([.,])\d{3}")
_DECIMAL = {POINT: re.compile(_SIGN + r"\d*\.\d+([eE][+-]?\d+)?"),
            COMMA: re.compile(_SIGN + r"\d*,\d+([eE][+-]?\d+)?")}
_GROUPED = {POINT: re.compile(_SIGN + r"[1-9]\d{0,2}(,\d{3})+(\.\d+)?"),   # 1,234,567.5
            COMMA: re.compile(_SIGN + r"[1-9]\d{0,2}(\.\d{3})+(,\d+)?")}   # 1.234.567,5


@dataclass(frozen=True)
class NumberStyle:
    """The decimal mark of one file (None: not shown by any cell) and how it was decided."""

    decimal: str | None
    evidence: str = ""

    def note(self) -> str | None:
        if self.decimal is None:
            return None
        name = "decimal point" if self.decimal == POINT else "decimal comma"
        group = "commas" if self.decimal == POINT else "dots"
        return (f"numbers read with a {name} ({group}, spaces and apostrophes group "
                f"thousands), as shown by {self.evidence}")


UNDECIDED = NumberStyle(None)


def _clean(text: str) -> str:
    t = text.strip().replace("\u2212", "-")
    return _SPACES.sub("", t)


def telling(text: str) -> str | None:
    """The decimal mark a written number shows by its form, or None (plain or ambiguous)."""
    if text.isascii() and text.isdigit():  # the common case, no mark at all
        return None
    t = _clean(text)
    if len(t) > MAX_NUMBER_CHARS or _AMBIGUOUS.fullmatch(t):
        return None
    if _PLAIN.fullmatch(t):
        return POINT if "." in t else None
    if _DECIMAL[COMMA].fullmatch(t):
        return COMMA
    if _GROUPED[POINT].fullmatch(t):
        return POINT
    if _GROUPED[COMMA].fullmatch(t):
        return COMMA
    return None


def decide(cells: Iterable[tuple[object, int, str]]) -> NumberStyle:
    """The style of a file from its number cells, given as (value, row, column). Two telling
    cells that disagree raise ValueError naming both."""
    first: dict[str, tuple[str, int, str]] = {}
    for value, row, column in cells:
        if not isinstance(value, str):
            continue
        mark = telling(value)
        if mark is not None and mark not in first:
            first[mark] = (value.strip(), row, column)
    if len(first) == 2:
        (a, ra, ca), (b, rb, cb) = first[POINT], first[COMMA]
        raise ValueError(f"the file writes numbers two ways: {a!r} (row {ra}, column {ca!r}) "
                         f"has a decimal point and {b!r} (row {rb}, column {cb!r}) a decimal "
                         "comma; save it again with one decimal mark")
    if not first:
        return UNDECIDED
    mark, (text, row, column) = next(iter(first.items()))
    return NumberStyle(mark, f"{text!r} in row {row}, column {column!r}")


def parse_number(value: object, style: NumberStyle = UNDECIDED) -> float:
    """A finite real number read under ``style``; ValueError with a short reason."""
    if isinstance(value, bool):
        raise ValueError(f"expected a number, found {describe(value)}")
    if isinstance(value, int):
        if abs(value) > EXACT_INTEGER:
            raise ValueError(f"the number {describe(value)} is too large (beyond 2**53 it "
                             "cannot be held exactly)")
        return float(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError(f"expected a finite number, found {describe(value)}")
        return value
    if not isinstance(value, str):
        raise ValueError(f"expected a number, found {describe(value)}")
    text = value.strip()
    if text.isascii() and text.isdigit() and len(text) <= 15:  # the common case
        return float(text)
    if len(text) > MAX_NUMBER_CHARS:
        raise ValueError(f"expected a number, found {describe(value)} "
                         f"({len(text):,} characters)")
    if text.upper() in ERROR_VALUES:
        raise ValueError(f"the cell holds the spreadsheet error value {text!r}, not a number")
    t = _clean(text)
    if _AMBIGUOUS.fullmatch(t):
        mark = "." if "." in t else ","
        if style.decimal is None:
            as_decimal, as_group = float(t.replace(",", ".")), int(re.sub(r"[.,]", "", t))
            raise ValueError(f"{text!r} could be {as_decimal:g} or {as_group:,}: no other "
                             f"number in the file shows whether {mark!r} is a decimal mark "
                             "or a thousands separator; write it without the separator "
                             "(or with its decimals)")
        t = t.replace(mark, "." if mark == style.decimal else "")
    else:
        mark = telling(t)
        if mark is not None and style.decimal is not None and mark != style.decimal:
            raise ValueError(f"{text!r} is written with a decimal "
                             f"{'point' if mark == POINT else 'comma'}, but the file's numbers "
                             f"use a decimal {'point' if style.decimal == POINT else 'comma'}")
        if mark == COMMA:
            t = t.replace(".", "").replace(",", ".")
        elif mark == POINT:
            t = t.replace(",", "")
    if not _PLAIN.fullmatch(t):
        raise ValueError(f"expected a number, found {describe(value)}")
    if re.fullmatch(r"[+-]?\d+", t) and abs(int(t)) > EXACT_INTEGER:
        raise ValueError(f"the number {describe(value)} is too large (beyond 2**53 it cannot "
                         "be held exactly)")
    x = float(t)
    if not math.isfinite(x):
        raise ValueError(f"expected a finite number, found {describe(value)}")
    return x


def parse_whole(value: object, style: NumberStyle = UNDECIDED) -> int:
    """A whole number (a count of units)."""
    if type(value) is str and value.isascii() and value.isdigit() and len(value) <= 15:
        return int(value)  # the common case
    x = parse_number(value, style)
    if x != math.floor(x):
        raise ValueError(f"expected a whole number of units, found {describe(value)}")
    if abs(x) > EXACT_INTEGER:
        raise ValueError(f"count {describe(value)} is too large")
    return int(x)
