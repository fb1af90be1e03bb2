"""Command-line options for priors as statements, earlier data and sensitivity, shared by
``lots``, ``life`` and ``plan``; and turning them into priors (parsing errors are
:class:`~qualbayes.errors.OptionError`, exit 2, raised before anything is computed)."""

from __future__ import annotations

import argparse
from dataclasses import dataclass, field

from qualbayes.errors import OptionError

STATEMENT_HELP = {
    "p": "what you believe about the defect rate p, as one or two statements: 'p<0.5%%@90%%' "
         "(90%% sure p is below 0.5%%), 'p=0.2%%' (median), '0.1%%<p<1%%@90%%'; repeat the "
         "option or separate with ';'. A Beta prior meeting them exactly is used",
    "R": "what you believe about the reliability R (or the failure probability p = 1 - R): "
         "'R>0.95@90%%', 'R=0.98', '0.9<R<0.99@90%%'; a Beta prior on p meeting them exactly "
         "is the analysis prior",
    "rate": "what you believe about the MTBF or the failure rate: 'mtbf>500@90%%', "
            "'mtbf=2000', 'rate<0.001@90%%'; a gamma prior on the rate meeting them exactly is "
            "the analysis prior",
    "life": "what you believe about the Weibull shape and the life: '1.5<shape<3@90%%', "
            "'B10>2000@90%%;B10=5000', 'scale=8000;scale>4000@90%%', 'R(5000)>0.9@90%%'; "
            "lognormal priors meeting them exactly (at most one shape and one life quantity)",
}
EARLIER_HELP = {
    "lots": "earlier inspection data to borrow from: a lots file of the previous generation "
            "or another plant (pooled), or X/N for X defectives in N units",
    "attribute": "an earlier pass/fail test to borrow from: X/N (X failures in N units) or a "
                 "lots file",
    "mtbf": "an earlier constant-rate test to borrow from: R/T (R failures in total unit-time "
            "T)",
    "life": "an earlier generation's life data to borrow from (a life file; its groups are "
            "pooled)",
    "life-plan": "an earlier pass/fail test to borrow from, each unit run to the mission "
                 "time: X/N (X failures in N units), or a lots file of such counts",
}


def add_prior_options(p: argparse.ArgumentParser, statements: str, earlier: str) -> None:
    g = p.add_argument_group("priors from statements, earlier data and sensitivity "
                             "(docs/priors.md)")
    g.add_argument("--believe", action="append", metavar="STATEMENT",
                   help=STATEMENT_HELP[statements])
    g.add_argument("--earlier", metavar="DATA", help=EARLIER_HELP[earlier])
    g.add_argument("--earlier-weight", metavar="W",
                   help="how much the earlier data count, from 0 (not at all) to 1 (as much "
                        "as the new data): the power prior L(earlier)^W x prior. Required "
                        "with --earlier")
    if earlier != "mtbf":
        g.add_argument("--earlier-sheet", metavar="NAME", help="xlsx sheet of the earlier file")
        g.add_argument("--earlier-columns", metavar="KEY=HEADER,...",
                       help="name earlier-file columns whose headers are not recognised")
    g.add_argument("--sensitivity", action="store_true",
                   help="rerun the question under a fixed set of priors (as run, uniform, "
                        "Jeffreys, stated, earlier data at weights 0, 0.5 and 1, sceptical) "
                        "and report where the decision depends on the prior")


def used(args) -> bool:
    """Whether any of these options was given (only then are the extra evidence files,
    sheets and figures written, so runs without them are unchanged)."""
    return bool(getattr(args, "believe", None) or getattr(args, "earlier", None)
                or getattr(args, "sensitivity", False))


def earlier_weight(args) -> float | None:
    """The weight, checked against --earlier: both or neither."""
    from qualbayes.priors.power import parse_weight  # noqa: PLC0415

    has_data, has_weight = args.earlier is not None, args.earlier_weight is not None
    if has_data and not has_weight:
        raise OptionError("--earlier needs --earlier-weight W (0 ignores the earlier data, 1 "
                          "pools them with the new data): the weight is a judgement to state, "
                          "so it has no default")
    if has_weight and not has_data:
        raise OptionError("--earlier-weight is given without --earlier DATA")
    return parse_weight(args.earlier_weight) if has_weight else None


