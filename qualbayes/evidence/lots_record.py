"""The run record of a lots question, and its renderings (terminal text, workbook sheets).

The record is a plain JSON-ready dict; everything shown to people is rendered from it, so a
report rebuilt from a saved record shows the same numbers.
"""

from __future__ import annotations

import pandas as pd

from qualbayes.acceptance import LotAssessment
from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.data.lots import LotTable
from qualbayes.evidence.jsonout import plain, without_draws  # noqa: F401 - re-export
from qualbayes.evidence.prior_record import prior_lines, prior_sheets, sensitivity_lines
from qualbayes.evidence.terminal import table as text_table
from qualbayes.gate import ESS_MIN, RHAT_MAX


def _none(v):
    return None if v is None or (not isinstance(v, str) and pd.isna(v)) else v


def lots_record(result: LotAssessment, data: LotTable, sha256: str, command: str,
                versions: dict) -> dict:
    lots = []
    for r in result.lots.to_dict("records"):
        lots.append({
            "lot": r["lot"], "part": _none(r["part"]), "supplier": _none(r["supplier"]),
            "date": _none(r["date"]), "row": r["row"],
            "lot_size": _none(r["lot_size"]), "inspected": r["inspected"],
            "defectives": r["defectives"],
            "posterior_mean": _none(r["posterior_mean"]),
            "interval": [_none(r["interval_low"]), _none(r["interval_high"])],
            "upper_bound": _none(r["upper_bound"]),
            "prob_within_spec": _none(r["prob_within_spec"]),
            "decision": r["decision"],
            "extra_clean_units_to_accept": _none(r["extra_clean_units_to_accept"]),
            "remaining_units": _none(r["remaining_units"]),
            "remaining_defectives": {"median": _none(r["remaining_defectives_median"]),
                                     "upper_bound": _none(r["remaining_defectives_upper"])},
        })
    return plain({
        "kind": "lots",
        "question": {"spec": result.spec, "confidence": result.confidence,
                     "asked": f"P(defect rate <= {result.spec:g} | data) >= {result.confidence:g}?",
                     "interval": f"central {result.confidence:.0%} credible interval",
                     "upper_bound": f"one-sided {result.confidence:.0%} upper bound"},
        "input": {"file": data.file, "sheet": data.sheet, "sha256": sha256,
                  "header_row": data.header_row, "rows_read": len(data.frame),
                  "rows_rejected": 0, "columns": data.headers, "notes": data.notes},
        "model": result.model, "prior": result.prior, "seed": result.seed,
        "prior_params": result.prior_params, "sampler": result.sampler,
        "posterior_draws": {k: {"mu": v["mu"], "kappa": v["kappa"]}
                            for k, v in result.draws.items()},
        "diagnostics": result.diagnostics, "next_lot": result.next_lot,
        "lots": lots, "notes": result.notes,
        "decision_counts": result.lots["decision"].value_counts().to_dict(),
        "caution": CAUTION, "standards": list(STANDARDS),
        "command": command, "versions": versions,
    })


def _pct(v):
    """A rate as a percentage for people; below 1 ppm it is shown as '<0.0001%'."""
    if v is None:
        return None
    return "<0.0001%" if v < 1e-6 else f"{100 * v:.3g}%"


