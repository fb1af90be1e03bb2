"""The audit report of a returns forecast (field failures of the units in service), built
from its run record (:mod:`qualbayes.evidence.forecast_record`)."""

from __future__ import annotations

from qualbayes.evidence.document import Figure, Paragraph, Report, Section, Table
from qualbayes.evidence.numbers import count, probability, quantity
from qualbayes.evidence.report_common import (
    caution_section,
    diagnostics_section,
    reproduce_sections,
    run_metadata,
    signoff_section,
)


def _totals(record: dict) -> Table:
    fc, q = record["forecast"], record["question"]
    rows = []
    for g in [*fc["groups"], fc["overall"]]:
        t, s = g["total"], g.get("spares") or {}
        rows.append([g["group"], count(g["units"]), quantity(t["expected"]),
                     count(t["median"]), f"{count(t['interval'][0])} - "
                                         f"{count(t['interval'][1])}",
                     probability(s.get("prob_enough")),
                     probability(s.get("prob_enough_mc_error"))])
    spares = "" if q.get("spares") is None else (
        f" P(enough spares): P(total failures <= {q['spares']}), with its Monte Carlo error.")
    return Table(["group", "units in service", "expected failures", "median",
                  q["interval"], "P(enough spares)", "Monte Carlo error"], rows,
                 caption=f"Failures over the next {q['horizon']} {q['period']}s.{spares}",
                 id="decision-summary")


def _periods(g: dict, q: dict) -> Table:
    rows = [[p["period"], quantity(p["expected"]),
             f"{quantity(p['expected_band'][0])} - {quantity(p['expected_band'][1])}",
             count(p["median"]), f"{count(p['interval'][0])} - {count(p['interval'][1])}",
             count(p["cumulative_median"]),
             f"{count(p['cumulative_interval'][0])} - {count(p['cumulative_interval'][1])}"]
            for p in g["periods"]]
    return Table([q["period"], "expected", "band of the expected count", "median",
                  q["interval"], "cumulative median", "cumulative interval"], rows,
                 caption=f"{g['group']}: {g['units']:,} units in service, ages "
                         f"{g['youngest_age']:,.0f} to {g['oldest_age']:,.0f}.",
                 id=f"periods-{g['group']}")


def _inputs(record: dict) -> Section:
    i = record["input"]
    rows = [["installed base", i["fleet"]], ["sheet", i.get("fleet_sheet")],
            ["SHA-256 of the installed base (full)", i["fleet_sha256"]],
            ["rows read", i["rows_read"]], ["units in service", count(i["units_in_service"])],
            ["life data", i["life"]], ["SHA-256 of the life data (full)", i["life_sha256"]]]
    rows += [[f"column for {k}", v] for k, v in (i.get("fleet_columns") or {}).items()]
    return Section("Inputs", [Table(["item", "value"], rows, id="inputs", style="kv"),
                              *[Paragraph(f"Note: {n}") for n in i.get("notes") or []]])


def _figures(record: dict) -> list:
    from qualbayes.evidence.forecast_record import forecast_figures  # noqa: PLC0415

    return [Figure(f"Expected field failures: {name}", fig,
                   "Expected failures per period (black), the band of that expectation from "
                   "the uncertainty in the life law (dark grey) and the predictive interval "
                   "of the count (light grey).", f"fig-returns-{k}")
            for k, (name, fig) in enumerate(forecast_figures(record))]


def build(record: dict) -> Report:
    q, life, fc = record["question"], record["life"], record["forecast"]
    passed = bool(life["diagnostics"]["passed"])
    alert = None if passed else (
        "CONVERGENCE GATE FAILED: the life posterior did not converge, so no forecast is "
        "given. Do not use the numbers of this run.")
    notes = [Paragraph(f"Note: {n}") for n in (fc or {}).get("notes", []) + life.get("notes", [])]
    summary = [_totals(record), *notes] if fc else [Paragraph(
        "No forecast: the life posterior did not pass the convergence gate.")]
    life_rows = [["source", life["source"]], ["life data", life["file"]],
                 *[[k, quantity(v) if isinstance(v, int | float) else v]
                   for k, v in life["summary"].items()]]
    prior = life["prior"] if isinstance(life["prior"], list) else [life["prior"]]
    sections = [
        Section("Forecast summary", summary),
        Section("The question asked", [Paragraph(q["asked"]), Table(
            ["item", "value"], [["horizon", f"{q['horizon']} {q['period']}s"],
                                ["usage per period", quantity(q["usage"])],
                                ["confidence of the intervals", q["confidence"]],
                                ["spares in stock", "(not given)" if q.get("spares") is None
                                 else q["spares"]]], style="kv")]),
        _inputs(record),
        Section("Model, life posterior and priors", [
            Paragraph(record["model"], "mono"),
            Table(["item", "value"], life_rows, id="life", style="kv"),
            *[Paragraph(f"Life prior: {p}", "mono") for p in prior]]),
        diagnostics_section({"diagnostics": {"life": life["diagnostics"]}}),
        Section("Forecast per period", [_periods(g, q) for g in [*fc["groups"],
                                                                 fc["overall"]]]
                if fc else [Paragraph("No forecast.")]),
        Section("Figures", _figures(record) or [Paragraph("No figures: no forecast.")]),
        caution_section(record),
        *reproduce_sections(record),
        signoff_section(record),
    ]
    return Report("Field-failure forecast (returns)",
                  f"{record['input']['fleet']} - {q['asked']}", sections, alert,
                  run_metadata(record), record["caution"])
