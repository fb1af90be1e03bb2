"""The audit report of an at-use run (accelerated life at the use condition), built from its
run record (:mod:`qualbayes.evidence.accelerated_record`)."""

from __future__ import annotations

from qualbayes.evidence.accelerated_record import show_stress
from qualbayes.evidence.document import Figure, Paragraph, Report, Section, Table
from qualbayes.evidence.numbers import probability, quantity
from qualbayes.evidence.report_common import (
    caution_section,
    diagnostics_section,
    inputs_section,
    reproduce_sections,
    run_metadata,
    signoff_section,
)

RESULT_KEYS = ("reliability_at_mission", "b10_at_use", "b1_at_use",
               "characteristic_life_at_use", "median_life_at_use", "shape", "sigma")


def _level(values, stresses) -> str:
    """A tested level in the engineer's units: 'Temp (C) 150 C, Volts 24'."""
    return ", ".join(f"{s['column']} {show_stress(v, s['relation'], s['temperature_unit'])}"
                     for v, s in zip(values, stresses, strict=True))


def _levels_table(record: dict) -> Table:
    rows = []
    for lv in record["result"]["levels"]:
        af = lv["acceleration_factor"]
        rows.append([_level(lv["stress"], record["stresses"]), lv["units"], lv["failures"],
                     quantity(af["median"]),
                     quantity(af["interval"][0]), quantity(af["interval"][1])])
    return Table(["tested level", "units", "failures", "acceleration factor (median)",
                  "interval low", "interval high"], rows,
                 caption="AF = exp(mu(use) - mu(level)): the factor by which life at the "
                         "tested level is shorter than at use (the same for every quantile, "
                         "the shape being common).", id="levels")


def _results(record: dict) -> list:
    r, q = record["result"], record["question"]
    rows = [[key.replace("_", " "), quantity(r[key]["median"]),
             quantity(r[key]["interval"][0]), quantity(r[key]["interval"][1])]
            for key in RESULT_KEYS if key in r]
    rows += [[f"{c['name']} ({c['stress']})", quantity(c["median"]),
              quantity(c["interval"][0]), quantity(c["interval"][1])]
             for c in r["coefficients"]]
    blocks: list = [Table(["quantity", "median", "interval low", "interval high"], rows,
                          caption=f"Posterior medians; interval: {q['interval']}.",
                          id="results"), _levels_table(record)]
    check = r.get("shape_check") or {}
    if check.get("done"):
        blocks.append(Table(
            ["tested level", "shape median", "interval low", "interval high"],
            [[_level(lv["stress"], record["stresses"]), quantity(lv["shape_median"]),
              quantity(lv["shape_interval"][0]),
              quantity(lv["shape_interval"][1])] for lv in check["levels"]],
            caption="Shape fitted level by level: the check of the common-shape assumption.",
            id="shape-check"))
    return blocks


def build(record: dict) -> Report:
    q, r = record["question"], record["result"]
    passed = bool(r["diagnostics"]["passed"])
    alert = None if passed else (
        "CONVERGENCE GATE FAILED: the sampler did not converge, so no answer and no decision "
        "are given. Do not use the numbers of this run.")
    c = q["confidence"]
    rel = r.get("reliability_at_mission") or {}
    summary = Table(
        ["use condition", "units", "failures", f"R(mission) {c:.0%} lower bound",
         "P(R >= target)", "Monte Carlo error", "decision"],
        [[q["use"], r["units"], r["failures"], probability(rel.get("lower_bound")),
          probability(r["prob_meets_target"]), probability(r["prob_meets_target_mc_error"]),
          r["decision"]]],
        caption=f"meets: P(R(mission) >= target) >= {c:g}; does-not-meet: P(R(mission) < "
                f"target) >= {c:g}; too-close-to-call: within 3 Monte Carlo standard errors "
                "of a threshold; otherwise undecided; not-converged: no decision.",
        id="decision-summary")
    notes = [Paragraph(f"Note: {n}") for n in r["notes"]]
    figures: list = [Paragraph("No figure: the convergence gate failed.")]
    if passed:
        from qualbayes.evidence.accelerated_plots import life_stress_figure  # noqa: PLC0415

        figures = [Figure("Life against stress", life_stress_figure(record),
                          "Posterior median lines with credible bands of the characteristic "
                          "(or median) life and the B10 life; points: the units tested; "
                          "dotted line: the use stress; diamond: B10 at use.",
                          "fig-at-use-0")]
    stresses = Table(["stress column", "relation", "temperature unit", "use value"],
                     [[s["column"], s["relation"], s["temperature_unit"] or "-",
                       s["use_as_written"]] for s in record["stresses"]], id="stresses")
    sections = [
        Section("Decision summary", [summary, *notes]),
        Section("The question asked", [Paragraph(q["asked"]), Table(
            ["item", "value"], [["mission time at use", q["mission"]],
                                ["time units", q["units"] or "(not stated)"],
                                ["target reliability", q["target"]], ["confidence C", c],
                                ["life distribution", q["distribution"]],
                                ["interval", q["interval"]], ["bound", q["lower_bound"]]],
            style="kv"), stresses]),
        inputs_section(record),
        Section("Model and priors", [Paragraph(record["model"], "mono"),
                                     *[Paragraph(f"Prior: {p}", "mono")
                                       for p in record["prior"]],
                                     Paragraph(f"Seed: {record['seed']}")]),
        diagnostics_section({"diagnostics": {"at use": r["diagnostics"]}}),
        Section("Results", _results(record) if passed else [
            Paragraph("No results: the convergence gate failed.")]),
        Section("Figures", figures),
        caution_section(record),
        *reproduce_sections(record),
        signoff_section(record),
    ]
    return Report("Reliability evidence (accelerated life at use)",
                  f"{record['input']['file']} - {q['asked']}", sections, alert,
                  run_metadata(record), record["caution"])
