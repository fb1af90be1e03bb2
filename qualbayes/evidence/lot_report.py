"""The audit report of a lots run, built from its run record."""

from __future__ import annotations

from qualbayes.evidence.document import Figure, Paragraph, Report, Section, Table
from qualbayes.evidence.numbers import probability, rate
from qualbayes.evidence.report_common import (
    caution_section,
    diagnostics_section,
    inputs_section,
    reproduce_sections,
    run_metadata,
    signoff_section,
)


def has_dates(record: dict) -> bool:
    return any(lot.get("date") for lot in record["lots"])


def draws_line(lots: list[dict], shown: int = 20) -> str | None:
    """The number of draws behind each lot's P, in one sentence: the common number and the
    lots summed over more (a close call settled in a later round); None when the record
    has no such numbers (closed form, quadrature).

    >>> lots = [{"lot": "A", "prob_within_spec_draws": 4000},
    ...         {"lot": "B", "prob_within_spec_draws": 12000}]
    >>> print(draws_line(lots))  # doctest: +NORMALIZE_WHITESPACE
    Draws behind each P (all chains): 4,000, except B (12,000): a close call, settled at a
    later round or at the cap.
    """
    have = [(lot["lot"], lot["prob_within_spec_draws"]) for lot in lots
            if lot.get("prob_within_spec_draws") is not None]
    if not have:
        return None
    base = min(d for _, d in have)
    more = [f"{name} ({d:,})" for name, d in have if d > base]
    if not more:
        return f"Draws behind each P (all chains): {base:,} for every lot."
    listed = ", ".join(more[:shown]) + (f" and {len(more) - shown} more" if len(more) > shown
                                        else "")
    return (f"Draws behind each P (all chains): {base:,}, except {listed}: a close call, "
            "settled at a later round or at the cap.")


