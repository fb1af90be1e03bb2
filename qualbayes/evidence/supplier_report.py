"""The audit report of a supplier scorecard, built from its run record alone.

Every number comes from the record (rates in the unit the limit was written in, through
:mod:`qualbayes.evidence.numbers`); every probability is shown with its Monte Carlo standard
error; a failed convergence gate is stated above everything and leaves every call
``not-converged`` with no rate or probability.
"""

from __future__ import annotations

from qualbayes.evidence.document import Figure, Paragraph, Report, Section, Table
from qualbayes.evidence.numbers import count, plural, probability, quantity, rate
from qualbayes.evidence.report_common import (
    caution_section,
    reproduce_sections,
    run_metadata,
    signoff_section,
)
from qualbayes.evidence.suppliers_record import call_words, gate_words, rate_unit
from qualbayes.inference.gate import ESS_MIN, RHAT_MAX

#: parameters listed in the report (the failing ones and those nearest the thresholds);
#: the workbook's Diagnostics sheet lists every one
MAX_PARAMETER_ROWS = 30

DEFINITIONS = (
    "r_s      = (1/T_s) sum_t mu_st                                 the supplier's rate",
    "worse_s  = 1[ mu_s,last > (1/(T_s - 1)) sum_(t < last) mu_st ]  latest period worse",
    "worst_s  = 1[ r_s = max_s' r_s' ]                               worst of all",
    "P(.)     = mean of the indicator over the posterior draws; MCSE from the split-chain "
    "ESS (Vehtari et al. 2021)",
)


def _with_mcse(p, mcse) -> str:
    """``0.9731 ± 0.0021``: a probability and its Monte Carlo standard error."""
    return "-" if p is None else f"{probability(p)} ± {probability(mcse)}"


def _verdict(label) -> str:
    return "-" if label is None else str(label)


def summary_section(record: dict) -> Section:
    q = record["question"]
    c, unit = q["confidence"], rate_unit(record)
    period = bool(q["period"])
    headers = ["rank", "supplier", "median rate", f"{c:.0%} upper bound",
               "P(rate > limit) ± MCSE", "limit call", "P(worst) ± MCSE"]
    if period:
        headers += ["latest period", "P(latest worse) ± MCSE", "latest call"]
    rows = []
    for s in record["suppliers"]:
        row = [s["rank"], s["supplier"], rate(s["rate_median"], unit),
               rate(s["rate_upper"], unit),
               _with_mcse(s["prob_above"], s["prob_above_mcse"]), _verdict(s["limit_call"]),
               _with_mcse(s["prob_worst"], s["prob_worst_mcse"])]
        if period:
            row += [s["latest_period"] or "-",
                    _with_mcse(s["prob_latest_worse"], s["prob_latest_worse_mcse"]),
                    _verdict(s["latest_call"])]
        rows.append(row)
    calls = {}
    for s in record["suppliers"]:
        calls[s["limit_call"]] = calls.get(s["limit_call"], 0) + 1
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(calls.items()))
    table = Table(headers, rows, caption=call_words(c) + " Suppliers ranked by median rate, "
                  "highest first; their counts are under Results.", id="decision-summary")
    blocks = [Paragraph(f"Limit calls: {counts}."), table]
    blocks += [Paragraph(n) for n in record["notes"]]
    return Section("Decision summary", blocks)


def question_section(record: dict) -> Section:
    q = record["question"]
    unit = rate_unit(record)
    rows = [["defect-rate limit", rate(q["spec"], unit)], ["confidence C", q["confidence"]],
            ["periods", q["period"] or "none (one rate per supplier)"],
            ["rate", q["rate"]], ["bound", q["upper_bound"]], ["interval", q["interval"]]]
    return Section("The question asked", [
        Paragraph(q["asked"]), Table(["item", "value"], rows, style="kv")])


def inputs_section(record: dict) -> Section:
    """Each file with its full SHA-256, the columns read, the rows left out."""
    i = record["input"]
    rows = [["input", i["file"]], ["sheet", i.get("sheet")], ["SHA-256 (full)", i["sha256"]],
            ["header row", i.get("header_row")], ["lots read", i.get("rows_read")]]
    rows += [[f"column for {k}", v] for k, v in (i.get("columns") or {}).items()]
    if i.get("columns_not_used"):
        rows.append(["columns not used", ", ".join(map(str, i["columns_not_used"]))])
    blocks = [Table(["item", "value"], rows, id="inputs", style="kv")]
    sources = i.get("sources") or []
    if len(sources) > 1:
        blocks.append(Paragraph("Several files were read and stacked; the SHA-256 above is "
                                "that of the list of the files' digests. Each file:"))
        rows = []
        for k, src in enumerate(sources, start=1):
            rows += [[f"file {k}", src.get("file")], [f"file {k}: SHA-256 (full)",
                                                      src.get("sha256")],
                     [f"file {k}: sheet, header row", f"{src.get('sheet') or '-'}, row "
                      f"{src.get('header_row')}"],
                     [f"file {k}: lots read, rows left out",
                      f"{src.get('lots', src.get('units'))}, {src.get('skipped', 0)}"]]
        blocks.append(Table(["item", "value"], rows, id="input-files", style="kv"))
    skipped = i.get("rows_skipped") or []
    if skipped:
        blocks.append(Table(
            ["file", "row", "lot", "why left out"],
            [[s.get("source", i["file"]), s.get("row"), s.get("lot"), s.get("reason")]
             for s in skipped], caption=f"{plural(len(skipped), 'row')} left out: no result "
            "yet (--strict refuses them instead).", id="rows-left-out"))
    else:
        blocks.append(Paragraph("No row was left out."))
    blocks += [Paragraph(f"Note: {n}") for n in i.get("notes") or []]
    return Section("Inputs", blocks)


