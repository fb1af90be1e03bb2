r"""Would a plan's verdict change under another prior? The plan questions rerun under the
fixed set of :mod:`qualbayes.priors.prior_set` (closed forms and quadrature):

* attribute plans: the units each prior needs, and whether passing the planned test
  demonstrates P(R >= R* | data) >= C under each prior;
* MTBF plans: the test time each prior needs, and whether the planned test demonstrates
  P(MTBF >= M | data) >= C;
* sampling plans: whether an accepted lot is within the limit with probability >= level;
* Weibull life plans: the time per unit each prior needs, and whether the planned test
  demonstrates P(R(mission) >= R* | data) >= C.
"""

from __future__ import annotations

from scipy import special

from qualbayes.priors.prior_set import (
    DEMONSTRATED,
    NOT_DEMONSTRATED,
    NOT_USABLE,
    PriorRow,
    item_summary,
    section,
)

# --------------------------------------------------------------------------- attribute plans

def attribute_sensitivity(reliability: float, confidence: float, plans: list[tuple[int, int]],
                          rows: list[PriorRow], as_run_prior=None) -> dict:
    """For each plan (c allowed failures, n units, as planned): the units each prior would
    need, and whether passing the planned test (c failures in n) demonstrates
    P(R >= R* | data) >= C under each prior. ``as_run_prior``: the analysis prior as a
    :class:`~qualbayes.planning.rate_prior.RatePrior` for a non-Beta first row (the history
    mixture), or None for a classical first row."""
    from qualbayes.planning.attribute import bayes_units  # noqa: PLC0415
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415
    from qualbayes.priors.predictive import plan_predictive  # noqa: PLC0415

    def prior_of(row):
        if row.family == "beta":
            return RatePrior.beta(row.params["a"], row.params["b"], row.prior)
        return as_run_prior

    items = []
    for c, n in plans:
        results = []
        for row in rows:
            prior = prior_of(row)
            if row.family == "classical":
                results.append({"prior": row.key, "prob": None, "decision": DEMONSTRATED,
                                "units": n})
                continue
            if n is None:
                results.append({"prior": row.key, "prob": None, "decision": NOT_USABLE,
                                "units": None})
                continue
            prob = prior.prob_at_most(1.0 - reliability, n, c)
            results.append({"prior": row.key, "prob": prob,
                            "decision": DEMONSTRATED if prob >= confidence else NOT_DEMONSTRATED,
                            "units": bayes_units(prior, reliability, confidence, c)})
        text, depends = item_summary(results, rows)
        items.append({"name": f"c = {c}, n = {n}", "failures": c, "units": n,
                      "results": results, "summary": f"passing the test ({n} units, at most "
                      f"{c} failing) leaves R >= {reliability:g} {text}", "depends": depends})
    from qualbayes.priors.predictive import mixture_plan_predictive  # noqa: PLC0415

    c0, n0 = next(((c, n) for c, n in plans if n), (None, None))
    predictive = [None if not n0 else
                  plan_predictive(r.params["a"], r.params["b"], n0, c0) if r.family == "beta"
                  else mixture_plan_predictive(as_run_prior.a, as_run_prior.b, n0, c0)
                  if r.family == "history" and as_run_prior is not None else None
                  for r in rows]
    return section(f"P(R >= {reliability:g} | at most c failures in n) >= {confidence:g}?",
                    confidence, rows, items, "plan", predictive)


# --------------------------------------------------------------------------- MTBF plans

def gamma_test_time(goal: float, confidence: float, failures: int, a: float, rate: float
                    ) -> float:
    """Bayesian test time M G^-1(C; a + r, 1) - b (0 if the prior alone suffices)."""
    return max(0.0, goal * float(special.gammaincinv(a + failures, confidence)) - rate)


