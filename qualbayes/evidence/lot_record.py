"""The run record of a lots question, and its renderings (terminal text, workbook sheets).

The record is a plain JSON-ready dict; everything shown to people is rendered from it, so a
report rebuilt from a saved record shows the same numbers.
"""

from __future__ import annotations

import math

import pandas as pd

from qualbayes import cross_check
from qualbayes.caution import CAUTION, STANDARDS
from qualbayes.data.lot_table import LotTable
from qualbayes.evidence.explain import HISTORY_NOTE, NEXT_STEP, gate_line, lots_columns
from qualbayes.evidence.jsonout import PlainRows, plain, without_draws  # noqa: F401 - re-export
from qualbayes.evidence.numbers import count, plural, probability, rate
from qualbayes.evidence.prior_record import prior_lines, prior_sheets, sensitivity_lines
from qualbayes.evidence.terminal import table as text_table
from qualbayes.inference.gate import ESS_MIN, RHAT_MAX
from qualbayes.lot_question import LotAssessment

BASIS_WORDS = {
    "lot": "the lot itself: its fraction defective (x + D)/N, D the defectives among the N - n "
           "units not inspected (beta-binomial); a fully inspected lot is decided exactly",
    "process": "the process: the defect rate p of the supplier's process for this lot",
}
MCSE_WORDS = ("P carries its Monte Carlo standard error (MCSE); a side of C within 3 MCSE is "
              "too close to call and gives undecided (more draws are made while the cap of "
              "draws could still settle it)")


QUADRATURE_WORDS = ("P is computed by quadrature (no sampling, no seed) and carries its stated "
                    "quadrature error; a side of C within that error is too close to call")


def engine_line(engine: dict) -> str:
    """Which engine answered, and its accuracy, in one line."""
    if engine.get("name") != "quadrature":
        return f"engine: {engine.get('name')} ({engine.get('accuracy', '')})"
    return (f"engine: quadrature, {engine['method']}; largest error of any P "
            f"{engine['max_error']:.2g}; run in {engine['processes']}")


def _plain_column(series: pd.Series) -> list:
    """A column as plain Python values (None for a missing or non-finite number): what
    :func:`qualbayes.evidence.jsonout.plain` makes of each cell, a column at a time."""
    if pd.api.types.is_float_dtype(series.dtype):
        return [v if math.isfinite(v) else None for v in series.tolist()]
    if pd.api.types.is_integer_dtype(series.dtype) or pd.api.types.is_bool_dtype(series.dtype):
        return series.to_numpy(dtype=object, na_value=None).tolist()
    missing = series.isna().tolist()  # None, NaN, NA, NaT; never a string
    return [None if m else plain(v) for v, m in zip(series.tolist(), missing, strict=True)]


def _flag(values: list) -> list:
    return [None if v is None else bool(v) for v in values]


def _lot_rows(frame: pd.DataFrame) -> PlainRows:
    """The record's ``lots``: one dict per lot, built column by column (the same values as
    building each row cell by cell with :func:`plain`, tests/test_lot_batch_io.py), as
    :class:`PlainRows` so that sealing the record does not walk them again."""
    col = {c: _plain_column(frame[c]) for c in frame.columns}
    col["too_close"] = _flag(col["too_close"])
    col["outlier"] = _flag(col["outlier"])
    extra = tuple(c for c in ("prob_within_spec_error", "prob_within_spec_draws") if c in col)
    keys = ("lot", "part", "supplier", "date", "row", "lot_size", "inspected", "defectives",
            "posterior_mean")
    tail = ("upper_bound", "prob_within_spec", "prob_within_spec_mcse")
    rest = ("decision_basis", "decision", "too_close", "group", "outlier", "outlier_p",
            "own_data_prob", "own_data_decision", "extra_clean_units_to_accept",
            "remaining_units")
    col["interval"] = [[lo, hi] for lo, hi in zip(col["interval_low"], col["interval_high"],
                                                  strict=True)]
    col["remaining_defectives"] = [
        {"median": m, "upper_bound": u} for m, u in zip(
            col["remaining_defectives_median"], col["remaining_defectives_upper"], strict=True)]
    order = (*keys, "interval", *tail, *extra, *rest, "remaining_defectives")
    return PlainRows(dict(zip(order, values, strict=True))
                     for values in zip(*(col[k] for k in order), strict=True))


