"""Field-failure forecast: the question behind ``qualbayes returns`` (pure numpy; the life
posterior comes in as draws).

For each group of the installed base and for all units together: the posterior predictive
number of failures in each coming period and in total over the horizon (median and central
C interval), the expected failures per period with its band, and, when a spare-part stock
is given, P(total failures <= stock) with its Monte Carlo standard error.
"""

from __future__ import annotations

import math

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.inference.mcse import mcse_mean
from qualbayes.models.forecast import LifeDraws, forecast_counts

MAX_DRAWS = 1000  # posterior draws used for the forecast (evenly thinned within chains)
ALL = "(all units)"


def check_forecast_options(usage: float, horizon: int, confidence: float,
                           spares: int | None) -> None:
    if not (math.isfinite(usage) and usage > 0):
        raise OptionError(f"--usage {usage!r}: the life units a unit accumulates per period "
                          "must be a positive number")
    if not (isinstance(horizon, int) and 1 <= horizon <= 600):
        raise OptionError(f"--horizon {horizon!r}: give a whole number of periods, 1 to 600")
    if not 0 < confidence < 1:
        raise OptionError(f"--confidence {confidence!r}: must lie strictly between 0 and 1")
    if spares is not None and (not isinstance(spares, int) or spares < 0):
        raise OptionError(f"--spares {spares!r}: give a whole number of units, 0 or more")


def _interval(x: np.ndarray, confidence: float, axis=0, counts: bool = False):
    """Central interval and median; for counts the quantiles are counts that occur (the
    inverse of the empirical cdf, no interpolation between two counts)."""
    tail = (1.0 - confidence) / 2.0
    return np.quantile(x, [tail, 0.5, 1.0 - tail], axis=axis,
                       method="inverted_cdf" if counts else "linear")


def summarise_counts(counts: np.ndarray, expected: np.ndarray, confidence: float,
                     spares: int | None) -> dict:
    """counts/expected: (chain, draw, K) -> per period and total summaries."""
    k = counts.shape[-1]
    flat = counts.reshape(-1, k)
    exp_flat = expected.reshape(-1, k)
    lo, med, hi = _interval(flat, confidence, counts=True)
    e_lo, e_med, e_hi = _interval(exp_flat, confidence)
    cum = np.cumsum(flat, axis=1)
    c_lo, c_med, c_hi = _interval(cum, confidence, counts=True)
    total = counts.sum(axis=-1)  # (chain, draw)
    t_lo, t_med, t_hi = _interval(total.reshape(-1), confidence, counts=True)
    out = {
        "periods": [{"period": j + 1, "expected": float(exp_flat[:, j].mean()),
                     "expected_band": [float(e_lo[j]), float(e_hi[j])],
                     "expected_median": float(e_med[j]),
                     "median": float(med[j]), "interval": [float(lo[j]), float(hi[j])],
                     "cumulative_median": float(c_med[j]),
                     "cumulative_interval": [float(c_lo[j]), float(c_hi[j])]}
                    for j in range(k)],
        "total": {"expected": float(exp_flat.sum(axis=1).mean()), "median": float(t_med),
                  "interval": [float(t_lo), float(t_hi)]},
    }
    if spares is not None:
        hit = (total <= spares).astype(float)
        out["spares"] = {"stock": spares, "prob_enough": float(hit.mean()),
                         "prob_enough_mc_error": float(mcse_mean(hit))}
    return out


def forecast_fleet(ages: np.ndarray, counts: np.ndarray | None, groups: np.ndarray | None,
                   draws: LifeDraws, usage: float, horizon: int, confidence: float = 0.9,
                   spares: int | None = None, seed: int = 20261202) -> dict:
    """Forecast for every group and for all units together.

    ``ages`` in life units (the units of the life data), ``usage`` life units per period.
    The groups share the posterior draws, so the total is the sum of the groups draw by
    draw (their uncertainty about the life law is common).
    """
    check_forecast_options(usage, horizon, confidence, spares)
    ages = np.asarray(ages, float)
    counts = np.ones(ages.size) if counts is None else np.asarray(counts, float)
    thin = draws.thinned(MAX_DRAWS)
    names = [ALL] if groups is None else list(dict.fromkeys(groups))
    per_group, total_counts, total_expected, binning = [], None, None, 0.0
    for j, g in enumerate(names):
        m = np.ones(ages.size, bool) if groups is None else (np.asarray(groups) == g)
        fc = forecast_counts(ages[m], counts[m], thin, usage, horizon, seed=seed + 7919 * j)
        binning = max(binning, fc["binning_error"])
        per_group.append({"group": g, "units": int(round(fc["units"])),
                          "oldest_age": float(ages[m].max()), "youngest_age":
                          float(ages[m].min()), "cohorts": fc["cohorts"],
                          **summarise_counts(fc["counts"], fc["expected"], confidence,
                                             spares if len(names) == 1 else None)})
        total_counts = fc["counts"] if total_counts is None else total_counts + fc["counts"]
        total_expected = (fc["expected"] if total_expected is None
                          else total_expected + fc["expected"])
    overall = per_group[0] if len(names) == 1 else {
        "group": ALL, "units": int(round(counts.sum())), "oldest_age": float(ages.max()),
        "youngest_age": float(ages.min()),
        **summarise_counts(total_counts, total_expected, confidence, spares)}
    notes = []
    if binning > 0:
        notes.append(f"ages were grouped into bins; the largest relative change this makes to "
                     f"an expected count per period is {binning:.1e} (checked exactly over "
                     "every unit at the posterior median life parameters)")
    return {"groups": per_group if len(names) > 1 else [], "overall": overall,
            "draws_used": int(thin.mu.size), "horizon": horizon, "usage": usage,
            "confidence": confidence, "distribution": draws.distribution, "notes": notes}
