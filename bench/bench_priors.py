"""Benchmark of the prior tools (run: python bench/bench_priors.py [--life]). Prints a table.

1. Elicitation: a Beta, lognormal and gamma prior from two statements each (closed form or
   nested root finding; target well under 10 ms).
2. Lots sensitivity: the fixed prior set over 10,000 simulated lots, closed forms
   (target < 1 s), and the lots CLI with --believe, --earlier and --sensitivity against the
   plain CLI on the example file (jax stays out of both).
3. Plan sensitivity: `plan sampling` and `plan life` (known shape and a shape range) with
   --believe, --earlier and --sensitivity, CLI end to end (jax stays out of all plans).
4. With --life: the life sensitivity on the SV-30 rig test (2 groups, default sampler
   settings): wall time of the analysis and of the whole set, and time per prior; the
   prior's numbers are model arguments, so the set compiles once.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parent.parent
os.environ.setdefault("CI", "true")


def timed(fn, repeat: int = 5) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def elicitation() -> list[tuple[str, float]]:
    from qualbayes.priors.elicit import elicit
    from qualbayes.priors.statements import parse_statements

    out = []
    for texts in (["p=0.2%", "p<0.5%@90%"], ["1.5<shape<3@90%"], ["mtbf>500@90%", "mtbf=2000"]):
        st = parse_statements(texts, ("p", "shape", "mtbf"))
        out.append((" ; ".join(texts), timed(lambda st=st: elicit(st))))
    return out


def lots_sensitivity(n: int = 10_000) -> float:
    from qualbayes.priors.power_prior import EarlierCounts
    from qualbayes.priors.prior_set import PriorRow, beta_rows, lots_sensitivity

    rng = np.random.default_rng(1)
    inspected = rng.choice([80, 125, 200, 315], n)
    frame = pd.DataFrame({"lot": [f"L{k}" for k in range(n)], "inspected": inspected,
                          "defectives": rng.binomial(inspected, 0.003)})
    first = PriorRow("as-run", "as run", "beta", {"a": 1.0, "b": 1.0}, "", "", "")
    rows = beta_rows(first, None, (1.0, 1.0, "uniform"), EarlierCounts(4, 2000, "bench"))
    return timed(lambda: lots_sensitivity(frame, 0.01, 0.95, rows), repeat=2)


def cli(extra: list[str]) -> float:
    cmd = [sys.executable, "-m", "qualbayes", "lots",
           str(ROOT / "example_lots" / "incoming_inspection.csv"), "--spec", "1%", *extra]
    return timed(lambda: subprocess.run(cmd, check=True, capture_output=True), repeat=3)


def plan_cli(question: list[str]) -> float:
    cmd = [sys.executable, "-m", "qualbayes", "plan", *question]
    return timed(lambda: subprocess.run(cmd, check=True, capture_output=True), repeat=3)


PLAN_LIFE = ["life", "--reliability", "0.9", "--confidence", "0.9", "--mission", "1000",
             "--units", "10", "--failures", "2", "--believe", "R>0.8@95%;R=0.95",
             "--earlier", "1/20", "--earlier-weight", "0.5", "--sensitivity"]


def plans() -> list[tuple[str, float]]:
    return [
        ("plan sampling CLI, --believe --earlier --sensitivity",
         plan_cli(["sampling", "--aql", "0.5%", "--ltpd", "3%", "--believe", "p<1%@90%",
                   "--earlier", "3/800", "--earlier-weight", "0.5", "--sensitivity"])),
        ("plan life CLI, known shape, c = 0..2, same options",
         plan_cli([*PLAN_LIFE, "--shape", "2"])),
        ("plan life CLI, shape range 1.5-3, c = 0..2, same options",
         plan_cli([*PLAN_LIFE, "--shape-range", "1.5,3"])),
    ]


def life() -> list[tuple[str, float]]:
    from qualbayes.data.life import read_life
    from qualbayes.life_question import assess_life, group_data
    from qualbayes.models.weibull import make_prior
    from qualbayes.priors.life_sensitivity import life_rows, life_sensitivity

    table = read_life(ROOT / "example_lots" / "sv30_rig_test.csv")
    prior = make_prior("1.5,4", None, None)
    t0 = time.perf_counter()
    result = assess_life(table, 5000.0, 0.9, 0.9, prior)
    t1 = time.perf_counter()
    rows = life_rows(prior, make_prior(None, "10:1500,8000", None), None)
    life_sensitivity(result, group_data(table), rows)
    t2 = time.perf_counter()
    reruns = sum(1 for r in rows if not r.as_run)
    return [("life analysis (as run)", t1 - t0), (f"life sensitivity, {reruns} priors", t2 - t1),
            ("  per prior", (t2 - t1) / reruns)]


def main() -> None:
    lines = [("elicit: " + name, t) for name, t in elicitation()]
    lines.append(("lots sensitivity, 10,000 lots x set", lots_sensitivity()))
    lines.append(("lots CLI, plain", cli([])))
    lines.append(("lots CLI, --believe --earlier --sensitivity",
                  cli(["--believe", "p=0.2%;p<0.8%@90%", "--earlier", "2/1500",
                       "--earlier-weight", "0.5", "--sensitivity"])))
    lines += plans()
    if "--life" in sys.argv:
        lines += life()
    width = max(len(n) for n, _ in lines)
    print(f"{'what':<{width}}  seconds")
    for name, t in lines:
        print(f"{name:<{width}}  {t:8.4f}")


if __name__ == "__main__":
    main()
