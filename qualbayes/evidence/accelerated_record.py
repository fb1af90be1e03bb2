"""The run record of an at-use question (accelerated life), its terminal text and workbook
sheets. The record is a JSON-ready dict; text, workbook and figure are rendered from it."""

from __future__ import annotations

import pandas as pd

from qualbayes.accelerated_analysis import AcceleratedAssessment
from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.data.stress_life import StressLifeTable
from qualbayes.evidence.jsonout import plain
from qualbayes.evidence.terminal import table as text_table
from qualbayes.inference.gate import ESS_MIN, RHAT_MAX
from qualbayes.models.life_stress import KELVIN_OFFSET

MODEL_TEXT = {
    "weibull": ("log T = mu(x) + sigma e, e smallest-extreme-value: Weibull life with common "
                "shape beta = 1/sigma and scale exp(mu(x))"),
    "lognormal": ("log T = mu(x) + sigma e, e standard normal: lognormal life with common "
                  "sigma and median exp(mu(x))"),
}


def show_stress(value: float, relation: str, temp_unit: str | None) -> str:
    """A stress as the engineer wrote it (temperatures back in their unit)."""
    if relation == "arrhenius":
        if temp_unit == "K":
            return f"{value:.6g} K"
        return f"{value - KELVIN_OFFSET:.6g} C"
    return f"{value:.6g}"


def at_use_record(result: AcceleratedAssessment, data: StressLifeTable, sha256: str,
                  command: str, versions: dict) -> dict:
    r = result.result
    units = data.life.units
    u = f" {units}" if units else ""
    c = result.confidence
    terms = result.terms
    use = ", ".join(f"{t.column} = {show_stress(t.use, t.relation, tu)}"
                    for t, tu in zip(terms, data.temperature_units, strict=True))
    return plain({
        "kind": "at-use",
        "question": {
            "mission": result.mission, "target": result.target, "confidence": c,
            "units": units, "use": use, "distribution": result.distribution,
            "asked": f"at use ({use}): P(R({result.mission:g}{u}) >= {result.target:g} | data) "
                     f">= {c:g}?",
            "interval": f"central {c:.0%} credible interval",
            "lower_bound": f"one-sided {c:.0%} lower bound of R({result.mission:g}{u}) at use",
        },
        "input": {"file": data.life.file, "sheet": data.life.sheet, "sha256": sha256,
                  "header_row": data.life.header_row, "rows_read": len(data.life.frame),
                  "columns": {**data.life.headers,
                              **{f"stress {j + 1}": h for j, h in enumerate(data.columns)}},
                  "notes": data.life.notes},
        "stresses": [{"column": t.column, "relation": t.relation,
                      "temperature_unit": tu, "use": t.use,
                      "use_as_written": show_stress(t.use, t.relation, tu)}
                     for t, tu in zip(terms, data.temperature_units, strict=True)],
        "model": MODEL_TEXT[result.distribution] + "; mu(x) = gamma0 + sum_j gamma_j "
                 "(s_j(x_j) - mean s_j) with s = 1/(k T) (Arrhenius, gamma = Ea in eV), "
                 "-log x (inverse power, gamma = n), -x (log-linear, gamma = b); censored "
                 "likelihood; NUTS after an affine change of variables from the posterior "
                 "mode and its Laplace covariance",
        "prior": [result.prior.describe(result.distribution), "log life at the mean tested "
                  "stress: flat", *[t.describe_prior() for t in terms]],
        "seed": result.seed, "result": r,
        "caution": CAUTION, "standards": list(STANDARDS),
        "command": command, "versions": versions,
    })


def _num(v, digits: int = 4) -> str:
    if v is None:
        return "-"
    return f"{v:,.0f}" if abs(v) >= 1000 else f"{v:.{digits}g}"


def _iv(summary: dict | None) -> str:
    if summary is None:
        return "-"
    lo, hi = summary["interval"]
    return f"{_num(summary['median'])} ({_num(lo)} - {_num(hi)})"