def build(record: dict) -> Report:
    from qualbayes.evidence import lot_plots  # noqa: PLC0415 - matplotlib

    q = record["question"]
    failed = [p for p, d in record["diagnostics"].items() if not d["passed"]]
    alert = None
    if failed:
        alert = ("CONVERGENCE GATE FAILED for " + ", ".join(failed) + ": the sampler did not "
                 "converge, so no decision is given for those lots. Do not use any number in "
                 "this report for them; rerun with more data or seek a statistician's review.")
    c = q["confidence"]
    unit = q.get("rate_unit", "%")

    def r_(v):
        return rate(v, unit)

    decisions = Table(
        ["lot", "group", "inspected", "defectives", "decided about", "P(within spec)",
         "MCSE", "decision", "clean units to accept", "own-data decision", "check"],
        [[r["lot"], r.get("group") or r["part"], r["inspected"], r["defectives"],
          r.get("decision_basis"), probability(r["prob_within_spec"]),
          probability(r.get("prob_within_spec_mcse")),
          r["decision"] + (" (too close to call)" if r.get("too_close") else ""),
          r["extra_clean_units_to_accept"],
          r.get("own_data_decision") if r.get("own_data_decision") != r["decision"] else "",
          "OUTLIER" if r.get("outlier") else ""] for r in record["lots"]],
        caption=f"accept: P(within spec) >= {c:g}; reject: P(beyond spec) >= {c:g} and at "
                "least one defective; otherwise undecided; not-converged: no decision "
                "(sampler gate failed). Decided about the lot (its own fraction defective) "
                "where its size is given, else the process rate. Own-data decision: the "
                "uniform prior on the lot's own data, shown where it differs.",
        id="decision-summary")
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(record["decision_counts"].items()))
    drawn = draws_line(record["lots"])
    summary = Section("Decision summary", [Paragraph(f"Decisions: {counts}."),
                                           *([Paragraph(drawn)] if drawn else []),
                                           *[Paragraph(n) for n in record["notes"]
                                             if "OUTLIER" in n or "does not look like" in n
                                             or "conflict" in n], decisions])
    question = Section("The question asked", [
        Paragraph(q["asked"]),
        Table(["item", "value"], [["defect-rate limit (spec)", r_(q["spec"])],
                                  ["confidence C", c], ["interval", q["interval"]],
                                  ["bound", q["upper_bound"]]], style="kv")])
    model = Section("Model and prior", [
        Paragraph(record["model"], "mono"), Paragraph(f"Prior: {record['prior']}", "mono"),
        Paragraph("Pooled by: " + ", ".join(record.get("group_by") or []) + " (one history per "
                  "value; history prior only). Decided about: " + "; ".join(
                      f"{k} = {v}" for k, v in q.get("bases", {}).items()), "mono"),
        Paragraph("Finite lots: defectives among the N - n units not inspected ~ "
                  "BetaBinomial(N - n, posterior Beta parameters), mixed over posterior draws "
                  "for the history prior.", "mono")])
    results = Section("Results", [Table(
        ["lot", "part", "date", "n", "x", "mean", "interval low", "interval high",
         "upper bound", "P(p<=spec)", "decision", "N - n", "D median", "D upper"],
        [[r["lot"], r["part"], r["date"], r["inspected"], r["defectives"],
          r_(r["posterior_mean"]), r_(r["interval"][0]), r_(r["interval"][1]),
          r_(r["upper_bound"]), probability(r["prob_within_spec"]), r["decision"],
          r["remaining_units"],
          r["remaining_defectives"]["median"], r["remaining_defectives"]["upper_bound"]]
         for r in record["lots"]],
        caption="D: defectives among the units not inspected (median and upper bound at C).",
        id="results")])
    if record["next_lot"]:
        rows = [[p, r_(nl.get("mean")), r_((nl.get("interval") or [None, None])[0]),
                 r_((nl.get("interval") or [None, None])[1]), r_(nl.get("upper_bound")),
                 probability(nl.get("prob_within_spec"))]
                for p, nl in record["next_lot"].items()]
        results.blocks.append(Table(["part", "next lot: mean", "interval low",
                                     "interval high", "upper bound", "P(p<=spec)"], rows,
                                    caption="Predictive for the next lot of each part."))
    figures = Section("Figures", [])
    if any(r["prob_within_spec"] is not None for r in record["lots"]):
        figures.blocks += [
            Figure("Posterior density of each lot's defect rate",
                   lot_plots.densities_figure(record),
                   "The lots with the least evidence of meeting the limit first (at most "
                   f"{lot_plots.MAX_PANELS}). Dashed: the limit; hatched: the probability "
                   "mass beyond it.", "fig-densities"),
            Figure("Lot-by-lot intervals", lot_plots.intervals_figure(record),
                   ("Lots in date order" if has_dates(record) else
                    "Lots in the order of the file (no date column was found)")
                   + " with their credible intervals and means.", "fig-intervals"),
            Figure("Prior and posterior", lot_plots.prior_posterior_figure(record),
                   "Each curve drawn whole on a logarithmic rate axis; the vertical line "
                   "is the limit.", "fig-prior-posterior")]
    for k, (part, fig) in enumerate(lot_plots.rank_figures(record)):
        figures.blocks.append(Figure(f"Rank plots of the chains: {part}", fig,
                                     "Flat histograms: the chains explore the same "
                                     "distribution.", f"fig-ranks-{k}"))
    if not figures.blocks:
        figures.blocks.append(Paragraph("No figures: no lot has a result."))
    from qualbayes.evidence.prior_record import prior_sections  # noqa: PLC0415

    sections = [summary, question, inputs_section(record), model, *prior_sections(record),
                diagnostics_section(record), results, figures, caution_section(record),
                *reproduce_sections(record), signoff_section(record)]
    return Report("Lot acceptance evidence",
                  f"{record['input']['file']} - {q['asked']}", sections, alert,
                  run_metadata(record), record["caution"])
