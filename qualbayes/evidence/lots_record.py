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

BASIS_WORDS = {
    "lot": "the lot itself: its fraction defective (x + D)/N, D the defectives among the N - n "
           "units not inspected (beta-binomial); a fully inspected lot is decided exactly",
    "process": "the process: the defect rate p of the supplier's process for this lot",
}
MCSE_WORDS = ("P carries its Monte Carlo standard error (MCSE); a side of C within 3 MCSE is "
              "too close to call and gives undecided after drawing more")


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
            "prob_within_spec_mcse": _none(r["prob_within_spec_mcse"]),
            "decision_basis": _none(r["decision_basis"]),
            "decision": r["decision"],
            "too_close": bool(r["too_close"]) if _none(r["too_close"]) is not None else None,
            "group": _none(r["group"]),
            "outlier": bool(r["outlier"]) if _none(r["outlier"]) is not None else None,
            "outlier_p": _none(r["outlier_p"]),
            "own_data_prob": _none(r["own_data_prob"]),
            "own_data_decision": _none(r["own_data_decision"]),
            "extra_clean_units_to_accept": _none(r["extra_clean_units_to_accept"]),
            "remaining_units": _none(r["remaining_units"]),
            "remaining_defectives": {"median": _none(r["remaining_defectives_median"]),
                                     "upper_bound": _none(r["remaining_defectives_upper"])},
        })
    c, s = result.confidence, result.spec
    return plain({
        "kind": "lots",
        "question": {"spec": s, "confidence": c,
                     "asked": (f"P(lot fraction defective <= {s:g} | data) >= {c:g} where the "
                               f"lot size is given, else P(defect rate <= {s:g} | data) >= "
                               f"{c:g}?" if result.decision_basis == "lot" else
                               f"P(defect rate <= {s:g} | data) >= {c:g}?"),
                     "decision_basis": result.decision_basis,
                     "bases": BASIS_WORDS,
                     "interval": f"central {c:.0%} credible interval of the defect rate "
                                 "(two-sided: it answers a different question from the bound)",
                     "upper_bound": f"one-sided {c:.0%} upper bound of the defect rate: the "
                                    f"rate is below it with probability {c:g}"},
        "group_by": list(result.group_by),
        "lot_spread": result.lot_spread,
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
    if record["diagnostics"]:
        head.append(f"pooled by: {', '.join(record['group_by'])} (one history per value)")
    head.append("decided about: " + "; ".join(f"{k} = {v}" for k, v in q["bases"].items()
                                              if k in {lot["decision_basis"]
                                                       for lot in record["lots"]}))
    for part, d in record["diagnostics"].items():
        status = "passed" if d["passed"] else "FAILED - no decision for these lots"
        head.append(f"convergence gate [{part}]: {status} (max R-hat {d['max_rhat']:.4f}, "
                    f"min bulk ESS {d['min_ess_bulk']:.0f}, min tail ESS "
                    f"{d['min_ess_tail']:.0f}, divergences {d['divergences']})")
        for reason in d["reasons"]:
            head.append(f"  - {reason}")
    c = q["confidence"]
    sampled = bool(record["diagnostics"])
    headers = ["lot", "group" if sampled else "part", "n", "x", "N", "basis",
               f"rate {c:.0%} upper", "P(within)", *(["MCSE"] if sampled else []),
               "decision", "clean units to accept", "own data", "check"]
    rows = []
    for lot in record["lots"]:
        p = lot["prob_within_spec"]
        own = lot["own_data_decision"]
        rows.append([lot["lot"], lot["group"] if sampled else lot["part"], lot["inspected"],
                     lot["defectives"], lot["lot_size"], lot["decision_basis"],
                     _pct(lot["upper_bound"]), None if p is None else f"{p:.4f}",
                     *([None if p is None else f"{lot['prob_within_spec_mcse']:.4f}"]
                       if sampled else []),
                     lot["decision"] + (" (too close)" if lot["too_close"] else ""),
                     lot["extra_clean_units_to_accept"],
                     own if own is not None and own != lot["decision"] else "",
                     "OUTLIER" if lot["outlier"] else ""])
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(record["decision_counts"].items()))
    tail = [f"decisions: {counts}",
            f"rate {c:.0%} upper: one-sided bound of the defect rate p; P(within): the "
            "probability behind the decision, about the lot or the process as in 'basis'; "
            "own data: the decision the lot's own data give under the uniform prior, shown "
            "where it differs"]
    if sampled:
        tail.append(MCSE_WORDS)
    for part, nl in record["next_lot"].items():
        if "prob_within_spec" in nl:
            tail.append(f"next lot of {part}: predicted defect rate median {_pct(nl['median'])}"
                        f", {c:.0%} upper {_pct(nl['upper_bound'])}, P(p<=spec) "
                        f"{nl['prob_within_spec']:.4f} (MCSE {nl['prob_within_spec_mcse']:.4f})"
                        f"; mean {_pct(nl['mean'])}"
                        + (f" ({nl['mean_note']})" if nl["mean"] > nl["upper_bound"] else ""))
    tail += record["notes"]
    tail.append(CAUTION)
    head += prior_lines(record)
    table = [text_table(headers, rows, "llrrrlrr" + ("r" if sampled else "") + "lrll"),
             *sensitivity_lines(record)]
    return "\n".join([*head, "", *table, "", *tail])


def lots_sheets(record: dict, data: LotTable | None = None) -> dict:
    """Workbook sheets: decisions, inputs, model and prior, diagnostics, cautions, provenance."""
    q = record["question"]
    decisions = pd.DataFrame([{
        "lot": r["lot"], "part": r["part"], "supplier": r["supplier"], "date": r["date"],
        "lot size": r["lot_size"], "inspected": r["inspected"], "defectives": r["defectives"],
        "posterior mean": r["posterior_mean"], "interval low": r["interval"][0],
        "interval high": r["interval"][1], "upper bound": r["upper_bound"],
        "decided about": r["decision_basis"], "P(within spec)": r["prob_within_spec"],
        "P MCSE": r["prob_within_spec_mcse"], "decision": r["decision"],
        "too close to call": r["too_close"], "group": r["group"],
        "own-data decision (uniform prior)": r["own_data_decision"],
        "own-data P": r["own_data_prob"], "outlier / prior conflict": r["outlier"],
        "outlier p-value": r["outlier_p"],
        "clean units to accept": r["extra_clean_units_to_accept"],
        "units not inspected": r["remaining_units"],
        "defectives not inspected, median": r["remaining_defectives"]["median"],
        "defectives not inspected, upper bound": r["remaining_defectives"]["upper_bound"],
    } for r in record["lots"]])
    inputs = pd.DataFrame([{
        "spreadsheet row": r["row"], "lot": r["lot"], "part": r["part"],
        "supplier": r["supplier"], "date": r["date"], "lot size": r["lot_size"],
        "inspected": r["inspected"], "defectives": r["defectives"]} for r in record["lots"]])
    model = [["question", q["asked"]], ["spec limit", q["spec"]],
             ["confidence", q["confidence"]], ["interval", q["interval"]],
             ["upper bound", q["upper_bound"]], ["model", record["model"]],
             ["prior", record["prior"]], ["seed", record["seed"]],
             ["pooled by", ", ".join(record.get("group_by") or [])],
             ["decided about", q.get("decision_basis")]]
    model += [[f"basis '{k}'", v] for k, v in q.get("bases", {}).items()]
    spread = record.get("lot_spread") or {}
    if spread:
        model.append(["lot-to-lot spread (stated)", spread.get("words")])
        for k, v in (spread.get("implied_lot_rate") or {}).items():
            model.append([f"implied prior on one lot's rate: {k}",
                          str(v) if isinstance(v, dict) else v])
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
    cautions += [[n] for n in record["notes"]]
    prov = [["input file", record["input"]["file"]], ["sheet", record["input"]["sheet"]],
            ["SHA-256", record["input"]["sha256"]], ["header row", record["input"]["header_row"]],
            ["rows read", record["input"]["rows_read"]], ["command", record["command"]]]
    prov += [[f"column {k}", v] for k, v in record["input"]["columns"].items()]
    prov += [[f"version {k}", v] for k, v in record["versions"].items()]
    return {"Decisions": decisions, "Inputs as read": inputs, "Model and prior": model,
            "Diagnostics": diag, "Cautions": cautions, "Provenance": prov,
            **prior_sheets(record)}