def at_use_text(record: dict) -> str:
    q, r = record["question"], record["result"]
    u = f" ({q['units']})" if q["units"] else ""
    d = r["diagnostics"]
    lines = [f"Reliability at the use condition: {q['asked']}",
             f"input: {record['input']['file']}, {record['input']['rows_read']} units "
             f"({r['failures']} failed), sha256 {record['input']['sha256'][:16]}...",
             f"model: {record['model']}",
             *[f"prior: {p}" for p in record["prior"]],
             f"convergence gate: {'passed' if d['passed'] else 'FAILED - no answer'} (max "
             f"R-hat {d['max_rhat']:.4f}, min bulk ESS {d['min_ess_bulk']:.0f}, min tail ESS "
             f"{d['min_ess_tail']:.0f}, divergences {d['divergences']})",
             *[f"  - {x}" for x in d["reasons"]], ""]
    if d["passed"]:
        life_key = ("characteristic_life_at_use" if "characteristic_life_at_use" in r
                    else "median_life_at_use")
        shape_key = "shape" if "shape" in r else "sigma"
        rel = r["reliability_at_mission"]
        rows = [["R(mission) at use", _iv(rel)],
                [f"{c_(q)} lower bound of R", f"{rel['lower_bound']:.4f}"],
                [f"B10 life at use{u}", _iv(r["b10_at_use"])],
                [f"B1 life at use{u}", _iv(r["b1_at_use"])],
                [life_key.replace("_", " ") + u, _iv(r[life_key])],
                [shape_key, _iv(r[shape_key])],
                *[[c["name"] + f" ({c['stress']})", _iv(c)] for c in r["coefficients"]],
                ["P(R >= target)", f"{r['prob_meets_target']:.4f} (Monte Carlo error "
                                   f"{r['prob_meets_target_mc_error']:.4f})"],
                ["decision", r["decision"]]]
        lines += [text_table(["quantity", f"median ({q['interval']})"], rows, "ll"), ""]
        lvl = [[", ".join(_stress_cells(lv["stress"], record["stresses"])), lv["units"],
                lv["failures"], _iv(lv["acceleration_factor"])] for lv in r["levels"]]
        lines += [text_table(["tested level", "units", "failures",
                              "acceleration factor vs use"], lvl, "lrrl"), ""]
        check = r.get("shape_check") or {}
        if check.get("done"):
            lines.append("shape per level (common-shape check): " + "; ".join(
                f"{', '.join(_stress_cells(lv['stress'], record['stresses']))}: "
                f"{lv['shape_median']:.3g} ({lv['shape_interval'][0]:.3g} - "
                f"{lv['shape_interval'][1]:.3g})" for lv in check["levels"]))
    else:
        lines.append("decision: not-converged (no numbers are reported from unconverged "
                     "chains)")
    lines += [f"note: {n}" for n in r["notes"]]
    lines += ["", CAUTION]
    return "\n".join(lines)


def c_(q: dict) -> str:
    return f"{q['confidence']:.0%}"


def _stress_cells(values, stresses) -> list[str]:
    return [f"{s['column']} {show_stress(v, s['relation'], s['temperature_unit'])}"
            for v, s in zip(values, stresses, strict=True)]


def at_use_sheets(record: dict, data: StressLifeTable | None = None) -> dict:
    """Results, levels, units as read, life-stress curve, model and prior, diagnostics,
    cautions, provenance."""
    q, r = record["question"], record["result"]
    results = [["quantity", "median", "interval low", "interval high"]]
    if r["diagnostics"]["passed"]:
        for key in ("reliability_at_mission", "b10_at_use", "b1_at_use",
                    "characteristic_life_at_use", "median_life_at_use", "shape", "sigma"):
            if key in r:
                results.append([key.replace("_", " "), r[key]["median"], *r[key]["interval"]])
        for c in r["coefficients"]:
            results.append([f"{c['name']} ({c['stress']})", c["median"], *c["interval"]])
        results += [["R lower bound", r["reliability_at_mission"]["lower_bound"]],
                    ["P(R >= target)", r["prob_meets_target"]],
                    ["Monte Carlo error of P", r["prob_meets_target_mc_error"]]]
    results.append(["decision", r["decision"]])
    sheets: dict = {"Results": results}
    if r["diagnostics"]["passed"]:
        sheets["Levels"] = pd.DataFrame([{
            **{s["column"]: show_stress(v, s["relation"], s["temperature_unit"])
               for v, s in zip(lv["stress"], record["stresses"], strict=True)},
            "units": lv["units"], "failures": lv["failures"],
            "acceleration factor median": lv["acceleration_factor"]["median"],
            "AF low": lv["acceleration_factor"]["interval"][0],
            "AF high": lv["acceleration_factor"]["interval"][1]} for lv in r["levels"]])
        cv = r["curve"]
        sheets["Life-stress curve"] = [["stress", "B10 median", "B10 low", "B10 high",
                                        "life median", "life low", "life high"]] + [
            [cv["stress"][i], cv["b10"]["median"][i], cv["b10"]["low"][i], cv["b10"]["high"][i],
             cv["b63"]["median"][i], cv["b63"]["low"][i], cv["b63"]["high"][i]]
            for i in range(len(cv["stress"]))]
    if data is not None:
        f = data.life.frame
        frame = pd.DataFrame({"spreadsheet row": f["row"], "unit": f["unit"], "kind": f["kind"],
                              "lower time": f["lower"],
                              "upper time": f["upper"].where(f["upper"] != float("inf"), None)})
        for j, s in enumerate(record["stresses"]):
            frame[s["column"]] = data.stress[:, j]
        sheets["Inputs as read"] = frame
    model = [["question", q["asked"]], ["mission", q["mission"]], ["target", q["target"]],
             ["confidence", q["confidence"]], ["life distribution", q["distribution"]],
             ["model", record["model"]], *[["prior", p] for p in record["prior"]],
             ["seed", record["seed"]]]
    diag = [["parameter", "R-hat", "bulk ESS", "tail ESS", "passed", "thresholds"]]
    for p in r["diagnostics"]["parameters"]:
        diag.append([p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"], p["passed"],
                     f"R-hat <= {RHAT_MAX}, ESS >= {ESS_MIN:.0f}, no divergences"])
    cautions = [[record["caution"]], *[[n] for n in r["notes"]], ["Standards to defer to:"],
                *[[s] for s in record["standards"]]]
    prov = [["input file", record["input"]["file"]], ["SHA-256", record["input"]["sha256"]],
            ["command", record["command"]],
            *[[f"column {k}", v] for k, v in record["input"]["columns"].items()],
            *[[f"version {k}", v] for k, v in record["versions"].items()]]
    sheets.update({"Model and prior": model, "Diagnostics": diag, "Cautions": cautions,
                   "Provenance": prov})
    return sheets
