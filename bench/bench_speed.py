"""Benchmark: the whole ``lots --prior history`` command against its fit (issue 18).

Run: ``python bench/bench_speed.py [case ...]`` with cases such as ``lots:1000`` (1,000 lots
of one part, four lot sizes), ``sizes:1000`` (the same lots, nearly every one its own lot
size) or ``parts:100`` (100 parts x 20 lots); no case: the full table (20, 100, 1,000,
10,000 and 200,000 lots of one part; 10, 100 and 1,000 parts x 20 lots), then a cold run
(empty compilation cache) of the 1,000-lot command.

Every measurement is a fresh process on a CSV written once per case (simulated lots: rates
from Beta(mu kappa, (1 - mu) kappa) with mu = 1%, kappa = 300, sample sizes 50..315, lot
sizes 800..5,000), with the same warm compilation cache (one unmeasured warm-up command
first):

* **fit**: ``fit_histories`` on the case's data, timed from the call to the gated result
  (imports excluded), with its minimum bulk ESS; the issue's target (the command within 2x
  its fit) is read against this;
* **fit process**: the whole wall time of that fresh process (interpreter, importing
  pandas and the sampler stack, reading the CSV, the fit): what a program that only fits
  costs, so that the command's own work beyond it shows as ``command / fit process``;
* **command**: ``python -m qualbayes lots FILE --spec 1% --prior history``, wall of the
  whole process (interpreter start, imports, reading, fit, close calls settled by
  continuing the adapted chains, per-lot answers, outlier check, printing), and its peak
  resident memory (getrusage).

When both are measured, the 1,000-lot command's wall is also given as a multiple of the
20-lot command's (target: at most 1.5x; and the command at most 2x its fit).

Options: ``--cache=DIR`` keeps the compilation cache in DIR (shared between invocations,
e.g. a before and an after version; default: a new temporary folder); ``--warmup=small``
warms the cache with a command on the case's parts with the most distinct (x, n) (as many
as one compiled call holds, ``lot_history_parts.CHUNK``; the same compiled sampler, a
fraction of the time; a retry's program, if a part needs one, is then compiled in the
measured run), ``--warmup=none`` not at all (default ``full``: the case's own command);
``--no-fit`` measures the command only. Each row ends with the load average before and
after it.
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
LOTS = (20, 100, 1000, 10_000, 200_000)
PARTS = (10, 100, 1000)

_WRAP = ("import atexit, resource, runpy, sys; atexit.register(lambda: print('MAXRSS', "
         "resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)); "
         "sys.argv = ['qualbayes'] + sys.argv[1:]; runpy.run_module('qualbayes', "
         "run_name='__main__')")


def write_case(path: Path, lots: int, parts: int, seed: int = 1,
               varied: bool = False) -> None:
    """``varied``: lot sizes drawn from 800..5,000 (nearly every lot its own size, as in a
    plant's export) instead of four sizes; the same defectives and sample sizes."""
    rng = np.random.default_rng(seed)
    k = lots * parts
    p = rng.beta(0.01 * 300, 0.99 * 300, size=k)
    n = rng.choice([50, 80, 125, 200, 315], size=k)
    x = rng.binomial(n, p)
    size = (rng.integers(800, 5001, size=k) if varied
            else rng.choice([800, 2000, 3200, 5000], size=k))
    part = np.repeat([f"P{j}" for j in range(parts)], lots)
    with path.open("w") as f:
        f.write("Lot No.,Part Number,Lot Qty,Qty Inspected,Nonconforming\n")
        for i in range(k):
            f.write(f"L{i},{part[i]},{size[i]},{n[i]},{x[i]}\n")


def fit_only(path: str) -> dict:
    """In a fresh process: the fit of the case's data alone (imports excluded)."""
    import pandas as pd

    from qualbayes.inference.run import SamplerSettings, configure_process

    configure_process()
    from qualbayes.lot_history_answers import TARGET_ACCEPT
    from qualbayes.models.lot_history import fit_histories

    frame = pd.read_csv(path)
    groups = [(g["Nonconforming"].to_numpy(float), g["Qty Inspected"].to_numpy(float))
              for _, g in frame.groupby("Part Number", sort=False)]
    t0, c0 = time.perf_counter(), time.process_time()
    fit = fit_histories(groups, SamplerSettings(target_accept=TARGET_ACCEPT),
                        names=[str(j) for j in range(len(groups))])
    return {"fit": time.perf_counter() - t0, "fit_cpu": time.process_time() - c0,
            "ess": fit.gate.min_ess_bulk, "passed": fit.gate.passed}


def _children_cpu() -> float:
    import resource

    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def command(path: str, cache: str) -> dict:
    env = dict(os.environ, QUALBAYES_JAX_CACHE=cache, CI="true", PYTHONPATH=str(ROOT))
    t0 = time.perf_counter()
    c0 = _children_cpu()
    done = subprocess.run([sys.executable, "-c", _WRAP, "lots", path, "--spec", "1%",
                           "--prior", "history"], env=env, capture_output=True, text=True,
                          check=False)
    wall = time.perf_counter() - t0
    rss = [ln for ln in done.stderr.splitlines() if ln.startswith("MAXRSS")]
    return {"wall": wall, "cpu": _children_cpu() - c0, "rc": done.returncode,
            "peak_mb": int(rss[-1].split()[1]) / 1024 if rss else float("nan")}


def fit_in_process(path: str, cache: str) -> dict:
    """:func:`fit_only` in a fresh process; ``fit_process``: that process's whole wall time
    (interpreter, imports of pandas and the sampler stack, reading the CSV, the fit)."""
    env = dict(os.environ, QUALBAYES_JAX_CACHE=cache, CI="true", PYTHONPATH=str(ROOT))
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, __file__, "--fit", path], env=env, check=True,
                         capture_output=True, text=True).stdout
    wall = time.perf_counter() - t0
    return json.loads(out.strip().splitlines()[-1]) | {"fit_process": wall}


