"""How many units must pass, allowing c failures, to show R >= R* at confidence C?
(pass/fail demonstration, classical or Bayesian; the API behind ``plan attribute``)."""

from __future__ import annotations

import math

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.planning import assurance as asr
from qualbayes.planning import attribute, draw_error, sampling
from qualbayes.planning.history import HistoryPrior
from qualbayes.planning.inputs import count, probability
from qualbayes.planning.plan_common import (
    MAX_OC_SERIES,
    allowed_list,
    not_converged_record,
    smallest_line,
    smallest_table,
    target_mark,
)
from qualbayes.planning.rate_prior import MIN_COMPONENT_ESS, RatePrior
from qualbayes.planning.records import (
    ASSUMPTIONS,
    BAYES_ASSUMPTION,
    DESIGN_ASSUMPTION,
    HISTORY_ASSUMPTION,
    curve,
    record,
    table,
)


def plan_attribute(reliability: float, confidence: float, failures=0,
                   analysis: RatePrior | str | None = None,
                   design: RatePrior | str | None = None, assurance: float | None = None,
                   history: HistoryPrior | None = None,
                   max_units: int = asr.DEFAULT_MAX_UNITS) -> dict:
    """How many units must pass, allowing c failures, to show R >= R* at confidence C?

    ``analysis``: prior on p = 1 - R for a Bayesian plan (None: classical; ``"history"``:
    the learned prior of ``history``). ``design``: the prior for the assurance (a RatePrior
    or ``"history"``; default: the analysis prior). ``assurance``: a wanted assurance, for
    which the smallest plan is searched. If ``history`` failed its convergence gate, no plan
    is given.
    """
    r = probability(reliability, "reliability")
    conf = probability(confidence, "confidence")
    cs = allowed_list(failures)
    max_units = count(max_units, "max units", least=1)
    question = (f"How many units must pass a test, allowing c failures, to show "
                f"R >= {r:g} at {conf:.0%} confidence?")
    inputs = {"reliability": r, "confidence": conf, "failures": cs,
              "wanted_assurance": assurance, "max_units": max_units}
    if "history" in (analysis, design) and history is None:
        raise OptionError("a prior 'history' needs the learned history prior")
    if history is not None and not history.passed:
        return not_converged_record("attribute", question, inputs, history)
    analysis = history.prior if analysis == "history" else analysis
    design = history.prior if design == "history" else design
    design = design if design is not None else analysis
    if assurance is not None and design is None:
        raise OptionError("a wanted assurance needs a design prior (or an analysis prior "
                          "to use as one)")
    classical = attribute.classical_table(r, conf, cs)
    bayes = attribute.bayes_table(analysis, r, conf, cs) if analysis is not None else None
    notes: list[str] = []
    if bayes is not None and analysis.components > 1:
        for row in bayes:
            if row["units"] is not None and row["component_ess"] < MIN_COMPONENT_ESS:
                notes.append(f"c = {row['failures']}: after the test only "
                             f"{row['component_ess']:.0f} of the prior's draws carry weight "
                             f"(< {MIN_COMPONENT_ESS:.0f}); that plan is not given")
                row["units"] = None
    used = bayes if bayes is not None else classical
    columns = ["allowed failures c", "units n"]
    rows = []
    for k, c in enumerate(cs):
        crow, row = classical[k], used[k]
        n = row["units"]
        line = [c, n]
        if bayes is None:
            line += [crow["lower_bound_at_c"], crow["risk_at_goal"]]
        else:
            line += [row["prob_demonstrated"], row["lower_bound_at_c"], crow["units"],
                     None if n is None else crow["units"] - n]
        if design is not None:
            line.append(None if n is None else
                        (1.0 if n == 0 else asr.betabinom_cdf(c, n, design)))
        rows.append(line)
    if bayes is None:
        columns += [f"exact lower {conf:.0%} bound on R at c", "P(pass | R = goal)"]
        method = ("classical binomial: smallest n with P(X <= c | R = R*) <= 1 - C; "
                  "c = 0 gives the success run n = ceil(ln(1 - C) / ln R*)")
    else:
        columns += ["P(R >= goal | c of n)", f"lower {conf:.0%} credible bound on R",
                    "classical n", "units saved"]
        method = ("Bayesian: smallest n with P(R >= R* | c failures in n) >= C, "
                  f"prior {analysis.label}; posterior components Beta(a + x, b + n - x)")
    if design is not None:
        columns.append("assurance")
    summary = [question, "method: " + method]
    for c, row, crow in zip(cs, used, classical, strict=True):
        n = row["units"]
        if n is None:
            summary.append(f"c = {c}: no plan (see notes)")
            continue
        allow = "none may fail" if c == 0 else f"at most {c} may fail"
        extra = "" if bayes is None else f" (classical: {crow['units']})"
        summary.append(f"plan: test {n} units, {allow}{extra}")
        if n == 0:
            summary.append("  the prior alone already gives P(R >= goal) >= C")
    priors = {"analysis": analysis.label if analysis is not None else "none (classical)",
              "design": design.label if design is not None else None}
    if history is not None:
        priors["history"] = history.describe()
    tables = [table("Plans", "Attribute demonstration plans", columns, rows)]
    smallest = None
    if design is not None:
        summary.append(f"design prior {design.label}: P(R >= {r:g}) = "
                       f"{design.prob_at_most(1 - r):.4g} before the test")
        if assurance is not None:
            smallest = asr.smallest_attribute_plan(r, conf, analysis, design, assurance,
                                                   max_units)
            if (analysis is not None and analysis.components > 1 and smallest.get("units")
                    and analysis.component_ess(smallest["units"], smallest["failures"])
                    < MIN_COMPONENT_ESS):
                smallest = {**smallest, "units": None, "reached": False,
                            "reason": "too few of the prior's draws carry weight after "
                                      "that test to trust it"}
            summary.append(smallest_line(smallest, "units", lambda v: f"{v} units"))
            tables.append(smallest_table(smallest, "units n", lambda v: v))
    if history is not None:
        mc_rows, mc_notes = draw_error.attribute_errors(
            history, analysis, design, r, conf, [(c, row["units"]) for c, row in zip(
                cs, used, strict=True)])
        notes += mc_notes
        tables.append(table("Monte Carlo error", "Monte Carlo error of the numbers that rest "
                            "on the history's posterior draws (exact given the draws)",
                            draw_error.ATTRIBUTE_COLUMNS, mc_rows))
    curves = [_attribute_oc(r, cs, used)]
    if design is not None:
        top = max([row["units"] or 0 for row in used]
                  + [smallest["units"] or 0 if smallest else 0])
        n_hi = min(max_units, max(20, int(math.ceil(1.5 * top))))
        ac = asr.attribute_assurance_curve(r, conf, analysis, design, n_hi)
        curves.append(curve("assurance", "Assurance against units on test", "units on test n",
                            "P(test passes) under the design prior", ac["units"],
                            [{"label": "assurance", "y": ac["assurance"]}],
                            target_mark(assurance, smallest, "units")))
    assumptions = list(ASSUMPTIONS["attribute"])
    if analysis is not None:
        assumptions.append(BAYES_ASSUMPTION)
    if history is not None:
        assumptions.append(HISTORY_ASSUMPTION)
    if design is not None:
        assumptions.append(DESIGN_ASSUMPTION)
    return record("attribute", question, inputs, method, summary, tables, curves,
                  assumptions, notes, priors, "plan",
                  {history.part: history.gate} if history is not None else {})


def _attribute_oc(r: float, cs: list[int], rows: list[dict]) -> dict:
    lo = max(0.0, 1.0 - 4.0 * (1.0 - r))
    grid = np.linspace(lo, 1.0, 201)
    series = [{"label": f"n = {row['units']}, c = {c}",
               "y": sampling.oc_curve(row["units"], c, 1.0 - grid).tolist()}
              for c, row in zip(cs, rows, strict=True) if row["units"]][:MAX_OC_SERIES]
    return curve("oc", "Operating characteristic", "true reliability R",
                 "P(test passes)", grid.tolist(), series,
                 [{"x": r, "y": None, "label": f"goal R = {r:g}"}])
