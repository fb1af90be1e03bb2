"""Checks on the numbers a plan is asked for. Each failure raises OptionError naming the
quantity (the command line passes its option name, e.g. ``--reliability``)."""

from __future__ import annotations

import math
import numbers

from qualbayes.errors import OptionError


def probability(value: float, name: str) -> float:
    """A probability strictly inside (0, 1)."""
    v = _number(value, name)
    if not 0.0 < v < 1.0:
        raise OptionError(f"{name} {value!r}: must lie strictly between 0 and 1")
    return v


def positive(value: float, name: str) -> float:
    """A finite number > 0 (a time, a shape, a prior parameter)."""
    v = _number(value, name)
    if not v > 0.0:
        raise OptionError(f"{name} {value!r}: must be greater than 0")
    return v


def count(value: int, name: str, least: int = 0) -> int:
    """A whole number >= ``least`` (units, allowed failures, a lot size)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise OptionError(f"{name} {value!r}: expected a whole number")
    if isinstance(value, numbers.Integral):
        v = int(value)
    else:
        f = float(value)
        if not math.isfinite(f) or f != int(f):
            raise OptionError(f"{name} {value!r}: expected a whole number")
        v = int(f)
    if v < least:
        if least == 0:
            raise OptionError(f"{name} {value!r}: a count cannot be negative")
        raise OptionError(f"{name} {value!r}: must be at least {least}")
    return v


def _number(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise OptionError(f"{name} {value!r}: expected a number")
    v = float(value)
    if not math.isfinite(v):
        raise OptionError(f"{name} {value!r}: must be a finite number")
    return v
