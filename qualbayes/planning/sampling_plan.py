"""Which single sampling plan (n, c) protects producer and consumer, and how good are
accepted lots under a prior (the API behind ``plan sampling``)."""

from __future__ import annotations

import numpy as np

from qualbayes.planning import draw_error, sampling
from qualbayes.planning.history import HistoryPrior
from qualbayes.planning.inputs import probability
from qualbayes.planning.plan_common import (
    not_converged_record,
    pct,
)
from qualbayes.planning.rate_prior import RatePrior
from qualbayes.planning.records import (
    ASSUMPTIONS,
    HISTORY_ASSUMPTION,
    curve,
    record,
    table,
)


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
    question = (f"Which single sampling plan accepts lots at AQL {pct(aql)} with probability "
                f">= {1 - alpha:.4g} and lots at LTPD {pct(ltpd)} with probability <= "
                f"{beta:.4g}?")
    inputs = {"aql": aql, "alpha": alpha, "ltpd": ltpd, "beta": beta, "lot_size": lot_size,
              "spec": spec, "n": plan.n, "c": plan.c, "limit": limit, "level": level}
    if history is not None:
        if not history.passed:
            return not_converged_record("sampling", question, inputs, history)
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
        what = (f"the accepted lot of {lot_size} holds at most {pct(limit)} defectives"
                if lot_size is not None else f"an accepted lot has p <= {pct(limit)}")
        key = first[-2] if lot_size is not None else first[3]
        summary.append(f"with prior {prior.label}: P(accept) = {first[2]:.4f}; " + (
            "no lot is accepted under this prior" if key is None else
            f"{what} with probability {key:.4f} (before inspection {first[1]:.4f}): "
            f"{first[-1]} at level {level:.4g}"))
        if history is not None:
            mc_rows, mc_notes = draw_error.sampling_errors(history, plan.n, plan.c, limit,
                                                           level, lot_size)
            tables.append(table("Monte Carlo error", "Monte Carlo error of the numbers that "
                                "rest on the history's posterior draws (exact given the draws)",
                                draw_error.SAMPLING_COLUMNS, mc_rows))
            summary += mc_notes
        assumptions.append(f"Bayesian view's decision: the plan protects the consumer when "
                           f"an accepted lot is within s = {pct(limit)} with probability at "
                           f"least {level:.4g} (default 1 - beta)")
    return record("sampling", question, inputs,
                  "exact " + plan.method + ": smallest n meeting P_a(LTPD) <= beta for the "
                  "first c whose n also meets P_a(AQL) >= 1 - alpha", summary, tables, curves,
                  assumptions, priors=priors,
                  diagnostics={history.part: history.gate} if history is not None else {})
