"""Operating characteristics of the scorecard's calls (docs/calibration.md, "Supplier
scorecard").

1. The drifting supplier: a supplier whose latest quarter runs at 5x its earlier rate
   (0.5% -> 2.5%, about 1,000 units a quarter) must be called "worse" in at least 95% of
   histories, and a supplier without drift in at most 5%.
2. The hyperprior on the supplier-to-supplier spread (sigma_b ~ HalfNormal(1)): how often a
   supplier truly within the limit is called "above limit", and one truly above it "within
   limit".

The CI-sized versions put many independent supplier histories in one fit (each supplier has
its own level and its own period spread; only m, sigma_b and phi are shared), and allow for
binomial Monte Carlo error: a count fails only if a true rate at the requirement would give
it with probability below 0.001. The slow versions repeat whole histories.
"""

import numpy as np
import pytest
from scipy import stats
from supplier_sim import simulate

from qualbayes.scorecard import assess_suppliers

BASE, DRIFT = 0.005, 5.0
QUARTERS, LOTS, N, KAPPA = 8, 5, 200, 400.0


def drift_rates(drifting: int, steady: int) -> np.ndarray:
    rates = np.full((drifting + steady, QUARTERS), BASE)
    rates[:drifting, -1] = BASE * DRIFT
    return rates


def _calls(rates, seed, *, gate_must_pass: bool = True):
    """The latest-period calls by supplier (S00, S01, ...). With ``gate_must_pass=False`` a
    failed gate is returned as every call "not-converged" (no verdict: counted as not found
    and as no false alarm by the study)."""
    table = simulate(rates, lots=LOTS, n=N, kappa=KAPPA, seed=seed)
    result = assess_suppliers(table, 0.01, period="quarter", seed=seed)
    assert result.converged or not gate_must_pass, result.diagnostics["reasons"]
    s = result.suppliers.set_index("supplier").sort_index()
    return s["latest_call"].tolist(), s


def _at_least(count: int, n: int, rate: float) -> bool:
    """count is not significantly (p < 0.001) below n * rate."""
    return count >= stats.binom.ppf(0.001, n, rate)


def _at_most(count: int, n: int, rate: float) -> bool:
    return count <= stats.binom.isf(0.001, n, rate)


# in the default run: 16 suppliers x 8 quarters, one fit (about 200 s of NUTS before the
# faster computation, under load; see the timing printed by the run below)
def test_drifting_supplier_is_found_ci_sized():
    k = 8
    calls, _ = _calls(drift_rates(k, k), seed=21)
    found = sum(c == "worse" for c in calls[:k])
    false = sum(c == "worse" for c in calls[k:])
    print(f"\ndrift found {found}/{k}; without drift flagged {false}/{k}")
    assert _at_least(found, k, 0.95)
    assert _at_most(false, k, 0.05)


@pytest.mark.slow  # 40 fits: about 1 to 2 minutes each on an idle 2-core machine
def test_drifting_supplier_is_found_study():
    """Whole histories of six suppliers, the first drifting, the other five steady; each
    history its own fit (docs/calibration.md, "Supplier scorecard": the measured rates with
    their binomial standard errors). Found: the drifting supplier called "worse"; false
    alarms: a steady supplier called "worse" (5 per history, 200 in all; the five share a
    fit, so they are not quite independent trials)."""
    histories = 40
    found = false = 0
    for h in range(histories):
        calls, _ = _calls(drift_rates(1, 5), seed=1000 + h, gate_must_pass=False)
        found += calls[0] == "worse"
        false += sum(c == "worse" for c in calls[1:])
    print(f"\nstudy: found {found}/{histories}, false alarms {false}/{5 * histories}")
    assert _at_least(found, histories, 0.95)
    assert _at_most(false, 5 * histories, 0.05)


TRUE_RATES = (0.005, 0.008, 0.0125, 0.02)  # against a limit of 1%


def oc_table(per_rate: int, seed: int) -> dict[float, dict[str, int]]:
    rates = np.repeat(np.array(TRUE_RATES), per_rate)[:, None]
    table = simulate(rates, lots=10, n=100, kappa=KAPPA, seed=seed)
    result = assess_suppliers(table, 0.01, period=None, seed=seed)
    assert result.converged, result.diagnostics["reasons"]
    s = result.suppliers.assign(k=lambda f: f["supplier"].str[1:].astype(int))
    out = {}
    for j, r in enumerate(TRUE_RATES):
        calls = s.loc[s["k"] // per_rate == j, "limit_call"].tolist()
        out[r] = {c: calls.count(c) for c in ("above limit", "within limit", "undecided",
                                              "too close to call")}
    return out


def test_hyperprior_operating_characteristics_ci_sized():
    per_rate = 8
    oc = oc_table(per_rate, seed=31)
    print("\n| true rate (limit 1%) | suppliers | called above limit | called within limit "
          "| undecided or too close |")
    print("| ---: | ---: | ---: | ---: | ---: |")
    for r, c in oc.items():
        print(f"| {100 * r:.3g}% | {per_rate} | {c['above limit']} | {c['within limit']} | "
              f"{c['undecided'] + c['too close to call']} |")
    assert _at_most(oc[0.005]["above limit"], per_rate, 0.05)   # within: rarely flagged
    assert _at_most(oc[0.02]["within limit"], per_rate, 0.05)   # above: rarely passed
    assert _at_most(oc[0.0125]["within limit"], per_rate, 0.05)  # never passed at 1.25x
