"""Invented supplier histories for the scorecard tests: known rates per supplier and period."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from qualbayes.data.lot_table import LotTable


def simulate(rates: np.ndarray, *, lots: int, n: int, kappa: float, seed: int) -> LotTable:
    """Lots of ``n`` units; supplier s's lot rates in quarter t are Beta(mu kappa,
    (1 - mu) kappa) with mu = ``rates[s, t]``. Quarters start in 2025-Q1."""
    rng = np.random.default_rng(seed)
    recs = []
    for s, row in enumerate(np.asarray(rates, dtype=float)):
        for t, mu in enumerate(row):
            p = rng.beta(mu * kappa, (1 - mu) * kappa, lots)
            x = rng.binomial(n, p)
            day = dt.date(2025 + t // 4, 3 * (t % 4) + 1, 15)
            for i in range(lots):
                recs.append((f"S{s}-{t}-{i}", None, f"S{s:02d}", day, None, n, int(x[i]),
                             len(recs) + 2))
    frame = pd.DataFrame(recs, columns=["lot", "part", "supplier", "date", "lot_size",
                                        "inspected", "defectives", "row"])
    return LotTable(frame, "simulated", None, 1, {"supplier": "Supplier", "date": "Date"}, [])
