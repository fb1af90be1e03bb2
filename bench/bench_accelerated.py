"""Benchmark of the accelerated life fit and the field forecast
(run: python bench/bench_accelerated.py).

Invented data: an Arrhenius-Weibull test at 85, 105 and 125 C, 20 units each (shape 2,
activation energy 0.7 eV, characteristic life 2,000 h at 105 C), every unit stopped at
1,500 h (type I censoring: about 40% suspensions). The fit is the one ``at-use`` runs:
posterior mode and Laplace covariance (scipy), NUTS with 4 chains x 1,000 draws after 1,000
warm-up iterations, float64, then the common-shape check (a second NUTS fit, one shape per
level). The forecast: 100,000 units in service with ages uniform over 0 to 8,760 h, 730 h a
month, 24 months, from 1,000 posterior draws of the life law at 40 C.

Each measurement runs in a fresh process: "cold" with an empty jax compilation cache
(compilation included), "warm" with the cache the cold run filled (as a second run of the
command). Printed: wall time of the fit (mode + NUTS + check), of the forecast, of the whole
process, and the minimum bulk ESS over the gated quantities. CPU time (all threads of the
process) is printed beside wall time, with the load average: on a shared machine the wall
time includes waiting for a core.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def child() -> None:
    t_start = time.perf_counter()
    import numpy as np
    import pandas as pd

    from qualbayes.accelerated_analysis import assess_at_use
    from qualbayes.data.life import LifeTable
    from qualbayes.data.stress_life import StressLifeTable
    from qualbayes.field_forecast import forecast_fleet
    from qualbayes.models.forecast import LifeDraws
    from qualbayes.models.life_stress import BOLTZMANN_EV, StressTerm

    rng = np.random.default_rng(2026)
    temps = np.repeat([358.15, 378.15, 398.15], 20)
    eta = 2000.0 * np.exp(0.7 / BOLTZMANN_EV * (1 / temps - 1 / 378.15))
    t = eta * rng.weibull(2.0, size=temps.size)
    kind = np.where(t < 1500.0, "failure", "suspension")
    frame = pd.DataFrame({"unit": [f"U{i}" for i in range(60)], "group": "(all units)",
                          "kind": kind, "lower": np.minimum(t, 1500.0),
                          "upper": np.where(t < 1500.0, t, np.inf), "row": np.arange(2, 62)})
    table = StressLifeTable(LifeTable(frame, "bench", None, 1, {}, []), ["T"], temps[:, None],
                            ["K"])
    t0, c0 = time.perf_counter(), time.process_time()
    res = assess_at_use(table, [StressTerm("T", "arrhenius", 313.15)], mission=20000.0,
                        target=0.9, confidence=0.9)
    fit_s, fit_cpu = time.perf_counter() - t0, time.process_time() - c0
    mu, sigma = res.use_life_draws()
    draws = LifeDraws(mu.reshape(4, -1), sigma.reshape(4, -1), "weibull")
    ages = rng.uniform(0, 8760.0, size=100_000)
    t0, c0 = time.perf_counter(), time.process_time()
    fc = forecast_fleet(ages, None, None, draws, 730.0, 24, 0.9)
    forecast_s, forecast_cpu = time.perf_counter() - t0, time.process_time() - c0
    r = res.result
    print(json.dumps({
        "fit_s": fit_s, "fit_cpu": fit_cpu, "forecast_s": forecast_s,
        "forecast_cpu": forecast_cpu, "load": os.getloadavg()[0],
        "process_s": time.perf_counter() - t_start,
        "min_ess_bulk": r["diagnostics"]["min_ess_bulk"],
        "min_ess_tail": r["diagnostics"]["min_ess_tail"],
        "check_min_ess": (r["shape_check"].get("diagnostics") or {}).get("min_ess_bulk"),
        "failures": r["failures"], "decision": r["decision"],
        "draws_used": fc["draws_used"], "total_median": fc["overall"]["total"]["median"],
    }))


def main() -> None:
    if "--child" in sys.argv:
        child()
        return
    env = dict(os.environ, CI="true", PYTHONPATH=str(ROOT))
    rows = []
    with tempfile.TemporaryDirectory() as cache:
        env["QUALBAYES_JAX_CACHE"] = cache
        for label in ("cold (empty compile cache)", "warm (cache filled)"):
            out = subprocess.run([sys.executable, __file__, "--child"], env=env,
                                 capture_output=True, text=True, check=True).stdout
            rows.append((label, json.loads(out.strip().splitlines()[-1])))
    print("| run | fit: 3 levels x 20 units, wall (CPU) s | min bulk ESS | min tail ESS | "
          "shape-check min ESS | forecast 100,000 units x 24 months, wall (CPU) s | "
          "process wall s | load average |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- |")
    for label, r in rows:
        print(f"| {label} | {r['fit_s']:.1f} ({r['fit_cpu']:.1f}) | {r['min_ess_bulk']:.0f} | "
              f"{r['min_ess_tail']:.0f} | {r['check_min_ess'] or float('nan'):.0f} | "
              f"{r['forecast_s']:.2f} ({r['forecast_cpu']:.2f}) | {r['process_s']:.1f} | "
              f"{r['load']:.1f} |")
    last = rows[-1][1]
    print(f"\n{last['failures']} failures of 60; decision {last['decision']}; forecast from "
          f"{last['draws_used']} posterior draws, median total {last['total_median']:.0f} "
          "failures over 24 months")


if __name__ == "__main__":
    main()