# --------------------------------------------------------------------------- Beta (lots, plans)

@dataclass
class BetaSetup:
    """The analysis prior on a probability p and where it came from."""

    a: float
    b: float
    name: str
    base: tuple[float, float, str]
    stated: object | None = None  # Elicited
    earlier: object | None = None  # EarlierCounts
    weight: float | None = None
    words: list[str] = field(default_factory=list)
    prior: object | None = None  # the RatePrior of a plan, when one is made

    def record(self) -> dict:
        """The run-record keys this prior adds."""
        earlier = None
        if self.earlier is not None:
            earlier = self.earlier.to_dict() | {
                "weight": self.weight, "initial_prior": self.base[2],
                "prior": f"Beta({self.a:.6g}, {self.b:.6g})",
                "method": "power prior (Ibrahim & Chen 2000): Beta(a0 + w x0, b0 + w (n0 - x0))"}
        return {"prior_words": self.words,
                "prior_elicited": [self.stated.to_dict()] if self.stated is not None else [],
                "earlier_data": earlier}


def beta_setup(statements, base: tuple[float, float, str] | None, earlier_text,
               weight: float | None, quantity: str, sheet=None, columns=None,
               noun: str = "defectives") -> BetaSetup | None:
    """Statements (already parsed) or ``base`` (a0, b0, label) as the initial prior, then
    the earlier data at ``weight``. None when neither statements nor earlier data are
    given (the caller keeps its own prior)."""
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.power import beta_power, earlier_counts  # noqa: PLC0415

    if not statements and earlier_text is None:
        return None
    stated = None
    words = []
    if statements:
        what = "p = 1 - R (the failure probability)" if quantity == "R" else "the defect rate p"
        stated = elicit(statements, what=what)
        base = (stated.params["a"], stated.params["b"],
                f"stated: p ~ Beta({stated.params['a']:.6g}, {stated.params['b']:.6g})")
        words.append(stated.words)
    if base is None:
        base = (1.0, 1.0, "uniform: p ~ Beta(1, 1)")
    a, b, name = base[0], base[1], base[2].split(":")[0]  # "uniform", "stated", "beta:A,B"
    earlier = None
    if earlier_text is not None:
        earlier = earlier_counts(earlier_text, sheet, columns)
        a, b = beta_power(base[0], base[1], earlier, weight)
        name = f"{name} prior with earlier data at weight {weight:g}"
        words.append(
            f"Borrowed from earlier data: {earlier.words(noun)}, at weight {weight:g} (power "
            f"prior, Ibrahim & Chen 2000): {base[2]} times their likelihood to the power "
            f"{weight:g} gives p ~ Beta({a:.6g}, {b:.6g}), as if {weight * earlier.units:.6g} "
            f"earlier units with {weight * earlier.failures:.6g} {noun} had been seen. Weight "
            "0 would ignore them; 1 would pool them with the new data as the same product.")
    return BetaSetup(a, b, name, base, stated, earlier, weight, words)


# --------------------------------------------------------------------------- lots

def lot_prior(args):
    """The analysis prior of ``lots`` from --prior, --believe and --earlier (all parsed and
    checked, and the earlier data read, before the lots are): (prior, BetaSetup or None)."""
    from qualbayes.models.priors import (  # noqa: PLC0415
        HISTORY,
        HISTORY_PHI_UNIFORM,
        UNIFORM,
        BetaPrior,
        parse_lot_prior,
    )
    from qualbayes.priors.statements import parse_statements  # noqa: PLC0415

    statements = parse_statements(args.believe, ("p",))
    weight = earlier_weight(args)
    prior = parse_lot_prior(args.prior) if args.prior is not None else UNIFORM
    if statements and args.prior is not None:
        raise OptionError("give the prior either as --prior or as --believe statements, not "
                          "both")
    if prior in (HISTORY, HISTORY_PHI_UNIFORM) and (statements or args.earlier is not None):
        raise OptionError("--believe and --earlier build a Beta prior; they cannot be combined "
                          "with --prior history (the history model learns from the lots "
                          "themselves)")
    base = None if prior in (HISTORY, HISTORY_PHI_UNIFORM) else (prior.a, prior.b,
                                                                 prior.describe())
    setup = beta_setup(statements, base, args.earlier, weight, "p", args.earlier_sheet,
                       args.earlier_columns)
    if setup is not None:
        prior = BetaPrior(setup.a, setup.b, setup.name)
    return prior, setup


