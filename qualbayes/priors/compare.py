"""``sensitivity(question, priors)``: a result rerun under a set of priors, as a tidy frame.

``question`` is a result of the Python API (:class:`~qualbayes.results.LotResult`, a
:class:`~qualbayes.results.PlanResult` of an attribute or MTBF plan, or a
:class:`~qualbayes.results.LifeResult`, whose reruns are NUTS fits, each gated).
``priors`` is None (the
standard set of :mod:`qualbayes.priors.prior_set`: as run, uniform, Jeffreys, sceptical),
or a dict ``{name: prior}`` of Beta priors (lots, attribute plans) or Gamma priors (MTBF
plans), rerun beside the prior as run. The frame has one row per item (lot or plan) and
prior: the key probability and the decision under that prior, and whether the item's
decision depends on the prior; ``frame.attrs["summary"]`` holds the sentence for the whole.
"""

from __future__ import annotations

import pandas as pd

from qualbayes.errors import ParameterError
from qualbayes.priors import prior_set as sens
from qualbayes.priors.distributions import Beta, Gamma


def _given_rows(priors: dict, kind) -> list[sens.PriorRow]:
    if not isinstance(priors, dict) or not priors:
        raise ParameterError("priors", priors, "give a dict {name: prior}")
    rows = []
    for name, prior in priors.items():
        if not isinstance(prior, kind):
            raise ParameterError("priors", priors, f"{name!r} is not a "
                                                   f"qualbayes.priors.{kind.__name__}")
        params = ({"a": prior.a, "b": prior.b} if kind is Beta
                  else {"a": prior.a, "rate": prior.rate})
        rows.append(sens.PriorRow(str(name), str(name), kind.__name__.lower(), params,
                                  prior.describe(), "Given.", str(name)))
    return rows


def _tidy(section: dict, noun: str) -> pd.DataFrame:
    labels = {p["key"]: p for p in section["priors"]}
    rows = []
    for item in section["items"]:
        for res in item["results"]:
            p = labels[res["prior"]]
            rows.append({noun: item["name"], "prior": p["label"], "prior_text": p["prior"],
                         "prob": res.get("prob"), "decision": res["decision"],
                         "depends_on_prior": item["depends"]})
    frame = pd.DataFrame(rows)
    frame["prob"] = frame["prob"].astype(float)
    frame.attrs["summary"] = section["summary"]
    frame.attrs["question"] = section["question"]
    return frame


def _lots(result, priors) -> pd.DataFrame:
    frame = result.lots
    if result.assessment.prior_params is None:  # the history prior
        first = sens.PriorRow("as-run", "as run (history)", "history", {}, result.prior,
                              "The hierarchical prior learned from the lots (NUTS).",
                              "the history prior as run")
        as_run = {"prob": list(frame["prob_within_spec"]), "decision": list(frame["decision"])}
    else:
        a, b = result.assessment.prior_params["a"], result.assessment.prior_params["b"]
        first = sens.PriorRow("as-run", "as run", "beta", {"a": a, "b": b},
                              f"p ~ Beta({a:.6g}, {b:.6g})", "The prior the analysis used.",
                              "the prior as run")
        as_run = None
    rows = (sens.beta_rows(first) if priors is None
            else sens.merge_duplicates([first, *_given_rows(priors, Beta)]))
    return _tidy(sens.lots_sensitivity(frame, result.spec, result.confidence, rows, as_run),
                 "lot")


