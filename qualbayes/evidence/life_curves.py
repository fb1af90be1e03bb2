"""The points and curves of the life figures, from the data and the posterior draws: median
ranks for the probability plot, the posterior median and central band of R(t)."""

from __future__ import annotations

import numpy as np

from qualbayes.models.weibull_ranks import plotting_positions

CURVE_POINTS = 60
MAX_PLOT_POINTS = 2000  # more plotted failures are thinned evenly (the picture is the same)


def plot_data(arrays: dict, beta, eta, mission: float, confidence: float) -> dict:
    """Points (median ranks) and curves (posterior median and central band of F(t)) for the
    probability plot and the R(t) curve; ``arrays`` as :func:`qualbayes.data.life.frame_arrays`,
    ``beta`` and ``eta`` the draws of shape and scale."""
    pos = plotting_positions(**arrays)
    shown = np.arange(pos["time"].size)
    if shown.size > MAX_PLOT_POINTS:
        shown = np.unique(np.linspace(0, shown.size - 1, MAX_PLOT_POINTS).astype(int))
    every = np.concatenate([v for v in arrays.values() if np.size(v)])
    every = every[every > 0]
    lo = min(every.min(), mission) / 3.0
    hi = max(every.max(), mission) * 3.0
    t = np.geomspace(lo, hi, CURVE_POINTS)
    take = np.linspace(0, beta.size - 1, min(beta.size, 2000)).astype(int)
    b, e = beta[take, None], eta[take, None]
    with np.errstate(over="ignore"):  # a huge shape: H = inf, R = 0 exactly
        rel = np.exp(-np.exp(b * (np.log(t)[None, :] - np.log(e))))
    tail = (1.0 - confidence) / 2.0
    r_lo, r_med, r_hi = np.quantile(rel, [tail, 0.5, 1.0 - tail], axis=0)
    return {
        "points": {"time": pos["time"][shown].tolist(),
                   "adjusted_rank": pos["rank"][shown].tolist(),
                   "median_rank": pos["median_rank"][shown].tolist(),
                   "kind": [("exact", "interval midpoint", "left-censored")[k]
                            for k in pos["kind"][shown]]},
        "plotted_failures": int(shown.size), "failures_ranked": int(pos["time"].size),
        "units": int(pos["n"]),
        "curve": {"time": t.tolist(), "reliability_median": r_med.tolist(),
                  "reliability_low": r_lo.tolist(), "reliability_high": r_hi.tolist()},
        "band": f"central {confidence:.0%} credible band",
    }
