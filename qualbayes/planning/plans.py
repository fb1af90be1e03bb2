"""The planning questions as the engineer asks them, answered as plan records (the API
behind ``qualbayes plan ...``). Pure computation: no files are read or written here."""

from __future__ import annotations

import math

import numpy as np

from qualbayes.errors import OptionError
from qualbayes.planning import assurance as asr
from qualbayes.planning import attribute, mtbf, sampling, weibull
from qualbayes.planning.history import HistoryPrior
from qualbayes.planning.inputs import count, positive, probability
from qualbayes.planning.mtbf import GammaPrior
from qualbayes.planning.priors import MIN_COMPONENT_ESS, RatePrior
from qualbayes.planning.records import (
    ASSUMPTIONS,
    BAYES_ASSUMPTION,
    DESIGN_ASSUMPTION,
    HISTORY_ASSUMPTION,
    NOT_CONVERGED,
    curve,
    record,
    table,
)
from qualbayes.planning.weibull import ShapePrior

MAX_OC_SERIES = 6


def _failures(failures) -> list[int]:
    if isinstance(failures, int | np.integer):
        failures = range(int(failures) + 1)
    out = sorted({count(c, "allowed failures") for c in failures})
    if not out:
        raise OptionError("allowed failures: give at least one value")
    return out


def _allow(c: int) -> str:
    return "no failure" if c == 0 else "1 failure" if c == 1 else f"{c} failures"


def _pct(v: float) -> str:
    return f"{100 * v:.4g}%"


def _not_converged(kind: str, question: str, inputs: dict, history: HistoryPrior) -> dict:
    return record(
        kind, question, inputs, "no plan: the prior could not be learned", [
            question,
            f"prior from lot history of part {history.part} ({history.lots} lots): the "
            "convergence gate FAILED, so no plan is given (" + NOT_CONVERGED + ")",
            *[f"  - {r}" for r in history.gate.get("reasons", [])]],
        [], [], ASSUMPTIONS[kind] + [HISTORY_ASSUMPTION],
        priors={"history": history.describe()}, verdict=NOT_CONVERGED,
        diagnostics={history.part: history.gate})


# --------------------------------------------------------------------------- attribute

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
    cs = _failures(failures)
    max_units = count(max_units, "max units", least=1)
    question = (f"How many units must pass a test, allowing c failures, to show "
                f"R >= {r:g} at {conf:.0%} confidence?")
    inputs = {"reliability": r, "confidence": conf, "failures": cs,
              "wanted_assurance": assurance, "max_units": max_units}
    if "history" in (analysis, design) and history is None:
        raise OptionError("a prior 'history' needs the learned history prior")
    if history is not None and not history.passed:
        return _not_converged("attribute", question, inputs, history)
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
            summary.append(_smallest_line(smallest, "units", lambda v: f"{v} units"))
            tables.append(_smallest_table(smallest, "units n", lambda v: v))
    curves = [_attribute_oc(r, cs, used)]
    if design is not None:
        top = max([row["units"] or 0 for row in used]
                  + [smallest["units"] or 0 if smallest else 0])
        n_hi = min(max_units, max(20, int(math.ceil(1.5 * top))))
        ac = asr.attribute_assurance_curve(r, conf, analysis, design, n_hi)
        curves.append(curve("assurance", "Assurance against units on test", "units on test n",
                            "P(test passes) under the design prior", ac["units"],
                            [{"label": "assurance", "y": ac["assurance"]}],
                            _target_mark(assurance, smallest, "units")))
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


def _smallest_line(s: dict, key: str, fmt) -> str:
    if s.get(key) is None:
        return f"wanted assurance {s['target']:g}: {s['reason']}"
    head = (f"smallest plan with assurance >= {s['target']:g}: " if s["reached"] else
            f"wanted assurance {s['target']:g} not reached ({s['reason']}); best: ")
    return (head + f"{fmt(s[key])}, allowing {_allow(s['failures'])} "
            f"(assurance {s['assurance']:.4g})")


def _smallest_table(s: dict, label: str, fmt) -> dict:
    key = {"units n": "units", "test time per unit": "time", "total test time": "time"}[label]
    return table("Wanted assurance", "Smallest plan reaching the wanted assurance",
                 ["wanted assurance", "reached", label, "allowed failures", "assurance",
                  "design P(goal met)", "note"],
                 [[s["target"], s["reached"], None if s.get(key) is None else fmt(s[key]),
                   s.get("failures"), s.get("assurance"), s["design_prob_goal_met"],
                   s.get("reason", "")]])


