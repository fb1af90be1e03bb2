"""``qualbayes prepare``: make the first real analysis as fast as later ones.

The sampler (NUTS) is compiled by jax for each model shape; on a first-ever run that
compilation costs several seconds (tens of seconds on a busy machine) and nothing can skip
it. Compiled code is kept in the persistent compilation cache (``QUALBAYES_JAX_CACHE``, by
default ``~/.cache/qualbayes/jax``), so this one-off command, run once after installation,
compiles the standard shapes there: it runs the lots history prior and the Weibull life
question, exactly as the commands run them, on small invented data sets whose padded shapes
are the commonest (one part with up to 8, 16 or 32 distinct (defectives, inspected) pairs,
three parts with up to 8 each, as in the example file; one and two life groups of up to
16 and 20 units). Shapes outside that set compile on their first use, as before.

It reads no file of the user's and writes nothing but the cache: the invented inputs live in
a temporary folder it creates and removes.
"""

from __future__ import annotations

import contextlib
import csv
import io
import os
import sys
import tempfile
import time
from pathlib import Path

from qualbayes.commands.common import HelpFormatter

#: (label, parts, distinct pairs per part): shapes (parts, terms padded to 8, 16, 32)
LOT_SHAPES = (("1 part, up to 8 distinct lots", 1, 8),
              ("1 part, up to 16 distinct lots", 1, 16),
              ("1 part, up to 32 distinct lots", 1, 32),
              ("3 parts, up to 8 distinct lots each", 3, 8))
#: (label, units per group): the life groups (all with failures and suspensions)
LIFE_SHAPES = (("1 group of 16 units", (16,)), ("2 groups of 18 and 20 units", (18, 20)))


def register(sub) -> None:
    p = sub.add_parser(
        "prepare", help="compile the sampler once after installation, so that the first "
                        "analysis runs as fast as later ones",
        description="Compiles the NUTS sampler for the commonest data shapes of the lots "
                    "history prior and the life question into the compilation cache "
                    "(QUALBAYES_JAX_CACHE). Run once after installing or upgrading; takes "
                    "about a minute. Reads and writes no file of yours.",
        formatter_class=HelpFormatter)
    p.set_defaults(func=run)


def _lots_csv(path: Path, parts: int, distinct: int) -> None:
    """Lots with ``distinct`` different (defectives, inspected) pairs for each part."""
    with path.open("w", newline="") as f:
        out = csv.writer(f)
        out.writerow(["lot", "part", "inspected", "defectives"])
        for j in range(parts):
            for i in range(distinct):
                out.writerow([f"L{j}-{i}", f"P{j}", 80 + 5 * i, i % 3])


def _life_csv(path: Path, sizes: tuple[int, ...]) -> None:
    """Groups of units: about half failed at distinct times, the rest still running."""
    with path.open("w", newline="") as f:
        out = csv.writer(f)
        out.writerow(["unit", "group", "time", "status"])
        for j, size in enumerate(sizes):
            for i in range(size):
                failed = i % 2 == 0
                time_ = 900.0 + 137.0 * i + 11.0 * j if failed else 4000.0 + 10.0 * i
                out.writerow([f"U{j}-{i}", f"G{j}", time_, "F" if failed else "S"])


def jobs(folder: Path) -> list[tuple[str, list[str]]]:
    """The command lines ``prepare`` runs (invented inputs written into ``folder``)."""
    out = []
    for k, (label, parts, distinct) in enumerate(LOT_SHAPES):
        path = folder / f"lots_{k}.csv"
        _lots_csv(path, parts, distinct)
        out.append((f"lots history prior, {label}",
                    ["lots", str(path), "--spec", "5%", "--prior", "history"]))
    for k, (label, sizes) in enumerate(LIFE_SHAPES):
        path = folder / f"life_{k}.csv"
        _life_csv(path, sizes)
        out.append((f"life, {label}", ["life", str(path), "--mission", "1000", "--target",
                                       "0.9"]))
    return out


def run(args) -> int:
    from qualbayes.errors import OptionError  # noqa: PLC0415

    cache = os.environ.get("JAX_COMPILATION_CACHE_DIR")
    if not cache:
        raise OptionError("the compilation cache is off (QUALBAYES_JAX_CACHE=off): there is "
                          "nowhere to keep compiled code, so prepare cannot help")
    from qualbayes.cli import build_parser  # noqa: PLC0415

    parser = build_parser()
    say = print  # the person asked for this: always report, on stdout
    say(f"qualbayes prepare: compiling the sampler into {cache}")
    started = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="qualbayes-prepare-") as tmp:
        todo = jobs(Path(tmp))
        for i, (label, argv) in enumerate(todo, 1):
            t = time.monotonic()
            command = parser.parse_args(argv)
            command.argv = argv
            with contextlib.redirect_stdout(io.StringIO()):
                code = int(command.func(command) or 0)
            if code != 0:
                print(f"qualbayes prepare: {label}: exit {code}", file=sys.stderr)
                return code
            say(f"  {i}/{len(todo)} {label}: {time.monotonic() - t:.1f} s")
    say(f"qualbayes prepare: done in {time.monotonic() - started:.0f} s; later analyses of "
        "these shapes start without compiling")
    return 0