def lots_record(result: LotAssessment, data: LotTable, sha256: str, command: str,
                versions: dict) -> dict:
    lots = _lot_rows(result.lots)
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
        "engine": result.engine or {"name": "nuts" if result.draws else "closed form"},
        "posterior_draws": {k: {"mu": v["mu"], "kappa": v["kappa"]}
                            for k, v in result.draws.items()},
        "diagnostics": result.diagnostics, "next_lot": result.next_lot,
        "lots": [], "notes": result.notes,
        "decision_counts": result.lots["decision"].value_counts().to_dict(),
        "caution": CAUTION, "standards": list(STANDARDS),
        "command": command, "versions": versions,
    }) | {"lots": lots}  # plain already (PlainRows, built column by column); same key order


#: A terminal shows at most this many lot rows; the rest are counted and left to the files.
TERMINAL_ROWS = 2000


def lots_text(record: dict) -> str:
    q = record["question"]
    unit = q.get("rate_unit", "%")

    def pct(v):
        return None if v is None else rate(v, unit)

    head = [
        f"Lot acceptance: {q['asked']}",
        f"input: {record['input']['file']}"
        + (f" [sheet {record['input']['sheet']}]" if record["input"]["sheet"] else "")
        + f", {plural(record['input']['rows_read'], 'lot')}, sha256 "
          f"{record['input']['sha256'][:16]}... (in full in the report)",
        f"prior: {record['prior']}",
    ]
    if record.get("posterior_draws"):
        head.append(HISTORY_NOTE)
    engine = record.get("engine") or {}
    quadrature = engine.get("name") == "quadrature"
    if record["diagnostics"] or quadrature:
        head.append(f"pooled by: {', '.join(record['group_by'])} (one history per value)")
    if quadrature:
        head.append(engine_line(engine))
    head.append("decided about: " + "; ".join(f"{k} = {v}" for k, v in q["bases"].items()
                                              if k in {lot["decision_basis"]
                                                       for lot in record["lots"]}))
    for part, d in record["diagnostics"].items():
        head.append(gate_line(f"part {part}", d, "no decision for these lots"))
        for reason in d["reasons"]:
            head.append(f"  - {reason}")
    c = q["confidence"]
    sampled = bool(record["diagnostics"]) or quadrature
    finite = any(lot.get("remaining_units") is not None for lot in record["lots"])
    headers = ["lot", "group" if sampled else "part", "n", "x", "N", "basis",
               f"rate {c:.0%} upper", "P(within)",
               *([("error" if quadrature else "MCSE")] if sampled else []),
               "decision", "clean units to accept", "own data", "check"]
    if finite:
        headers += ["units left", "defectives left"]
    rows = []
    shown = record["lots"][:TERMINAL_ROWS]
    for lot in shown:
        p = lot["prob_within_spec"]
        own = lot["own_data_decision"]
        row = [lot["lot"], lot["group"] if sampled else lot["part"], lot["inspected"],
               lot["defectives"], lot["lot_size"], lot["decision_basis"],
               pct(lot["upper_bound"]), None if p is None else probability(p),
               *([None if p is None else probability(
                   lot.get("prob_within_spec_error") if quadrature
                   else lot["prob_within_spec_mcse"])] if sampled else []),
               lot["decision"] + (" (too close)" if lot["too_close"] else ""),
               lot["extra_clean_units_to_accept"],
               own if own is not None and own != lot["decision"] else "",
               "OUTLIER" if lot["outlier"] else ""]
        if finite:
            d = lot["remaining_defectives"]
            row += [lot["remaining_units"], None if d["median"] is None else
                    f"{count(d['median'])} (up to {count(d['upper_bound'])})"]
        rows.append(row)
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(record["decision_counts"].items()))
    tail = [f"decisions: {counts}"]
    if sampled:
        tail.append(QUADRATURE_WORDS if quadrature else MCSE_WORDS)
    for part, nl in record["next_lot"].items():
        if "prob_within_spec" in nl:
            tail.append(f"next lot of {part}: predicted defect rate median {pct(nl['median'])}"
                        f", {c:.0%} upper {pct(nl['upper_bound'])}, P(p<=spec) "
                        f"{probability(nl['prob_within_spec'])} ("
                        + (f"quadrature error {probability(nl['prob_within_spec_error'])}"
                           if quadrature else
                           f"MCSE {probability(nl['prob_within_spec_mcse'])}")
                        + f"); mean {pct(nl['mean'])}"
                        + (f" ({nl['mean_note']})" if nl["mean"] > nl["upper_bound"] else ""))
    tail += record["notes"] + record["input"]["notes"]
    tail += [NEXT_STEP, CAUTION]
    head += prior_lines(record)
    hidden = len(record["lots"]) - len(shown)
    more = ([f"... and {count(hidden)} more lots not shown here (the decision counts below cover "
             "every lot; every lot is in the workbook of --out, the report and --json)"]
            if hidden else [])
    table = [text_table(headers, rows, "llrrrlrr" + ("r" if sampled else "") + "lrll"
                        + "rr" * finite), *more,
             lots_columns(finite, c), *sensitivity_lines(record)]
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
        "P MCSE": r["prob_within_spec_mcse"],
        "P quadrature error": r.get("prob_within_spec_error"),
        "P draws": r.get("prob_within_spec_draws"), "decision": r["decision"],
        "too close to call": r["too_close"], "group": r["group"],
        "own-data decision (uniform prior)": r["own_data_decision"],
        "own-data P": r["own_data_prob"], "outlier / prior conflict": r["outlier"],
        "outlier p-value": r["outlier_p"],
        "clean units to accept": r["extra_clean_units_to_accept"],
        "units not inspected": r["remaining_units"],
        "defectives not inspected, median": r["remaining_defectives"]["median"],
        "defectives not inspected, upper bound": r["remaining_defectives"]["upper_bound"],
    } for r in record["lots"]])
    decisions.attrs.update(rate_unit=q.get("rate_unit", "%"), formats=dict.fromkeys(
        ["posterior mean", "interval low", "interval high", "upper bound"], "rate"))
    inputs = pd.DataFrame([{
        "spreadsheet row": r["row"], "lot": r["lot"], "part": r["part"],
        "supplier": r["supplier"], "date": r["date"], "lot size": r["lot_size"],
        "inspected": r["inspected"], "defectives": r["defectives"],
        "source": r.get("source", record["input"]["file"])} for r in record["lots"]])
    model = [["question", q["asked"]], ["spec limit", q["spec"]],
             ["confidence", q["confidence"]], ["interval", q["interval"]],
             ["upper bound", q["upper_bound"]], ["model", record["model"]],
             ["prior", record["prior"]], ["seed", record["seed"]],
             ["pooled by", ", ".join(record.get("group_by") or [])],
             ["engine", engine_line(record.get("engine") or {})],
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
    engine = record.get("engine") or {}
    if engine.get("name") == "quadrature":
        for part, acc in engine.get("groups", {}).items():
            diag.append([part, "quadrature: no sampler, no convergence to check", None, None,
                         None, True, None, None,
                         f"largest error of P {acc['max_error']:.2g}; {acc['method']}"])
    elif not record["diagnostics"]:
        diag.append(["(all)", "closed form: no sampler, no convergence to check", None, None,
                     None, True, None, None, None])
    for part, d in record["diagnostics"].items():
        for p in d["parameters"]:
            diag.append([part, p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"], p["passed"],
                         d["divergences"], d["attempts"],
                         f"R-hat <= {RHAT_MAX}, ESS >= {ESS_MIN:.0f}, no divergences"])
        diag += cross_check.sheet_rows(part, d)
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
