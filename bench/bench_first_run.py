"""First-ever run against a warm run, in fresh processes, for the commands that compile.

For each command line: a new empty jax compilation cache folder (``QUALBAYES_JAX_CACHE``),
then the command in a fresh interpreter twice: the first-ever run (empty cache) and a warm
run (the cache the first run left). With ``--prepare`` the one-off ``qualbayes prepare`` runs
first on the empty cache (as after installation) and its own time is reported. jax logs every
compilation (``JAX_LOG_COMPILES=1``); the table counts them, the persistent-cache hits and the
seconds spent tracing, lowering and in XLA compilation (loads from the cache included), and
gives the ratio first / warm. Timings are noisy on a shared 2-core machine: read the ratios
of one table, measured back to back, and the load average printed with it.

    PYTHONPATH=$PWD python bench/bench_first_run.py [--prepare] [--only demo]
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
EX = ROOT / "example_lots"
CASES = {
    "demo: lots xlsx --prior history": ["lots", str(EX / "incoming_inspection.xlsx"), "--spec",
                                        "1%", "--prior", "history"],
    "lots csv --prior history": ["lots", str(EX / "incoming_inspection.csv"), "--spec", "2%",
                                 "--prior", "history"],
    "life": ["life", str(EX / "sv30_rig_test.csv"), "--mission", "2000", "--target", "0.9"],
}
_XLA = re.compile(r"Finished XLA compilation of (\S+) in ([\d.]+) sec")
_TRACE = re.compile(r"Finished tracing \S+ for jit in ([\d.]+) sec")
_LOWER = re.compile(r"Finished jaxpr to MLIR module conversion \S+ in ([\d.]+) sec")


def run(argv: list[str], cache: str) -> dict:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("JAX_", "XLA_"))}
    env |= {"PYTHONPATH": str(ROOT), "QUALBAYES_JAX_CACHE": cache, "JAX_LOG_COMPILES": "1"}
    with tempfile.TemporaryDirectory() as work:
        t = time.perf_counter()
        out = subprocess.run([sys.executable, "-m", "qualbayes", *argv], capture_output=True,
                             text=True, env=env, cwd=work)
        wall = time.perf_counter() - t
    if out.returncode != 0:
        raise SystemExit(f"{argv}: exit {out.returncode}\n{out.stderr[-2000:]}")
    log = out.stderr
    xla = [(name, float(s)) for name, s in _XLA.findall(log)]
    big = [s for name, s in xla if s >= 0.5]
    return {"wall": wall, "compiles": len(xla), "hits": log.count("Persistent compilation "
                                                                   "cache hit"),
            "xla": sum(s for _, s in xla), "big": len(big),
            "trace": sum(map(float, _TRACE.findall(log))) + sum(map(float,
                                                                    _LOWER.findall(log)))}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--prepare", action="store_true",
                        help="run `qualbayes prepare` on the empty cache first")
    parser.add_argument("--only", help="run only the cases whose name contains this")
    opts = parser.parse_args()
    print(f"load average before: {os.getloadavg()[0]:.1f}")
    print("| command | run | wall (s) | compilations (>= 0.5 s) | persistent-cache hits | "
          "XLA compile or load (s) | tracing + lowering (s) | first / warm |")
    print("|---|---|---|---|---|---|---|---|")
    for name, argv in CASES.items():
        if opts.only and opts.only not in name:
            continue
        with tempfile.TemporaryDirectory() as cache:
            if opts.prepare:
                r = run(["prepare"], cache)
                print(f"| qualbayes prepare | once, empty cache | {r['wall']:.1f} | "
                      f"{r['compiles']} ({r['big']}) | {r['hits']} | {r['xla']:.1f} | "
                      f"{r['trace']:.1f} | |")
            first = run(argv, cache)
            warm = run(argv, cache)
        label = "first after prepare" if opts.prepare else "first-ever"
        for run_name, r in ((label, first), ("warm", warm)):
            ratio = f"{first['wall'] / warm['wall']:.2f}" if r is warm else ""
            print(f"| {name} | {run_name} | {r['wall']:.1f} | {r['compiles']} ({r['big']}) | "
                  f"{r['hits']} | {r['xla']:.1f} | {r['trace']:.1f} | {ratio} |")
    print(f"load average after: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
