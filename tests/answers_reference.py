"""The answering pass as it was before the speed work of issue 18 (commit 133ae50), kept
as the reference that the faster code must reproduce number for number
(tests/test_lot_answers.py): the clean-unit search by doubling and bisection from 0, and
the mixture quantile one level at a time."""

from __future__ import annotations

import numpy as np
from scipy import special

from qualbayes.lot_decisions import LOT, MAX_EXTRA_UNITS, MIN_WEIGHT_ESS, draws_g
from qualbayes.search import smallest_int


class _Degenerate(Exception):
    pass


def extra_clean_units(a0, b0, x, n, remaining, lot_size, spec, confidence, basis,
                      calls: list | None = None):
    """The earlier ``lot_decisions.extra_clean_units``, verbatim but for ``calls`` (each
    tested m appended, to count the sums over the draws)."""
    alpha, beta = a0 + x, b0 + (n - x)
    lot = basis == LOT and remaining is not None
    if lot and x > spec * lot_size + 1e-12:
        return None
    base = special.betaln(alpha, beta)
    single = alpha.size == 1

    def ok(m: int) -> bool:
        if calls is not None:
            calls.append(m)
        if single:
            w = np.ones(1)
        else:
            logw = special.betaln(alpha, beta + m) - base
            w = np.exp(logw - logw.max())
            if w.sum() ** 2 / (w**2).sum() < MIN_WEIGHT_ESS:
                raise _Degenerate
        if lot:
            g, _ = draws_g(a0, b0 + m, x, n, remaining - m, spec, LOT, lot_size)
        else:
            g = special.betainc(alpha, beta + m, spec)
        return bool(np.average(g, weights=w) >= confidence)

    try:
        return smallest_int(ok, 0, remaining if lot else MAX_EXTRA_UNITS)
    except _Degenerate:
        return None
