"""Searching whole numbers (sample sizes, extra units) under a monotone condition."""

from __future__ import annotations

from collections.abc import Callable


def smallest_int(ok: Callable[[int], bool], lo: int = 0, cap: int = 10**9) -> int | None:
    """The smallest integer n in [lo, cap] with ``ok(n)``, for ``ok`` monotone in n (False up
    to some n, True from there on); None when ``ok(cap)`` is False.

    Doubling steps bracket the answer, then bisection finds it: O(log n) calls of ``ok``.
    """
    if lo > cap:
        return None
    if ok(lo):
        return lo
    step = max(1, lo)
    hi = lo
    while True:  # invariant: ok(lo) is False
        hi = min(cap, lo + step)
        if ok(hi):
            break
        if hi >= cap:
            return None
        lo, step = hi, 2 * step
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid
    return hi
