"""The shape of a plan's answer: a plain, JSON-ready record that every rendering (terminal,
JSON, workbook, figures) is drawn from, with its stated assumptions and the caution."""

from __future__ import annotations

from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.evidence.jsonout import plain

ASSUMPTIONS = {
    "attribute": [
        "units fail or survive independently, each with the same reliability R (binomial)",
        "the units and the test conditions represent the fielded product and its use "
        "(constant conditions, no acceleration)",
        "pass/fail is judged without error, by the same criterion as in the field",
    ],
    "life": [
        "failures follow a Weibull law whose shape is the stated one (or lies in the stated "
        "range), the same in the test as in the field",
        "units are independent and are tested at use conditions for L times the mission time "
        "each; a failure before the end of a unit's test counts",
        "L > 1 trades units for test time and rests entirely on the shape: a true shape lower "
        "than assumed (for L > 1) or higher than assumed (for L < 1) overstates what the "
        "test shows",
    ],
    "mtbf": [
        "constant failure rate (exponential life): no early failures and no wear-out within "
        "the test and the mission",
        "time-terminated test; the total operating time of all units counts; failed units "
        "are repaired or replaced",
        "failures are independent, at use conditions",
    ],
    "sampling": [
        "the sample is drawn at random from the lot; units are classified without error",
        "binomial: the lot is large compared with the sample (or a steady process); "
        "hypergeometric: a lot of N units holding D = round(pN) defectives",
    ],
}

BAYES_ASSUMPTION = (
    "the prior describes the product being tested: borrowing from an earlier design "
    "generation or a supplier's history assumes the new units behave like those")
HISTORY_ASSUMPTION = (
    "the learned prior is the predictive for a new lot of the same part: the units on test "
    "are treated as one more lot from the same lot-to-lot population")
DESIGN_ASSUMPTION = (
    "assurance is the chance of passing averaged over the design prior; it is only as good "
    "as that prior (Wilson & Farrow, 2019)")

STANDARD_KEYS = {"attribute": ("IEC 61123",), "life": ("IEC 61123", "IEC 61649"),
                 "mtbf": ("IEC 61124", "MIL-HDBK-781A"), "sampling": ("ISO 2859-1",)}

NOT_CONVERGED = "not-converged"


def standards(kind: str) -> list[str]:
    keys = STANDARD_KEYS[kind]
    return [s for s in STANDARDS if s.startswith(keys)]


def table(name: str, title: str, columns: list[str], rows: list[list]) -> dict:
    return {"name": name, "title": title, "columns": columns, "rows": rows}


def curve(name: str, title: str, x_label: str, y_label: str, x, series: list[dict],
          marks: list[dict] | None = None, x_log: bool = False) -> dict:
    """``series``: [{"label", "y"}]; ``marks``: points to show, [{"x", "y", "label"}]."""
    return {"name": name, "title": title, "x_label": x_label, "y_label": y_label,
            "x": list(x), "series": series, "marks": marks or [], "x_log": x_log}


def record(kind: str, question: str, inputs: dict, method: str, summary: list[str],
           tables: list[dict], curves: list[dict], assumptions: list[str],
           notes: list[str] | None = None, priors: dict | None = None,
           verdict: str = "plan", diagnostics: dict | None = None) -> dict:
    return plain({
        "kind": "plan", "plan": kind, "question": question, "inputs": inputs,
        "method": method, "priors": priors or {}, "verdict": verdict,
        "summary": summary, "tables": tables, "curves": curves,
        "assumptions": assumptions, "notes": notes or [],
        "diagnostics": diagnostics or {}, "caution": CAUTION, "standards": standards(kind),
    })
