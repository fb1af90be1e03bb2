r"""How much longer must an undecided group be tested? Importance reweighting of the Weibull
posterior draws (numpy; the Pareto diagnostic from qualbayes.inference.psis, no ArviZ).

If every running unit (each unit now a suspension, at time :math:`t_i`) survives a further
time x, the posterior changes by the likelihood ratio

.. math:: w_s(x) = \prod_i \frac{S(t_i + x)}{S(t_i)}
        = \exp\Big(-\sum_i [((t_i + x)/\eta_s)^{\beta_s} - (t_i/\eta_s)^{\beta_s}]\Big)

(with m new units instead: :math:`w_s(x) = \exp(-m (x/\eta_s)^{\beta_s})`), so

.. math:: P_x = \frac{\sum_s w_s(x)\,\mathbf 1[R_s(T) \ge R^*]}{\sum_s w_s(x)}

is P(R(T) >= R* | data and survival to x) without refitting. The answer is the least x with
:math:`P_x \ge C` (a grid, then bisection). The reweighting is trusted only while the weights
are sound: Pareto k of the log weights at most 0.7 (Vehtari, Simpson, Gelman, Yao & Gabry
2024, JMLR 25(72)) and an effective number of draws :math:`(\sum w)^2/\sum w^2` of at least
400; otherwise the answer is refused with the reason (refit with the extended data instead).
Its Monte Carlo error is the delta-method error of the self-normalised ratio,
:math:`\mathrm{MCSE}(\tfrac1S\sum_s S\tilde w_s (g_s - P_x))`, using the chains'
autocorrelation.
"""

from __future__ import annotations

import math

import numpy as np

from qualbayes.inference.mcse import mcse_mean
from qualbayes.inference.psis import pareto_k

K_MAX = 0.7
ESS_MIN = 400.0
GRID = 48
REACH = 20.0  # search up to this many times max(mission, longest time on test)
MAX_CELLS = 40_000_000  # draws x distinct running times per evaluation


class _Weights:
    def __init__(self, chains: dict, times: np.ndarray, counts: np.ndarray):
        self.beta = np.exp(chains["log_shape"])
        self.log_eta = chains["log_scale"]
        self.times, self.counts = times, counts
        size = self.beta.size
        if times.size and size * times.size > MAX_CELLS:  # keep whole chains, fewer draws
            keep = max(MAX_CELLS // times.size // self.beta.shape[0], 50)
            cols = np.unique(np.linspace(0, self.beta.shape[1] - 1, keep).astype(int))
            self.beta, self.log_eta = self.beta[:, cols], self.log_eta[:, cols]

    def log_w(self, x: float, new_units: int | None) -> np.ndarray:
        b, le = self.beta[..., None], self.log_eta[..., None]
        if new_units:
            return -new_units * np.exp(self.beta * (math.log(x) - self.log_eta))
        h1 = np.exp(b * (np.log(self.times + x) - le))
        h0 = np.exp(b * (np.log(self.times) - le))
        return -np.sum(self.counts * (h1 - h0), axis=-1)


def reweighted(log_w: np.ndarray, good: np.ndarray) -> dict:
    """P, its MCSE, the Pareto k of the weights and their effective number."""
    lw = log_w - log_w.max()
    w = np.exp(lw)
    wn = w / w.sum()
    p = float(np.sum(wn * good))
    ess = float(1.0 / np.sum(wn**2))
    k = pareto_k(lw.reshape(-1))
    mc = float(mcse_mean(wn * w.size * (good - p)))
    return {"p": p, "mcse": mc, "pareto_k": float(k), "ess": ess}


def remaining_time(chains: dict, suspensions, mission: float, target: float,
                   confidence: float, new_units: int | None = None,
                   longest: float | None = None) -> dict:
    """The extra survival time after which P(R(mission) >= target) reaches ``confidence``.

    ``chains``: (chain, draw) arrays of ``log_shape`` and ``log_scale``; ``suspensions``: the
    running units' times (ignored with ``new_units``)."""
    ts = np.asarray(suspensions, float)
    if not new_units and ts.size == 0:
        return {"found": False, "case": "nothing-running", "new_units": 0, "running": 0}
    times, counts = np.unique(ts, return_counts=True)
    wts = _Weights(chains, times, counts.astype(float))
    good = (wts.beta * (math.log(mission) - wts.log_eta)
            <= math.log(-math.log(target))).astype(float)
    basis = {"new_units": int(new_units or 0), "running": int(ts.size)}
    top = REACH * max(mission, longest or (ts.max() if ts.size else mission))
    grid = np.geomspace(top * 1e-4, top, GRID)

    def at(x):
        return reweighted(wts.log_w(x, new_units), good)

    prev, hit = None, None
    for x in grid:
        r = at(x)
        sound = r["pareto_k"] <= K_MAX and r["ess"] >= ESS_MIN
        if not sound:
            return _refused(x, r, prev, basis)
        if r["p"] >= confidence:
            hit = x
            break
        prev = (x, r)
    if hit is None:
        return {"found": False, "case": "not-reached", "search_limit": float(top), **basis}
    lo = prev[0] if prev else 0.0
    hi = hit
    for _ in range(30):
        mid = 0.5 * (lo + hi)
        if mid <= 0 or hi - lo < 1e-4 * hi:
            break
        if at(mid)["p"] >= confidence:
            hi = mid
        else:
            lo = mid
    r = at(hi)
    return {"found": True, "case": "reached", **basis, "extra_time": hi,
            "prob_at_extra_time": r["p"], "prob_mcse": r["mcse"], "pareto_k": r["pareto_k"],
            "weights_ess": r["ess"]}


def _refused(x, r, prev, basis) -> dict:
    return {"found": False, "case": "weights-degenerate", **basis, "refused": True,
            "pareto_k": r["pareto_k"], "weights_ess": r["ess"], "beyond": float(x),
            "pareto_k_max": K_MAX, "weights_ess_min": ESS_MIN,
            "reached_time": float(prev[0]) if prev else None,
            "reached_prob": float(prev[1]["p"]) if prev else None}