def _plan(result, priors) -> pd.DataFrame:
    from qualbayes.priors import plan_sensitivity as plan_sens  # noqa: PLC0415

    inputs, plans = result.record["inputs"], result.table("Plans")
    analysis = result.analysis
    if result.kind == "attribute":
        if analysis is not None and analysis.components > 1:
            first = sens.PriorRow("as-run", "as run (history)", "history", {}, analysis.label,
                                  "The prior learned from the lot history.",
                                  "the history prior as run")
        elif analysis is not None:
            a, b = float(analysis.a[0]), float(analysis.b[0])
            first = sens.PriorRow("as-run", "as run", "beta", {"a": a, "b": b},
                                  f"p ~ Beta({a:.6g}, {b:.6g})", "The analysis prior.",
                                  "the prior as run")
        else:
            first = sens.PriorRow("as-run", "as run (classical)", "classical", {},
                                  "none: the classical binomial rule", "The plan as run.",
                                  "the classical rule as run")
        rows = (sens.beta_rows(first) if priors is None
                else sens.merge_duplicates([first, *_given_rows(priors, Beta)]))
        pairs = [(int(c), None if pd.isna(n) else int(n))
                 for c, n in zip(plans["allowed failures c"], plans["units n"], strict=True)]
        section = plan_sens.attribute_sensitivity(
            inputs["reliability"], inputs["confidence"], pairs, rows,
            analysis if analysis is not None and analysis.components > 1 else None)
        return _tidy(section, "plan")
    if result.kind == "mtbf":
        if analysis is not None:
            first = sens.PriorRow("as-run", "as run", "gamma", {"a": analysis.a,
                                                                "rate": analysis.b},
                                  analysis.describe(), "The analysis prior.",
                                  "the prior as run")
            times = plans["Bayesian test time"]
        else:
            first = sens.PriorRow("as-run", "as run (classical)", "classical", {},
                                  "none: the classical chi-square rule", "The plan as run.",
                                  "the classical rule as run")
            times = plans["classical test time"]
        rows = (sens.gamma_rows(first) if priors is None
                else sens.merge_duplicates([first, *_given_rows(priors, Gamma)]))
        pairs = [(int(r), float(t)) for r, t in zip(plans["allowed failures r"], times,
                                                    strict=True)]
        return _tidy(plan_sens.mtbf_sensitivity(inputs["mtbf_goal"], inputs["confidence"],
                                                pairs, rows), "plan")
    raise ParameterError("question", result.kind, "sensitivity from Python is available for "
                                                  "lots, attribute and MTBF plans")


def _life(result, priors, settings) -> pd.DataFrame:
    from qualbayes.inference.run import SamplerSettings  # noqa: PLC0415
    from qualbayes.life_question import group_data  # noqa: PLC0415
    from qualbayes.priors.life_sensitivity import life_rows, life_sensitivity  # noqa: PLC0415

    if priors is not None:
        raise ParameterError("priors", priors, "a life result is rerun under the standard set "
                                               "only (leave priors out)")
    as_run = result.assessment.prior
    if as_run.earlier:
        raise ParameterError("question", "LifeResult", "a life prior with earlier data is "
                                                       "rerun from the command line "
                                                       "(--sensitivity)")
    if settings is not None and not isinstance(settings, SamplerSettings):
        raise ParameterError("settings", settings, "expected SamplerSettings")
    rows = life_rows(as_run, None, None, result.assessment.units)
    section = life_sensitivity(result.assessment, group_data(result.table), rows, None,
                               settings)
    return _tidy(section, "group")


def sensitivity(question, priors: dict | None = None, *, settings=None) -> pd.DataFrame:
    """Every item of ``question`` (a LotResult, an attribute/MTBF PlanResult or a
    LifeResult) under every prior of the set; see the module notes. ``settings``: the
    sampler settings of the life reruns (default: those of the result's seed)."""
    from qualbayes.results import LifeResult, LotResult, PlanResult  # noqa: PLC0415

    if isinstance(question, LotResult):
        return _lots(question, priors)
    if isinstance(question, PlanResult):
        return _plan(question, priors)
    if isinstance(question, LifeResult):
        return _life(question, priors, settings)
    raise ParameterError("question", type(question).__name__,
                         "expected a LotResult, PlanResult or LifeResult from the qualbayes "
                         "API")
