"""One number formatter for everything a person reads: terminal, HTML, PDF and workbook.

Rules (docs/reports.md, "Numbers"):

* rates in the unit the user gave the limit in: percent (``%``, the default), parts per
  million (``ppm``) or a plain fraction; three significant figures; below the smallest
  step of the unit (0.0001 %, 0.01 ppm, 0.000001) the text is ``<0.0001%`` and so on, never
  a meaningless 1e-58;
* probabilities to 4 decimals, ``<0.0001`` and ``>0.9999`` at the ends (exact 0 and 1 are
  written ``0`` and ``1``);
* counts with thousands separators; times and other quantities with thousands separators
  and four significant figures;
* never scientific notation.

Workbooks keep the full-precision number in the cell and get a display format from
:func:`excel_format`.

>>> rate(0.00297607), rate(7.938e-57), rate(0.0042, "ppm"), rate(0.25, "fraction")
('0.298%', '<0.0001%', '4,200 ppm', '0.25')
>>> probability(0.95), probability(3e-9), probability(0.999991), probability(1.0)
('0.9500', '<0.0001', '>0.9999', '1')
>>> count(113800), quantity(113812.4), quantity(0.012345), quantity(2.5)
('113,800', '113,812', '0.01235', '2.5')
"""

from __future__ import annotations

import math

RATE_UNITS = ("%", "ppm", "fraction")
_SCALE = {"%": 100.0, "ppm": 1e6, "fraction": 1.0}
_FLOOR = {"%": ("0.0001", 1e-4), "ppm": ("0.01", 1e-2), "fraction": ("0.000001", 1e-6)}


def _missing(value) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def significant(value: float, digits: int = 4) -> str:
    """``value`` with ``digits`` significant figures in plain decimal notation, thousands
    separated; trailing zeros after the point dropped."""
    if value == 0:
        return "0"
    if math.isinf(value):
        return "infinite" if value > 0 else "minus infinite"
    exponent = math.floor(math.log10(abs(value)))
    places = max(0, digits - 1 - exponent)
    text = f"{value:,.{places}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def rate(value, unit: str = "%", digits: int = 3) -> str:
    """A rate (a fraction between 0 and 1) in ``unit``: ``%``, ``ppm`` or ``fraction``."""
    if _missing(value):
        return "-"
    if unit not in _SCALE:
        raise ValueError(f"unit must be one of {RATE_UNITS}, not {unit!r}")
    shown = float(value) * _SCALE[unit]
    floor_text, floor = _FLOOR[unit]
    suffix = {"%": "%", "ppm": " ppm", "fraction": ""}[unit]
    if shown == 0:
        return f"0{suffix}"
    if shown < floor:
        return f"<{floor_text}{suffix}"
    return significant(shown, digits) + suffix


def rate_unit_of(text: str | None) -> str:
    """The unit a limit was written in: ``1%`` -> ``%``, ``500ppm`` -> ``ppm``, ``0.01`` ->
    ``%`` (a bare fraction is shown in percent, as engineers quote defect rates)."""
    t = (text or "").strip().lower()
    if t.endswith("ppm"):
        return "ppm"
    return "%"


def probability(value) -> str:
    """A probability to 4 decimals, with ``<0.0001`` and ``>0.9999`` at the ends."""
    if _missing(value):
        return "-"
    p = float(value)
    if p == 0:
        return "0"
    if p == 1:
        return "1"
    if 0 < p < 1e-4:
        return "<0.0001"
    if 0.9999 < p < 1:
        return ">0.9999"
    return f"{p:.4f}"


def is_probability(value) -> str:
    """``= 0.2819``, ``< 0.0001`` or ``> 0.9999``: a probability after its name.

    >>> "P(p > spec) " + is_probability(0.99999)
    'P(p > spec) > 0.9999'
    """
    text = probability(value)
    return f"{text[0]} {text[1:]}" if text[0] in "<>" else f"= {text}"


def count(value) -> str:
    """A whole number with thousands separators."""
    if _missing(value):
        return "-"
    return f"{round(float(value)):,d}" if isinstance(value, float) else f"{int(value):,d}"


def quantity(value, digits: int = 4) -> str:
    """A time or other measured quantity: whole numbers above 1,000 (thousands separated),
    otherwise ``digits`` significant figures; below 0.0001 in size ``<0.0001``."""
    if _missing(value):
        return "-"
    v = float(value)
    if v == 0:
        return "0"
    if abs(v) >= 1000:
        return f"{v:,.0f}"
    if abs(v) < 1e-4:
        return "<0.0001" if v > 0 else ">-0.0001"
    return significant(v, digits)


def cell(value) -> str:
    """One text form of a table cell whose meaning is not known: booleans as yes/no,
    integers as counts, other numbers as quantities, missing as '-'."""
    if _missing(value):
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return count(value)
    if isinstance(value, float):
        return quantity(value)
    if hasattr(value, "item") and not isinstance(value, str):  # numpy scalar
        return cell(value.item())
    return str(value)


def plural(n, word: str, many: str | None = None) -> str:
    """``1 failure``, ``2 failures``, ``0 failures`` (counts thousands separated).

    >>> plural(1, "failure"), plural(1200, "unit"), plural(2, "lot", "lots")
    ('1 failure', '1,200 units', '2 lots')
    """
    return f"{count(n)} {word if n == 1 else (many or word + 's')}"


def excel_format(kind: str, unit: str = "%") -> str:
    """The workbook display format of a kind of number; the cell keeps full precision."""
    if kind == "rate":  # a spreadsheet cannot scale a cell by 1e6 for display: ppm in %
        return "0.000000" if unit == "fraction" else "0.0000%"
    return {"probability": "0.0000", "count": "#,##0", "quantity": "#,##0.####"}.get(
        kind, "General")
