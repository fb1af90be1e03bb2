"""How much total test time, allowing r failures, shows MTBF >= goal (chi-square or a
gamma prior; the API behind ``plan mtbf``)."""

from __future__ import annotations

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.planning import assurance as asr
from qualbayes.planning import mtbf
from qualbayes.planning.inputs import positive, probability
from qualbayes.planning.mtbf import GammaPrior
from qualbayes.planning.plan_common import (
    MAX_OC_SERIES,
    allow_words,
    allowed_list,
    smallest_line,
    smallest_table,
    target_mark,
)
from qualbayes.planning.records import (
    ASSUMPTIONS,
    BAYES_ASSUMPTION,
    DESIGN_ASSUMPTION,
    curve,
    record,
    table,
)


def plan_mtbf(goal: float, confidence: float, failures=0, analysis: GammaPrior | None = None,
              design: GammaPrior | None = None, assurance: float | None = None) -> dict:
    """How long a (total unit-time) test, allowing r failures, shows MTBF >= goal at
    confidence C? Classical chi-square, or Bayesian with a gamma prior on the rate."""
    goal = positive(goal, "MTBF goal")
    conf = probability(confidence, "confidence")
    cs = allowed_list(failures)
    design = design if design is not None else analysis
    if assurance is not None and design is None:
        raise OptionError("a wanted assurance needs a design prior (or an analysis prior "
                          "to use as one)")
    question = (f"How much total test time, allowing r failures, shows MTBF >= {goal:g} at "
                f"{conf:.0%} confidence?")
    inputs = {"mtbf_goal": goal, "confidence": conf, "failures": cs,
              "wanted_assurance": assurance}
    rows_in = mtbf.table(goal, conf, cs, analysis)
    columns = ["allowed failures r", "T / MTBF goal (chi-square)", "classical test time"]
    if analysis is not None:
        columns += ["Bayesian test time", "time saved", "posterior median MTBF if r",
                    f"posterior lower {conf:.0%} bound if r"]
    if design is not None:
        columns.append("assurance")
    rows = []
    for row in rows_in:
        line = [row["failures"], row["factor"], row["classical_time"]]
        time = row["classical_time"]
        if analysis is not None:
            time = row["bayes_time"]
            post = mtbf.posterior_mtbf(analysis, row["failures"], time, conf)
            line += [time, row["classical_time"] - time, post["median_mtbf"],
                     post["lower_bound_mtbf"]]
        if design is not None:
            line.append(asr.mtbf_assurance(time, goal, conf, analysis, design))
        rows.append(line)
    if analysis is None:
        method = "classical: T = M chi2(C; 2r + 2) / 2 (time-terminated, Poisson failures)"
    else:
        method = (f"Bayesian: T = M G^-1(C; a + r, 1) - b with {analysis.describe()}; "
                  "posterior Gamma(a + r, b + T)")
    summary = [question, "method: " + method]
    for row in rows_in:
        t = row["bayes_time"] if analysis is not None else row["classical_time"]
        allow = "no failure" if row["failures"] == 0 else f"at most {allow_words(row['failures'])}"
        extra = "" if analysis is None else f" (classical: {row['classical_time']:.4g})"
        summary.append(f"plan: {t:.4g} total unit-time with {allow}{extra}")
    tables = [table("Plans", "Constant failure rate test plans", columns, rows)]
    smallest = None
    if design is not None:
        import scipy.special as sp  # noqa: PLC0415

        summary.append(f"design prior {design.describe()}: P(MTBF >= {goal:g}) = "
                       f"{float(sp.gammainc(design.a, design.b / goal)):.4g} before the test")
        if assurance is not None:
            smallest = asr.smallest_mtbf_plan(goal, conf, analysis, design, assurance)
            summary.append(smallest_line(smallest, "time",
                                          lambda v: f"{v:.4g} total unit-time"))
            tables.append(smallest_table(smallest, "total test time", lambda v: v))
    grid = np.geomspace(goal / 5.0, goal * 10.0, 201)
    times = [row["bayes_time"] if analysis is not None else row["classical_time"]
             for row in rows_in]
    oc = curve("oc", "Operating characteristic", "true MTBF", "P(test passes)",
               grid.tolist(),
               [{"label": f"r = {c}, T = {t:.4g}", "y": mtbf.oc_curve(t, c, grid).tolist()}
                for c, t in zip(cs, times, strict=True) if t > 0][:MAX_OC_SERIES],
               [{"x": goal, "y": None, "label": f"goal MTBF = {goal:g}"}], x_log=True)
    curves = [oc]
    if design is not None:
        top = max(times + [smallest["time"] if smallest and smallest.get("time") else 0.0])
        ac = asr.mtbf_assurance_curve(goal, conf, analysis, design, max(1.5 * top, goal))
        curves.append(curve("assurance", "Assurance against total test time",
                            "total test time", "P(test passes) under the design prior",
                            ac["time"], [{"label": "assurance", "y": ac["assurance"]}],
                            target_mark(assurance, smallest, "time")))
    assumptions = list(ASSUMPTIONS["mtbf"])
    if analysis is not None:
        assumptions.append(BAYES_ASSUMPTION)
    if design is not None:
        assumptions.append(DESIGN_ASSUMPTION)
    return record("mtbf", question, inputs, method, summary, tables, curves, assumptions,
                  priors={"analysis": analysis.describe() if analysis else "none (classical)",
                          "design": design.describe() if design else None})