def lot_prior_evidence(args, result, prior, setup, spec: float, confidence: float) -> dict:
    """The run-record keys of the lots prior: its words, what it expects (prior predictive)
    and, with --sensitivity, the sensitivity table. JSON-ready."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415
    from qualbayes.models.priors import HISTORY, HISTORY_PHI_UNIFORM  # noqa: PLC0415
    from qualbayes.priors.predictive import lots_predictive  # noqa: PLC0415

    if prior == HISTORY_PHI_UNIFORM:
        prior = HISTORY

    extras = setup.record() if setup is not None else {
        "prior_words": [], "prior_elicited": [], "earlier_data": None}
    frame = result.lots
    if prior != HISTORY:
        lots = list(zip(frame["lot"].astype(str), frame["defectives"].astype(int),
                        frame["inspected"].astype(int), strict=True))
        pred = lots_predictive(prior.a, prior.b, lots)
        extras["prior_predictive"] = pred
        extras["prior_words"] = [*extras["prior_words"],
                                 f"What the prior as run expects: it {pred['words']}."]
    if args.sensitivity:
        from qualbayes.priors.sensitivity import (  # noqa: PLC0415
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


def figure_file(record: dict):
    """(path writer) for the prior figure: PNG bytes drawn in memory first."""
    from qualbayes.evidence.prior_plots import prior_png  # noqa: PLC0415

    png = prior_png(record)
    return lambda p: p.write_bytes(png)


# --------------------------------------------------------------------------- plans

def attribute_prior(args, analysis):
    """--believe / --earlier of ``plan attribute`` and ``plan life``: the BetaSetup on
    p = 1 - R (None if neither is given), after checking they do not clash with
    --reliability-prior or --history."""
    return _plan_beta_prior(args, analysis, "R", "--reliability-prior", args.reliability_prior)


def sampling_prior(args, prior):
    """--believe / --earlier of ``plan sampling``: a Beta prior on the defect rate of the lots
    offered (None if neither is given)."""
    return _plan_beta_prior(args, prior, "p", "--lot-quality-prior", args.lot_quality_prior)


def _plan_beta_prior(args, prior, quantity: str, option: str, given):
    from qualbayes.planning.priors import RatePrior  # noqa: PLC0415
    from qualbayes.priors.statements import parse_statements  # noqa: PLC0415

    statements = parse_statements(args.believe, ("R", "p") if quantity == "R" else ("p",))
    weight = earlier_weight(args)
    if not statements and args.earlier is None:
        return None
    if prior == "history":
        raise OptionError("--believe and --earlier build a Beta prior; they cannot be combined "
                          "with the history prior")
    if statements and given is not None:
        raise OptionError(f"give the prior either as {option} or as --believe statements, "
                          "not both")
    on = " (on p = 1 - R)" if quantity == "R" else ""
    base = None
    if prior not in ("none", None):
        base = (float(prior.a[0]), float(prior.b[0]), prior.label + on)
    setup = beta_setup(statements, base, args.earlier, weight, quantity, args.earlier_sheet,
                       args.earlier_columns,
                       noun="failures" if quantity == "R" else "defectives")
    what = "p = 1 - R" if quantity == "R" else "p"
    setup.prior = RatePrior.beta(setup.a, setup.b,
                                 f"{setup.name}: {what} ~ Beta({setup.a:.6g}, {setup.b:.6g})")
    return setup


@dataclass
class GammaSetup:
    """The analysis prior on a failure rate and where it came from."""

    prior: object | None  # GammaPrior, or None (classical) at weight 0 on the flat prior
    base: tuple[float, float, str]
    stated: object | None = None
    earlier: object | None = None
    weight: float | None = None
    words: list[str] = field(default_factory=list)

    def record(self) -> dict:
        earlier = None
        if self.earlier is not None:
            earlier = self.earlier.to_dict() | {
                "weight": self.weight, "initial_prior": self.base[2],
                "prior": self.prior.describe() if self.prior is not None else
                "none: weight 0 on the flat prior leaves the classical test",
                "method": "power prior (Ibrahim & Chen 2000): Gamma(a0 + w r0, b0 + w T0)"}
        return {"prior_words": self.words,
                "prior_elicited": [self.stated.to_dict()] if self.stated is not None else [],
                "earlier_data": earlier}


def mtbf_prior(args, analysis):
    """--believe / --earlier of ``plan mtbf`` (None if neither is given)."""
    from qualbayes.planning.mtbf import GammaPrior  # noqa: PLC0415
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.power import gamma_power, parse_exposure  # noqa: PLC0415
    from qualbayes.priors.statements import parse_statements  # noqa: PLC0415

    statements = parse_statements(args.believe, ("rate", "mtbf"))
    weight = earlier_weight(args)
    if not statements and args.earlier is None:
        return None
    if statements and args.rate_prior is not None:
        raise OptionError("give the analysis prior either as --rate-prior or as --believe "
                          "statements, not both")
    words, stated = [], None
    if statements:
        stated = elicit(statements, what="the failure rate (1/MTBF)")
        base = (stated.params["a"], stated.params["rate"], f"stated: {stated.describe()}")
        words.append(stated.words)
    elif analysis is not None:
        base = (analysis.a, analysis.b, analysis.describe())
    else:
        base = (1.0, 0.0, "flat: failure rate ~ Gamma(1, 0) (the classical test's prior)")
    a, b = base[0], base[1]
    earlier = None
    if args.earlier is not None:
        earlier = parse_exposure(args.earlier)
        a, b = gamma_power(base[0], base[1], earlier, weight)
        words.append(
            f"Borrowed from an earlier test: {earlier.words()}, at weight {weight:g} (power "
            f"prior, Ibrahim & Chen 2000): {base[2]} times its likelihood to the power "
            f"{weight:g} gives failure rate ~ Gamma({a:.6g}, {b:.6g}), as if "
            f"{weight * earlier.failures:.6g} failures in {weight * earlier.time:.6g} "
            "unit-time had been seen. Weight 0 would ignore it; 1 would pool it with the "
            "new test.")
    prior = GammaPrior(a, b) if b > 0 else None
    if prior is None:
        words.append("With weight 0 on the flat prior no prior remains: the plan is the "
                     "classical one.")
    return GammaSetup(prior, base, stated, earlier, weight, words)


def _plan_rows(record: dict) -> list[list]:
    return next(t for t in record["tables"] if t["name"] == "Plans")["rows"]


def plan_prior_evidence(args, kind: str, record: dict, setup, analysis) -> dict:
    """The prior keys of a plan record (words, predictive, sensitivity); also adds the
    sensitivity table to the record's tables so that text, workbook and report show it."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415
    from qualbayes.priors import sensitivity as sens  # noqa: PLC0415

    extras = setup.record() if setup is not None else {
        "prior_words": [], "prior_elicited": [], "earlier_data": None}
    if record.get("verdict") == "not-converged":
        return plain(extras)
    if kind == "attribute":
        plans = [(int(r[0]), r[1]) for r in _plan_rows(record)]
        c0, n0 = next(((c, n) for c, n in plans if n), (None, None))
        first = _first_row(analysis, "analysis prior", "the classical binomial rule")
        if analysis is not None and analysis.components == 1 and n0:
            from qualbayes.priors.predictive import plan_predictive  # noqa: PLC0415

            pred = plan_predictive(float(analysis.a[0]), float(analysis.b[0]), n0, c0)
            extras["prior_predictive"] = pred
            extras["prior_words"] = [*extras["prior_words"],
                                     f"What the analysis prior expects: it {pred['words']}."]
        if args.sensitivity:
            rows = sens.beta_rows(first, setup.stated if setup else None,
                                  setup.base if setup else None,
                                  setup.earlier if setup else None)
            extras["sensitivity"] = sens.attribute_sensitivity(
                record["inputs"]["reliability"], record["inputs"]["confidence"], plans, rows,
                analysis if analysis is not None and analysis.components > 1 else None)
    elif kind == "sampling":
        extras.update(_sampling_evidence(args, record, setup, analysis))
    elif kind == "life":
        extras.update(_life_plan_evidence(args, record, setup, analysis))
    else:  # mtbf
        rows_in = _plan_rows(record)
        bayes = analysis is not None
        plans = [(int(r[0]), float(r[3] if bayes else r[2])) for r in rows_in]
        if bayes:
            from qualbayes.priors.predictive import gamma_expectations  # noqa: PLC0415

            pred = gamma_expectations(analysis.a, analysis.b, plans[0][1], plans[0][0])
            extras["prior_predictive"] = pred
            extras["prior_words"] = [*extras["prior_words"],
                                     f"What the analysis prior expects: it {pred['words']}."]
        if args.sensitivity:
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


