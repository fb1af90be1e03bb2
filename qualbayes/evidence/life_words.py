"""The words of the life question: the notes of each group, the comparisons and the other
distributions in sentences, and the model in symbols. The question
(:func:`qualbayes.life_question.assess_life`) returns numbers, flags and codes only; this
module turns them into the group results of the run record (same keys, same sentences as
the command line has always printed), with the plot curves of :mod:`life_curves`.
"""

from __future__ import annotations

from qualbayes import cross_check
from qualbayes.data.life import frame_arrays
from qualbayes.evidence.life_curves import plot_data
from qualbayes.inference.mcse import is_close_call
from qualbayes.life_checks import PPC_MISFIT
from qualbayes.life_models import LABELS
from qualbayes.life_precision import RULE_TEXT, Precision, close_call_note
from qualbayes.life_question import PRIOR_SHARE_NOTE, LifeAssessment

MODEL_TEXT = {"weibull": (
    "t ~ Weibull(shape beta, scale eta), R(t) = exp(-(t/eta)^beta); failures log f(t), "
    "suspensions log S(t), interval-censored log(S(a) - S(b)), left-censored log F(b); "
    "NUTS on (log beta, log eta) after an affine change of variables from the posterior "
    "mode and its Laplace covariance; each group fitted on its own")}
WHY_NO_ML = {
    "zero-failures": "no maximum-likelihood answer: with zero failures the likelihood has no "
                     "maximum",
    "shape-unsettled": "the maximum-likelihood shape runs off (> 50): it has not settled",
    "sigma-unsettled": "the maximum-likelihood sigma does not settle",
}
GATE_NOTE = ("the sampler did not pass the convergence gate: no answer and no decision are "
             "given for this group (see diagnostics)")
NUMBERS_ONLY = ("shape_prior_share", "data_alone")  # flags the words below are built from


def model_text(result: LifeAssessment) -> str:
    return MODEL_TEXT.get(result.model, result.model)


def run_notes(result: LifeAssessment) -> list[str]:
    """The notes of the whole run: a failed gate, the quadrature cross-check, the priors of
    the other distributions."""
    notes = []
    if not all(g["diagnostics"]["passed"] for g in result.groups):
        notes.append("the convergence gate failed for at least one group: it carries "
                     "'not-converged' and no decision")
    notes.append(cross_check.summary_line({g["group"]: g["diagnostics"].get("cross_check")
                                           for g in result.groups}))
    if result.alternatives:
        notes.append("other distributions: lognormal prior " + result.alternatives_prior.text
                     + "; exponential prior: uniform on the cumulative hazard at t_ref; "
                     "a stated B-life, reliability or earlier-data prior applies to the "
                     "Weibull only")
    return notes


def comparison_words(c: dict, confidence: float) -> dict:
    """One comparison with its verdict and sentence in place of the code ``call``."""
    a, b, call = c["a"], c["b"], c["call"]
    out = {k: v for k, v in c.items() if k != "call"}
    if call == "not-converged":
        return {"a": a, "b": b, "verdict": "not-converged",
                "words": f"{a} against {b}: no comparison (a group failed its convergence gate)",
                "prob_a_more_reliable": None}
    p, mc = c["prob_a_more_reliable"], c["prob_a_more_reliable_mcse"]
    verdict = {"accept": f"{a} better", "reject": f"{b} better", "undecided": "not told apart",
               "too-close": "too close to call"}[call]
    words = {
        "accept": f"{a} is more reliable than {b} at the mission time "
                  f"(P = {p:.4f} >= {confidence:g})",
        "reject": f"{b} is more reliable than {a} at the mission time "
                  f"(P = {1 - p:.4f} >= {confidence:g})",
        "undecided": f"the data do not tell {a} from {b} at the mission time at confidence "
                     f"{confidence:g} (P({a} better) = {p:.4f})",
        "too-close": f"{a} against {b}: P = {p:.4f} is too close to call at this Monte Carlo "
                     f"precision (MCSE {mc:.4f})",
    }[call]
    head = {k: out.pop(k) for k in ("a", "b", "prob_a_more_reliable",
                                    "prob_a_more_reliable_mcse")}
    return head | {"verdict": verdict, "words": words} | out


