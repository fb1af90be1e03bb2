"""Renderings of a plan record (see :mod:`qualbayes.planning.records`): terminal text and
workbook sheets. Everything shown is drawn from the record, so a saved record rebuilds the
same report."""

from __future__ import annotations

import pandas as pd

from qualbayes.evidence.explain import NEXT_STEP, gate_line
from qualbayes.evidence.prior_record import prior_lines, prior_sheets, sensitivity_lines
from qualbayes.evidence.terminal import table as text_table


def plan_text(record: dict) -> str:
    lines = list(record["summary"])
    for name, gate in record.get("diagnostics", {}).items():
        lines.append(gate_line(f"the prior learned from {name}", gate, "no plan"))
    for t in record["tables"]:
        lines += ["", t["title"] + ":", text_table(t["columns"], t["rows"])]
    lines += prior_lines(record) + sensitivity_lines(record)
    lines += ["", "assumptions:"] + [f"  - {a}" for a in record["assumptions"]]
    if record["notes"]:
        lines += ["notes:"] + [f"  - {n}" for n in record["notes"]]
    lines.append("standards to defer to: " + "; ".join(record["standards"]))
    lines.append(NEXT_STEP)
    lines.append(record["caution"])
    return "\n".join(lines)


def curve_sheet_name(name: str) -> str:
    """``oc`` -> ``OC curve``, ``assurance`` -> ``Assurance curve``."""
    return "OC curve" if name == "oc" else f"{name.replace('_', ' ').capitalize()} curve"


def _sheet_name(name: str, used: set[str]) -> str:
    base = "".join(ch for ch in name if ch not in "[]:*?/\\")[:31] or "Sheet"
    out, k = base, 2
    while out in used:
        out = f"{base[:28]} {k}"
        k += 1
    used.add(out)
    return out


def plan_sheets(record: dict) -> dict:
    """Summary, one sheet per table, the curve data, assumptions and cautions, provenance."""
    used: set[str] = set()
    sheets: dict = {}
    summary = [["question", record["question"]], ["method", record["method"]],
               ["verdict", record["verdict"]]]
    summary += [[f"input: {k}", v if not isinstance(v, list | dict) else str(v)]
                for k, v in record["inputs"].items()]
    for k, v in record["priors"].items():
        summary.append([f"prior: {k}", v if not isinstance(v, dict) else str(v)])
    summary += [["", line] for line in record["summary"]]
    sheets[_sheet_name("Summary", used)] = summary
    for t in record["tables"]:
        sheets[_sheet_name(t["name"], used)] = pd.DataFrame(t["rows"], columns=t["columns"])
    for c in record["curves"]:
        frame = pd.DataFrame({c["x_label"]: c["x"]})
        for s in c["series"]:
            frame[s["label"]] = s["y"]
        sheets[_sheet_name(curve_sheet_name(c["name"]), used)] = frame
    cautions = [[record["caution"]], ["Assumptions:"]] + [[a] for a in record["assumptions"]]
    cautions += [["Standards to defer to:"]] + [[s] for s in record["standards"]]
    cautions += [[n] for n in record["notes"]]
    sheets[_sheet_name("Assumptions and cautions", used)] = cautions
    prov = [["command", record.get("command")]]
    history = record["priors"].get("history")
    if isinstance(history, dict):
        prov += [["history file", history.get("file")], ["sheet", history.get("sheet")],
                 ["SHA-256", history.get("sha256")], ["part", history.get("part")]]
    prov += [[f"version {k}", v] for k, v in record.get("versions", {}).items()]
    sheets[_sheet_name("Provenance", used)] = prov
    for name, sheet in prior_sheets(record).items():
        sheets[_sheet_name(name, used)] = sheet
    return sheets