def mtbf_sensitivity(goal: float, confidence: float, plans: list[tuple[int, float]],
                     rows: list[PriorRow]) -> dict:
    """For each plan (r allowed failures, total time T, as planned): the test time each
    prior would need, and whether passing the planned test demonstrates
    P(MTBF >= M | data) = P(rate <= 1/M) >= C under each prior."""
    from qualbayes.priors.predictive import gamma_expectations  # noqa: PLC0415

    items = []
    for r, t in plans:
        results = []
        for row in rows:
            if row.family == "classical":
                results.append({"prior": row.key, "prob": None, "decision": DEMONSTRATED,
                                "time": t})
                continue
            a, b = row.params["a"], row.params["rate"]
            prob = float(special.gammainc(a + r, (b + t) / goal)) if b + t > 0 else 0.0
            results.append({"prior": row.key, "prob": prob,
                            "decision": DEMONSTRATED if prob >= confidence * (1 - 1e-12)
                            else NOT_DEMONSTRATED,
                            "time": gamma_test_time(goal, confidence, r, a, b)})
        text, depends = item_summary(results, rows)
        items.append({"name": f"r = {r}, T = {t:.6g}", "failures": r, "time": t,
                      "results": results, "summary": f"passing the test (total time {t:.4g}, "
                      f"at most {r} failures) leaves MTBF >= {goal:g} {text}",
                      "depends": depends})
    r0, t0 = plans[0]
    predictive = [gamma_expectations(row.params["a"], row.params["rate"], t0, r0)
                  if row.family == "gamma" else None for row in rows]
    predictive = [p if p is not None or row.family != "gamma" else
                  {"range": None, "words": "improper prior (rate 0): it expects no "
                                           "particular data"} for p, row in
                  zip(predictive, rows, strict=True)]
    return section(f"P(MTBF >= {goal:g} | at most r failures in T) >= {confidence:g}?",
                    confidence, rows, items, "plan", predictive)


# --------------------------------------------------------------------------- sampling plans

def sampling_sensitivity(n: int, c: int, lot_size: int | None, limit: float, level: float,
                         rows: list[PriorRow], as_run_prior=None) -> dict:
    """For the plan (inspect n, accept at most c defectives): under each prior on the defect
    rate of the lots offered, P(accept) and whether an accepted lot is within ``limit``
    with probability >= ``level`` (for a lot of N units: the lot's own defectives
    D <= limit N). ``as_run_prior``: the RatePrior of a non-Beta first row (the history
    mixture); a 'classical' first row (no lot-quality prior) makes no such statement."""
    from qualbayes.planning import sampling  # noqa: PLC0415
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415
    from qualbayes.priors.predictive import plan_predictive  # noqa: PLC0415

    results = []
    for row in rows:
        if row.family == "classical":
            results.append({"prior": row.key, "prob": None, "decision": NOT_USABLE,
                            "prob_accept": None, "reason": "the classical plan makes no "
                            "statement about the quality of accepted lots"})
            continue
        prior = (RatePrior.beta(row.params["a"], row.params["b"], row.prior)
                 if row.family == "beta" else as_run_prior)
        prob = sampling.accepted_within(n, c, prior, limit, lot_size)
        accept = sampling.accepted_lot_quality(n, c, prior, limit, lot_size)["prob_accept"]
        decision = sampling.protection(prob, level)
        results.append({"prior": row.key, "prob": prob, "prob_accept": accept,
                        "decision": decision or NOT_USABLE}
                       | ({} if decision else {"reason": "no lot is accepted under it"}))
    text, depends = item_summary(results, rows)
    within = (f"the accepted lot of {lot_size} holds at most {limit:.4g} N defectives"
              if lot_size is not None else f"an accepted lot has p <= {limit:.4g}")
    items = [{"name": f"n = {n}, c = {c}", "units": n, "failures": c, "results": results,
              "summary": f"{within} with probability >= {level:.4g}: {text}",
              "depends": depends}]
    from qualbayes.priors.predictive import mixture_plan_predictive  # noqa: PLC0415

    predictive = [plan_predictive(r.params["a"], r.params["b"], n, c, noun="defectives")
                  if r.family == "beta" else
                  mixture_plan_predictive(as_run_prior.a, as_run_prior.b, n, c,
                                          noun="defectives")
                  if r.family == "history" and as_run_prior is not None else None
                  for r in rows]
    what = "D <= s N" if lot_size is not None else "p <= s"
    return section(f"P({what} | accepted), s = {limit:g}, >= {level:g}?", level, rows,
                    items, "plan", predictive)


