"""Checks on the keyword arguments of the public functions, on entry. Each failure raises
:class:`~qualbayes.errors.ParameterError` naming the parameter (never a command-line flag).

Numbers are taken as numbers; a probability or a defect-rate limit may also be given as text
the engineer would write (``"1%"``, ``"10000ppm"``, ``"95%"``), read by the same rules as on
the command line. Anything else is refused rather than guessed.

>>> rate(0.01, "spec"), rate("1%", "spec"), rate("10000ppm", "spec")
(0.01, 0.01, 0.01)
>>> rate(1.5, "spec")  # doctest: +ELLIPSIS
Traceback (most recent call last):
...
qualbayes.errors.ParameterError: spec=1.5: a defect-rate limit lies strictly between 0 and 1 ...
>>> confidence("90%", "confidence")
0.9
"""

from __future__ import annotations

import math
import numbers
import re

from qualbayes.errors import ParameterError

_NUMBER = r"[0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?"


def number(value, name: str) -> float:
    """A finite number."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ParameterError(name, value, "expected a number")
    v = float(value)
    if not math.isfinite(v):
        raise ParameterError(name, value, "must be a finite number")
    return v


def _fraction(value, name: str, units: tuple[str, ...]) -> float:
    """A number, or text: a number with an optional unit among ``units`` (% or ppm)."""
    if isinstance(value, str):
        text = value.strip().lower().replace(" ", "")
        m = re.fullmatch(rf"({_NUMBER})(%|ppm)?", text)
        if not m or (m[2] and m[2] not in units):
            shown = " or ".join(["0.01", *(f"1{u}" if u == "%" else f"10000{u}" for u in units)])
            raise ParameterError(name, value, f"write a number such as {shown}")
        v = float(m[1])
        return v / 100.0 if m[2] == "%" else v / 1e6 if m[2] == "ppm" else v
    return number(value, name)


def rate(value, name: str = "spec") -> float:
    """A defect-rate limit strictly inside (0, 1): 0.01, "1%" or "10000ppm"."""
    v = _fraction(value, name, ("%", "ppm"))
    if not 0.0 < v < 1.0:
        raise ParameterError(name, value, "a defect-rate limit lies strictly between 0 and 1 "
                                          "(0% and 100%)")
    return v


def probability(value, name: str) -> float:
    """A probability strictly inside (0, 1): 0.9 or "90%"."""
    v = _fraction(value, name, ("%",))
    if not 0.0 < v < 1.0:
        raise ParameterError(name, value, "must lie strictly between 0 and 1")
    return v


def confidence(value, name: str = "confidence") -> float:
    """A confidence level strictly between 0.5 and 1: at or below 0.5 a quantity could be
    both within and beyond its limit 'with confidence', so no decision rule is defined."""
    v = probability(value, name)
    if not v > 0.5:
        raise ParameterError(name, value, "must lie strictly between 0.5 and 1 (e.g. 0.9 or "
                                          "95%): at or below 0.5 accept and reject could both "
                                          "hold")
    return v


def positive(value, name: str) -> float:
    """A finite number > 0."""
    v = number(value, name)
    if not v > 0.0:
        raise ParameterError(name, value, "must be greater than 0")
    return v


def count(value, name: str, least: int = 0) -> int:
    """A whole number >= ``least``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ParameterError(name, value, "expected a whole number")
    f = float(value)
    if not math.isfinite(f) or f != math.floor(f):
        raise ParameterError(name, value, "expected a whole number")
    if f < least:
        raise ParameterError(name, value, f"must be at least {least}")
    return int(f)


def counts(value, name: str, least: int = 0) -> int | list[int]:
    """One whole number, or a list of them (e.g. allowed failures 0, 1, 2)."""
    if isinstance(value, list | tuple | range):
        if not value:
            raise ParameterError(name, value, "give at least one value")
        return [count(v, name, least) for v in value]
    return count(value, name, least)


#: seeds lie in [0, 2**32), as the command line's --seed: a larger one would either be read
#: through a float (another number above 2**53) or end the fit with jax's OverflowError
MAX_SEED = 2**32


def seed(value, name: str = "seed") -> int:
    """A random seed: a whole number from 0 to 2**32 - 1, taken exactly (never through a
    float).

    >>> seed(7), seed(2**32 - 1)
    (7, 4294967295)
    """
    if isinstance(value, numbers.Integral) and not isinstance(value, bool):
        value = int(value)
    else:
        value = count(value, name, 0)  # a whole float such as 5.0; anything else refused
    if not 0 <= value < MAX_SEED:  # also every float large enough to stand for another number
        raise ParameterError(name, value, f"give a whole number from 0 to {MAX_SEED - 1}")
    return value


def settings_with_seed(settings, seed_value):
    """Sampler settings (default ones when None) with ``seed_value`` honoured when given."""
    from dataclasses import replace  # noqa: PLC0415

    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415

    if settings is None:
        return SamplerSettings() if seed_value is None else SamplerSettings(seed=seed_value)
    if not isinstance(settings, SamplerSettings):
        raise ParameterError("settings", settings,
                             "expected qualbayes.inference.run.SamplerSettings")
    return settings if seed_value is None else replace(settings, seed=seed_value)


def text(value, name: str) -> str:
    if not isinstance(value, str):
        raise ParameterError(name, value, "expected text")
    return value
