"""The prior keys of a run record: the prior's words, what it expects (prior predictive)
and, when asked, the sensitivity section (the question rerun under the prior set). Pure
functions of results, records and setups (:mod:`qualbayes.priors.setups`); JSON-ready.
"""

from __future__ import annotations


def lots_prior_evidence(result, prior, setup, spec: float, confidence: float,
                        sensitivity: bool = False, stated: bool = True) -> dict:
    """The run-record keys of the lots prior: its words, what it expects (prior predictive,
    only when a prior was ``stated``) and, when ``sensitivity``, the sensitivity table.
    JSON-ready."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415
    from qualbayes.models.lot_prior import HISTORY, HISTORY_PHI_UNIFORM  # noqa: PLC0415
    from qualbayes.priors.predictive import lots_predictive  # noqa: PLC0415

    if prior == HISTORY_PHI_UNIFORM:
        prior = HISTORY
    extras = setup.record() if setup is not None else {
        "prior_words": [], "prior_elicited": [], "earlier_data": None}
    frame = result.lots
    if prior != HISTORY and stated:
        lots = list(zip(frame["lot"].astype(str), frame["defectives"].astype(int),
                        frame["inspected"].astype(int), strict=True))
        pred = lots_predictive(prior.a, prior.b, lots)
        extras["prior_predictive"] = pred
        extras["prior_words"] = [*extras["prior_words"],
                                 f"What the prior as run expects: it {pred['words']}."]
    if sensitivity:
        from qualbayes.priors.prior_set import (  # noqa: PLC0415
            PriorRow,
            beta_rows,
            lots_sensitivity,
        )

        if prior == HISTORY:
            first = PriorRow("as-run", "as run (history)", "history", {}, result.prior,
                             "The hierarchical prior learned from the lots (NUTS).",
                             "the history prior as run")
            as_run = {"prob": list(frame["prob_within_spec"]),
                      "decision": list(frame["decision"])}
        else:
            first = PriorRow("as-run", "as run", "beta", {"a": prior.a, "b": prior.b},
                             f"p ~ Beta({prior.a:.6g}, {prior.b:.6g})",
                             f"The prior the analysis used ({prior.name}).", "the prior as run")
            as_run = None
        rows = beta_rows(first, setup.stated if setup else None, setup.base if setup else None,
                         setup.earlier if setup else None)
        from qualbayes.lot_answers import beta_answers  # noqa: PLC0415

        extras["sensitivity"] = lots_sensitivity(
            frame, spec, confidence, rows, as_run,
            beta_answers=lambda a, b: beta_answers(frame, a, b, spec, confidence))
    return plain(extras)


def plan_rows(record: dict) -> list[list]:
    return next(t for t in record["tables"] if t["name"] == "Plans")["rows"]


def plan_prior_evidence(kind: str, record: dict, setup, analysis, sensitivity: bool = False
                        ) -> dict:
    """The prior keys of a plan record (words, predictive, sensitivity); also adds the
    sensitivity table to the record's tables so that text, workbook and report show it."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415
    from qualbayes.priors import prior_set as sens  # noqa: PLC0415

    extras = setup.record() if setup is not None else {
        "prior_words": [], "prior_elicited": [], "earlier_data": None}
    if record.get("verdict") == "not-converged":
        return plain(extras)
    if kind == "attribute":
        plans = [(int(r[0]), r[1]) for r in plan_rows(record)]
        c0, n0 = next(((c, n) for c, n in plans if n), (None, None))
        first = first_row(analysis, "analysis prior", "the classical binomial rule")
        if analysis is not None and analysis.components == 1 and n0:
            from qualbayes.priors.predictive import plan_predictive  # noqa: PLC0415

            pred = plan_predictive(float(analysis.a[0]), float(analysis.b[0]), n0, c0)
            extras["prior_predictive"] = pred
            extras["prior_words"] = [*extras["prior_words"],
                                     f"What the analysis prior expects: it {pred['words']}."]
        if sensitivity:
            rows = sens.beta_rows(first, setup.stated if setup else None,
                                  setup.base if setup else None,
                                  setup.earlier if setup else None)
            extras["sensitivity"] = sens.attribute_sensitivity(
                record["inputs"]["reliability"], record["inputs"]["confidence"], plans, rows,
                analysis if analysis is not None and analysis.components > 1 else None)
    elif kind == "sampling":
        extras.update(sampling_evidence(record, setup, analysis, sensitivity))
    elif kind == "life":
        extras.update(life_plan_evidence(record, setup, analysis, sensitivity))
    else:  # mtbf
        rows_in = plan_rows(record)
        bayes = analysis is not None
        plans = [(int(r[0]), float(r[3] if bayes else r[2])) for r in rows_in]
        if bayes:
            from qualbayes.priors.predictive import gamma_expectations  # noqa: PLC0415

            pred = gamma_expectations(analysis.a, analysis.b, plans[0][1], plans[0][0])
            extras["prior_predictive"] = pred
            extras["prior_words"] = [*extras["prior_words"],
                                     f"What the analysis prior expects: it {pred['words']}."]
        if sensitivity:
            first = (sens.PriorRow("as-run", "as run", "gamma",
                                   {"a": analysis.a, "rate": analysis.b},
                                   analysis.describe(), "The analysis prior.",
                                   "the prior as run") if bayes else
                     sens.PriorRow("as-run", "as run (classical)", "classical", {},
                                   "none: the classical chi-square rule", "The plan as run.",
                                   "the classical rule as run"))
            rows = sens.gamma_rows(first, setup.stated if setup else None,
                                   setup.base if setup else None,
                                   setup.earlier if setup else None)
            extras["sensitivity"] = sens.mtbf_sensitivity(record["inputs"]["mtbf_goal"],
                                                          record["inputs"]["confidence"],
                                                          plans, rows)
    return plain(extras)


