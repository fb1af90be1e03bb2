"""Benchmark of the lot path (run: python bench/bench_lots.py). Prints a table.

1. The CLI end to end on the example file with a conjugate prior (target < 1.5 s; jax is
   kept out of this path).
2. The hierarchical model on 1,000 simulated lots, 4 chains x 1,000 draws (after 1,000
   warm-up), marginalised (production) against the plain model that samples every lot
   rate: wall time, minimum bulk ESS of the hyperparameters (mu, log kappa), ESS per second
   (targets: marginalised >= 3x the plain ESS/s, and under 6 s wall). Each fit runs in a
   fresh process, timed from the call of the fit to the gated result (imports excluded);
   "cold" starts with an empty jax compilation cache, "warm" is the second run with it.
3. The default history hyperprior (tau ~ HalfNormal(0.5)) beside the earlier one
   (phi ~ Uniform, ``history-phi-uniform``) on the 1,000-lot case and on a stable supplier
   (200 lots, mu = 0.002, kappa = 20,000): wall, ESS/s, divergences (target: no more than
   1.5 x the earlier wall).
4. The whole lots question (``assess_lots``, history prior, 1,000 lots of one part with
   lot sizes: fit, more draws if needed, per-lot answers, outlier check) against its fit's
   wall (target: within 2 x), and 200,000 lots (target: under 60 s wall).
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


def stable(k: int = 200, seed: int = 9):
    return simulate(k, mu=0.002, kappa=20000.0, seed=seed)


def hierarchical(model_name: str, x, n) -> dict:
    from qualbayes.inference.run import SamplerSettings, configure_process

    configure_process()
    from qualbayes.models import lot_history
    from qualbayes.models.lot_spread import PhiUniformPrior

    model = getattr(lot_history, model_name)
    prior = PhiUniformPrior() if model_name == "lot_history_model_phi_uniform" else None
    settings = SamplerSettings(num_warmup=1000, num_samples=1000, seed=3, retry=False)
    t0 = time.perf_counter()
    fit = lot_history.fit_histories([(x, n)], settings, names=["sim"], model=model,
                                    prior=prior)
    wall = time.perf_counter() - t0
    ess = fit.gate.min_ess_bulk
    return {"wall": wall, "ess": ess, "ess_per_s": ess / wall, "rhat": fit.gate.max_rhat,
            "div": fit.gate.divergences}


def fit_in_subprocess(model_name: str, cache: str, case: str = "sim") -> dict:  # noqa: D103
    env = dict(os.environ, QUALBAYES_JAX_CACHE=cache, CI="true")
    out = subprocess.run([sys.executable, __file__, "--fit", model_name, case], env=env,
                         check=True, capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def lot_table(k: int, seed: int = 1):
    import pandas as pd

    from qualbayes.data.lot_table import LotTable

    x, n = simulate(k, seed=seed)
    rng = np.random.default_rng(seed + 1)
    size = rng.choice([800, 2000, 3200, 5000], size=k)
    frame = pd.DataFrame({"lot": [f"L{i}" for i in range(k)], "part": "P", "supplier": None,
                          "date": None, "lot_size": pd.array(size, dtype="Int64"),
                          "inspected": n.astype(int), "defectives": x.astype(int),
                          "row": np.arange(k) + 2})
    return LotTable(frame, "sim.csv", None, 1, {}, [])


def question(k: int) -> dict:
    """Fit alone, then the whole question, in one warm process."""
    from qualbayes.inference.run import SamplerSettings
    from qualbayes.lot_question import assess_lots
    from qualbayes.models import lot_history

    table = lot_table(k)
    f = table.frame
    settings = SamplerSettings(seed=3)
    lot_history.fit_histories([(f["defectives"].to_numpy(float),
                                f["inspected"].to_numpy(float))], settings, names=["P"])
    t0 = time.perf_counter()
    lot_history.fit_histories([(f["defectives"].to_numpy(float),
                                f["inspected"].to_numpy(float))], settings, names=["P"])
    fit_wall = time.perf_counter() - t0
    t0 = time.perf_counter()
    res = assess_lots(table, 0.01, 0.95, "history", settings=settings)
    wall = time.perf_counter() - t0
    return {"fit": fit_wall, "question": wall, "chains": res.sampler.get("chains"),
            "passed": res.converged}


def question_in_subprocess(k: int, cache: str) -> dict:
    env = dict(os.environ, QUALBAYES_JAX_CACHE=cache, CI="true")
    out = subprocess.run([sys.executable, __file__, "--question", str(k)], env=env,
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
    old_cache = tempfile.mkdtemp(prefix="qualbayes-bench-cache-")
    for case, label in (("sim", "1,000 lots"), ("stable", "stable supplier, 200 lots")):
        fit_in_subprocess("lot_history_model_phi_uniform", old_cache, case)
        old = fit_in_subprocess("lot_history_model_phi_uniform", old_cache, case)
        fit_in_subprocess("lot_history_model", cache, case)  # warm: its own padded shape
        new = fit_in_subprocess("lot_history_model", cache, case)
        for name, r in (("earlier prior (phi uniform)", old), ("default prior (tau HN 0.5)",
                                                                 new)):
            rows.append((f"{label}, {name}, warm: wall / ESS/s / divergences",
                         f"{r['wall']:.1f} s / {r['ess_per_s']:.0f} / {r['div']}", ""))
        rows.append((f"{label}: wall ratio default / earlier",
                     f"{new['wall'] / old['wall']:.2f}x", "<= 1.5x"))
    for k, target in ((1000, "<= 2x the fit"), (200_000, "< 60 s")):
        q = question_in_subprocess(k, cache)
        rows.append((f"assess_lots history, {k:,} lots of one part: fit / whole question",
                     f"{q['fit']:.1f} s / {q['question']:.1f} s", target))
        rows.append(("  ratio question / fit; chains used; gate passed",
                     f"{q['question'] / q['fit']:.2f}x; {q['chains']}; {q['passed']}", ""))
    w = max(len(r[0]) for r in rows)
    print(f"{'measure'.ljust(w)}  {'value':>22}  target")
    print("-" * (w + 34))
    for label, value, target in rows:
        print(f"{label.ljust(w)}  {value:>22}  {target}")
    print(f"machine: {os.cpu_count()} cores; python {sys.version.split()[0]}")


if __name__ == "__main__":
    if len(sys.argv) == 4 and sys.argv[1] == "--fit":
        data = stable() if sys.argv[3] == "stable" else simulate()
        print(json.dumps(hierarchical(sys.argv[2], *data)))
    elif len(sys.argv) == 3 and sys.argv[1] == "--question":
        print(json.dumps(question(int(sys.argv[2]))))
    else:
        main()
