"""Benchmark: the per-lot answering pass after a history fit (issue 18, item 1).

Run: ``python bench/bench_answers.py [case ...] [--profile] [--workers=K]`` with cases ``lots:20``,
``lots:1000`` (lots of one part), ``sizes:1000`` (the same, nearly every lot its own
size) or ``parts:10`` (10 parts x 20 lots, answered part by
part); no case: ``lots:20 lots:1000 parts:10``.

The lots are bench/bench_speed.py's simulated lots (the same CSV rows). The draws stand in
for a NUTS fit's: 4 chains x 1,000 draws of (mu, kappa) taken from the part's exact 2-D
quadrature posterior (``lot_history_grid.posterior_grid``) by weighted resampling, so no
sampler runs and jax is not imported. Timed in this process, after one unmeasured warm-up
call: the pass that decides (``answer_lots(..., full=False)``: P, its MCSE, the decision)
and the full pass that reuses it (``known=``: bounds, quantiles, clean-unit counts,
defectives not inspected), as the command runs them: wall and CPU seconds of this
process (compare CPU when other work loads the machine). ``--profile`` prints a
pyinstrument profile of the full pass of each case; ``--workers=K``: threads of the full
pass (default: answer_lots's default; 0: the CPUs available).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parent
sys.path.insert(0, str(ROOT))

from bench_speed import write_case  # noqa: E402

from qualbayes.lot_answers import answer_lots  # noqa: E402
from qualbayes.models.lot_history_grid import posterior_grid  # noqa: E402

CHAINS, DRAWS = 4, 1000


def case_frames(case: str, tmp: Path) -> list[tuple[pd.DataFrame, np.ndarray, np.ndarray]]:
    kind, count = case.split(":")
    lots, parts = (int(count), 1) if kind in ("lots", "sizes") else (20, int(count))
    path = tmp / f"{kind}_{count}.csv"
    write_case(path, lots, parts, varied=kind == "sizes")
    raw = pd.read_csv(path)
    rng = np.random.default_rng(11)
    out = []
    for _, g in raw.groupby("Part Number", sort=False):
        frame = pd.DataFrame({"defectives": g["Nonconforming"].to_numpy(float),
                              "inspected": g["Qty Inspected"].to_numpy(float),
                              "lot_size": pd.array(g["Lot Qty"].to_numpy(), dtype="Int64")})
        frame["decision_basis"] = "lot"
        post = posterior_grid(frame["defectives"], frame["inspected"])
        pick = rng.choice(post.mu.size, size=CHAINS * DRAWS, p=post.weight)
        mu, kappa = post.mu[pick], post.kappa[pick]
        out.append((frame.reset_index(drop=True), mu * kappa, (1 - mu) * kappa))
    return out


def run(frames, spec=0.01, confidence=0.95, workers=None):
    """(wall, CPU) of the deciding pass, (wall, CPU) of the full pass, the full answers."""
    t0, c0 = time.perf_counter(), time.process_time()
    known = [answer_lots(f, a, b, CHAINS, spec, confidence, full=False) for f, a, b in frames]
    t1, c1 = time.perf_counter(), time.process_time()
    full = [answer_lots(f, a, b, CHAINS, spec, confidence, known=k, workers=workers)
            for (f, a, b), k in zip(frames, known, strict=True)]
    t2, c2 = time.perf_counter(), time.process_time()
    return (t1 - t0, c1 - c0), (t2 - t1, c2 - c1), full


def main(argv: list[str]) -> None:
    import os
    import tempfile

    profile = "--profile" in argv
    workers = next((int(a.split("=")[1]) for a in argv if a.startswith("--workers=")), 1)
    workers = workers if workers > 0 else None
    cases = [a for a in argv if not a.startswith("--")] or ["lots:20", "lots:1000", "parts:10"]
    print(f"load before: {os.getloadavg()[0]:.2f}")
    print("| case | distinct (x, n, N) | decide pass wall / CPU (s) | full pass wall / CPU (s) "
          "| load (1 min) |")
    print("| --- | --- | --- | --- | --- |")
    with tempfile.TemporaryDirectory() as tmp:
        for case in cases:
            frames = case_frames(case, Path(tmp))
            run(frames[:1])  # warm-up (imports, first calls)
            combos = sum(len(f.drop_duplicates()) for f, _, _ in frames)
            if profile:
                from pyinstrument import Profiler  # noqa: PLC0415

                known = [answer_lots(f, a, b, CHAINS, 0.01, 0.95, full=False)
                         for f, a, b in frames]
                prof = Profiler()
                prof.start()
                for (f, a, b), k in zip(frames, known, strict=True):
                    answer_lots(f, a, b, CHAINS, 0.01, 0.95, known=k)
                prof.stop()
                print(prof.output_text(unicode=False, color=False))
                continue
            (w_decide, c_decide), (w_full, c_full), _ = run(frames, workers=workers)
            print(f"| {case} | {combos} | {w_decide:.3f} / {c_decide:.3f} | "
                  f"{w_full:.3f} / {c_full:.3f} | {os.getloadavg()[0]:.2f} |")


if __name__ == "__main__":
    main(sys.argv[1:])
