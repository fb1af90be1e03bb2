"""Benchmark and accuracy study of the lot-history outlier check (issue 18, item 1).

Run: ``python bench/bench_outliers.py [histories] [lots]`` (default 150 histories of 2 to
40 lots; ``lots``: every history that many lots, e.g. 20 as in bench_speed's parts). For
simulated histories of one part (homogeneous, heterogeneous, with one planted outlying
lot of several severities, two and three lots, 5 to 40 lots) it computes each distinct lot's
leave-one-out p-value three ways:

* **shared**: :func:`qualbayes.models.lot_history_grid.loo_pvalues` (one grid for every
  term of the group, the left-out term subtracted);
* **per term 100**: :func:`~qualbayes.models.lot_history_grid.loo_pvalues_per_term` (each
  term's leave-one-out posterior on its own 100 x 100 grid, the earlier outlier check);
* **per term 300**: the same on 300 x 300 grids (the finest, as the truth).

and prints the largest differences, the flags (p below ``OUTLIER_LEVEL``) that differ, and
the CPU time per history of each way (one process; the load is printed beside it).
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np


def histories(count: int, seed: int = 11, lots_each: int | None = None
              ) -> list[tuple[str, np.ndarray, np.ndarray]]:
    rng = np.random.default_rng(seed)
    sizes = np.array([50, 80, 125, 200, 315])
    out = []
    kinds = ("homogeneous", "heterogeneous", "outlier", "few", "clean")
    for i in range(count):
        kind = kinds[i % len(kinds)]
        lots = int(rng.integers(5, 41)) if kind != "few" else int(rng.integers(2, 4))
        lots = lots_each or lots
        n = rng.choice(sizes, lots)
        base = rng.choice([0.001, 0.003, 0.01, 0.03])
        if kind == "heterogeneous":
            p = rng.beta(base * 5, (1 - base) * 5, lots)
        elif kind == "clean":
            p = np.zeros(lots)
        else:
            p = rng.beta(base * 300, (1 - base) * 300, lots)
        x = rng.binomial(n, p)
        if kind in ("outlier", "few"):
            x[-1] = rng.binomial(n[-1], min(0.5, base * rng.choice([3, 5, 10, 30])))
        out.append((kind, x.astype(float), n.astype(float)))
    return out


def main(count: int, lots_each: int | None = None) -> None:
    from qualbayes.models import lot_history_grid as grid

    rows = {"shared": [], "ref100": [], "ref300": []}
    times = {"shared": 0.0, "ref100": 0.0}
    terms = 0
    for _, x, n in histories(count, lots_each=lots_each):
        t0 = time.process_time()
        rows["shared"].append(grid.loo_pvalues(x, n)[2])
        t1 = time.process_time()
        rows["ref100"].append(grid.loo_pvalues_per_term(x, n)[2])
        t2 = time.process_time()
        rows["ref300"].append(grid.loo_pvalues_per_term(x, n, size=300)[2])
        times["shared"] += t1 - t0
        times["ref100"] += t2 - t1
        terms += len(rows["shared"][-1])
    p = {k: np.concatenate(v) for k, v in rows.items()}
    level = grid.OUTLIER_LEVEL
    print(f"{count} histories, {terms} distinct lots, {int((p['ref300'] < level).sum())} "
          f"flagged by the 300-point reference")
    print("| comparison | max abs diff in p | max rel diff (p > 1e-12) | flags differing |")
    print("| --- | --- | --- | --- |")
    for a, b in (("shared", "ref100"), ("shared", "ref300"), ("ref100", "ref300")):
        d = np.abs(p[a] - p[b])
        big = p[b] > 1e-12
        rel = (d[big] / p[b][big]).max()
        flips = int(((p[a] < level) != (p[b] < level)).sum())
        print(f"| {a} vs {b} | {d.max():.2e} | {rel:.2e} | {flips} |")
    print(f"\nCPU time per history: shared {1e3 * times['shared'] / count:.1f} ms, per term 100 "
          f"{1e3 * times['ref100'] / count:.1f} ms; load average {os.getloadavg()[0]:.1f}, "
          f"{os.cpu_count()} cores")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 150,
         int(sys.argv[2]) if len(sys.argv) > 2 else None)
