"""Operating characteristics of the lot decision rules (run: python bench/lot_oc.py [--ci]).

Runs the study of tests/test_calibration.py (``test_lot_oc_large``, or the CI-sized one with
--ci) with the same seeds and prints the markdown table of docs/calibration.md: per
scenario and prior, the consumer's risk (accept when the true rate is above spec), the
producer's risk (reject when it is within), each with its Monte Carlo standard error over
histories, the share of accept / reject / undecided, and for the history prior how often
the outlier check flagged the bad and the good lots.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
from test_calibration import OC_CI, OC_SLOW  # noqa: E402

from qualbayes.models import lot_oc  # noqa: E402


def main(ci: bool) -> None:
    histories, seed = (OC_CI, 2026) if ci else (OC_SLOW, 2027)
    print("| scenario | prior | histories | consumer's risk (MC se) | producer's risk (MC se) "
          "| accept / reject / undecided | outlier flags: bad lots / good lots |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for sc in lot_oc.scenarios():
        t0 = time.perf_counter()
        res = lot_oc.run(sc, histories[sc.key], seed, outliers=sc.key == "c")
        for name in ("uniform", "jeffreys", "history"):
            r = lot_oc.risks(sc, res, name)
            dec = res[name]["decisions"]
            share = " / ".join(f"{np.mean(dec == d):.3f}" for d in ("accept", "reject",
                                                                     "undecided"))
            cons = "{:.4f} ({:.4f})".format(*r["consumer"]) if "consumer" in r else "-"
            prod = "{:.4f} ({:.4f})".format(*r["producer"]) if "producer" in r else "-"
            flags = (f"{r['flag_bad']:.3f} / {r['flag_good']:.4f}" if "flag_bad" in r else
                     f"- / {r['flag_any']:.4f}" if "flag_any" in r else "-")
            print(f"| ({sc.key}) {sc.words} | {name} | {histories[sc.key]} | {cons} | {prod} "
                  f"| {share} | {flags} |")
        print(f"<!-- ({sc.key}) {time.perf_counter() - t0:.1f} s -->")


if __name__ == "__main__":
    main("--ci" in sys.argv)
