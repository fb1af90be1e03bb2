"""Benchmark: several parts fitted jointly (one NUTS run over 2 x parts dimensions) against
every part as its own problem (``models/lot_history_parts.py``), issue 18.

Run: ``python bench/bench_parts.py [parts ...] [--chunk=8,32,128] [--rounds=2] [--retry]``
(default 1 10 100; 20 lots per part; ``--chunk``: the parts per compiled call of the
independent fit, each measured; ``BENCH_WAY=independent`` or ``joint`` for one way only).
One process for all sizes, so that compiled code is shared as in a long session: each
(parts, way) is fitted ``rounds`` times (default 2; 1 for the joint fit of 100 parts, whose
every run takes minutes) and each round's wall is printed: round 1 includes tracing and
loading (or compiling) the sampler for that shape, round 2 is the sampling alone. Min bulk
and tail ESS over every part's mu and log kappa; parts failing their own gate; gate as
judged (no retry unless ``--retry``). CPU seconds (all threads of the process, getrusage)
beside the wall: on a shared machine the wall scatters with the load, the CPU time much
less.
"""

from __future__ import annotations

import os
import resource
import sys
import time

import numpy as np


def groups_for(parts: int, lots: int = 20, seed: int = 1):
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(parts):
        n = rng.choice([50, 80, 125, 200, 315], size=lots).astype(float)
        x = rng.binomial(n.astype(int), rng.beta(0.01 * 300, 0.99 * 300, size=lots))
        out.append((x.astype(float), n))
    return out


def _cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


def _failing(fit, names) -> int:
    return sum(not fit.gate.select(part=name).passed for name in names)


def main(sizes: list[int], ways=(True, False), chunks=(None,), rounds: int = 2,
         retry: bool = False) -> None:
    from qualbayes.inference.run import SamplerSettings, configure_process

    configure_process()
    from qualbayes.lot_history_answers import TARGET_ACCEPT
    from qualbayes.models import lot_history_parts
    from qualbayes.models.lot_history import fit_histories

    settings = SamplerSettings(target_accept=TARGET_ACCEPT, retry=retry)
    print("| parts x 20 lots | way | parts per call | round | wall | CPU | min bulk ESS "
          "| min tail ESS | parts failing | gate | load |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |", flush=True)
    for parts in sizes:
        groups = groups_for(parts)
        names = [f"P{j}" for j in range(parts)]
        for independent in ways:
            for chunk in (chunks if independent else (None,)):
                if chunk:
                    lot_history_parts.CHUNK = chunk
                n_rounds = 1 if (parts >= 100 and not independent) else rounds
                for r in range(1, n_rounds + 1):
                    t0, c0 = time.perf_counter(), _cpu()
                    fit = fit_histories(groups, settings, names=names,
                                        independent=independent)
                    wall, cpu = time.perf_counter() - t0, _cpu() - c0
                    per = (lot_history_parts.CHUNK if independent else "-")
                    print(f"| {parts} | {'independent' if independent else 'joint'} | {per} "
                          f"| {r} | {wall:.1f} s | {cpu:.1f} s | {fit.gate.min_ess_bulk:.0f} "
                          f"| {fit.gate.min_ess_tail:.0f} | {_failing(fit, names)} | "
                          f"{'passed' if fit.gate.passed else 'FAILED'} | "
                          f"{os.getloadavg()[0]:.1f} |", flush=True)
    print(f"machine: {os.cpu_count()} cores; load average {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    way = {"independent": (True,), "joint": (False,)}.get(os.environ.get("BENCH_WAY", ""),
                                                          (True, False))
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    opts = dict(a[2:].split("=", 1) for a in sys.argv[1:] if a.startswith("--") and "=" in a)
    chunks = tuple(int(c) for c in opts["chunk"].split(",")) if "chunk" in opts else (None,)
    main([int(a) for a in args] or [1, 10, 100], way, chunks, int(opts.get("rounds", 2)),
         "--retry" in sys.argv)
