"""Benchmark: ``lots --prior history --engine quadrature`` on very large batches (issue 18).

Run: ``python bench/bench_batch.py [case ...] [--processes N] [--json]`` with cases such as
``lots:200000`` (200,000 lots of one part) or ``parts:1000`` (1,000 parts x 200 lots);
no case: both. Each measurement is a fresh process (interpreter start, imports, reading,
quadrature, answers, printing) on a CSV written once per case by
``bench_speed.write_case`` (the same simulated lots as the NUTS benchmark), with wall time,
CPU time (user + system of the command's process and its threads) and peak resident memory
(getrusage of the command's own process; with ``--processes`` the workers' are not
included), and the 1-minute load average before and after (the machine is shared: compare
CPU times when it was not idle). The command prints its terminal text (at most 2,000 lot
rows); with ``--json`` it prints instead the sealed record of every lot (the run record as
``--json`` writes it, digest included). The quadrature is deterministic: the decision counts
are printed so that runs can be compared.
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_speed import _WRAP, ROOT, write_case  # noqa: E402


def command(path: str, processes: int | None, record: bool = False) -> dict:
    env = dict(os.environ, PYTHONPATH=str(ROOT), CI="1")
    argv = [sys.executable, "-c", _WRAP, "lots", path, "--spec", "1%", "--prior", "history",
            "--engine", "quadrature", *(["--json"] if record else [])]
    if processes:
        argv += ["--processes", str(processes)]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    load0 = os.getloadavg()[0]
    t0 = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True, env=env, check=False)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    rss = [int(line.split()[1]) for line in done.stderr.splitlines()
           if line.startswith("MAXRSS")]
    out = {"wall_s": round(wall, 2), "cpu_s": round(cpu, 2),
           "peak_mb": round(rss[-1] / 1024) if rss else None, "exit": done.returncode,
           "load_1min": [round(load0, 2), round(os.getloadavg()[0], 2)]}
    if done.returncode == 0 and record:
        doc = json.loads(done.stdout)
        out["decisions"] = doc["decision_counts"]
        out["engine"] = f"largest error of any P {doc['engine']['max_error']:.2g}"
        out["record_mb"] = round(len(done.stdout.encode()) / 2**20, 1)
    elif done.returncode == 0:  # the terminal text
        lines = done.stdout.splitlines()
        out["decisions"] = next((s for s in lines if s.startswith("decisions:")), None)
        out["engine"] = next((s.split("; ")[-2] for s in lines if s.startswith("engine:")),
                             None)
    else:
        out["stderr"] = done.stderr[-2000:]
    return out


def main(argv: list[str]) -> None:
    processes = None
    record = "--json" in argv
    argv = [a for a in argv if a != "--json"]
    if "--processes" in argv:
        i = argv.index("--processes")
        processes = int(argv[i + 1])
        argv = argv[:i] + argv[i + 2:]
    cases = argv or ["lots:200000", "parts:1000"]
    with tempfile.TemporaryDirectory() as tmp:
        for case in cases:
            kind, count = case.split(":")
            lots, parts = (int(count), 1) if kind == "lots" else (200, int(count))
            path = Path(tmp) / f"{kind}_{count}.csv"
            write_case(path, lots, parts)
            res = command(str(path), processes, record)
            print(json.dumps({"case": case, "lots": lots * parts, "parts": parts,
                              "processes": processes or 1, "json": record, **res}),
                  flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
