"""The smallest whole number meeting a monotone condition, searched from a good first guess.

:func:`qualbayes.search.smallest_int` brackets the answer by doubling from the lower end and
bisects: about 2 log2(answer) evaluations. When each evaluation is costly (a sum over
posterior draws) and a close first guess is at hand (a conjugate estimate), the condition's
underlying *value* (a probability minus its threshold, increasing in n) lets a secant step
land next to the answer: typically 3 to 6 evaluations. The answer is the same smallest
integer whenever the condition is monotone (tests/test_lot_answers.py compares both searches
on smooth, stepped and flat conditions).
"""

from __future__ import annotations

import math
from collections.abc import Callable


def smallest_near(value: Callable[[int], float], start: int, cap: int, lo: int = 0,
                  true_at: int | None = None, slope: float | None = None) -> int | None:
    """The smallest integer m in [lo, cap] with ``value(m) >= 0``, for a condition that is
    False up to some m and True from there on (``value`` need not be continuous); None when
    ``value(cap) < 0``. ``start``: the first guess; ``true_at``: a point known to meet the
    condition without evaluating it (or None); ``slope``: an estimate of the value's
    increase per unit near ``start`` (or None), used for the first step.

    Every evaluated point lies strictly inside the current bracket, so the bracket shrinks
    at every step. Inside a bracket the next point is the secant's root rounded up (the
    Illinois rule: an end kept twice in a row has its value halved), kept inside. Outside
    one, the first step is a Newton step with ``slope`` (one unit without it), then the
    secant through the last two points on that side, at most eight times the previous
    step, and from the fourth point on the same side at least twice the previous step.

    >>> smallest_near(lambda m: m - 41.5, start=30, cap=10**9)
    42
    >>> smallest_near(lambda m: -1.0, start=5, cap=100) is None
    True
    """
    if lo > cap:
        return None
    below, above = lo - 1, cap + 1  # value(below) < 0, value(above) >= 0 by convention
    if true_at is not None and lo <= true_at <= cap:
        above = true_at
    f_below: float | None = None  # the values the secant uses (Illinois may halve them)
    f_above: float | None = None
    prev: tuple[int, float] | None = None  # the previous point on the current side
    run, side, move = 0, 0, 0
    m = min(max(int(start), below + 1), above - 1)
    while above - below > 1:
        v = float(value(m))
        new_side = 1 if v >= 0 else -1
        if new_side == side:
            run += 1
            prev = (above, f_above) if side > 0 else (below, f_below)
        else:
            run, side, prev = 1, new_side, None
        if v >= 0:
            above, f_above = m, v
        else:
            below, f_below = m, v
        if above - below <= 1:
            break
        if f_below is not None and f_above is not None:
            if run >= 2:  # Illinois: the other end was kept twice
                if side > 0:
                    f_below = f_below / 2
                else:
                    f_above = f_above / 2
            r = below + (above - below) * (-f_below) / (f_above - f_below)
            m = math.ceil(r) if math.isfinite(r) else (below + above) // 2
            m = min(max(m, below + 1), above - 1)
            continue
        here = (m, v)
        if prev is None:  # one point on this side: a Newton step with the slope given
            r = m - v / slope if slope is not None and slope > 0 else None
            if r is not None and not (math.isfinite(r) and abs(r) < 2**62):
                r = None
        else:
            r = _secant(prev, here)
        target = (math.ceil(r) if side < 0 else math.ceil(r) - 1) if r is not None else None
        step = abs(target - m) if target is not None else 0
        if run >= 4:
            step = max(step, 2 * move)
        if prev is not None:
            step = min(step, 8 * max(move, 1))
        move = max(step, 1)
        m = min(m + move, above - 1) if side < 0 else max(m - move, below + 1)
    return None if above > cap else above


def _secant(first: tuple[int, float] | None, second: tuple[int, float]) -> float | None:
    """The root of the line through two (m, value) points, or None (one point, flat or
    decreasing line, or a root out of range)."""
    if first is None:
        return None
    (m1, v1), (m2, v2) = first, second
    if m1 == m2 or (v2 - v1) / (m2 - m1) <= 0:
        return None
    r = m2 - v2 * (m2 - m1) / (v2 - v1)
    return r if math.isfinite(r) and abs(r) < 2**62 else None


def doubling_path(answer: int | None, cap: int, lo: int = 0) -> list[int]:
    """The points :func:`qualbayes.search.smallest_int` tests on its way to ``answer`` (None:
    the condition never met up to ``cap``) for a monotone condition, in its order.

    >>> doubling_path(5, 100)
    [0, 1, 3, 7, 5, 4]
    """
    from qualbayes.search import smallest_int  # noqa: PLC0415

    seen: list[int] = []

    def ok(m: int) -> bool:
        seen.append(m)
        return answer is not None and m >= answer

    smallest_int(ok, lo, cap)
    return seen
