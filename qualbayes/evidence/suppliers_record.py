"""The run record of the supplier scorecard, and its renderings (terminal text, workbook).

The record is a plain JSON-ready dict; everything shown is rendered from it.
"""

from __future__ import annotations

import math

import pandas as pd

from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.evidence.jsonout import plain
from qualbayes.evidence.terminal import table as text_table
from qualbayes.inference.gate import ESS_MIN, RHAT_MAX
from qualbayes.models.supplier_rates import M_MEAN, M_SD, SIGMA_B_SCALE, SIGMA_W_SCALE
from qualbayes.scorecard import SupplierScorecard

PRIOR = {
    "m": f"Normal({M_MEAN:g}, {M_SD:g}^2) on the logit of a typical supplier's rate",
    "sigma_b": f"HalfNormal({SIGMA_B_SCALE:g}): spread between suppliers (logit scale)",
    "sigma_w": f"HalfNormal({SIGMA_W_SCALE:g}), one per supplier: spread of its periods "
               "(logit scale)",
    "phi": "Uniform(1e-4, 1), phi = 1/sqrt(kappa + 1): lot-to-lot spread within a period",
}


def _rows(frame: pd.DataFrame) -> list[dict]:
    out = []
    for r in frame.to_dict("records"):
        out.append({k: (None if isinstance(v, float) and math.isnan(v) else v)
                    for k, v in r.items()})
    return out


def suppliers_record(result: SupplierScorecard, data, sha256: str, command: str,
                     versions: dict) -> dict:
    c = result.confidence
    return plain({
        "kind": "suppliers",
        "question": {
            "spec": result.spec, "confidence": c, "period": result.period,
            "asked": (f"per supplier: P(defect rate > {result.spec:g} | data); whether the "
                      "latest period is worse than the earlier ones; which supplier is worst"),
            "rate": "the supplier's mean defect rate over the periods shown",
            "upper_bound": f"one-sided {c:.0%} upper bound",
            "interval": f"central {c:.0%} credible interval",
        },
        "input": {"file": data.file, "sheet": data.sheet, "sha256": sha256,
                  "header_row": data.header_row, "rows_read": len(data.frame),
                  "rows_rejected": 0, "columns": data.headers, "notes": data.notes},
        "model": result.model, "prior": PRIOR, "seed": result.seed,
        "diagnostics": result.diagnostics, "hyper_medians": result.hyper,
        "suppliers": _rows(result.suppliers), "periods": _rows(result.periods),
        "notes": result.notes, "caution": CAUTION, "standards": list(STANDARDS),
        "command": command, "versions": versions,
    })


def _pct(v):
    if v is None:
        return None
    return "<0.0001%" if v < 1e-6 else f"{100 * v:.3g}%"


def _prob(p, mcse):
    return None if p is None else f"{p:.3f} ±{mcse:.3f}"


def suppliers_text(record: dict) -> str:
    q, d = record["question"], record["diagnostics"]
    inp = record["input"]
    head = [f"Supplier scorecard: limit {_pct(q['spec'])}, confidence {q['confidence']:g}"
            + (f", by {q['period']}" if q["period"] else ""),
            f"input: {inp['file']}" + (f" [sheet {inp['sheet']}]" if inp["sheet"] else "")
            + f", {inp['rows_read']} lots, sha256 {inp['sha256'][:16]}...",
            f"rate: {q['rate']}; upper: {q['upper_bound']}; ± is the Monte Carlo standard "
            "error",
            f"convergence gate: {'passed' if d['passed'] else 'FAILED - no verdict'} "
            f"(max R-hat {d['max_rhat']:.4f}, min bulk ESS {d['min_ess_bulk']:.0f}, min tail "
            f"ESS {d['min_ess_tail']:.0f}, divergences {d['divergences']})"]
    head += [f"  - {r}" for r in d["reasons"][:10]]
    c = q["confidence"]
    headers = ["rank", "supplier", "lots", "n", "x", "median", f"{c:.0%} upper",
               "P(rate>limit)", "call", "P(worst)"]
    if q["period"]:
        headers += ["latest", "P(latest worse)", "latest call"]
    rows = []
    for s in record["suppliers"]:
        row = [s["rank"], s["supplier"], s["lots"], s["inspected"], s["defectives"],
               _pct(s["rate_median"]), _pct(s["rate_upper"]),
               _prob(s["prob_above"], s["prob_above_mcse"]), s["limit_call"],
               _prob(s["prob_worst"], s["prob_worst_mcse"])]
        if q["period"]:
            row += [s["latest_period"],
                    _prob(s["prob_latest_worse"], s["prob_latest_worse_mcse"]),
                    s["latest_call"]]
        rows.append(row)
    align = "rlrrrrrrlr" + ("lrl" if q["period"] else "")
    tail = [*record["notes"], *inp["notes"], CAUTION]
    return "\n".join([*head, "", text_table(headers, rows, align), "", *tail])


def suppliers_sheets(record: dict) -> dict:
    """Workbook sheets: scorecard, periods, model and prior, diagnostics, cautions,
    provenance."""
    q = record["question"]
    scorecard = pd.DataFrame(record["suppliers"])
    periods = pd.DataFrame(record["periods"])
    model = [["question", q["asked"]], ["limit", q["spec"]], ["confidence", q["confidence"]],
             ["period", q["period"] or "(none)"], ["rate", q["rate"]],
             ["upper bound", q["upper_bound"]], ["interval", q["interval"]],
             ["model", record["model"]], ["seed", record["seed"]]]
    model += [[f"prior {k}", v] for k, v in record["prior"].items()]
    model += [[f"posterior median {k}", v] for k, v in record["hyper_medians"].items()]
    d = record["diagnostics"]
    diag = [["parameter", "R-hat", "bulk ESS", "tail ESS", "passed", "divergences",
             "attempts", "thresholds"]]
    for p in d["parameters"]:
        diag.append([p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"], p["passed"],
                     d["divergences"], d["attempts"],
                     f"R-hat <= {RHAT_MAX}, ESS >= {ESS_MIN:.0f}, no divergences"])
    cautions = [[record["caution"]], ["Standards to defer to:"]]
    cautions += [[s] for s in record["standards"]]
    cautions += [[n] for n in record["notes"] + record["input"]["notes"]]
    inp = record["input"]
    prov = [["input file", inp["file"]], ["sheet", inp["sheet"]], ["SHA-256", inp["sha256"]],
            ["header row", inp["header_row"]], ["rows read", inp["rows_read"]],
            ["command", record["command"]]]
    prov += [[f"column {k}", v] for k, v in inp["columns"].items()]
    prov += [[f"version {k}", v] for k, v in record["versions"].items()]
    return {"Scorecard": scorecard, "Periods": periods, "Model and prior": model,
            "Diagnostics": diag, "Cautions": cautions, "Provenance": prov}
