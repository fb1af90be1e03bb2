"""Terminal lines, workbook sheets and report sections for the life questions after "does it
meet?": group comparisons, remaining test time, other distributions, checks of fit,
extrapolation and the data-alone answer. Built from the run record alone."""

from __future__ import annotations


def _iv(s: dict | None, fmt: str = "{:.4g}") -> str:
    if not s:
        return "-"
    lo, hi = s["interval"]
    return f"{fmt.format(s['median'])} ({fmt.format(lo)} - {fmt.format(hi)})"


def _p(v, mc) -> str:
    return "-" if v is None else f"{v:.4f} +- {mc:.4f}"


def comparison_rows(record: dict) -> list[list]:
    return [[c["a"], c["b"], _p(c["prob_a_more_reliable"], c.get("prob_a_more_reliable_mcse")),
             _iv(c.get("b10_ratio")), _iv(c.get("shape_difference"), "{:+.3g}"), c["verdict"]]
            for c in record.get("comparisons") or []]


COMPARISON_HEAD = ["A", "B", "P(R_A > R_B) +- MCSE", "B10_A / B10_B", "shape A - B",
                   "verdict"]
MODEL_HEAD = ["group", "distribution", "R(mission) median (interval)", "P(R>=target) +- MCSE",
              "decision", "elpd (LOO)", "SE", "difference to best", "SE of difference",
              "units with high Pareto k"]


def model_rows(record: dict) -> list[list]:
    rows = []
    for g in record["groups"]:
        m = g.get("models")
        if not m:
            continue
        loo = {r["family"]: r for r in ((m.get("loo") or {}).get("models") or [])}
        for r in m["by_model"]:
            lo = loo.get(r["family"], {})
            rows.append([g["group"], r["family"], _iv(r["reliability_at_mission"]),
                         _p(r["prob_meets_target"], r["prob_meets_target_mc_error"]),
                         r["decision"], _f(lo.get("elpd")), _f(lo.get("se")),
                         _f(lo.get("elpd_difference")), _f(lo.get("difference_se")),
                         lo.get("units_high_k")])
    return rows


def _f(v):
    return "-" if v is None else f"{v:.2f}"


def extras_lines(record: dict) -> list[str]:
    """Lines for the terminal after the results table."""
    from qualbayes.evidence.terminal import table as text_table  # noqa: PLC0415

    out = []
    rows = comparison_rows(record)
    if rows:
        out += ["", "Group comparisons at the mission time (medians with central "
                f"{record['question']['confidence']:.0%} intervals):",
                text_table(COMPARISON_HEAD, rows, "llrlll")]
        out += [f"  {c['words']}" for c in record["comparisons"]]
    rows = model_rows(record)
    if rows:
        out += ["", "Under each distribution (PSIS-LOO: higher elpd predicts better):",
                text_table(MODEL_HEAD, rows, "lllrlrrrrr")]
    for g in record["groups"]:
        rt = g.get("remaining_test")
        if rt:
            out.append(f"[{g['group']}] remaining test: {rt['words']}")
    return out


