"""Import time of each command, in fresh processes (python -X importtime).

For each command line, a fresh interpreter runs ``qualbayes.cli.main(argv)`` under
``-X importtime``; the table gives the wall time of the whole command, the time spent in
imports (sum of the top-level cumulative import times: everything the command imported,
at parse time and later), the part of it in the heavy sampler/plotting stack (jax, numpyro,
arviz, matplotlib), and which heavy modules were loaded. ``parse only`` builds the parser
of every command (what any command costs before it runs). Keep the runs few: 2 cores.

    PYTHONPATH=$PWD python bench/bench_import.py
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
EX = ROOT / "example_lots"
HEAVY = ("jax", "numpyro", "arviz", "matplotlib")
COMMANDS = {
    "parse only (build_parser)": None,
    "lots (conjugate)": ["lots", str(EX / "incoming_inspection.csv"), "--spec", "1%"],
    "lots --prior history": ["lots", str(EX / "incoming_inspection.csv"), "--spec", "1%",
                             "--prior", "history"],
    "life": ["life", str(EX / "sv30_rig_test.csv"), "--mission", "2000", "--target", "0.9"],
    "plan attribute": ["plan", "attribute", "--reliability", "0.9", "--confidence", "0.9"],
}
_LINE = re.compile(r"import time:\s+(\d+) \|\s+(\d+) \| (\s*)(\S+)")


def run(argv) -> dict:
    if argv is None:
        body = "from qualbayes.cli import build_parser\nbuild_parser()\n"
    else:
        body = ("import io, contextlib\nfrom qualbayes.cli import main\n"
                f"with contextlib.redirect_stdout(io.StringIO()):\n    rc = main({argv!r})\n"
                "assert rc == 0, rc\n")
    body += (f"import sys\nprint([m for m in {HEAVY!r} if m in sys.modules])\n")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    t = time.perf_counter()
    out = subprocess.run([sys.executable, "-X", "importtime", "-c", body], capture_output=True,
                         text=True, env=env, check=True)
    wall = time.perf_counter() - t
    total = heavy = 0
    for line in out.stderr.splitlines():
        m = _LINE.match(line)
        if m and not m.group(3):  # top level: its cumulative time includes its children
            total += int(m.group(2))
        if m and m.group(4).split(".")[0] in HEAVY:  # their own modules' self time
            heavy += int(m.group(1))
    return {"wall": wall, "imports": total / 1e6, "heavy": heavy / 1e6,
            "loaded": out.stdout.strip().splitlines()[-1]}


def main() -> None:
    print("| command | wall (s) | imports (s) | of which jax/numpyro/arviz/matplotlib (s) | "
          "heavy modules loaded |")
    print("|---|---|---|---|---|")
    for name, argv in COMMANDS.items():
        r = run(argv)
        print(f"| {name} | {r['wall']:.2f} | {r['imports']:.2f} | {r['heavy']:.2f} | "
              f"{r['loaded']} |")


if __name__ == "__main__":
    main()
