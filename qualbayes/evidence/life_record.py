"""The run record of a life question, and its renderings (terminal text, workbook sheets).

The question returns numbers; the record words them (:mod:`life_words`: notes, verdicts,
the model in symbols) and adds the plot curves (:mod:`life_curves`). The record is a plain
JSON-ready dict; the text, the workbook and the figures are rendered
from it, so evidence rebuilt from a saved record shows the same numbers.
"""

from __future__ import annotations

import pandas as pd

from qualbayes import cross_check
from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.data.life import LifeTable
from qualbayes.evidence.explain import NEXT_STEP, gate_line, life_columns
from qualbayes.evidence.jsonout import plain
from qualbayes.evidence.life_extras_record import extras_lines, extras_sheets
from qualbayes.evidence.life_words import worded
from qualbayes.evidence.numbers import plural, probability, quantity
from qualbayes.evidence.prior_record import prior_lines, prior_sheets, sensitivity_lines
from qualbayes.evidence.terminal import table as text_table
from qualbayes.inference.gate import ESS_MIN, RHAT_MAX
from qualbayes.life_question import LifeAssessment

MCSE_COLUMN = ("MCSE of P: the Monte Carlo standard error of P from the posterior draws; a P "
               "within 3 MCSE of the confidence is sampled again with more draws and, if still "
               "that close, is 'undecided': too close to call at this Monte Carlo precision.")


def life_record(result: LifeAssessment, data: LifeTable, sha256: str, command: str,
                versions: dict) -> dict:
    u = f" {result.units}" if result.units else ""
    c = result.confidence
    decisions: dict[str, int] = {}
    words = worded(result, data)
    for g in result.groups:
        decisions[g["decision"]] = decisions.get(g["decision"], 0) + 1
    return plain({
        "kind": "life",
        "question": {
            "mission": result.mission, "target": result.target, "confidence": c,
            "units": result.units,
            "asked": (f"P(R({result.mission:g}{u}) >= {result.target:g} | data) >= {c:g}?"),
            "interval": f"central {c:.0%} credible interval",
            "lower_bound": f"one-sided {c:.0%} lower bound of R({result.mission:g}{u})",
        },
        "input": {"file": data.file, "sheet": data.sheet, "sha256": sha256,
                  "header_row": data.header_row, "rows_read": len(data.frame),
                  "rows_rejected": 0, "columns": data.headers, "notes": data.notes},
        "model": words["model"], "prior": result.prior.describe(result.units),
        "seed": result.seed,
        "groups": words["groups"], "notes": words["notes"],
        "comparisons": words["comparisons"],
        "posterior_draws": {g: d["chains"] for g, d in (result.draws or {}).items()
                            if "chains" in d},
        "decision_counts": decisions,
        "caution": CAUTION, "standards": list(STANDARDS),
        "command": command, "versions": versions,
    })


def _num(v, digits: int = 4):
    return None if v is None else quantity(v, digits)


def _with_interval(summary: dict | None) -> str | None:
    if summary is None:
        return None
    lo, hi = summary["interval"]
    return f"{_num(summary['median'])} ({_num(lo)} - {_num(hi)})"


def _mcse(g: dict):
    """MCSE of P(R >= target); records written before the rename carry ``_mc_error``."""
    return g.get("prob_meets_target_mcse", g.get("prob_meets_target_mc_error"))


def _mcse_text(g: dict) -> str | None:
    v = _mcse(g)
    return None if v is None else f"{v:.4f}"


def life_text(record: dict) -> str:
    q = record["question"]
    u = f" {q['units']}" if q["units"] else ""
    c = q["confidence"]
    head = [
        f"Reliability at the mission time: {q['asked']}",
        f"input: {record['input']['file']}"
        + (f" [sheet {record['input']['sheet']}]" if record["input"]["sheet"] else "")
        + f", {plural(record['input']['rows_read'], 'unit')}, sha256 "
          f"{record['input']['sha256'][:16]}... (in full in the report)",
        *[f"prior: {p}" for p in record["prior"]],
    ]
    for g in record["groups"]:
        d = g["diagnostics"]
        head.append(gate_line(f"group {g['group']}", d,
                              "no answer and no decision for this group"))
        for reason in d["reasons"]:
            head.append(f"  - {reason}")
    headers = ["group", "units", "fail", "susp", "shape", f"scale{u}", f"B10{u}",
               f"R({q['mission']:g}) median", f"{c:.0%} lower", "P(R>=target)", "MCSE of P",
               "decision"]
    rows = []
    for g in record["groups"]:
        rel = g["reliability_at_mission"]
        rows.append([g["group"], g["units"], g["failures"], g["suspensions"],
                     _with_interval(g["shape"]), _with_interval(g["scale"]),
                     _with_interval(g["b10"]),
                     None if rel is None else probability(rel["median"]),
                     None if rel is None else probability(rel["lower_bound"]),
                     None if g["prob_meets_target"] is None else
                     probability(g["prob_meets_target"]),
                     _mcse_text(g), g["decision"]])
    detail = [life_columns(c), MCSE_COLUMN, f"(medians with {record['question']['interval']}s)"]
    for g in record["groups"]:
        if g["b1"] is not None:
            detail.append(f"[{g['group']}] B1 life {_with_interval(g['b1'])}{u}; mean life "
                          f"{_with_interval(g['mean_life'])}{u}; posterior mode shape "
                          f"{_num(g['posterior_mode']['shape'])}, scale "
                          f"{_num(g['posterior_mode']['scale'])}{u}")
        for n in g["notes"]:
            detail.append(f"[{g['group']}] {n}")
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(record["decision_counts"].items()))
    tail = [f"decisions: {counts}", *record["notes"], *record["input"]["notes"], NEXT_STEP,
            CAUTION]
    head += prior_lines(record)
    detail += sensitivity_lines(record)
    more = extras_lines(record)
    return "\n".join([*head, "", text_table(headers, rows, "lrrrlllrrrrl"), *more, "", *detail,
                      "", *tail])


