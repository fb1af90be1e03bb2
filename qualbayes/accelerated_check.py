r"""Does one shape fit every stress level? The check behind the common-shape assumption.

Every level with at least two failures gets its own location and shape:
:math:`\log T_{li} = \mu_l + \sigma_l\varepsilon_{li}`, :math:`\mu_l` flat, :math:`\log\sigma_l`
with the same prior as the common model. NUTS gives the posterior of each level's shape
:math:`\beta_l = 1/\sigma_l`; for each pair of levels the posterior probability
:math:`P(\beta_a > \beta_b \mid \text{data})` is computed from the draws (with its Monte
Carlo error). A pair with that probability beyond 0.995 or below 0.005 (the levels' shapes
differ at the 1% two-sided level, a screen with a stated rate, not a proof) is reported as
evidence against the common shape: the failure mechanism may change with stress, and the
extrapolation to use is then not to be trusted.
"""

from __future__ import annotations

import itertools

import numpy as np

from qualbayes.inference.mcse import mcse_mean
from qualbayes.models import life_stress as ls

CHECK_MIN_FAILURES = 2
CHECK_MAX_LEVELS = 12
FLAG = 0.005


def common_shape_check(kind, lower, upper, level_of, levels, distribution: str,
                       prior: ls.StressPrior, settings, confidence: float) -> dict:
    """Per-level shape posteriors and the pairwise screen (see the module notes)."""
    from qualbayes.models.accelerated import fit_accelerated  # noqa: PLC0415

    failed = np.isin(kind, ("failure", "interval", "left"))
    eligible = [i for i in range(levels.shape[0])
                if failed[level_of == i].sum() >= CHECK_MIN_FAILURES]
    out: dict = {"levels": [], "pairs": [], "notes": [], "done": False}
    if len(eligible) < 2 or levels.shape[0] > CHECK_MAX_LEVELS:
        out["notes"].append(
            "common-shape check not possible: it needs at least two stress levels with "
            f"{CHECK_MIN_FAILURES} or more failures each (and at most {CHECK_MAX_LEVELS} "
            "levels); the common shape is assumed, not checked")
        return out
    keep = np.isin(level_of, eligible)
    new_index = {old: k for k, old in enumerate(eligible)}
    lv = np.array([new_index[i] for i in level_of[keep]])
    design = ls.build_design(kind[keep], lower[keep], upper[keep],
                             np.zeros((int(keep.sum()), 1)), distribution, levels=lv)
    laplace = ls.posterior_mode(design, prior)
    n = len(eligible)

    def gate_on(draws):
        th = draws["theta"]
        return {**{f"log_sigma level {k}[check]": th[..., k] for k in range(n)},
                **{f"location level {k}[check]": th[..., n + k] for k in range(n)}}

    fit = fit_accelerated(design, laplace, prior, (), settings, gate_on)
    if not fit.gate.passed:
        out["notes"].append("common-shape check: the per-level fit did not pass the "
                            "convergence gate; the common shape is assumed, not checked")
        out["diagnostics"] = fit.gate.to_dict()
        return out
    th = fit.draws["theta"]
    shape = np.exp(-th[..., :n])  # (chain, draw, level)
    tail = (1.0 - confidence) / 2.0
    for k, i in enumerate(eligible):
        lo, med, hi = np.quantile(shape[..., k], [tail, 0.5, 1 - tail])
        out["levels"].append({"stress": [float(v) for v in levels[i]],
                              "failures": int(failed[level_of == i].sum()),
                              "shape_median": float(med), "shape_interval": [float(lo),
                                                                             float(hi)]})
    flagged = []
    for a, b in itertools.combinations(range(n), 2):
        hit = (shape[..., a] > shape[..., b]).astype(float)
        p, err = float(hit.mean()), float(mcse_mean(hit))
        differ = p > 1 - FLAG or p < FLAG
        out["pairs"].append({"levels": [a, b], "prob_first_shape_larger": p, "mc_error": err,
                             "differ": differ})
        if differ:
            flagged.append((a, b, p))
    out["done"] = True
    out["diagnostics"] = fit.gate.to_dict()
    if flagged:
        a, b, p = flagged[0]
        out["notes"].append(
            "COMMON-SHAPE CAUTION: the shapes of the stress levels differ (P(shape at level "
            f"{levels[eligible[a]].tolist()} > shape at level {levels[eligible[b]].tolist()}) = "
            f"{p:.4f}); the failure mechanism may change with stress, and the extrapolation "
            "to use rests on an assumption the data contradict")
    else:
        out["notes"].append("common-shape check: the per-level shapes agree (no pair of "
                            f"levels differs at the {2 * FLAG:.0%} level)")
    return out
