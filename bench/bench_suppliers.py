"""Benchmark of the supplier scorecard (run: python bench/bench_suppliers.py [S Q L]).

200 invented suppliers x 8 quarters x 30 lots (48,000 lots, 1,600 supplier-quarters), the
hierarchical model with periods, 4 chains x 1,000 draws after 1,000 warm-up, the
scorecard's target acceptance (``scorecard.TARGET_ACCEPT``, 0.99), close calls continued as
the command does. Each fit runs in a fresh process, timed from the call of
``assess_suppliers`` to the gated, summarised result (imports and data building excluded):
"cold" starts with an empty jax compilation cache, "warm" is the second run with it. The
table gives wall time, the process's CPU time (all threads; less sensitive than wall time to
other work on a shared machine), the gate, the smallest bulk and tail ESS over every gated parameter
(m, log sigma_b, logit phi, and per supplier a_s and log sigma_w,s, and per cell the logit
rate), the divergences, the attempts and the further runs drawn for close calls.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
os.environ.setdefault("CI", "true")


def history(suppliers: int, quarters: int, lots: int, seed: int = 15):
    """A LotTable of invented suppliers; one in ten drifts in its last quarter (x3)."""
    import datetime as dt

    import numpy as np
    import pandas as pd

    from qualbayes.data.lot_table import LotTable

    rng = np.random.default_rng(seed)
    level = np.exp(rng.normal(np.log(0.005), 0.6, suppliers))
    recs = []
    for s in range(suppliers):
        for q in range(quarters):
            rate = level[s] * (3.0 if s % 10 == 0 and q == quarters - 1 else 1.0)
            n = rng.choice([50, 80, 125], lots)
            p = rng.beta(rate * 400, (1 - rate) * 400, lots)
            x = rng.binomial(n, p)
            day = dt.date(2025 + q // 4, 3 * (q % 4) + 1, 10)
            for i in range(lots):
                recs.append((f"S{s}-{q}-{i}", None, f"Supplier {s:03d}", day, None,
                             int(n[i]), int(x[i]), len(recs) + 2))
    frame = pd.DataFrame(recs, columns=["lot", "part", "supplier", "date", "lot_size",
                                        "inspected", "defectives", "row"])
    return LotTable(frame, "bench", None, 1, {"supplier": "Supplier", "date": "Date"}, [])


def one_fit(suppliers: int, quarters: int, lots: int) -> dict:
    import time

    from qualbayes.inference.run import configure_process

    configure_process()  # as the command line does: one CPU device per chain, the jax cache
    from qualbayes.scorecard import assess_suppliers

    table = history(suppliers, quarters, lots)
    t0, c0 = time.perf_counter(), time.process_time()
    result = assess_suppliers(table, 0.01, period="quarter")
    seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
    d = result.diagnostics
    return {"seconds": seconds, "cpu_seconds": cpu, "passed": d["passed"],
            "min_ess_bulk": d["min_ess_bulk"],
            "min_ess_tail": d["min_ess_tail"], "max_rhat": d["max_rhat"],
            "divergences": d["divergences"], "attempts": d["attempts"],
            "parameters": len(d["parameters"]), "extra_runs": result.extra_runs}


def main(argv: list[str]) -> None:
    if argv and argv[0] == "--child":
        print(json.dumps(one_fit(*map(int, argv[1:4]))))
        return
    shape = [int(a) for a in argv[:3]] or [200, 8, 30]
    s, q, lt = shape
    print(f"suppliers x quarters x lots = {s} x {q} x {lt} ({s * q * lt:,} lots)\n")
    print("| run | wall s | CPU s | gate | min bulk ESS | min tail ESS | max R-hat | divergences "
          "| attempts | extra runs | gated parameters | load 1-min (start-end) |")
    print("| --- | ---: | ---: | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | --- |",
          flush=True)
    with tempfile.TemporaryDirectory() as cache:
        env = {**os.environ, "QUALBAYES_JAX_CACHE": cache, "PYTHONPATH": str(ROOT)}
        for label in ("cold", "warm"):  # each row printed as soon as its run ends
            load = os.getloadavg()[0]
            out = subprocess.run([sys.executable, __file__, "--child", *map(str, shape)],
                                 env=env, check=True, capture_output=True, text=True)
            r = json.loads(out.stdout.strip().splitlines()[-1])
            print(f"| {label} | {r['seconds']:.1f} | {r['cpu_seconds']:.1f} | "
                  f"{'passed' if r['passed'] else 'FAILED'} "
                  f"| {r['min_ess_bulk']:.0f} | {r['min_ess_tail']:.0f} | "
                  f"{r['max_rhat']:.4f} | {r['divergences']} | {r['attempts']} | "
                  f"{r['extra_runs']} | "
                  f"{r['parameters']:,} | {load:.1f}-{os.getloadavg()[0]:.1f} |", flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