def lots_text(record: dict) -> str:
    q = record["question"]
    head = [
        f"Lot acceptance: {q['asked']}",
        f"input: {record['input']['file']}"
        + (f" [sheet {record['input']['sheet']}]" if record["input"]["sheet"] else "")
        + f", {record['input']['rows_read']} lots, sha256 {record['input']['sha256'][:16]}...",
        f"prior: {record['prior']}",
    ]
    for part, d in record["diagnostics"].items():
        status = "passed" if d["passed"] else "FAILED - no decision for these lots"
        head.append(f"convergence gate [{part}]: {status} (max R-hat {d['max_rhat']:.4f}, "
                    f"min bulk ESS {d['min_ess_bulk']:.0f}, min tail ESS "
                    f"{d['min_ess_tail']:.0f}, divergences {d['divergences']})")
        for reason in d["reasons"]:
            head.append(f"  - {reason}")
    c = q["confidence"]
    headers = ["lot", "part", "n", "x", "mean", f"{c:.0%} interval", f"{c:.0%} upper",
               "P(p<=spec)", "decision", "clean units to accept"]
    rows = []
    for lot in record["lots"]:
        lo, hi = lot["interval"]
        rows.append([lot["lot"], lot["part"], lot["inspected"], lot["defectives"],
                     _pct(lot["posterior_mean"]),
                     None if lo is None else f"{_pct(lo)} - {_pct(hi)}",
                     _pct(lot["upper_bound"]),
                     None if lot["prob_within_spec"] is None else
                     f"{lot['prob_within_spec']:.4f}",
                     lot["decision"], lot["extra_clean_units_to_accept"]])
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(record["decision_counts"].items()))
    tail = [f"decisions: {counts}"]
    for part, nl in record["next_lot"].items():
        if "prob_within_spec" in nl:
            tail.append(f"next lot of {part}: predicted defect rate mean {_pct(nl['mean'])}, "
                        f"{c:.0%} upper {_pct(nl['upper_bound'])}, "
                        f"P(p<=spec) {nl['prob_within_spec']:.4f}")
    tail += record["notes"] + record["input"]["notes"]
    tail.append(CAUTION)
    head += prior_lines(record)
    table = [text_table(headers, rows, "llrrrrrrll"), *sensitivity_lines(record)]
    return "\n".join([*head, "", *table, "", *tail])


def lots_sheets(record: dict, data: LotTable | None = None) -> dict:
    """Workbook sheets: decisions, inputs, model and prior, diagnostics, cautions, provenance."""
    q = record["question"]
    decisions = pd.DataFrame([{
        "lot": r["lot"], "part": r["part"], "supplier": r["supplier"], "date": r["date"],
        "lot size": r["lot_size"], "inspected": r["inspected"], "defectives": r["defectives"],
        "posterior mean": r["posterior_mean"], "interval low": r["interval"][0],
        "interval high": r["interval"][1], "upper bound": r["upper_bound"],
        "P(p <= spec)": r["prob_within_spec"], "decision": r["decision"],
        "clean units to accept": r["extra_clean_units_to_accept"],
        "units not inspected": r["remaining_units"],
        "defectives not inspected, median": r["remaining_defectives"]["median"],
        "defectives not inspected, upper bound": r["remaining_defectives"]["upper_bound"],
    } for r in record["lots"]])
    inputs = pd.DataFrame([{
        "spreadsheet row": r["row"], "lot": r["lot"], "part": r["part"],
        "supplier": r["supplier"], "date": r["date"], "lot size": r["lot_size"],
        "inspected": r["inspected"], "defectives": r["defectives"],
        "source": r.get("source", record["input"]["file"])} for r in record["lots"]])
    model = [["question", q["asked"]], ["spec limit", q["spec"]],
             ["confidence", q["confidence"]], ["interval", q["interval"]],
             ["upper bound", q["upper_bound"]], ["model", record["model"]],
             ["prior", record["prior"]], ["seed", record["seed"]]]
    for part, nl in record["next_lot"].items():
        for k, v in nl.items():
            model.append([f"next lot of {part}: {k}", str(v) if isinstance(v, list) else v])
    diag = [["part", "parameter", "R-hat", "bulk ESS", "tail ESS", "passed", "divergences",
             "attempts", "thresholds"]]
    if not record["diagnostics"]:
        diag.append(["(all)", "closed form: no sampler, no convergence to check", None, None,
                     None, True, None, None, None])
    for part, d in record["diagnostics"].items():
        for p in d["parameters"]:
            diag.append([part, p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"], p["passed"],
                         d["divergences"], d["attempts"],
                         f"R-hat <= {RHAT_MAX}, ESS >= {ESS_MIN:.0f}, no divergences"])
    cautions = [[record["caution"]], ["Standards to defer to:"]] + [[s] for s in
                                                                      record["standards"]]
    cautions += [[n] for n in record["notes"] + record["input"]["notes"]]
    prov = [["input file", record["input"]["file"]], ["sheet", record["input"]["sheet"]],
            ["SHA-256", record["input"]["sha256"]], ["header row", record["input"]["header_row"]],
            ["rows read", record["input"]["rows_read"]], ["command", record["command"]]]
    prov += [[f"column {k}", v] for k, v in record["input"]["columns"].items()]
    prov += [[f"version {k}", v] for k, v in record["versions"].items()]
    return {"Decisions": decisions, "Inputs as read": inputs, "Model and prior": model,
            "Diagnostics": diag, "Cautions": cautions, "Provenance": prov,
            **prior_sheets(record)}
