"""Acceptance questions and the decision rule (pure functions, no I/O).

Rule, for a quantity q and limit s at confidence C:
``accept``/``meets`` when P(q within limit | data) >= C, ``reject``/``does-not-meet`` when
P(q beyond limit | data) >= C, otherwise ``undecided``. A failed convergence gate gives
``not-converged`` and no verdict.
"""

from __future__ import annotations

import re

from qualbayes.errors import OptionError

ACCEPT, REJECT, UNDECIDED, NOT_CONVERGED = "accept", "reject", "undecided", "not-converged"
MEETS, DOES_NOT_MEET = "meets", "does-not-meet"


def parse_rate(text: str, option: str = "--spec") -> float:
    """A defect-rate limit as ``0.01``, ``1%`` or ``10000ppm`` -> 0.01."""
    t = str(text).strip().lower().replace(" ", "")
    m = re.fullmatch(r"([0-9]*\.?[0-9]+(?:e-?[0-9]+)?)(%|ppm)?", t)
    if not m:
        raise OptionError(f"{option} {text!r}: write the limit as 0.01, 1% or 10000ppm")
    value = float(m[1])
    if m[2] == "%":
        value /= 100.0
    elif m[2] == "ppm":
        value /= 1e6
    if not 0.0 < value < 1.0:
        raise OptionError(f"{option} {text!r}: the limit must lie strictly between 0 and 1 "
                          "(0% and 100%)")
    return value


def parse_probability(text: str | float, option: str) -> float:
    """A probability strictly inside (0, 1); ``90%`` is accepted."""
    t = str(text).strip()
    try:
        value = float(t[:-1]) / 100.0 if t.endswith("%") else float(t)
    except ValueError:
        raise OptionError(f"{option} {text!r}: expected a number such as 0.95 or 95%") from None
    if not 0.0 < value < 1.0:
        raise OptionError(f"{option} {text!r}: must lie strictly between 0 and 1")
    return value


def decide(prob_within: float, confidence: float, converged: bool = True,
           labels: tuple[str, str] = (ACCEPT, REJECT)) -> str:
    """The decision for one quantity from P(within limit)."""
    if not converged:
        return NOT_CONVERGED
    if prob_within >= confidence:
        return labels[0]
    if 1.0 - prob_within >= confidence:
        return labels[1]
    return UNDECIDED