def _target_mark(target, smallest, key) -> list[dict]:
    marks = []
    if target is not None:
        marks.append({"x": None, "y": target, "label": f"wanted assurance {target:g}"})
    if smallest and smallest.get(key) is not None:
        marks.append({"x": smallest[key], "y": smallest["assurance"], "label": "smallest plan"})
    return marks


# --------------------------------------------------------------------------- life (Weibull)

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
    cs = _failures(failures)
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
            summary.append(_smallest_line(smallest, "time",
                                          lambda v: f"{v:.4g} per unit on {main} units"))
            tables.append(_smallest_table(smallest, "test time per unit", lambda v: v))
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
            _target_mark(assurance, smallest, "time")))
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


# --------------------------------------------------------------------------- MTBF

def plan_mtbf(goal: float, confidence: float, failures=0, analysis: GammaPrior | None = None,
              design: GammaPrior | None = None, assurance: float | None = None) -> dict:
    """How long a (total unit-time) test, allowing r failures, shows MTBF >= goal at
    confidence C? Classical chi-square, or Bayesian with a gamma prior on the rate."""
    goal = positive(goal, "MTBF goal")
    conf = probability(confidence, "confidence")
    cs = _failures(failures)
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
        allow = "no failure" if row["failures"] == 0 else f"at most {_allow(row['failures'])}"
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
            summary.append(_smallest_line(smallest, "time",
                                          lambda v: f"{v:.4g} total unit-time"))
            tables.append(_smallest_table(smallest, "total test time", lambda v: v))
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
                            _target_mark(assurance, smallest, "time")))
    assumptions = list(ASSUMPTIONS["mtbf"])
    if analysis is not None:
        assumptions.append(BAYES_ASSUMPTION)
    if design is not None:
        assumptions.append(DESIGN_ASSUMPTION)
    return record("mtbf", question, inputs, method, summary, tables, curves, assumptions,
                  priors={"analysis": analysis.describe() if analysis else "none (classical)",
                          "design": design.describe() if design else None})


# --------------------------------------------------------------------------- sampling

