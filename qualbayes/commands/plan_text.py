"""Option texts of ``qualbayes plan ...`` -> typed values (numbers, allowed failures,
Beta and gamma priors); errors name the option (exit 2)."""

from __future__ import annotations

import re

from qualbayes.errors import OptionError

_NUM = r"[0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?"


def parse_number(text: str, option: str) -> float:
    t = str(text).strip()
    if not re.fullmatch(_NUM, t):
        raise OptionError(f"{option} {text!r}: expected a positive number such as 600")
    value = float(t)
    if not value > 0 or value == float("inf"):
        raise OptionError(f"{option} {text!r}: must be greater than 0")
    return value


def parse_whole(text: str, option: str, least: int = 0) -> int:
    t = str(text).strip()
    if not re.fullmatch(r"-?[0-9]+", t):
        raise OptionError(f"{option} {text!r}: expected a whole number")
    value = int(t)
    if value < least:
        raise OptionError(f"{option} {text!r}: " + ("a count cannot be negative" if least == 0
                                                    else f"must be at least {least}"))
    return value


def parse_failures(text: str) -> list[int]:
    """``K`` -> 0..K, ``A..B`` -> A..B, ``A,B,C`` -> that list."""
    t = str(text).strip()
    if ".." in t:
        lo, _, hi = t.partition("..")
        a, b = parse_whole(lo, "--failures"), parse_whole(hi, "--failures")
        if b < a:
            raise OptionError(f"--failures {text!r}: the range must run upwards, e.g. 0..3")
        return list(range(a, b + 1))
    if "," in t:
        return sorted({parse_whole(v, "--failures") for v in t.split(",")})
    return list(range(parse_whole(t, "--failures") + 1))


def parse_pair(text: str, option: str, prefix: str) -> tuple[float, float]:
    t = str(text).strip().lower()
    if t.startswith(prefix + ":"):
        t = t[len(prefix) + 1:]
    parts = t.split(",")
    if len(parts) != 2:
        raise OptionError(f"{option} {text!r}: write {prefix}:A,B with two positive numbers")
    a, b = (parse_number(v, option) for v in parts)
    if a > 1e9 or b > 1e12:
        raise OptionError(f"{option} {text!r}: A and B are implausibly large")
    return a, b


def parse_reliability_prior(text: str, option: str, on_reliability: bool = True):
    """A Beta prior as typed: on R (attribute, life) or on the defect rate (sampling).
    Returns a RatePrior, or the strings 'history' / 'none' / 'same'."""
    from qualbayes.planning.priors import RatePrior  # noqa: PLC0415

    t = str(text).strip().lower()
    if t in ("history", "none", "same"):
        return t
    make = RatePrior.on_reliability if on_reliability else RatePrior.beta
    what = "R" if on_reliability else "p"
    if t == "uniform":
        return make(1.0, 1.0, f"uniform: {what} ~ Beta(1, 1)")
    if t == "jeffreys":
        return make(0.5, 0.5, f"jeffreys: {what} ~ Beta(0.5, 0.5)")
    a, b = parse_pair(text, option, "beta")
    return make(a, b)


def parse_gamma(text: str, option: str):
    from qualbayes.planning.mtbf import GammaPrior  # noqa: PLC0415

    if str(text).strip().lower() == "same":
        return "same"
    a, b = parse_pair(text, option, "gamma")
    return GammaPrior(a, b)


def optional_probability(text, option):
    from qualbayes.questions import parse_probability  # noqa: PLC0415

    return None if text is None else parse_probability(text, option)