def loo_words(comparison: dict) -> list[str]:
    best = comparison["best"]
    words = []
    for row in comparison["models"]:
        if row["family"] == best:
            continue
        a, b = LABELS[best], LABELS[row["family"]]
        diff, se = row["elpd_difference"], row["difference_se"]
        if row["distinguished_from_best"]:
            words.append(f"the data favour {a} over {b} (elpd difference {diff:.1f}, SE "
                         f"{se:.1f})")
        else:
            words.append(f"the data do not distinguish {a} from {b} (elpd difference "
                         f"{diff:.1f}, SE {se:.1f})")
    high = [f"{LABELS[r['family']]}: {r['units_high_k']} unit(s) with Pareto k above "
            f"{r['pareto_k_threshold']:.2f}" for r in comparison["models"] if r["units_high_k"]]
    if high:
        words.append("PSIS-LOO is unreliable for some observations (" + "; ".join(high)
                     + "): read the comparison with care")
    return words


def models_words(models: dict, confidence: float) -> dict:
    """The other distributions with the LOO comparison and the differences in words."""
    rows, comparison = models["by_model"], models["loo"]
    words = loo_words(comparison) if comparison else []
    if comparison:
        comparison = comparison | {"words": list(words)}
        best = comparison["best"]
        rb = next(r for r in rows if r["family"] == best)["reliability_at_mission"]["median"]
        for row in comparison["models"]:
            if row["family"] != best and not row["distinguished_from_best"]:
                other = next(r for r in rows if r["family"] == row["family"])
                diff = other["reliability_at_mission"]["median"] - rb
                words.append(f"R(mission) differs by {diff:+.4f} between {LABELS[best]} "
                             f"and {LABELS[row['family']]} (posterior medians)")
    for r in rows:
        if r["passed"] and is_close_call(r["prob_meets_target"],
                                         r["prob_meets_target_mc_error"], confidence):
            words.append(f"under {LABELS[r['family']]} P(R >= target) = "
                         f"{r['prob_meets_target']:.4f} is within 3 Monte Carlo standard errors "
                         f"of {confidence:g}: too close to call at this precision")
    decisions = {r["decision"] for r in rows}
    if len(decisions) > 1:
        words.append("the decision depends on the distribution: " + ", ".join(
            f"{r['decision']} under {LABELS[r['family']]}" for r in rows))
    return {"by_model": rows, "loo": comparison, "words": words}


def fit_check_words(c: dict) -> dict:
    out = {k: v for k, v in c.items() if k not in ("doubtful", "confidence")}
    conf = c["confidence"]
    label = LABELS[c["family"]]
    inside = sum(lo <= o <= hi for o, lo, hi in zip(c["observed"], c["predicted_low"],
                                                    c["predicted_high"], strict=True))
    if c["misfit"]:
        verdict = f"the {label} model does not reproduce when the failures occurred"
    elif c["doubtful"]:
        verdict = (f"too close to call against {PPC_MISFIT:g} at this Monte Carlo precision; "
                   "treat the fit as doubtful")
    else:
        verdict = "no sign of misfit"
    words = (f"check of fit ({label}): observed failures fall inside the central "
             f"{conf:.0%} predictive range in {inside} of {len(c['observed'])} time bins; "
             f"posterior predictive p-value {c['p_value']:.3f} (Monte Carlo error "
             f"{c['p_value_mcse']:.3f}): " + verdict)
    return out | {"band": f"central {conf:.0%} predictive range", "words": words}


