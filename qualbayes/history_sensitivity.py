r"""Sensitivity of the lot-history answers to the stated lot-to-lot spread, by quadrature.

Each row refits the two-parameter history posterior of every group under another spread
scale S (:class:`qualbayes.models.lot_spread.HistoryPrior`) on the exact 2-D grid of
:mod:`qualbayes.models.lot_history_grid` instead of NUTS (about 0.05 s per group and scale,
no jax, no convergence to check), and answers every lot on its own basis exactly as the
lots question does: :math:`P = \sum_g w_g\, g(a_g, b_g)` with
:func:`qualbayes.lot_decisions.draws_g` evaluated at the grid points (a_g, b_g) =
(mu kappa, (1 - mu) kappa) with weights w_g. Quadrature has no Monte Carlo error: the
decision is accept when P >= C, reject when 1 - P >= C and the lot has a defective,
undecided otherwise.

>>> import pandas as pd
>>> f = pd.DataFrame({"lot": ["a", "b", "c"], "part": "P", "defectives": [0, 1, 0],
...                   "inspected": [80, 80, 125], "lot_size": pd.array([None] * 3, "Int64"),
...                   "decision_basis": "process"})
>>> t = spread_sensitivity(f, 0.02, 0.9, scales=(0.5,))
>>> list(t.columns)[:4]
['lot', 'group', 'lot_spread', 'prob_within_spec']
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from qualbayes.lot_answers import _combos, group_rows
from qualbayes.lot_decisions import draws_g
from qualbayes.models import lot_history_grid as grid
from qualbayes.models.lot_spread import HistoryPrior
from qualbayes.questions import ACCEPT, REJECT, UNDECIDED

SCALES = (0.25, 0.5, 1.0)  # half, as stated by default, twice


def group_probabilities(frame: pd.DataFrame, spec: float, prior: HistoryPrior,
                        size: int = 160) -> np.ndarray:
    """P(within spec | lots of the group) of every lot of ``frame`` (one group)."""
    x = frame["defectives"].to_numpy(float)
    n = frame["inspected"].to_numpy(float)
    g = grid.posterior_grid(x, n, prior=prior, size=size)
    combos, index = _combos(frame)
    probs = np.array([float(g.weight @ draws_g(g.a, g.b, cx, cn, rem, spec, basis, lot)[0])
                      for cx, cn, rem, lot, basis in combos])
    return probs[index]


def spread_sensitivity(frame: pd.DataFrame, spec: float, confidence: float,
                       scales=SCALES, group_by=("part",)) -> pd.DataFrame:
    """One row per lot and spread scale S: P(within spec) and the decision, by quadrature.
    ``frame`` needs lot, defectives, inspected, lot_size, decision_basis and the group
    columns."""
    rows = []
    for label, idx in group_rows(frame, tuple(group_by)).items():
        sub = frame.iloc[idx]
        x = sub["defectives"].to_numpy(float)
        for s in scales:
            p = group_probabilities(sub, spec, HistoryPrior(float(s)))
            dec = np.where(p >= confidence, ACCEPT,
                           np.where((1.0 - p >= confidence) & (x > 0), REJECT, UNDECIDED))
            rows += [{"lot": lot, "group": label, "lot_spread": float(s),
                      "prob_within_spec": float(pi), "decision": str(d)}
                     for lot, pi, d in zip(sub["lot"], p, dec, strict=True)]
    return pd.DataFrame(rows, columns=["lot", "group", "lot_spread", "prob_within_spec",
                                       "decision"])