def model_section(record: dict) -> Section:
    lines = "\n".join(part.strip() for part in str(record["model"]).split(";"))
    priors = "\n".join(f"{k}: {v}" for k, v in record["prior"].items())
    blocks = [Paragraph(lines, "mono"), Paragraph("Priors:\n" + priors, "mono"),
              Paragraph("Quantities, from the draws of every supplier-period rate mu_st:"),
              Paragraph("\n".join(DEFINITIONS), "mono")]
    hyper = record.get("hyper_medians") or {}
    if hyper:
        blocks.append(Table(["parameter", "posterior median"],
                            [[k, float(v)] for k, v in hyper.items()], style="kv"))
    return Section("Model and prior", blocks)


def diagnostics_section(record: dict) -> Section:
    d = record["diagnostics"]
    settings = d.get("settings") or {}
    blocks = [Paragraph(gate_words(d), "" if d["passed"] else "caution")]
    blocks += [Paragraph(f"Reason: {r}") for r in (d.get("reasons") or [])[:10]]
    if settings:
        blocks.append(Table(["setting", "value"], [[k.replace("_", " "), str(v)]
                                                   for k, v in settings.items()],
                            caption="Sampler settings of the final attempt.", id="sampler",
                            style="kv"))
    params = list(d.get("parameters") or [])
    params.sort(key=lambda p: (bool(p["passed"]), _ess(p)))
    shown = params[:MAX_PARAMETER_ROWS]
    rows = [[p["name"], p["rhat"], p["ess_bulk"], p["ess_tail"],
             "pass" if p["passed"] else "FAIL"] for p in shown]
    more = (f" {len(params) - len(shown)} more, all passing, in the workbook's Diagnostics "
            "sheet." if len(params) > len(shown) else "")
    blocks.append(Table(["parameter", "R-hat", "bulk ESS", "tail ESS", "gate"], rows,
                        caption=f"{plural(len(params), 'gated parameter')}; failing ones and "
                        f"those with the smallest ESS first. Thresholds: R-hat <= {RHAT_MAX}, "
                        f"ESS >= {ESS_MIN:.0f}.{more}", id="diagnostics"))
    return Section("Sampler and diagnostics", blocks)


def _ess(p: dict) -> float:
    values = [v for v in (p.get("ess_bulk"), p.get("ess_tail")) if isinstance(v, int | float)]
    return min(values) if values else 0.0


def results_section(record: dict) -> Section:
    q = record["question"]
    c, unit = q["confidence"], rate_unit(record)
    rows = [[s["rank"], s["supplier"], s["periods"], s["lots"], s["inspected"],
             s["defectives"], rate(s["rate_median"], unit), rate(s.get("rate_mean"), unit),
             rate(s["rate_upper"], unit), quantity(s.get("period_spread_median"))]
            for s in record["suppliers"]]
    suppliers = Table(["rank", "supplier", "periods", "lots", "n", "x", "median",
                       "mean", f"{c:.0%} upper", "period spread (logit, median)"], rows,
                      caption="Per supplier. Period spread: posterior median of sigma_w,s.",
                      id="results")
    cells = [[p["supplier"], p["period"], p["lots"], p["inspected"], p["defectives"],
              rate(p["defectives"] / p["inspected"], unit) if p["inspected"] else "-",
              rate(p["rate_median"], unit), rate(p["interval_low"], unit),
              rate(p["interval_high"], unit), rate(p["rate_upper"], unit),
              _with_mcse(p["prob_above"], p["prob_above_mcse"])]
             for p in record["periods"]]
    periods = Table(["supplier", "period", "lots", "n", "x", "x/n", "median", "interval low",
                     "interval high", f"{c:.0%} upper", "P(rate > limit) ± MCSE"], cells,
                    caption=f"Per supplier and {q['period'] or 'supplier'}: {q['interval']} "
                    "and one-sided upper bound of the mean lot defect rate.", id="periods")
    return Section("Results", [suppliers, periods])


def figures_section(record: dict) -> Section:
    from qualbayes.evidence.supplier_plots import MAX_PANELS, rates_figure  # noqa: PLC0415

    q = record["question"]
    n = len(record["suppliers"])
    shown = min(n, MAX_PANELS if q["period"] else 40)
    caption = (f"Median and {q['interval']} of each supplier's rate"
               + (f" per {q['period']}" if q["period"] else "")
               + f"; dashed: the limit. The {shown} highest-ranked of {count(n)} suppliers.")
    if not record["diagnostics"]["passed"]:
        caption = "Observed x/n only: the convergence gate failed, so no posterior is drawn."
    return Section("Figures", [Figure("Defect rates with their intervals",
                                      rates_figure(record), caption, "fig-supplier-rates")])


def build(record: dict) -> Report:
    q = record["question"]
    alert = None
    if not record["diagnostics"]["passed"]:
        alert = ("CONVERGENCE GATE FAILED: the sampler did not converge, so no rate, "
                 "probability or call is given for any supplier. Do not use the numbers of "
                 "this run; rerun with more data or seek a statistician's review.")
    sections = [summary_section(record), question_section(record), inputs_section(record),
                model_section(record), diagnostics_section(record), results_section(record),
                figures_section(record), caution_section(record),
                *reproduce_sections(record), signoff_section(record)]
    period = f", by {q['period']}" if q["period"] else ""
    return Report("Supplier scorecard evidence",
                  f"{record['input']['file']} - limit {rate(q['spec'], rate_unit(record))}"
                  f"{period}", sections, alert, run_metadata(record), record["caution"])