def extrapolation_words(e: dict, g: dict, mission: float, units: str) -> dict:
    if not e["beyond"]:
        return e
    from qualbayes.life_extras import extrapolation_values  # noqa: PLC0415

    u = f" {units}" if units else ""
    words = (f"the mission time {mission:,.6g}{u} is {e['factor']:.2g} times the longest "
             f"observed time ({e['longest_observed']:,.6g}{u}): R(mission) is an "
             "extrapolation beyond the data and rests on the chosen distribution (Weibull)")
    basis = ("posterior median under each distribution" if g.get("models")
             else "by maximum likelihood under each distribution")
    vals = {LABELS[f]: v for f, v in extrapolation_values(g).items() if v is not None}
    if len(vals) > 1:
        words += (f"; R(mission) {basis}: " + ", ".join(f"{v:.4f} ({k})" for k, v in vals.items())
                  + f", a spread of {e['spread']:.4f}")
    return e | {"words": words}


def data_alone_words(g: dict, units: str) -> str:
    ml = g["max_likelihood"]["weibull"]
    u = f" {units}" if units else ""
    if not ml["fitted"]:
        return f"the data alone (maximum likelihood): {WHY_NO_ML[ml['reason']]}"
    rel = g["reliability_at_mission"]["median"]
    return (f"the prior weighs heavily here; the data alone (censored maximum likelihood) "
            f"give shape {ml['shape']:.3g}, scale {ml['scale']:,.4g}{u}, B10 "
            f"{ml['b10']:,.4g}{u}, R(mission) {ml['reliability_at_mission']:.4f}, beside the "
            f"posterior medians shape {g['shape']['median']:.3g}, B10 "
            f"{g['b10']['median']:,.4g}{u}, R(mission) {rel:.4f}")


def _ml_words(ml: dict | None) -> dict | None:
    if ml is None:
        return None
    return {f: ({("why" if k == "reason" else k): (WHY_NO_ML[x] if k == "reason" else x)
                 for k, x in v.items()}) for f, v in ml.items()}


def group_notes(g: dict, result: LifeAssessment) -> list[str]:
    """The notes of one group, in the order the command line has always printed them."""
    if not g["diagnostics"]["passed"]:
        return [GATE_NOTE]
    notes = []
    prior, mc = result.prior, g["monte_carlo"]
    share = g.get("shape_prior_share")
    if g["failures"] == 0:
        lo, hi = prior.shape_range or (float("nan"), float("nan"))
        notes.append(f"zero failures: the data bound the life from below only; the answer "
                     f"rests on the stated shape prior ({lo:g} to {hi:g}) and on the scale "
                     "prior. A different shape range gives a different answer.")
    elif share is not None and share > PRIOR_SHARE_NOTE:
        notes.append(f"with {g['failures']} failure(s) the shape is informed mainly by its "
                     f"prior (posterior spread of log shape is {share:.0%} of the prior's)")
    if mc["close_call"] or mc["extra_draw_rounds"]:
        prec = Precision(mc["prob_meets_target"], mc["prob_meets_target_mcse"],
                         mc["draws_per_chain"], mc["extra_draw_rounds"], mc["close_call"])
        notes.append(close_call_note(prec, result.confidence))
    if g.get("data_alone") and g.get("max_likelihood"):
        notes.append(data_alone_words(g, result.units))
    return notes