def life_sheets(record: dict, data: LifeTable | None = None) -> dict:
    """Workbook sheets: results, inputs, probability-plot data, model and prior,
    diagnostics, cautions, provenance."""
    q = record["question"]

    def s(g, key, part):
        v = g[key]
        if v is None:
            return None
        return v["median"] if part == "median" else v["interval"][0 if part == "low" else 1]

    results = pd.DataFrame([{
        "group": g["group"], "units": g["units"], "failures": g["failures"],
        "exact failures": g["exact_failures"], "suspensions": g["suspensions"],
        "interval-censored": g["interval_censored"], "left-censored": g["left_censored"],
        **{f"{label} {part}": s(g, key, part)
           for key, label in (("shape", "shape"), ("scale", "scale"), ("b1", "B1 life"),
                              ("b10", "B10 life"), ("mean_life", "mean life"),
                              ("reliability_at_mission", "R(mission)"))
           for part in ("median", "low", "high")},
        "R(mission) lower bound": None if g["reliability_at_mission"] is None
        else g["reliability_at_mission"]["lower_bound"],
        "P(R(mission) >= target)": g["prob_meets_target"],
        "Monte Carlo error of P": _mcse(g),
        "decision": g["decision"],
        "posterior mode shape": g["posterior_mode"]["shape"],
        "posterior mode scale": g["posterior_mode"]["scale"],
        "notes": " ".join(g["notes"]),
    } for g in record["groups"]])
    results.attrs["formats"] = {c: "probability" for c in results.columns
                                if str(c).startswith(("R(mission)", "Monte Carlo"))}
    sheets: dict = {"Results": results}
    if data is not None:
        f = data.frame
        sheets["Inputs as read"] = pd.DataFrame({
            "spreadsheet row": f["row"], "unit": f["unit"], "group": f["group"],
            "kind": f["kind"], "lower time": f["lower"],
            "upper time": f["upper"].where(f["upper"] != float("inf"), None),
            "source": f["source"] if "source" in f else data.file})
    plot_rows = [["group", "time", "adjusted rank", "median rank (Bernard)", "plotted as"]]
    curve_rows = [["group", "time", "R median", "R band low", "R band high"]]
    for g in record["groups"]:
        p = g["plot"]
        if p is None:
            continue
        pts = p["points"]
        for i in range(len(pts["time"])):
            plot_rows.append([g["group"], pts["time"][i], pts["adjusted_rank"][i],
                              pts["median_rank"][i], pts["kind"][i]])
        cv = p["curve"]
        for i in range(len(cv["time"])):
            curve_rows.append([g["group"], cv["time"][i], cv["reliability_median"][i],
                               cv["reliability_low"][i], cv["reliability_high"][i]])
    sheets["Probability plot"] = plot_rows
    sheets["R(t) curve"] = curve_rows
    model = [["question", q["asked"]], ["mission time", q["mission"]],
             ["time units", q["units"] or "(not stated)"], ["target", q["target"]],
             ["confidence", q["confidence"]], ["interval", q["interval"]],
             ["lower bound", q["lower_bound"]], ["model", record["model"]]]
    model += [["prior", p] for p in record["prior"]]
    model += [["seed", record["seed"]]]
    diag = [["group", "parameter", "R-hat", "bulk ESS", "tail ESS", "passed", "divergences",
             "attempts", "thresholds"]]
    for g in record["groups"]:
        d = g["diagnostics"]
        for p in d["parameters"]:
            diag.append([g["group"], p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"],
                         p["passed"], d["divergences"], d["attempts"],
                         f"R-hat <= {RHAT_MAX}, ESS >= {ESS_MIN:.0f}, no divergences"])
        diag += cross_check.sheet_rows(g["group"], d)
    cautions = [[record["caution"]], ["Standards to defer to:"]] + [
        [s_] for s_ in record["standards"]]
    cautions += [[n] for n in record["notes"] + record["input"]["notes"]]
    cautions += [[f"[{g['group']}] {n}"] for g in record["groups"] for n in g["notes"]]
    prov = [["input file", record["input"]["file"]], ["sheet", record["input"]["sheet"]],
            ["SHA-256", record["input"]["sha256"]], ["header row", record["input"]["header_row"]],
            ["rows read", record["input"]["rows_read"]], ["command", record["command"]]]
    prov += [[f"column {k}", v] for k, v in record["input"]["columns"].items()]
    prov += [[f"version {k}", v] for k, v in record["versions"].items()]
    sheets.update({"Model and prior": model, "Diagnostics": diag, "Cautions": cautions,
                   "Provenance": prov, **prior_sheets(record), **extras_sheets(record)})
    return sheets
