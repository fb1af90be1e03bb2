r"""Which distribution, does it fit, and how far does the answer reach: PSIS-LOO model
comparison, a posterior predictive check of failures in time bins, and the extrapolation
warning (numpy and scipy; Pareto smoothing from qualbayes.inference.psis).

**LOO.** For each distinct observation i (count :math:`w_i`),
:math:`\widehat{\mathrm{elpd}}_i = \log \sum_s \tilde w_{is} p(y_i \mid \theta_s)` with
:math:`\tilde w_{is}` the Pareto-smoothed, normalised importance ratios
:math:`1/p(y_i\mid\theta_s)` (``qualbayes.inference.psis``, equal to ArviZ ``psislw``;
Vehtari, Gelman & Gabry 2017, Stat. Comput. 27:1413). Identical observations have
identical terms, so
:math:`\mathrm{elpd} = \sum_i w_i \widehat{\mathrm{elpd}}_i` and its standard error is
:math:`\sqrt{n\,\widehat{\mathrm{var}}(\widehat{\mathrm{elpd}}_i)}` over the n units — the
same numbers ``arviz.loo`` gives on the expanded data (tested). Two models are "not
distinguished" when their elpd difference is below 4 or below 2 standard errors of the
difference (Sivula, Magnusson, Matamoros & Vehtari 2022, arXiv:2008.10296; common
practice).

**Check of fit.** Time is cut into bins holding about equal numbers of failures. Unit i is
on test until its exit time :math:`x_i` (its failure or suspension; interval and left-censored
failures at the middle of their interval, as in the probability plot). The expected number of
failures in bin :math:`(e_{k-1}, e_k]` is the counting-process compensator

.. math:: E_k(\theta) = \sum_i w_i\,[H(\min(x_i, e_k)) - H(\min(x_i, e_{k-1}))]

(H the cumulative hazard), so the check respects censoring: a unit suspended early adds
nothing to later bins. Replicated counts are Poisson(:math:`E_k`); the discrepancy
:math:`D = \sum_k (O_k - E_k)^2 / E_k` of the observed counts is compared with that of the
replicated counts (posterior predictive p-value; small values signal misfit).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import logsumexp

from qualbayes.inference.mcse import mcse_mean
from qualbayes.inference.psis import psis
from qualbayes.life_models import log_lik_pointwise, log_reliability
from qualbayes.models.censored import Observations

ELPD_SMALL = 4.0  # an elpd difference below this is small (Sivula et al. 2022)
SE_FACTOR = 2.0
MAX_CELLS = 20_000_000  # draws x observations for LOO (draws are thinned beyond this)
LOO_DRAWS = 2000  # at most this many draws for PSIS (evenly thinned; PSIS loops over observations)
PPC_DRAWS = 1000
PPC_MISFIT = 0.05


def thin_index(size: int, cap: int) -> np.ndarray:
    """Evenly spaced indices keeping at most ``cap`` of ``size``."""
    return np.unique(np.linspace(0, size - 1, min(size, cap)).astype(int))


def loo(family: str, draws: dict, obs: Observations) -> dict:
    """PSIS-LOO of one fitted family on one group: elpd, its SE, the pointwise terms (per
    distinct observation) and the Pareto k diagnostics (counted in units)."""
    n_obs = obs.weights().size
    size = next(np.size(v) for k, v in draws.items() if k != "t_ref")
    take = thin_index(size, min(LOO_DRAWS, max(MAX_CELLS // max(n_obs, 1), 200)))
    d = {k: (np.asarray(v).reshape(-1)[take] if k != "t_ref" else v) for k, v in draws.items()}
    ll = log_lik_pointwise(family, d, obs).T  # (n, S)
    lw, k = psis(-ll)
    elpd_i = logsumexp(lw + ll, axis=1)
    w = obs.weights()
    n = w.sum()
    elpd = float(w @ elpd_i)
    var = float(w @ (elpd_i - elpd / n) ** 2) / n  # as arviz.loo: population variance
    k_max = min(1.0 - 1.0 / math.log10(take.size), 0.7)
    return {"family": family, "elpd": elpd, "se": math.sqrt(n * var), "pointwise": elpd_i,
            "pareto_k_max": float(np.max(k)), "pareto_k_threshold": k_max,
            "units_high_k": int(w[k > k_max].sum()), "draws_used": int(take.size)}


def compare(loos: dict[str, dict], weights: np.ndarray) -> dict:
    """Rank the families by elpd, with each one's difference to the best and its SE."""
    order = sorted(loos, key=lambda f: -loos[f]["elpd"])
    best = order[0]
    n = weights.sum()
    rows = []
    for f in order:
        diff_i = loos[best]["pointwise"] - loos[f]["pointwise"]
        diff = float(weights @ diff_i)
        var = float(weights @ (diff_i - diff / n) ** 2) / n
        se = math.sqrt(n * var)
        close = diff < ELPD_SMALL or diff < SE_FACTOR * se
        rows.append({"family": f, "elpd": loos[f]["elpd"], "se": loos[f]["se"],
                     "elpd_difference": diff, "difference_se": se,
                     "distinguished_from_best": f != best and not close,
                     "pareto_k_max": loos[f]["pareto_k_max"],
                     "pareto_k_threshold": loos[f]["pareto_k_threshold"],
                     "units_high_k": loos[f]["units_high_k"]})
    return {"best": best, "models": rows}


