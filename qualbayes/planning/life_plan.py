"""With n units, how long must each be tested to show R(mission) >= R* (binomial test with
the test time scaled by an assumed Weibull shape, known shape or a shape range; the API
behind ``plan life``)."""

from __future__ import annotations

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.planning import assurance as asr
from qualbayes.planning import attribute, weibull
from qualbayes.planning.inputs import count, positive, probability
from qualbayes.planning.plan_common import (
    MAX_OC_SERIES,
    allowed_list,
    smallest_line,
    smallest_table,
    target_mark,
)
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.planning.records import (
    ASSUMPTIONS,
    BAYES_ASSUMPTION,
    DESIGN_ASSUMPTION,
    curve,
    record,
    table,
)
from qualbayes.planning.weibull import ShapePrior


def default_units(units: int, failures: list[int], success_run: int) -> list[int]:
    """The trade-off rows when one unit count is given: a spread around it and the
    success-run size (L = 1)."""
    cand = {units, max(1, units // 4), max(1, units // 2), 2 * units, 4 * units, success_run}
    return sorted(n for n in cand if n > min(failures))


def plan_life(reliability: float, confidence: float, mission: float, units, shape,
              failures=0, design: RatePrior | None = None,
              assurance: float | None = None, analysis: RatePrior | None = None) -> dict:
    """With n units available, how long must each be tested (c failures allowed) to show
    R(mission) >= R* at confidence C, given a Weibull shape (or a shape range)?

    ``shape``: a number, or a :class:`ShapePrior` (e.g. ``ShapePrior.from_range(1.5, 3)``).
    ``units``: one count (the plan; the trade-off spreads around it) or a list.
    ``analysis``: prior on p = 1 - R(mission) for a Bayesian plan (None: classical); see
    :mod:`qualbayes.planning.life_bayes`.
    ``design``: prior on p = 1 - R(mission) for the assurance (default: the analysis prior).
    """
    from qualbayes.planning import life_bayes  # noqa: PLC0415

    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    mission = positive(mission, "mission time")
    cs = allowed_list(failures)
    if not isinstance(shape, ShapePrior):
        shape = positive(shape, "shape")
    unit_list = [units] if isinstance(units, int | np.integer) else list(units)
    unit_list = [count(n, "units", least=1) for n in unit_list]
    if not unit_list:
        raise OptionError("units: give at least one number of units")
    main = unit_list[0]
    if main <= max(cs):
        raise OptionError(f"units {main}: need more units on test than allowed failures "
                          f"({max(cs)})")
    design = design if design is not None else analysis
    if assurance is not None and design is None:
        raise OptionError("a wanted assurance needs a design prior on R(mission)")
    success = attribute.success_run_units(r, conf)
    rows_units = (default_units(main, cs, success) if len(unit_list) == 1
                  else sorted(set(unit_list)))
    known = not isinstance(shape, ShapePrior)
    shape_text = (f"known shape {shape:g}" if known else
                  f"shape between {shape.interval()[0]:g} and {shape.interval()[1]:g}, "
                  "integrated over")
    question = (f"With {main} units, how long must each be tested to show R({mission:g}) >= "
                f"{r:g} at {conf:.0%} confidence ({shape_text})?")
    inputs = {"reliability": r, "confidence": conf, "mission_time": mission, "units": unit_list,
              "failures": cs, "shape": shape if known else
              {"range_95": list(shape.interval()), "log_median": shape.log_median,
               "log_sd": shape.log_sd}, "wanted_assurance": assurance}
    bayes = analysis is not None
    if not bayes:
        method = ("binomial test with the test time scaled by an assumed Weibull shape: "
                  "X ~ Binomial(n, 1 - R*^(L^beta)); L = (ln R_L / ln R*)^(1/beta), R_L the "
                  "(1 - C) quantile of Beta(n - c, c + 1)" if known
                  else "binomial test with the test time scaled by an assumed Weibull shape, "
                  "the consumer's risk at the goal "
                  "averaged over ln(beta) ~ Normal (the stated range as its central 95%): "
                  "E_beta[P(X <= c | R*)] <= 1 - C, solved for L")
    else:
        method = ("Bayesian, test time scaled by an assumed Weibull shape: least L with "
                  "P(R(t) >= R* | c of n failed in "
                  f"L t) >= C, prior {analysis.label}; posterior by the exact signed Beta sum "
                  "over (1 - (1 - p)^(L^beta))^c" + ("" if known else
                                                      ", averaged over ln(beta) ~ Normal"))

    def plan_for(n, b, c):
        if bayes:
            return life_bayes.life_plan(analysis, r, conf, mission, n, b, c)
        return weibull.life_plan(r, conf, mission, n, b, c)

    trade = table("Trade-off", f"Test time per unit (mission {mission:g}) by units on test",
                  ["units n"] + [f"time per unit, c = {c}" for c in cs],
                  [[n] + [plan_for(n, shape, c)["test_time"] if n > c else None for c in cs]
                   for n in rows_units])
    detail_cols = ["allowed failures c", "L (test / mission)", "time per unit",
                   "total unit-time", "P(pass | R = goal)"]
    if bayes:
        detail_cols += ["P(R >= goal | c of n)", "classical time per unit", "time saved"]
    if not known:
        lo, hi = shape.interval()
        detail_cols += [f"time per unit if shape = {lo:.3g}", f"time per unit if shape = {hi:.3g}"]
    if design is not None:
        detail_cols.append("assurance")
    detail, plans = [], []
    for c in cs:
        p = plan_for(main, shape, c)
        plans.append(p)
        row = [c, p["ratio"], p["test_time"], p["total_time"], p["risk_at_goal"]]
        if bayes:
            row += [p["prob_demonstrated"], p["classical_time"],
                    None if p["test_time"] is None else p["classical_time"] - p["test_time"]]
        if not known:
            row += [plan_for(main, b, c)["test_time"] for b in shape.interval()]
        if design is not None:
            row.append(None if p["ratio"] is None else 1.0 if p["ratio"] == 0 else
                       asr.life_assurance(main, p["ratio"], c, shape, design))
        detail.append(row)
    summary = [question, "method: " + method,
               f"for comparison, the success-run plan (L = 1, c = 0) needs {success} units"]
    for p in plans:
        allow = "none may fail" if p["failures"] == 0 else f"at most {p['failures']} may fail"
        extra = f" (classical: {p['classical_time']:.4g})" if bayes else ""
        if p["ratio"] is None:
            summary.append(f"c = {p['failures']}: no test time up to e^60 mission times "
                           "shows the goal")
        elif p["ratio"] == 0:
            summary.append(f"c = {p['failures']}: the prior alone shows the goal "
                           f"(P(R >= {r:g}) = {p['prob_demonstrated']:.4g} before any test): "
                           "no test time is needed to meet the rule, so the prior carries the "
                           "whole decision; check it")
        else:
            summary.append(f"plan: test {main} units for {p['test_time']:.4g} each "
                           f"(L = {p['ratio']:.3g}), {allow}{extra}")
    tables = [table("Plans", f"Plans for {main} units", detail_cols, detail), trade]
    smallest = None
    if design is not None:
        summary.append(f"design prior {design.label}: P(R({mission:g}) >= {r:g}) = "
                       f"{design.prob_at_most(1 - r):.4g} before the test")
        if assurance is not None:
            smallest = asr.smallest_life_plan(r, conf, main, shape, design, assurance,
                                              analysis=analysis)
            if smallest.get("ratio") is not None:
                smallest["time"] = smallest["ratio"] * mission
            summary.append(smallest_line(smallest, "time",
                                          lambda v: f"{v:.4g} per unit on {main} units"))
            tables.append(smallest_table(smallest, "test time per unit", lambda v: v))
    shown = [p for p in plans if p["ratio"]]
    grid = np.linspace(max(0.0, 1.0 - 4.0 * (1.0 - r)), 1.0, 201)
    oc = curve("oc", f"Operating characteristic, {main} units", f"true R({mission:g})",
               "P(test passes)", grid.tolist(),
               [{"label": f"c = {p['failures']}, {p['test_time']:.4g} per unit",
                 "y": weibull.oc_curve(main, p["ratio"], p["failures"], shape, grid).tolist()}
                for p in shown][:MAX_OC_SERIES],
               [{"x": r, "y": None, "label": f"goal R = {r:g}"}])
    curves = [oc]
    if design is not None:
        top = max([p["ratio"] for p in shown]
                  + [smallest["ratio"] if smallest and smallest.get("ratio") else 0.0]
                  + [weibull.time_ratio(r, conf, main, shape, cs[0])])
        ac = asr.life_assurance_curve(r, conf, main, shape, design, 1.5 * top,
                                      analysis=analysis)
        curves.append(curve(
            "assurance", f"Assurance against test time, {main} units", "test time per unit",
            "P(test passes) under the design prior", [v * mission for v in ac["ratio"]],
            [{"label": "assurance", "y": ac["assurance"]}],
            target_mark(assurance, smallest, "time")))
    assumptions = list(ASSUMPTIONS["life"])
    if not known:
        assumptions.append("the shape's uncertainty is a lognormal prior with the stated "
                           "range as its central 95%; the risk at the goal is averaged over it")
    if bayes:
        assumptions += [BAYES_ASSUMPTION, "the prior on R(mission) is independent of the "
                        "shape: what the test time shows about R(mission) still rests on the "
                        "shape"]
    if design is not None:
        assumptions.append(DESIGN_ASSUMPTION)
    return record("life", question, inputs, method, summary, tables, curves, assumptions,
                  priors={"shape": shape_text if known else shape.describe(),
                          "analysis": analysis.label if bayes else "none (classical)",
                          "design": design.label if design is not None else None})
