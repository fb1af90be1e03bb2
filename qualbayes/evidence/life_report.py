"""The audit report of a life run, built from its run record."""

from __future__ import annotations

from qualbayes.evidence.document import Figure, Paragraph, Report, Section, Table
from qualbayes.evidence.life_extras_record import extras_sections
from qualbayes.evidence.numbers import probability
from qualbayes.evidence.prior_record import prior_sections
from qualbayes.evidence.report_common import (
    caution_section,
    diagnostics_section,
    inputs_section,
    reproduce_sections,
    run_metadata,
    signoff_section,
)


def _mi(s: dict | None, key: str = "median"):
    return None if not s else s.get(key)


CAPTIONS = {
    "probability": ("Weibull probability plot",
                    "Posterior median line with its credible band; points: median ranks "
                    "(adjusted for suspensions, Bernard's approximation)"),
    "reliability": ("Reliability R(t)", "Posterior median line with its credible band"),
    "fit check": ("Check of fit",
                  "Observed failures per time bin against each distribution's posterior "
                  "predictive median and range (units count only while on test)"),
}


def _figures(record: dict) -> list[Figure]:
    from qualbayes.evidence.life_plots import group_figures  # noqa: PLC0415 - matplotlib

    out = []
    for k, (name, kind, fig) in enumerate(group_figures(record)):
        title, caption = CAPTIONS[kind]
        out.append(Figure(f"{title}: {name}", fig, caption, f"fig-life-{k}"))
    return out


def _rank_figures(record: dict) -> list[Figure]:
    import numpy as np  # noqa: PLC0415

    from qualbayes.evidence.plots import rank_plot  # noqa: PLC0415

    out = []
    for k, (group, d) in enumerate((record.get("posterior_draws") or {}).items()):
        fig = rank_plot({name: np.asarray(v, float) for name, v in d.items()},
                        f"rank plots: {group}")
        out.append(Figure(f"Rank plots of the chains: {group}", fig,
                          "Flat histograms: the chains explore the same distribution.",
                          f"fig-life-ranks-{k}"))
    return out


def build(record: dict) -> Report:
    q = record["question"]
    groups = record["groups"]
    diags = {g["group"]: g["diagnostics"] for g in groups if g.get("diagnostics")}
    failed = [name for name, d in diags.items() if not d.get("passed")]
    alert = None
    if failed:
        alert = ("CONVERGENCE GATE FAILED for " + ", ".join(failed) + ": the sampler did not "
                 "converge, so no decision is given for those groups. Do not use their "
                 "numbers.")
    c = q["confidence"]
    rel = [g["reliability_at_mission"] for g in groups]
    summary = Table(
        ["group", "units", "failures", "suspensions", f"R(mission) {c:.0%} lower bound",
         "P(R >= target)", "decision"],
        [[g["group"], g["units"], g["failures"], g["suspensions"],
          probability(_mi(r, "lower_bound")), probability(g["prob_meets_target"]),
          g["decision"]] for g, r in zip(groups, rel, strict=True)],
        caption=f"meets: P(R(mission) >= target) >= {c:g}; does-not-meet: P(R(mission) < "
                f"target) >= {c:g}; otherwise undecided; not-converged: no decision.",
        id="decision-summary")
    counts = ", ".join(f"{k}: {v}" for k, v in sorted(record["decision_counts"].items()))
    results = Table(
        ["group", "shape", "scale", "B1", "B10", "mean life", "R(mission) median",
         "R interval low", "R interval high"],
        [[g["group"], _mi(g["shape"]), _mi(g["scale"]), _mi(g["b1"]), _mi(g["b10"]),
          _mi(g["mean_life"]), probability(_mi(r)),
          *(map(probability, r["interval"]) if r else ["-", "-"])]
         for g, r in zip(groups, rel, strict=True)],
        caption=f"Posterior medians; R interval: {q['interval']}.", id="results")
    intervals = Table(
        ["group", "quantity", "median", "interval low", "interval high"],
        [[g["group"], name, s["median"], s["interval"][0], s["interval"][1]]
         for g in groups for name in ("shape", "scale", "b1", "b10", "mean_life")
         if (s := g.get(name))])
    record_d = dict(record, diagnostics=diags)
    notes = [Paragraph(f"{g['group']}: {n}") for g in groups for n in g.get("notes") or []]
    sections = [
        Section("Decision summary", [Paragraph(f"Decisions: {counts}."), summary, *notes]),
        Section("The question asked", [Paragraph(q["asked"]), Table(
            ["item", "value"], [["mission time", q["mission"]],
                                ["time units", q["units"] or "(not stated)"],
                                ["target reliability", q["target"]], ["confidence C", c],
                                ["interval", q["interval"]], ["bound", q["lower_bound"]]],
            style="kv")]),
        inputs_section(record),
        Section("Model and priors", [Paragraph(record["model"], "mono"),
                                     Paragraph("Prior: " + (
                                         "; ".join(record["prior"])
                                         if isinstance(record["prior"], list)
                                         else str(record["prior"])), "mono")]),
        *prior_sections(record),
        diagnostics_section(record_d),
        Section("Results", [results, intervals]),
        *extras_sections(record),
        Section("Figures", (_figures(record) + _rank_figures(record)) or [
            Paragraph("No figures: no group has a result.")]),
        caution_section(record),
        *reproduce_sections(record),
        signoff_section(record),
    ]
    return Report("Reliability evidence (Weibull life)", f"{record['input']['file']} - "
                  f"{q['asked']}", sections, alert, run_metadata(record), record["caution"])