def extras_sheets(record: dict) -> dict:
    """Workbook sheets (only those with content)."""
    sheets: dict = {}
    if record.get("comparisons"):
        rows = [["A", "B", "P(R_A(mission) > R_B(mission))", "Monte Carlo error",
                 "B10 ratio median", "B10 ratio low", "B10 ratio high", "P(B10 ratio > 1)",
                 "shape difference median", "low", "high", "verdict", "in words"]]
        for c in record["comparisons"]:
            r, d = c.get("b10_ratio") or {}, c.get("shape_difference") or {}
            rows.append([c["a"], c["b"], c["prob_a_more_reliable"],
                         c.get("prob_a_more_reliable_mcse"), r.get("median"),
                         *(r.get("interval") or [None, None]), r.get("prob_above_1"),
                         d.get("median"), *(d.get("interval") or [None, None]),
                         c["verdict"], c["words"]])
        sheets["Group comparisons"] = rows
    rem = [["group", "found", "basis", "extra time", "P at that time", "Monte Carlo error",
            "Pareto k", "effective draws", "in words"]]
    rem += [[g["group"], rt["found"], rt["basis"], rt.get("extra_time"),
             rt.get("prob_at_extra_time"), rt.get("prob_mcse"), rt.get("pareto_k"),
             rt.get("weights_ess"), rt["words"]]
            for g in record["groups"] if (rt := g.get("remaining_test"))]
    if len(rem) > 1:
        sheets["Remaining test"] = rem
    rows = model_rows(record)
    if rows:
        sheets["Distributions"] = [MODEL_HEAD, *rows]
    fit = [["group", "distribution", "bin from", "bin to", "observed failures",
            "predicted median", "predicted low", "predicted high", "p-value", "MC error"]]
    for g in record["groups"]:
        for c in g.get("fit_check") or []:
            e = c["edges"]
            for k in range(len(c["observed"])):
                fit.append([g["group"], c["family"], e[k], None if e[k + 1] in (None, float("inf"))
                            else e[k + 1], c["observed"][k], c["predicted_median"][k],
                            c["predicted_low"][k], c["predicted_high"][k], c["p_value"],
                            c["p_value_mcse"]])
    if len(fit) > 1:
        sheets["Check of fit"] = fit
    ml = [["group", "distribution", "fitted", "B10", "R(mission)", "parameters / why not"]]
    for g in record["groups"]:
        for fam, v in (g.get("max_likelihood") or {}).items():
            params = {k: x for k, x in v.items() if k not in ("fitted", "b10",
                                                              "reliability_at_mission")}
            ml.append([g["group"], fam, v["fitted"], v.get("b10"),
                       v.get("reliability_at_mission"),
                       "; ".join(f"{k} {x:.6g}" if isinstance(x, float) else f"{k}: {x}"
                                 for k, x in params.items())])
    if len(ml) > 1:
        sheets["Data alone (ML)"] = ml
    ex = [["group", "longest observed time", "mission / longest", "spread of R(mission)",
           "in words"]]
    ex += [[g["group"], e["longest_observed"], e["factor"], e.get("spread"), e["words"]]
           for g in record["groups"] if (e := g.get("extrapolation")) and e.get("beyond")]
    if len(ex) > 1:
        sheets["Extrapolation"] = ex
    return sheets


def extras_sections(record: dict) -> list:
    """Report sections (only those with content)."""
    from qualbayes.evidence.document import Paragraph, Section, Table  # noqa: PLC0415

    out = []
    rows = comparison_rows(record)
    if rows:
        out.append(Section("Group comparisons", [
            Table(COMPARISON_HEAD, rows, caption="P(R_A > R_B) at the mission time with its "
                  "Monte Carlo error; medians with central credible intervals.",
                  id="life-comparisons"),
            *[Paragraph(c["words"]) for c in record["comparisons"]]]))
    rem = [Paragraph(f"{g['group']}: {rt['words']}") for g in record["groups"]
           if (rt := g.get("remaining_test"))]
    if rem:
        out.append(Section("Remaining test time", rem))
    rows = model_rows(record)
    if rows:
        words = [Paragraph(f"{g['group']}: {w}") for g in record["groups"]
                 for w in ((g.get("models") or {}).get("words") or [])]
        out.append(Section("Choice of distribution", [
            Table(MODEL_HEAD, rows, caption="PSIS-LOO (ArviZ Pareto smoothing); a difference "
                  "below 4 or below 2 SE does not distinguish the models.", id="life-models"),
            *words]))
    extra = [Paragraph(f"{g['group']}: {e['words']}") for g in record["groups"]
             if (e := g.get("extrapolation")) and e.get("beyond")]
    if extra:
        out.append(Section("Extrapolation", extra))
    return out
