"""Benchmark of the lot path (run: python bench/bench_lots.py). Prints a table.

1. The CLI end to end on the example file with a conjugate prior (target < 1.5 s; jax is
   kept out of this path).
2. The hierarchical model on 1,000 simulated lots, 4 chains x 1,000 draws (after 1,000
   warm-up), marginalised (production) against the plain model that samples every lot
   rate: wall time, minimum bulk ESS of the hyperparameters (mu, log kappa), ESS per second
   (targets: marginalised >= 3x the plain ESS/s, and under 6 s wall). Each fit runs in a
   fresh process, timed from the call of the fit to the gated result (imports excluded);
   "cold" starts with an empty jax compilation cache, "warm" is the second run with it.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
os.environ.setdefault("CI", "true")


def cli_seconds(runs: int = 3) -> list[float]:
    exe = Path(sys.executable).with_name("qualbayes")
    cmd = [str(exe) if exe.exists() else sys.executable, *([] if exe.exists() else
                                                           ["-m", "qualbayes"]),
           "lots", str(ROOT / "example_lots" / "incoming_inspection.xlsx"), "--spec", "1%"]
    out = []
    for _ in range(runs):
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, capture_output=True)
        out.append(time.perf_counter() - t0)
    return out


def simulate(k: int = 1000, mu: float = 0.01, kappa: float = 300.0, seed: int = 1):
    rng = np.random.default_rng(seed)
    p = rng.beta(mu * kappa, (1 - mu) * kappa, size=k)
    n = rng.choice([50, 80, 125, 200, 315], size=k).astype(float)
    return rng.binomial(n.astype(int), p).astype(float), n


def hierarchical(model_name: str, x, n) -> dict:
    from qualbayes.inference import SamplerSettings, configure_process

    configure_process()
    from qualbayes.models import lot_history

    model = getattr(lot_history, model_name)
    settings = SamplerSettings(num_warmup=1000, num_samples=1000, seed=3, retry=False)
    t0 = time.perf_counter()
    fit = lot_history.fit_histories([(x, n)], settings, names=["sim"], model=model)
    wall = time.perf_counter() - t0
    ess = fit.gate.min_ess_bulk
    return {"wall": wall, "ess": ess, "ess_per_s": ess / wall, "rhat": fit.gate.max_rhat,
            "div": fit.gate.divergences}


def fit_in_subprocess(model_name: str, cache: str) -> dict:
    env = dict(os.environ, QUALBAYES_JAX_CACHE=cache, CI="true")
    out = subprocess.run([sys.executable, __file__, "--fit", model_name], env=env,
                         check=True, capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def main() -> None:
    cli = cli_seconds()
    cache = tempfile.mkdtemp(prefix="qualbayes-bench-cache-")
    cold = fit_in_subprocess("lot_history_model", cache)
    marg = fit_in_subprocess("lot_history_model", cache)
    plain_cache = tempfile.mkdtemp(prefix="qualbayes-bench-cache-")
    fit_in_subprocess("lot_history_model_plain", plain_cache)
    plain = fit_in_subprocess("lot_history_model_plain", plain_cache)
    rows = [
        ("CLI end to end, example xlsx, conjugate prior (best of 3)", f"{min(cli):.2f} s",
         "< 1.5 s"),
        ("CLI end to end, runs", ", ".join(f"{c:.2f}" for c in cli) + " s", ""),
    ]
    rows.append(("hierarchical, 1,000 lots, marginalised, cold cache: wall",
                 f"{cold['wall']:.1f} s", ""))
    for name, r in (("marginalised", marg), ("plain (every p_i sampled)", plain)):
        rows.append((f"hierarchical, 1,000 lots, {name}, warm cache: wall", f"{r['wall']:.1f} s",
                     "< 6 s" if name == "marginalised" else ""))
        rows.append(("  min bulk ESS (mu, log kappa) / max R-hat / divergences",
                     f"{r['ess']:.0f} / {r['rhat']:.4f} / {r['div']}", ""))
        rows.append(("  ESS per second", f"{r['ess_per_s']:.0f}", ""))
    ratio = marg["ess_per_s"] / plain["ess_per_s"]
    rows.append(("ESS/s ratio, marginalised / plain", f"{ratio:.1f}x", ">= 3x"))
    w = max(len(r[0]) for r in rows)
    print(f"{'measure'.ljust(w)}  {'value':>22}  target")
    print("-" * (w + 34))
    for label, value, target in rows:
        print(f"{label.ljust(w)}  {value:>22}  {target}")
    print(f"machine: {os.cpu_count()} cores; python {sys.version.split()[0]}")


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "--fit":
        print(json.dumps(hierarchical(sys.argv[2], *simulate())))
    else:
        main()