def _sampling_evidence(args, record: dict, setup, prior) -> dict:
    """Predictive and sensitivity keys of a sampling plan; ``prior``: the lot-quality prior
    as run (a RatePrior, or None for the plan alone)."""
    from qualbayes.priors import sensitivity as sens  # noqa: PLC0415
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
    if not args.sensitivity:
        return out
    first = _first_row(prior, "lot-quality prior", "the plan's producer's and consumer's "
                       "risks only, no prior on lot quality")
    rows = sens.beta_rows(first, setup.stated if setup else None,
                          setup.base if setup else None, setup.earlier if setup else None)
    out["sensitivity"] = sens.sampling_sensitivity(
        n, c, inp["lot_size"], inp["limit"], inp["level"], rows,
        prior if prior is not None and prior.components > 1 else None)
    return out


def _first_row(prior, what: str, classical: str):
    """The as-run row of a plan's sensitivity set: the classical rule (no prior), the Beta
    prior, or the history mixture."""
    from qualbayes.priors import sensitivity as sens  # noqa: PLC0415

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


def _life_plan_evidence(args, record: dict, setup, prior) -> dict:
    """Predictive and sensitivity keys of a Weibull life plan; ``prior``: the analysis prior
    on p = 1 - R(mission) as run (a RatePrior, or None for the classical plan)."""
    from qualbayes.planning.weibull import ShapePrior  # noqa: PLC0415
    from qualbayes.priors import sensitivity as sens  # noqa: PLC0415

    inp = record["inputs"]
    shape = inp["shape"]
    if isinstance(shape, dict):
        shape = ShapePrior(shape["log_median"], shape["log_sd"])
    plans = [(int(r[0]), r[1]) for r in _plan_rows(record)]
    units, mission = inp["units"][0], inp["mission_time"]
    first = _first_row(prior, "analysis prior", "the classical Weibull-extended binomial rule")
    out: dict = {}
    if prior is not None:
        c0, l0 = next(((c, r) for c, r in plans if r), (None, None))
        pred = sens._life_plan_predictive(first, units, l0, c0, shape, mission)
        out["prior_predictive"] = pred
        out["prior_words"] = [*(setup.words if setup else []),
                              f"What the analysis prior expects: it {pred['words']}."]
    if args.sensitivity:
        rows = sens.beta_rows(first, setup.stated if setup else None,
                              setup.base if setup else None, setup.earlier if setup else None)
        out["sensitivity"] = sens.life_plan_sensitivity(
            inp["reliability"], inp["confidence"], mission, units, shape, plans, rows)
    return out