def write_small(path: Path, out: Path, keep: int) -> None:
    """The ``keep`` parts of the case with the most distinct (x, n) (the same padded shape,
    hence the same compiled sampler, as the whole case)."""
    import pandas as pd

    frame = pd.read_csv(path)
    terms = frame.groupby("Part Number", sort=False).apply(
        lambda g: len(set(zip(g["Nonconforming"], g["Qty Inspected"], strict=True))))
    chosen = terms.sort_values(ascending=False, kind="stable").index[:keep]
    frame[frame["Part Number"].isin(chosen)].to_csv(out, index=False)


def _chunk() -> int:
    sys.path.insert(0, str(ROOT))
    from qualbayes.models.lot_history_parts import CHUNK

    return 1 << (max(CHUNK, 1) - 1).bit_length()


def measure(case: str, cache: str, tmp: Path, warmup: str = "full",
            with_fit: bool = True) -> dict:
    kind, count = case.split(":")
    lots, parts = (int(count), 1) if kind in ("lots", "sizes") else (20, int(count))
    path = tmp / f"{kind}-{count}.csv"
    write_case(path, lots, parts, varied=kind == "sizes")
    load0 = os.getloadavg()[0]
    if warmup == "full" or (warmup == "small" and parts == 1):
        command(str(path), cache)  # warm-up: this shape's compiled code in the cache
    elif warmup == "small":
        small = tmp / f"{kind}-{count}-warm.csv"
        write_small(path, small, max(2, min(parts, _chunk())))
        command(str(small), cache)
    fit = (fit_in_process(str(path), cache) if with_fit
           else {"fit": float("nan"), "fit_cpu": float("nan"), "ess": float("nan"),
                 "passed": True, "fit_process": float("nan")})
    cmd = command(str(path), cache)
    label = f"{lots:,} lots x {parts:,} part(s)" + (", varied sizes" if kind == "sizes" else "")
    return {"case": label, **fit, **cmd,
            "load": f"{load0:.1f} to {os.getloadavg()[0]:.1f}"}


def main(cases: list[str]) -> None:
    tmp = Path(tempfile.mkdtemp(prefix="qualbayes-speed-"))
    opts = dict(a[2:].split("=", 1) for a in sys.argv[1:] if a.startswith("--") and "=" in a)
    cache = opts.get("cache") or tempfile.mkdtemp(prefix="qualbayes-speed-cache-")
    warmup, with_fit = opts.get("warmup", "full"), "--no-fit" not in sys.argv
    print(f"code: {ROOT}; cache: {cache}; warm-up: {warmup}")
    print("| case | fit (warm) | fit CPU | whole command | command CPU | command / fit "
          "| fit process | command / fit process | peak memory | min bulk ESS | gate | exit "
          "| load |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    walls = {}
    for case in cases:  # each row as soon as it is measured
        r = measure(case, cache, tmp, warmup, with_fit)
        walls[case] = r["wall"]
        print(f"| {r['case']} | {r['fit']:.1f} s | {r['fit_cpu']:.1f} s | {r['wall']:.1f} s "
              f"| {r['cpu']:.1f} s | {r['wall'] / r['fit']:.1f}x | {r['fit_process']:.1f} s "
              f"| {r['wall'] / r['fit_process']:.2f}x | {r['peak_mb']:.0f} MB "
              f"| {r['ess']:.0f} | "
              f"{'passed' if r['passed'] else 'FAILED'} | {r['rc']} | {r['load']} |",
              flush=True)
    if "lots:20" in walls and "lots:1000" in walls:
        print(f"\n1,000 lots / 20 lots, whole command: "
              f"{walls['lots:1000'] / walls['lots:20']:.2f}x")
    if "--cold" in sys.argv:
        path = tmp / "cold-1000.csv"
        write_case(path, 1000, 1)
        cold = command(str(path), tempfile.mkdtemp(prefix="qualbayes-speed-cold-"))
        print(f"\ncold cache, 1,000 lots x 1 part: whole command {cold['wall']:.1f} s, "
              f"peak {cold['peak_mb']:.0f} MB, exit {cold['rc']}")
    print(f"machine: {os.cpu_count()} cores; load average {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "--fit":
        print(json.dumps(fit_only(sys.argv[2])))
    else:
        chosen = [a for a in sys.argv[1:] if ":" in a]
        main(chosen or [f"lots:{k}" for k in LOTS] + [f"parts:{k}" for k in PARTS])
