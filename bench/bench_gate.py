"""The convergence gate's cost: ArviZ called one scalar at a time (the earlier gate) against
one vectorised numpy call per variable (qualbayes.inference.diagnostics), for K parts with two
parameters each, 4 chains x 1000 draws. Prints a markdown table.

    python bench/bench_gate.py [--parts 10 100 300]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np


def arviz_per_scalar(draws: dict) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        import arviz as az
    for arr in draws.values():
        for k in range(arr.shape[2]):
            x = arr[:, :, k]
            az.rhat(x, method="rank")
            az.ess(x, method="bulk")
            az.ess(x, method="tail")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--parts", type=int, nargs="+", default=[10, 100, 300])
    args = ap.parse_args()
    from qualbayes.inference.gate import diagnose_arrays

    rng = np.random.default_rng(0)
    print("| parts | ArviZ per scalar (CPU s) | numpy vectorised (CPU s) | speed-up |")
    print("| ---: | ---: | ---: | ---: |")
    for k in args.parts:
        draws = {"mu": rng.normal(size=(4, 1000, k)), "log_kappa": rng.normal(size=(4, 1000, k))}
        arviz_per_scalar({"mu": draws["mu"][:, :, :1]})  # import and warm up
        t0 = time.process_time()
        arviz_per_scalar(draws)
        t1 = time.process_time()
        diagnose_arrays(draws, 0, dims={"mu": ["part"], "log_kappa": ["part"]})
        t2 = time.process_time()
        print(f"| {k} | {t1 - t0:.3f} | {t2 - t1:.3f} | {(t1 - t0) / (t2 - t1):.1f}x |")


if __name__ == "__main__":
    main()
