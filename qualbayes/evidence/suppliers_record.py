"""The run record of the supplier scorecard, and its renderings (terminal text, workbook).

The record is a plain JSON-ready dict; everything shown is rendered from it.
"""

from __future__ import annotations

import math

import pandas as pd

from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.evidence.jsonout import plain
from qualbayes.evidence.numbers import plural, probability, quantity, rate
from qualbayes.evidence.report_common import META_KEYS
from qualbayes.evidence.terminal import table as text_table
from qualbayes.inference.gate import ESS_MIN, RHAT_MAX
from qualbayes.models.supplier_rates import (
    CHANGE_SD,
    M_MEAN,
    M_SD,
    SIGMA_B_SCALE,
    SIGMA_W_SCALE,
)
from qualbayes.scorecard import SupplierScorecard

PRIOR = {
    "m": f"Normal({M_MEAN:g}, {M_SD:g}^2) on the logit of a typical supplier's rate",
    "sigma_b": f"HalfNormal({SIGMA_B_SCALE:g}): spread between suppliers (logit scale)",
    "sigma_w": f"HalfNormal({SIGMA_W_SCALE:g}), one per supplier: spread of its periods "
               "(logit scale)",
    "delta": f"Normal(0, {CHANGE_SD:g}^2), one per supplier with two periods or more: change "
             "of its latest period beyond that spread (logit scale)",
    "phi": "Uniform(1e-4, 1), phi = 1/sqrt(kappa + 1): lot-to-lot spread within a period",
}


def _rows(frame: pd.DataFrame) -> list[dict]:
    out = []
    for r in frame.to_dict("records"):
        out.append({k: (None if isinstance(v, float) and math.isnan(v) else v)
                    for k, v in r.items()})
    return out


def suppliers_record(result: SupplierScorecard, data, sha256: str, command: str,
                     versions: dict, rate_unit: str = "%") -> dict:
    """The run record of a scorecard; ``rate_unit`` (``%`` or ``ppm``, as the limit was
    written) is the unit every rendering shows rates in."""
    c = result.confidence
    return plain({
        "kind": "suppliers",
        "question": {
            "spec": result.spec, "confidence": c, "period": result.period,
            "rate_unit": rate_unit,
            "asked": (f"per supplier: P(defect rate > {rate(result.spec, rate_unit)} | data); "
                      "whether the "
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


RATE_COLUMNS = ("rate_median", "rate_upper", "rate_mean", "interval_low", "interval_high",
                "period_spread_median")
PROB_COLUMNS = ("prob_above", "prob_above_mcse", "prob_worst", "prob_worst_mcse",
                "prob_latest_worse", "prob_latest_worse_mcse")
COUNT_COLUMNS = ("rank", "lots", "inspected", "defectives", "periods")


def rate_unit(record: dict) -> str:
    """The unit the limit was written in (``%`` or ``ppm``); ``%`` for older records."""
    return record["question"].get("rate_unit") or "%"


def gate_words(diagnostics: dict) -> str:
    """The convergence gate in plain words, with its numbers."""
    d = diagnostics
    divergent = plural(d.get("divergences") or 0, "divergent transition")
    attempts = plural(d.get("attempts") or 1, "attempt")
    nums = (f"largest R-hat {quantity(d.get('max_rhat'))}, smallest bulk ESS "
            f"{quantity(d.get('min_ess_bulk'))}, smallest tail ESS "
            f"{quantity(d.get('min_ess_tail'))}, {divergent}, {attempts}")
    rule = (f"every gated parameter needs R-hat <= {RHAT_MAX} and bulk and tail ESS >= "
            f"{ESS_MIN:.0f}, and no transition may diverge")
    if d["passed"]:
        return (f"Convergence gate passed: the chains agree and are long enough ({rule}; "
                f"{nums}).")
    return (f"CONVERGENCE GATE FAILED: the chains did not converge, so no rate, probability "
            f"or call is given ({rule}; {nums}).")


def call_words(confidence: float) -> str:
    """What each call means."""
    c = f"{confidence:g}"
    return (f"Limit call: 'above limit' when P(rate > limit) >= {c}, 'within limit' when "
            f"P(rate <= limit) >= {c}, otherwise 'undecided'. Latest period: 'worse' when "
            f"P(latest worse) >= {c}, 'better' when P(latest not worse) >= {c}, otherwise "
            "'no clear change'. 'too close to call' when the probability lies within 3 Monte "
            "Carlo standard errors of the confidence level: rerun with more draws. "
            "'not-converged': the convergence gate failed and no call is given.")


def suppliers_text(record: dict) -> str:
    q, d = record["question"], record["diagnostics"]
    inp = record["input"]
    unit = rate_unit(record)

    def pr(p, mcse):
        return None if p is None else f"{probability(p)} ±{probability(mcse)}"

    head = [f"Supplier scorecard: limit {rate(q['spec'], unit)}, confidence "
            f"{q['confidence']:g}" + (f", by {q['period']}" if q["period"] else ""),
            f"input: {inp['file']}" + (f" [sheet {inp['sheet']}]" if inp["sheet"] else "")
            + f", {plural(inp['rows_read'], 'lot')}, sha256 {inp['sha256'][:16]}...",
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
               rate(s["rate_median"], unit), rate(s["rate_upper"], unit),
               pr(s["prob_above"], s["prob_above_mcse"]), s["limit_call"],
               pr(s["prob_worst"], s["prob_worst_mcse"])]
        if q["period"]:
            row += [s["latest_period"],
                    pr(s["prob_latest_worse"], s["prob_latest_worse_mcse"]),
                    s["latest_call"]]
        rows.append(row)
    align = "rlrrrrrrlr" + ("lrl" if q["period"] else "")
    tail = [*record["notes"], *inp["notes"], CAUTION]
    return "\n".join([*head, "", text_table(headers, rows, align), "", *tail])


def _frame(rows: list[dict], unit: str) -> pd.DataFrame:
    frame = pd.DataFrame(rows)
    kinds = {**dict.fromkeys(RATE_COLUMNS, "rate"), **dict.fromkeys(PROB_COLUMNS,
                                                                      "probability"),
             **dict.fromkeys(COUNT_COLUMNS, "count")}
    frame.attrs.update(rate_unit=unit, formats={k: v for k, v in kinds.items()
                                                if k in frame.columns})
    return frame


def suppliers_sheets(record: dict) -> dict:
    """Workbook sheets: scorecard, periods, model and prior, diagnostics, cautions,
    provenance (with each input file, its SHA-256 and the rows left out)."""
    from qualbayes.evidence.inputs_sheets import with_input_rows  # noqa: PLC0415

    q = record["question"]
    unit = rate_unit(record)
    model = [["question", q["asked"]], ["limit", q["spec"]],
             ["limit as written", rate(q["spec"], unit)], ["confidence", q["confidence"]],
             ["period", q["period"] or "(none)"], ["rate", q["rate"]],
             ["upper bound", q["upper_bound"]], ["interval", q["interval"]],
             ["calls", call_words(q["confidence"])], ["model", record["model"]],
             ["seed", record["seed"]], ["convergence gate", gate_words(record["diagnostics"])]]
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
    prov += [[k.replace("_", " "), record.get(k)] for k in META_KEYS]
    prov += [[f"column {k}", v] for k, v in inp["columns"].items()]
    prov += [[f"version {k}", v] for k, v in record["versions"].items()]
    sheets = {"Scorecard": _frame(record["suppliers"], unit),
              "Periods": _frame(record["periods"], unit), "Model and prior": model,
              "Diagnostics": diag, "Cautions": cautions, "Provenance": prov}
    return with_input_rows(sheets, record)