# --------------------------------------------------------------------------- life

Q_SCALE = 1.0 - 0.36787944117144233  # B_q at q = 1 - 1/e is the Weibull scale itself


@dataclass
class LifeSetup:
    """The stated (elicited) parts of the life prior and the earlier data."""

    stated: object | None  # LifePrior: the elicited parts on the default prior
    elicited: list = field(default_factory=list)  # Elicited priors (shape, life)
    earlier: object | None = None  # EarlierLife
    weight: float | None = None
    words: list[str] = field(default_factory=list)

    def record(self) -> dict:
        earlier = None
        if self.earlier is not None:
            earlier = self.earlier.to_dict() | {
                "weight": self.weight,
                "method": "power prior (Ibrahim & Chen 2000): w x log-likelihood of the "
                          "earlier data added to the log prior"}
        return {"prior_words": self.words, "prior_elicited": [e.to_dict() for e in self.elicited],
                "earlier_data": earlier}


def _with_elicited(prior, e):
    """The LifePrior with one elicited lognormal part put in."""
    import math  # noqa: PLC0415
    from dataclasses import replace  # noqa: PLC0415

    mu, sigma = e.params["mu"], e.params["sigma"]
    said = "; ".join(s.text for s in e.statements)
    if e.variable == "shape":
        z = 1.959963984540054
        return replace(prior, shape=(mu, sigma), shape_given=True,
                       shape_range=(math.exp(mu - z * sigma), math.exp(mu + z * sigma)))
    if e.variable.startswith("H("):
        return replace(prior, scale_kind="reliability", scale_args=(e.time, mu, sigma),
                       scale_text=f"stated '{said}': ln H({e.time:g}) = ln(-ln R({e.time:g})) "
                                  f"~ Normal({mu:.4g}, {sigma:.4g}^2)")
    q = Q_SCALE if e.variable == "scale" else e.time
    name = "the scale (= B63.2 life)" if e.variable == "scale" else f"{e.variable} life"
    return replace(prior, scale_kind="blife", scale_args=(q, mu, sigma),
                   scale_text=f"stated '{said}': ln {name} ~ Normal({mu:.4g}, {sigma:.4g}^2)")