def sampling_evidence(record: dict, setup, prior, sensitivity: bool = False) -> dict:
    """Predictive and sensitivity keys of a sampling plan; ``prior``: the lot-quality prior
    as run (a RatePrior, or None for the plan alone)."""
    from qualbayes.priors import prior_set as sens  # noqa: PLC0415
    from qualbayes.priors.predictive import plan_predictive  # noqa: PLC0415

    inp = record["inputs"]
    n, c = inp["n"], inp["c"]
    out: dict = {}
    if prior is not None and prior.components == 1:
        a, b = float(prior.a[0]), float(prior.b[0])
        pred = plan_predictive(a, b, n, c, noun="defectives")
        out["prior_predictive"] = pred
        out["prior_words"] = [*(setup.words if setup else []),
                              f"What the lot-quality prior expects: it {pred['words']}."]
    if not sensitivity:
        return out
    first = first_row(prior, "lot-quality prior", "the plan's producer's and consumer's "
                       "risks only, no prior on lot quality")
    rows = sens.beta_rows(first, setup.stated if setup else None,
                          setup.base if setup else None, setup.earlier if setup else None)
    out["sensitivity"] = sens.sampling_sensitivity(
        n, c, inp["lot_size"], inp["limit"], inp["level"], rows,
        prior if prior is not None and prior.components > 1 else None)
    return out


def first_row(prior, what: str, classical: str):
    """The as-run row of a plan's sensitivity set: the classical rule (no prior), the Beta
    prior, or the history mixture."""
    from qualbayes.priors import prior_set as sens  # noqa: PLC0415

    if prior is None:
        return sens.PriorRow("as-run", "as run (classical)", "classical", {},
                             f"none: {classical}", "The plan as run.",
                             "the classical rule as run")
    if prior.components == 1:
        a, b = float(prior.a[0]), float(prior.b[0])
        return sens.PriorRow("as-run", "as run", "beta", {"a": a, "b": b},
                             f"p ~ Beta({a:.6g}, {b:.6g})", f"The {what} ({prior.label}).",
                             "the prior as run")
    return sens.PriorRow("as-run", "as run (history)", "history", {}, prior.label,
                         "The prior learned from the lot history.", "the history prior as run")


def life_plan_evidence(record: dict, setup, prior, sensitivity: bool = False) -> dict:
    """Predictive and sensitivity keys of a Weibull life plan; ``prior``: the analysis prior
    on p = 1 - R(mission) as run (a RatePrior, or None for the classical plan)."""
    from qualbayes.planning.weibull import ShapePrior  # noqa: PLC0415
    from qualbayes.priors import prior_set as sens  # noqa: PLC0415

    inp = record["inputs"]
    shape = inp["shape"]
    if isinstance(shape, dict):
        shape = ShapePrior(shape["log_median"], shape["log_sd"])
    plans = [(int(r[0]), r[1]) for r in plan_rows(record)]
    units, mission = inp["units"][0], inp["mission_time"]
    first = first_row(prior, "analysis prior", "the classical binomial rule with the test "
                      "time scaled by an assumed Weibull shape")
    out: dict = {}
    if prior is not None:
        c0, l0 = next(((c, r) for c, r in plans if r), (None, None))
        pred = sens.life_plan_predictive(first, units, l0, c0, shape, mission)
        out["prior_predictive"] = pred
        out["prior_words"] = [*(setup.words if setup else []),
                              f"What the analysis prior expects: it {pred['words']}."]
    if sensitivity:
        rows = sens.beta_rows(first, setup.stated if setup else None,
                              setup.base if setup else None, setup.earlier if setup else None)
        out["sensitivity"] = sens.life_plan_sensitivity(
            inp["reliability"], inp["confidence"], mission, units, shape, plans, rows)
    return out


def life_prior_evidence(result, data, prior, setup, sensitivity: bool = False, settings=None
                        ) -> dict:
    """The prior keys of a life record; when ``sensitivity`` the sensitivity section (NUTS
    runs, each gated)."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415

    extras = setup.record() if setup is not None else {
        "prior_words": [], "prior_elicited": [], "earlier_data": None}
    if sensitivity:
        from qualbayes.life_question import group_data  # noqa: PLC0415
        from qualbayes.priors.life_sensitivity import life_rows, life_sensitivity  # noqa: PLC0415

        earlier = setup.earlier if setup is not None else None
        stated = setup.stated if setup is not None else None
        rows = life_rows(prior, stated, earlier, result.units)
        extras["sensitivity"] = life_sensitivity(result, group_data(data), rows, earlier,
                                                 settings)
    return plain(extras)
