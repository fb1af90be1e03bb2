r"""Monte Carlo precision of the life decision: the MCSE of P(R(mission) >= target), more
draws when the call is close, and the close-call label.

For one group with posterior draws :math:`(\beta_s, \eta_s)` over chains,

.. math::

    \hat P = \frac1S \sum_s 1\{R_s \ge r^*\},\qquad R_s = \exp(-(t_m/\eta_s)^{\beta_s}),

and :math:`\mathrm{MCSE}(\hat P) = \mathrm{sd}(1\{\cdot\}) / \sqrt{\mathrm{ESS}}` with the ESS of
the indicator sequence itself (:func:`qualbayes.inference.mcse.mcse_mean`). No
Rao-Blackwellisation is
available: :math:`R(t_m)` is a deterministic function of :math:`(\beta, \eta)` and the
posterior has no closed-form conditional under censoring and the general priors, so the
indicator is the per-draw quantity.

Rule (:func:`settle`). When :math:`\hat P` or :math:`1 - \hat P` lies within
:data:`qualbayes.inference.mcse.CLOSE_MCSE` (3) MCSE of the confidence C, the group is sampled again
alone with :data:`MORE_DRAWS` (4) times the draws per chain, then 16 times: at most
:data:`MAX_ROUNDS` (2) extra rounds and at most :data:`MAX_DRAWS_PER_CHAIN` (16,000) draws
per chain (64,000 with the default 4 chains; the default 1,000 per chain reaches the cap in
two rounds). The same seed is used every round, so the same input and seed give the same numbers.
If the call is still close after the last round the decision is ``undecided`` with the note
:data:`CLOSE_NOTE`. Because a verdict needs :math:`|\hat P - C| > 3` MCSE, two seeds can
differ only between a verdict and that label (a flip of a verdict across C would need a swing
of more than 6 MCSE).

>>> import numpy as np
>>> rng = np.random.default_rng(0)
>>> ls, lc = rng.normal(0.5, 0.1, (4, 500)), rng.normal(3.0, 0.1, (4, 500))
>>> p, mc = prob_meets(ls, lc, mission=5.0, target=0.9)
>>> bool(0 < mc < 0.02)
True
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from qualbayes.inference.mcse import CLOSE_MCSE, is_close_call, mcse_mean

MORE_DRAWS = 4
MAX_ROUNDS = 2
#: the cap: no extra round goes beyond this many draws per chain
MAX_DRAWS_PER_CHAIN = 16_000
CLOSE_NOTE = "too close to call at this Monte Carlo precision"
RULE_TEXT = (f"P or 1 - P within {CLOSE_MCSE:g} MCSE of C: up to {MAX_ROUNDS} extra rounds of "
             f"{MORE_DRAWS}x the draws per chain (same seed), at most {MAX_DRAWS_PER_CHAIN:,} "
             f"per chain; still that close: undecided, '{CLOSE_NOTE}'")


@dataclass(frozen=True)
class Precision:
    """P(R(mission) >= target) from the draws kept, its MCSE, and how they were reached."""

    prob: float
    mcse: float
    draws_per_chain: int
    extra_rounds: int
    close_call: bool

    def to_dict(self) -> dict:
        return {"prob_meets_target": self.prob, "prob_meets_target_mcse": self.mcse,
                "draws_per_chain": self.draws_per_chain, "extra_draw_rounds": self.extra_rounds,
                "close_call": self.close_call}


def prob_meets(log_shape: np.ndarray, log_scale: np.ndarray, *, mission: float,
               target: float) -> tuple[float, float]:
    """P(R(mission) >= target) and its MCSE from (chain, draw) arrays of log shape and log
    scale (the same arithmetic as :func:`qualbayes.life_question.weibull_quantities`)."""
    beta, eta = np.exp(log_shape), np.exp(log_scale)
    with np.errstate(over="ignore"):
        r = np.exp(-np.exp(beta * (math.log(mission) - np.log(eta))))
    hit = (r >= target).astype(float)
    return float(hit.mean()), float(mcse_mean(hit))


def more_draws(settings, rounds: int):
    """The sampler settings of extra round ``rounds`` (1, 2, ...): the same seed and warmup,
    ``MORE_DRAWS ** rounds`` times the draws per chain, at most ``MAX_DRAWS_PER_CHAIN``;
    None when the cap is already reached."""
    if rounds > MAX_ROUNDS or settings.num_samples * MORE_DRAWS ** (rounds - 1) \
            >= MAX_DRAWS_PER_CHAIN:
        return None
    wanted = settings.num_samples * MORE_DRAWS ** rounds
    return replace(settings, num_samples=min(wanted, MAX_DRAWS_PER_CHAIN))


def settle(chains: dict, gate, *, settings, refit: Callable, mission: float, target: float,
           confidence: float, k: float = CLOSE_MCSE):
    """Draw more while the call is close (at most ``MAX_ROUNDS`` rounds, at most
    ``MAX_DRAWS_PER_CHAIN`` draws per chain).

    ``chains``: {"log_shape", "log_scale"} as (chain, draw) arrays and ``gate`` their
    convergence gate (``.passed``); ``refit(settings)`` returns ``(chains, gate)`` of a new
    fit of this group alone. Returns ``(chains, gate, Precision)`` of the last fit used."""
    p, mc = prob_meets(chains["log_shape"], chains["log_scale"], mission=mission,
                       target=target)
    rounds = 0
    close = bool(is_close_call(p, mc, confidence, k))
    while gate.passed and close and (more := more_draws(settings, rounds + 1)) is not None:
        rounds += 1
        chains, gate = refit(more)
        p, mc = prob_meets(chains["log_shape"], chains["log_scale"], mission=mission,
                           target=target)
        close = bool(is_close_call(p, mc, confidence, k))
    draws = int(np.shape(chains["log_shape"])[1])
    return chains, gate, Precision(p, mc, draws, rounds, bool(close and gate.passed))


def close_call_note(prec: Precision, confidence: float) -> str:
    """The group note of a close call (or of a call settled by extra draws)."""
    if prec.close_call:
        level = (f"the confidence {confidence:g}" if abs(prec.prob - confidence)
                 <= abs(1.0 - prec.prob - confidence) else f"1 - the confidence {confidence:g}")
        return (f"P(R >= target) = {prec.prob:.4f} (Monte Carlo error {prec.mcse:.4f}) is "
                f"within {CLOSE_MCSE:g} Monte Carlo standard errors of {level} after "
                f"{prec.extra_rounds} extra round(s) of draws ({prec.draws_per_chain:,} per "
                f"chain; cap {MAX_DRAWS_PER_CHAIN:,}): {CLOSE_NOTE}")
    return (f"the first draws left P(R >= target) within {CLOSE_MCSE:g} Monte Carlo standard "
            f"errors of the confidence; {prec.extra_rounds} extra round(s) of draws "
            f"({prec.draws_per_chain:,} per chain, same seed) settled the call")