def life_prior(args, prior):
    """--believe / --earlier of ``life`` on top of the --shape-prior / --blife-prior /
    --reliability-prior prior: (prior, LifeSetup or None). The earlier file is read here,
    before the data."""
    from qualbayes.models.weibull import LifePrior  # noqa: PLC0415
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.power import earlier_life, life_power_prior  # noqa: PLC0415
    from qualbayes.priors.statements import parse_statements  # noqa: PLC0415

    statements = parse_statements(args.believe, ("shape", "scale", "B", "R(T)"))
    weight = earlier_weight(args)
    if not statements and args.earlier is None:
        return prior, None
    shape_st = [s for s in statements if s.family_key == "shape"]
    life_st = [s for s in statements if s.family_key != "shape"]
    if shape_st and args.shape_prior is not None:
        raise OptionError("give the shape either as --shape-prior or as --believe statements, "
                          "not both")
    if life_st and (args.blife_prior is not None or args.reliability_prior is not None):
        raise OptionError("give the life either as --blife-prior / --reliability-prior or as "
                          "--believe statements, not both")
    elicited = [elicit(st, what=None) for st in (shape_st, life_st) if st]
    stated = None
    if elicited:
        stated = LifePrior()
        for e in elicited:
            prior = _with_elicited(prior, e)
            stated = _with_elicited(stated, e)
    words = [e.words for e in elicited]
    earlier = None
    if args.earlier is not None:
        earlier = earlier_life(args.earlier, args.earlier_sheet, args.earlier_columns,
                               getattr(args, "units", "") or "")
        prior = life_power_prior(prior, earlier, weight)
        words.append(
            f"Borrowed from earlier data: {earlier.words()}, at weight {weight:g} (power "
            f"prior, Ibrahim & Chen 2000): the prior is multiplied by their Weibull likelihood "
            f"to the power {weight:g}, i.e. {weight:g} x their log-likelihood is added to the "
            "log prior. Weight 0 would ignore them; 1 would pool them with the new data as "
            "the same product.")
    return prior, LifeSetup(stated, elicited, earlier, weight, words)


def life_prior_evidence(args, result, data, prior, setup, settings=None) -> dict:
    """The prior keys of a life record; with --sensitivity the sensitivity section (NUTS
    runs, each gated)."""
    from qualbayes.evidence.jsonout import plain  # noqa: PLC0415

    extras = setup.record() if setup is not None else {
        "prior_words": [], "prior_elicited": [], "earlier_data": None}
    if args.sensitivity:
        from qualbayes.life_analysis import group_data  # noqa: PLC0415
        from qualbayes.priors.life_sensitivity import life_rows, life_sensitivity  # noqa: PLC0415

        earlier = setup.earlier if setup is not None else None
        stated = setup.stated if setup is not None else None
        rows = life_rows(prior, stated, earlier, result.units)
        extras["sensitivity"] = life_sensitivity(result, group_data(data), rows, earlier,
                                                 settings)
    return plain(extras)