# --------------------------------------------------------------------------- Weibull life plans

def life_plan_sensitivity(reliability: float, confidence: float, mission: float, units: int,
                          shape, plans: list[tuple[int, float | None]], rows: list[PriorRow]
                          ) -> dict:
    """For each plan (c allowed failures, L = test time per unit / mission time, as planned
    for n units): the time per unit each prior would need, and whether passing the planned
    test demonstrates P(R(mission) >= R* | data) >= C under each prior (the priors are on
    p = 1 - R(mission); :mod:`qualbayes.planning.life_bayes`)."""
    from qualbayes.planning import life_bayes  # noqa: PLC0415
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415

    items = []
    for c, ratio in plans:
        results = []
        for row in rows:
            if row.family == "classical":
                results.append({"prior": row.key, "prob": None, "decision": DEMONSTRATED,
                                "time": None if ratio is None else ratio * mission})
                continue
            prior = RatePrior.beta(row.params["a"], row.params["b"], row.prior)
            need = life_bayes.time_ratio(prior, reliability, confidence, units, shape, c)
            time = None if need is None else need * mission
            if ratio is None:
                results.append({"prior": row.key, "prob": None, "decision": NOT_USABLE,
                                "time": time, "reason": "no planned test to judge"})
                continue
            prob = (prior.prob_at_most(1.0 - reliability) if ratio == 0 else  # no test
                    life_bayes.prob_demonstrated(prior, reliability, units, ratio, c, shape))
            results.append({"prior": row.key, "prob": prob,
                            "decision": DEMONSTRATED if prob >= confidence * (1 - 1e-12)
                            else NOT_DEMONSTRATED, "time": time})
        text, depends = item_summary(results, rows)
        shown = ("no plan" if ratio is None else "no test" if ratio == 0
                 else f"{ratio * mission:.4g} per unit")
        test = ("with no test (the prior alone)" if ratio == 0 else
                f"passing the test ({units} units for {shown}, at most {c} failing)")
        items.append({"name": f"c = {c}, {shown}", "failures": c,
                      "time": None if ratio is None else ratio * mission, "results": results,
                      "summary": f"{test}: R({mission:g}) >= {reliability:g} {text}",
                      "depends": depends})
    c0, l0 = next(((c, r) for c, r in plans if r), (None, None))
    predictive = [life_plan_predictive(r, units, l0, c0, shape, mission)
                  if r.family == "beta" else None for r in rows]
    return section(f"P(R({mission:g}) >= {reliability:g} | at most c of {units} failed) >= "
                    f"{confidence:g}?", confidence, rows, items, "plan", predictive)


def life_plan_predictive(row: PriorRow, units: int, ratio: float | None, allowed: int | None,
                          shape, mission: float) -> dict:
    """Failures among n units run to the mission time (beta-binomial) and, for the planned
    test, the chance it passes under the prior (its assurance)."""
    from qualbayes.planning.assurance import life_assurance  # noqa: PLC0415
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415
    from qualbayes.priors.predictive import beta_expectations  # noqa: PLC0415

    a, b = row.params["a"], row.params["b"]
    out = beta_expectations(a, b, units)
    lo, hi = out["range"]
    words = (f"expects {lo} to {hi} failures among {units} units run to the mission time "
             f"{mission:g} ({out['level']:.0%})")
    if ratio:
        out["prob_pass"] = life_assurance(units, ratio, allowed, shape, RatePrior.beta(a, b))
        words += (f"; P(the planned test, {ratio * mission:.4g} per unit, passes) = "
                  f"{out['prob_pass']:.3g}")
    out["words"] = words
    return out