def plan_sampling(aql: float, alpha: float, ltpd: float, beta: float,
                  lot_size: int | None = None, prior: RatePrior | None = None,
                  spec: float | None = None, history: HistoryPrior | None = None,
                  level: float | None = None) -> dict:
    """Which single sampling plan (n, c) protects both the producer (AQL, alpha) and the
    consumer (LTPD, beta)? With a prior on lot quality: how good are accepted lots, and is an
    accepted lot within the limit (``spec``, else the LTPD) with probability >= ``level``
    (default 1 - beta)?"""
    plan = sampling.find_plan(aql, alpha, ltpd, beta, lot_size)
    level = 1.0 - beta if level is None else probability(level, "level")
    limit = spec if spec is not None else ltpd
    question = (f"Which single sampling plan accepts lots at AQL {_pct(aql)} with probability "
                f">= {1 - alpha:.4g} and lots at LTPD {_pct(ltpd)} with probability <= "
                f"{beta:.4g}?")
    inputs = {"aql": aql, "alpha": alpha, "ltpd": ltpd, "beta": beta, "lot_size": lot_size,
              "spec": spec, "n": plan.n, "c": plan.c, "limit": limit, "level": level}
    if history is not None:
        if not history.passed:
            return _not_converged("sampling", question, inputs, history)
        prior = history.prior
    rows = [[plan.method, plan.n, plan.c, plan.pa_aql, 1 - plan.pa_aql, plan.pa_ltpd]]
    summary = [question, f"plan ({plan.method}): inspect n = {plan.n}, accept with at most "
                         f"c = {plan.c} defectives"]
    summary.append(f"P(accept) at AQL = {plan.pa_aql:.4f} (producer's risk "
                   f"{1 - plan.pa_aql:.4f}); at LTPD = {plan.pa_ltpd:.4f} (consumer's risk)")
    if lot_size is not None:
        d1 = sampling.defectives_in_lot(aql, lot_size)
        d2 = sampling.defectives_in_lot(ltpd, lot_size)
        summary.append(f"lot of {lot_size}: AQL means {d1} defectives in the lot, LTPD {d2}")
        big = sampling.find_plan(aql, alpha, ltpd, beta)
        rows.append([big.method + " (large-lot comparison)", big.n, big.c, big.pa_aql,
                     1 - big.pa_aql, big.pa_ltpd])
    tables = [table("Plan", "Single sampling plan",
                    ["method", "sample size n", "acceptance number c", "P(accept) at AQL",
                     "producer's risk", "P(accept) at LTPD = consumer's risk"], rows)]
    hi = min(1.0, 2.0 * ltpd)
    grid = np.linspace(0.0, hi, 201)
    if lot_size is not None:
        grid = np.unique(np.arange(0, int(hi * lot_size) + 1) / lot_size)
    pa = sampling.oc_curve(plan.n, plan.c, grid, lot_size)
    pick = np.unique(np.concatenate([[aql, ltpd], np.linspace(0, hi, 11)[1:]]))
    tables.append(table("OC points", "Probability of acceptance", ["defect rate p", "P(accept)"],
                        [[float(p), float(sampling.acceptance_probability(plan.n, plan.c, p,
                                                                          lot_size))]
                         for p in pick]))
    curves = [curve("oc", f"OC curve, n = {plan.n}, c = {plan.c} ({plan.method})",
                    "lot defect rate p", "P(accept)", grid.tolist(),
                    [{"label": f"n = {plan.n}, c = {plan.c}", "y": pa.tolist()}],
                    [{"x": aql, "y": plan.pa_aql, "label": f"AQL: 1 - alpha = {1 - alpha:g}"},
                     {"x": ltpd, "y": plan.pa_ltpd, "label": f"LTPD: beta = {beta:g}"}])]
    priors = {}
    assumptions = list(ASSUMPTIONS["sampling"])
    if prior is not None:
        priors["lot_quality"] = prior.label
        if history is not None:
            priors["history"] = history.describe()
            assumptions.append(HISTORY_ASSUMPTION)
        assumptions.append("Bayesian view: the quality of the lots offered varies as the "
                           "prior says")
        brow, cols = [], ["spec s", "P(p <= s) before", "P(accept)", "P(p <= s | accepted)",
                          "P(p <= s | rejected)", "mean p of accepted lots"]
        if lot_size is not None:
            cols.append("P(lot holds <= sN defectives | accepted)")
        cols.append(f"accepted lots within s with P >= {level:.4g}?")
        for s in dict.fromkeys([limit, aql, ltpd]):  # the decision's limit first
            q = sampling.accepted_lot_quality(plan.n, plan.c, prior, s, lot_size)
            line = [s, q["prob_within_spec_prior"], q["prob_accept"],
                    q["prob_within_spec_if_accepted"], q["prob_within_spec_if_rejected"],
                    q["mean_rate_if_accepted"]]
            if lot_size is not None:
                line.append(q["lot_within_spec_if_accepted"])
            key = line[-1] if lot_size is not None else line[3]
            line.append(sampling.protection(key, level) or "no lot is accepted")
            brow.append(line)
        tables.append(table("Accepted lots", f"Quality of lots under the prior {prior.label}",
                            cols, brow))
        first = brow[0]
        what = (f"the accepted lot of {lot_size} holds at most {_pct(limit)} defectives"
                if lot_size is not None else f"an accepted lot has p <= {_pct(limit)}")
        key = first[-2] if lot_size is not None else first[3]
        summary.append(f"with prior {prior.label}: P(accept) = {first[2]:.4f}; " + (
            "no lot is accepted under this prior" if key is None else
            f"{what} with probability {key:.4f} (before inspection {first[1]:.4f}): "
            f"{first[-1]} at level {level:.4g}"))
        assumptions.append(f"Bayesian view's decision: the plan protects the consumer when "
                           f"an accepted lot is within s = {_pct(limit)} with probability at "
                           f"least {level:.4g} (default 1 - beta)")
    return record("sampling", question, inputs,
                  "exact " + plan.method + ": smallest n meeting P_a(LTPD) <= beta for the "
                  "first c whose n also meets P_a(AQL) >= 1 - alpha", summary, tables, curves,
                  assumptions, priors=priors,
                  diagnostics={history.part: history.gate} if history is not None else {})
