"""Simulation-based calibration table (run: python bench/calibration.py [--ci-only]).

Runs the studies of tests/test_calibration.py with the same seeds and settings (the CI
version, the deliberately wrong likelihoods, and the large version marked slow) and prints
the markdown table of docs/calibration.md: per study and parameter the chi-square of the
ranks in 10 bins, its p-value, the 50% and 90% interval coverage with the binomial band of
the tests (central 1 - 0.001/60, tests/sbc.py), how many replications passed the convergence
gate, and the divergences. Also printed:
wall time per study (compilation included) on this machine.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
os.environ.setdefault("CI", "true")  # no progress bars

import sbc  # noqa: E402
from test_calibration import CI_SETTINGS, SLOW_SETTINGS  # noqa: E402


def studies(ci_only: bool):
    lots = sbc.simulate(60, 5, seed=2018)
    life = sbc.simulate_life(60, 10, seed=1804)
    inspected = sbc.simulate_life(60, 10, seed=1805, inspections=(500.0, 1000.0, 1500.0,
                                                                  2000.0))
    yield lambda: sbc.run(lots, CI_SETTINGS, name="CI: lot history, 5 lots")
    yield lambda: sbc.run(lots, CI_SETTINGS, model=sbc.pooled_binomial_model,
                          name="CI: lot history, variation dropped (WRONG)")
    yield lambda: sbc.run_life(life, CI_SETTINGS, name="CI: Weibull, right-censored")
    yield lambda: sbc.run_life(life, CI_SETTINGS, drop_suspensions=True,
                               name="CI: Weibull, suspensions dropped (WRONG)")
    yield lambda: sbc.run_life(inspected, CI_SETTINGS, name="CI: Weibull, inspections")
    if ci_only:
        return
    for k in (1, 5, 20):
        yield lambda k=k: sbc.run(sbc.simulate(400, k, seed=100 + k), SLOW_SETTINGS,
                                  name=f"slow: lot history, {k} lots")
    for units, insp in ((3, ()), (10, ()), (30, ()), (10, (500.0, 1000.0, 1500.0, 2000.0))):
        label = "inspections" if insp else "right-censored"
        yield lambda units=units, insp=insp, label=label: sbc.run_life(
            sbc.simulate_life(400, units, seed=200 + units + len(insp), inspections=insp),
            SLOW_SETTINGS, name=f"slow: Weibull, {label}, {units} units")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--ci-only", action="store_true", help="only the CI version")
    args = ap.parse_args()
    rows, times = [], []
    for make in studies(args.ci_only):
        t0 = time.perf_counter()
        cal = make()
        times.append((cal.name, time.perf_counter() - t0, cal.extra))
        rows += sbc.markdown_rows(cal)
        print(f"done: {cal.name} ({times[-1][1]:.0f} s)", file=sys.stderr, flush=True)
    print("\n".join(sbc.TABLE_HEADER + rows))
    print()
    print("| study | wall time (s) | min bulk ESS | max R-hat |")
    print("| --- | --- | --- | --- |")
    for name, sec, extra in times:
        print(f"| {name} | {sec:.0f} | {extra['min_ess_bulk']:.0f} | {extra['max_rhat']:.4f} |")


if __name__ == "__main__":
    main()
