"""Two versions of the code, one command, measured back to back (wall and CPU).

On a shared machine whose speed drifts by half within an hour, a before/after comparison is
only readable when the two versions alternate. This runs ``qualbayes ARGS`` from each code
tree in turn, in fresh processes, ``--repeat`` times:

* ``--mode warm`` (default): each tree has its own compilation cache, warmed by one
  unmeasured run; then each run is timed;
* ``--mode first``: each run starts from an empty cache (the first-ever run), then runs
  again on the cache it left (warm); both are timed and their ratio given.

    python bench/bench_ab.py --tree before=/path/one --tree after=/path/two \\
        [--mode first] [--repeat 4] -- lots FILE --spec 1% --prior history

Output: one line per run (tree, wall, CPU), then the median wall and CPU per tree (and the
median first / warm ratio), with the 1-minute load average before and after.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time


def timed(root: str, cache: str, argv: list[str]) -> tuple[float, float]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("JAX_", "XLA_"))}
    env |= {"PYTHONPATH": root, "QUALBAYES_JAX_CACHE": cache}
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run([sys.executable, "-m", "qualbayes", *argv], env=env, check=True,
                   stdout=subprocess.DEVNULL, cwd=root)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tree", action="append", required=True, metavar="NAME=PATH")
    parser.add_argument("--mode", choices=("warm", "first"), default="warm")
    parser.add_argument("--repeat", type=int, default=4)
    parser.add_argument("argv", nargs=argparse.REMAINDER)
    opts = parser.parse_args()
    argv = opts.argv[1:] if opts.argv[:1] == ["--"] else opts.argv
    argv = [os.path.abspath(a) if os.path.exists(a) else a for a in argv]
    trees = dict(t.split("=", 1) for t in opts.tree)
    rows: dict[str, list] = {name: [] for name in trees}
    load = [os.getloadavg()[0]]
    with tempfile.TemporaryDirectory() as tmp:
        caches = {name: os.path.join(tmp, name) for name in trees}
        if opts.mode == "warm":
            for name, root in trees.items():
                timed(root, caches[name], argv)  # warm-up, not measured
        for _ in range(opts.repeat):
            for name, root in trees.items():
                if opts.mode == "first":
                    shutil.rmtree(caches[name], ignore_errors=True)
                    first = timed(root, caches[name], argv)
                    warm = timed(root, caches[name], argv)
                    rows[name].append((first, warm))
                    print(f"{name}: first-ever {first[0]:.2f} s (CPU {first[1]:.2f} s), warm "
                          f"{warm[0]:.2f} s (CPU {warm[1]:.2f} s), first / warm "
                          f"{first[0] / warm[0]:.2f}", flush=True)
                else:
                    wall, cpu = timed(root, caches[name], argv)
                    rows[name].append(((wall, cpu),))
                    print(f"{name}: {wall:.2f} s (CPU {cpu:.2f} s)", flush=True)
    load.append(os.getloadavg()[0])
    for name, runs in rows.items():
        walls = [r[0][0] for r in runs]
        cpus = [r[0][1] for r in runs]
        line = f"{name}: median wall {statistics.median(walls):.2f} s, CPU " \
               f"{statistics.median(cpus):.2f} s"
        if opts.mode == "first":
            warm = [r[1][0] for r in runs]
            ratios = [f / w for f, w in zip(walls, warm, strict=True)]
            line += (f" (first-ever); warm {statistics.median(warm):.2f} s; first / warm "
                     f"{', '.join(f'{x:.2f}' for x in ratios)}")
        print(line)
    print(f"load average: {load[0]:.1f} before, {load[1]:.1f} after")


if __name__ == "__main__":
    main()