def check_fit(family: str, draws: dict, obs: Observations, confidence: float,
              rng: np.random.Generator) -> dict | None:
    """Observed against predicted failures in time bins (None with fewer than 3 failures)."""
    x = np.concatenate([obs.exact, obs.right, 0.5 * (obs.int_a + obs.int_b), 0.5 * obs.left])
    failed = np.concatenate([np.ones(obs.exact.size), np.zeros(obs.right.size),
                             np.ones(obs.int_a.size + obs.left.size)]).astype(bool)
    w = obs.weights()
    if w[failed].sum() < 3:
        return None
    bins = int(min(8, max(2, w[failed].sum() // 3)))
    ft, fw = x[failed], w[failed]
    chains = next(np.shape(v) for k, v in draws.items() if k != "t_ref")
    per_chain = max(PPC_DRAWS // chains[0], 8)
    cols = thin_index(chains[1], per_chain)
    d = {k: (np.asarray(v)[:, cols] if k != "t_ref" else v) for k, v in draws.items()}
    # bins of equal expected failures (from the model, not from where the failures fell:
    # bins cut at the observed failures would make every observed count look alike)
    grid = np.geomspace(x.min(), x.max(), 200)
    cum = np.cumsum(_expected(family, d, x, w, grid).reshape(-1, grid.size + 1).mean(0))
    edges = np.unique(np.interp(np.arange(1, bins) / bins * cum[-1], cum[:-1], grid))
    cuts = np.concatenate([[0.0], edges, [np.inf]])
    observed = np.array([fw[(ft > lo) & (ft <= hi)].sum() for lo, hi in
                         zip(cuts[:-1], cuts[1:], strict=True)])
    expected = _expected(family, d, x, w, edges)  # (chain, draw, K)
    rep = rng.poisson(expected)
    with np.errstate(divide="ignore", invalid="ignore"):
        e_safe = np.maximum(expected, 1e-12)
        d_obs = np.sum((observed - expected) ** 2 / e_safe, axis=-1)
        d_rep = np.sum((rep - expected) ** 2 / e_safe, axis=-1)
    exceed = (d_rep >= d_obs).astype(float)
    ppp, ppp_mcse = float(exceed.mean()), float(mcse_mean(exceed))
    tail = (1.0 - confidence) / 2.0
    flat_rep = rep.reshape(-1, rep.shape[-1])
    lo, med, hi = np.quantile(flat_rep, [tail, 0.5, 1.0 - tail], axis=0)
    misfit = ppp + 3 * ppp_mcse < PPC_MISFIT
    return {"family": family, "edges": cuts.tolist(), "observed": observed.tolist(),
            "predicted_median": med.tolist(), "predicted_low": lo.tolist(),
            "predicted_high": hi.tolist(), "expected_mean": expected.reshape(
                -1, expected.shape[-1]).mean(axis=0).tolist(),
            "p_value": ppp, "p_value_mcse": ppp_mcse, "misfit": bool(misfit),
            "doubtful": bool(not misfit and ppp - 3 * ppp_mcse < PPC_MISFIT),
            "confidence": confidence}


def _expected(family: str, d: dict, x: np.ndarray, w: np.ndarray, edges: np.ndarray):
    """E_k for each draw: sum_i w_i H(min(x_i, e)) at every edge e, differenced; chunked
    over draws so memory stays small."""
    lead = next(np.shape(v) for k, v in d.items() if k != "t_ref")
    flat_d = {k: (np.asarray(v).reshape(-1) if k != "t_ref" else v) for k, v in d.items()}
    order = np.argsort(x)
    xs, ws = x[order], w[order]
    pos = np.searchsorted(xs, edges, side="left")  # units with x < e
    after = np.concatenate([np.cumsum(ws[::-1])[::-1], [0.0]])[pos]  # weight with x >= e
    s = lead[0] * lead[1]
    out = np.zeros((s, edges.size + 2))
    step = max(1, 2_000_000 // max(xs.size, 1))
    for a in range(0, s, step):
        sl = {k: (v[a:a + step] if k != "t_ref" else v) for k, v in flat_d.items()}
        h_x = -log_reliability(family, sl, xs)  # (chunk, n)
        cum = np.concatenate([np.zeros((h_x.shape[0], 1)), np.cumsum(h_x * ws, axis=1)], 1)
        h_e = -log_reliability(family, sl, edges)  # (chunk, K-1)
        out[a:a + step, 1:-1] = cum[:, pos] + h_e * after
        out[a:a + step, -1] = cum[:, -1]
    return np.diff(out, axis=1).reshape(*lead, edges.size + 1)


def extrapolation(obs: Observations, mission: float,
                  r_by_family: dict[str, float | None] | None = None) -> dict:
    """Whether the mission time lies beyond the longest observed time, by how much, and the
    spread of R(mission) across the fitted distributions (``r_by_family``)."""
    longest = obs.longest
    factor = mission / longest
    out = {"longest_observed": longest, "factor": factor, "beyond": bool(factor > 1.0)}
    vals = [v for v in (r_by_family or {}).values() if v is not None]
    if out["beyond"] and len(vals) > 1:
        out["spread"] = max(vals) - min(vals)
    return out
