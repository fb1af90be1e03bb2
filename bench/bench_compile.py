"""Each program a command compiles, compiled again alone (issue 18, item 3).

A first-ever run differs from a warm one by its XLA compilations, which run beside other
work (two at once, and the machine's other load). This measures what each costs alone:
``qualbayes ARGS`` runs once in this process with the persistent compilation cache off,
every program jax compiles is kept (its ``jax.stages.Lowered``), and the ``--top`` largest
are compiled again one at a time, nothing else running, ``--repeat`` times under each
variant of XLA's compile options (``--variant JSON``, as ``Lowered.compile`` takes them;
the compiler as shipped comes first). Each line: the program's size (characters and
operations of its StableHLO text), the compilation's wall and CPU seconds, or the reason
XLA refused the variant.

``Lowered.compile`` keeps its result on the object, so each compilation here adds a unique
``xla_dump_max_hlo_modules`` (a limit on debugging dumps, which are off: it changes neither
the program nor the work) to be compiled anew.

    PYTHONPATH=$PWD python bench/bench_compile.py [--top 2] [--repeat 3] \\
        [--variant '{"xla_backend_optimization_level": 1}'] \\
        -- lots example_lots/incoming_inspection.xlsx --spec 1% --prior history
"""

from __future__ import annotations

import argparse
import contextlib
import io
import itertools
import json
import os
import re
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
_UNIQUE = itertools.count(1_000_000)


def kept_programs(argv: list[str]) -> list:
    """Run ``qualbayes argv`` here (persistent cache off); every program it compiled."""
    os.environ["QUALBAYES_JAX_CACHE"] = "off"
    sys.path.insert(0, str(ROOT))
    from qualbayes.inference.run import configure_process  # noqa: PLC0415

    configure_process()
    import jax.stages  # noqa: PLC0415

    from qualbayes.cli import main  # noqa: PLC0415

    kept, plain = [], jax.stages.Lowered.compile

    def keep(self, *args, **kwargs):
        kept.append(self)
        return plain(self, *args, **kwargs)

    jax.stages.Lowered.compile = keep
    try:
        with contextlib.redirect_stdout(io.StringIO()), contextlib.suppress(SystemExit):
            main(argv)
    finally:
        jax.stages.Lowered.compile = plain
    return kept


def size(lowered) -> tuple[int, int]:
    """(characters, operations) of the program's StableHLO text."""
    text = lowered.as_text()
    return len(text), len(re.findall(r"= \"?[a-z_]+\.[a-z_]+", text))


def compile_alone(lowered, options: dict) -> tuple[float, float] | str:
    """(wall, CPU) seconds of one new compilation, or XLA's reason for refusing it."""
    options = {**options, "xla_dump_max_hlo_modules": next(_UNIQUE)}
    wall, cpu = time.perf_counter(), time.process_time()
    try:
        lowered.compile(options)
    except Exception as exc:  # noqa: BLE001 - report XLA's refusal and go on
        return str(exc).splitlines()[0][:100]
    return time.perf_counter() - wall, time.process_time() - cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--top", type=int, default=2, help="the largest programs to time")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--variant", action="append", default=[], metavar="JSON",
                        help="XLA compile options, e.g. '{\"xla_backend_optimization_level\": 1}'")
    parser.add_argument("argv", nargs="+", help="the command, after --")
    args = parser.parse_args()
    variants = [{}] + [json.loads(v) for v in args.variant]
    programs = kept_programs(args.argv)
    sizes = [size(p) for p in programs]
    order = sorted(range(len(programs)), key=lambda i: -sizes[i][0])[:args.top]
    print(f"{len(programs)} programs compiled by: qualbayes {' '.join(args.argv)}")
    print(f"load average before: {os.getloadavg()[0]:.2f}")
    print("| program (StableHLO chars, ops) | compile options | wall (s) | CPU (s) |")
    print("| --- | --- | ---: | ---: |")
    for _, variant, i in itertools.product(range(args.repeat), variants, order):
        got = compile_alone(programs[i], variant)
        label = f"#{i} ({sizes[i][0]:,}, {sizes[i][1]:,})"
        shown = json.dumps(variant) if variant else "as shipped"
        if isinstance(got, str):
            print(f"| {label} | {shown} | refused: {got} | |", flush=True)
        else:
            print(f"| {label} | {shown} | {got[0]:.2f} | {got[1]:.2f} |", flush=True)
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
