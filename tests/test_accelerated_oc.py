"""Operating characteristics of the at-use decision with the default priors (flat activation
energy and location, log shape ~ N(0, 1)): under fixed true values, how often it says
"meets" for a design that is out of limit, and "does-not-meet" for one within limit.

Design (invented, docs/accelerated.md "Operating characteristics"): Arrhenius-Weibull,
Ea = 0.7 eV, shape 2, characteristic life 2,000 h at 105 C; 20 units at each of 85, 105
and 125 C stopped at 1,500 h; use 40 C; target R(mission) >= 0.95 at C = 0.9. The mission is
set so that the true R(mission) is 0.90 (out of limit) or 0.99 (within limit). Measured
values are in docs/accelerated.md.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from qualbayes.data.life import LifeTable
from qualbayes.data.stress_life import StressLifeTable
from qualbayes.models.life_stress import BOLTZMANN_EV, StressTerm

EA, BETA, ETA_105, USE_K = 0.7, 2.0, 2000.0, 313.15


def true_mission(r_true: float) -> float:
    eta_use = ETA_105 * math.exp(EA / BOLTZMANN_EV * (1 / USE_K - 1 / 378.15))
    return eta_use * (-math.log(r_true)) ** (1 / BETA)


def one_decision(rng, mission: float) -> str:
    from qualbayes.accelerated_analysis import assess_at_use

    temps = np.repeat([358.15, 378.15, 398.15], 20)
    eta = ETA_105 * np.exp(EA / BOLTZMANN_EV * (1 / temps - 1 / 378.15))
    t = eta * rng.weibull(BETA, size=temps.size)
    kind = np.where(t < 1500.0, "failure", "suspension")
    frame = pd.DataFrame({"unit": [f"U{i}" for i in range(60)], "group": "(all units)",
                          "kind": kind, "lower": np.minimum(t, 1500.0),
                          "upper": np.where(t < 1500.0, t, np.inf), "row": np.arange(2, 62)})
    table = StressLifeTable(LifeTable(frame, "oc", None, 1, {}, []), ["T"], temps[:, None],
                            ["K"])
    res = assess_at_use(table, [StressTerm("T", "arrhenius", USE_K)], mission=mission,
                        target=0.95, confidence=0.9, check_shape=False,
                        seed=int(rng.integers(1 << 30)))
    return res.result["decision"]


def oc_study(runs: int, seed: int) -> dict:
    rng = np.random.default_rng(seed)
    out = {}
    for label, r_true in (("out of limit (R = 0.90)", 0.90), ("within limit (R = 0.99)", 0.99)):
        decisions = [one_decision(rng, true_mission(r_true)) for _ in range(runs)]
        out[label] = {d: decisions.count(d) / runs for d in set(decisions)}
    return out


@pytest.mark.slow
def test_at_use_operating_characteristics():
    """With C = 0.9 a calibrated rule accepts an out-of-limit design at most about 10% of
    the time; allowed: 10% + 3 binomial standard errors (runs = 45: 0.045). 90 fits in one
    process: about a hundred exhaust its memory mappings for compiled code (docs)."""
    runs = 45
    oc = oc_study(runs, seed=404)
    print(oc)
    bound = 0.1 + 3 * math.sqrt(0.09 / runs)
    assert oc["out of limit (R = 0.90)"].get("meets", 0.0) <= bound
    assert oc["within limit (R = 0.99)"].get("does-not-meet", 0.0) <= bound