def worded_group(g: dict, result: LifeAssessment, arrays: dict | None) -> dict:
    """One group result of the run record: the numbers with their words and curves."""
    ok = g["diagnostics"]["passed"]
    done = {}
    if "monte_carlo" in g:
        done["monte_carlo"] = g["monte_carlo"] | {"rule": RULE_TEXT}
    if g.get("max_likelihood"):
        done["max_likelihood"] = _ml_words(g["max_likelihood"])
    if g.get("models"):
        done["models"] = models_words(g["models"], result.confidence)
    if g.get("extrapolation"):
        done["extrapolation"] = extrapolation_words(g["extrapolation"], g, result.mission,
                                                    result.units)
    if g.get("fit_check") is not None:
        done["fit_check"] = [fit_check_words(c) for c in g["fit_check"]]
    if g.get("remaining_test"):
        rt = g["remaining_test"]
        said = remaining_words(rt, result.confidence)
        done["remaining_test"] = ({"found": rt["found"]}
                                  | {k: v for k, v in said.items() if k != "words"} | rt
                                  | {k: v for k, v in said.items() if k == "words"})
    notes = group_notes(g, result)
    if ok:
        notes += (done.get("models") or {}).get("words") or []
        if (done.get("extrapolation") or {}).get("beyond"):
            notes.append(done["extrapolation"]["words"])
        if "fit_check" in done:
            notes += [c["words"] for c in done["fit_check"]] or [
                "check of fit: fewer than 3 failures, nothing to check"]
    out = {}
    for key, v in g.items():
        if key in NUMBERS_ONLY:
            continue
        out[key] = done.get(key, v)
        if key == "diagnostics":
            d = result.draws.get(g["group"], {})
            out["notes"] = notes
            out["plot"] = (plot_data(arrays, d["shape"], d["scale"], result.mission,
                                     result.confidence)
                           if ok and arrays is not None and "shape" in d else None)
    return out


def worded(result: LifeAssessment, data=None) -> dict:
    """The record's ``model``, ``groups``, ``notes`` and ``comparisons`` from the numbers
    (``data``: the LifeTable, for the plotted points and curves)."""
    arrays = {}
    if data is not None:
        for g in result.groups:
            name = g["group"]
            arrays[name] = frame_arrays(data.frame[data.frame["group"] == name])
    return {"model": model_text(result),
            "groups": [worded_group(g, result, arrays.get(g["group"])) for g in result.groups],
            "notes": run_notes(result),
            "comparisons": [comparison_words(c, result.confidence)
                            for c in result.comparisons]}


def _t(x: float) -> str:
    return f"{x:,.0f}" if x >= 1000 else f"{x:.4g}"


def remaining_words(rt: dict, confidence: float) -> dict[str, str]:
    """The basis and the sentence of a remaining-test-time answer
    (:func:`qualbayes.life_remaining.remaining_time` returns numbers and a case code)."""
    case = rt.get("case")
    if case == "nothing-running":
        return {"basis": "running units",
                "words": "no unit is still running (no suspensions): give a number of new "
                         "units to test (--new-units N) for the time they would need"}
    basis = (f"{rt['new_units']} new unit(s) put on test" if rt.get("new_units") else
             f"the {rt['running']} suspended unit(s) (assumed still on test)")
    if case == "not-reached":
        words = (f"survival alone does not bring P(R >= target) to {confidence:g} within "
                 f"{_t(rt['search_limit'])} more time ({basis}): the running units cannot "
                 "settle this; more units or a design change are needed")
    elif case == "weights-degenerate":
        reached = (f"; up to {_t(rt['reached_time'])} more, P(R >= target) only reaches "
                   f"{rt['reached_prob']:.4f}" if rt.get("reached_time") is not None else "")
        words = (f"cannot say how much longer to test by reweighting: beyond "
                 f"{_t(rt['beyond'])} more the weights degenerate (Pareto k "
                 f"{rt['pareto_k']:.2f}, {rt['weights_ess']:.0f} effective draws; needed k <= "
                 f"{rt['pareto_k_max']}, >= {rt['weights_ess_min']:.0f}){reached}. The extra "
                 f"evidence would outweigh the present posterior: refit with the extended data "
                 f"to reach {confidence:g}")
    else:
        words = (f"P(R >= target) reaches {confidence:g} if {basis} each survive a further "
                 f"{_t(rt['extra_time'])} without failure (P = {rt['prob_at_extra_time']:.4f}, "
                 f"Monte Carlo error {rt['prob_mcse']:.4f}; by reweighting the posterior "
                 f"draws, Pareto k {rt['pareto_k']:.2f}, {rt['weights_ess']:.0f} effective "
                 "draws)")
    return {"basis": basis, "words": words}

