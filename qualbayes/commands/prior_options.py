"""Command-line options for priors as statements, earlier data and sensitivity, shared by
``lots``, ``life`` and ``plan``: text to prior objects and setups, with the checks of which
options may be combined (errors are :class:`~qualbayes.errors.OptionError`, exit 2, raised
before anything is computed). The priors themselves are built in :mod:`qualbayes.priors`
(setups, evidence); nothing below this module sees the argparse Namespace."""

from __future__ import annotations

import argparse

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
    from qualbayes.priors.power_prior import parse_weight  # noqa: PLC0415

    has_data, has_weight = args.earlier is not None, args.earlier_weight is not None
    if has_data and not has_weight:
        raise OptionError("--earlier needs --earlier-weight W (0 ignores the earlier data, 1 "
                          "pools them with the new data): the weight is a judgement to state, "
                          "so it has no default")
    if has_weight and not has_data:
        raise OptionError("--earlier-weight is given without --earlier DATA")
    return parse_weight(args.earlier_weight) if has_weight else None


# --------------------------------------------------------------------------- Beta (lots, plans)

from qualbayes.priors.setups import (  # noqa: E402 - re-exported for the commands
    BetaSetup,
    GammaSetup,
    LifeSetup,
    beta_setup,
)

__all__ = ["BetaSetup", "GammaSetup", "LifeSetup", "beta_setup"]


# --------------------------------------------------------------------------- lots

def lot_prior(args):
    """The analysis prior of ``lots`` from --prior, --believe and --earlier (all parsed and
    checked, and the earlier data read, before the lots are): (prior, BetaSetup or None)."""
    from qualbayes.models.lot_prior import (  # noqa: PLC0415
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
    """The run-record keys of the lots prior (see :mod:`qualbayes.priors.evidence`)."""
    from qualbayes.priors.evidence import lots_prior_evidence  # noqa: PLC0415

    stated = used(args) or args.prior is not None  # the prior-range line only for a stated prior
    return lots_prior_evidence(result, prior, setup, spec, confidence, args.sensitivity, stated)


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
    from qualbayes.planning.rate_prior import RatePrior  # noqa: PLC0415
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


def mtbf_prior(args, analysis):
    """--believe / --earlier of ``plan mtbf`` (None if neither is given)."""
    from qualbayes.priors.setups import gamma_setup  # noqa: PLC0415
    from qualbayes.priors.statements import parse_statements  # noqa: PLC0415

    statements = parse_statements(args.believe, ("rate", "mtbf"))
    weight = earlier_weight(args)
    if not statements and args.earlier is None:
        return None
    if statements and args.rate_prior is not None:
        raise OptionError("give the analysis prior either as --rate-prior or as --believe "
                          "statements, not both")
    return gamma_setup(statements, analysis, args.earlier, weight)


def plan_prior_evidence(args, kind: str, record: dict, setup, analysis) -> dict:
    """The prior keys of a plan record (see :mod:`qualbayes.priors.evidence`)."""
    from qualbayes.priors import evidence  # noqa: PLC0415

    return evidence.plan_prior_evidence(kind, record, setup, analysis, args.sensitivity)


# --------------------------------------------------------------------------- life

def life_prior(args, prior):
    """--believe / --earlier of ``life`` on top of the --shape-prior / --blife-prior /
    --reliability-prior prior: (prior, LifeSetup or None). The earlier file is read here,
    before the data."""
    from qualbayes.priors.setups import life_setup  # noqa: PLC0415
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
    return life_setup(prior, shape_st, life_st, args.earlier, weight, args.earlier_sheet,
                      args.earlier_columns, getattr(args, "units", "") or "")


def life_prior_evidence(args, result, data, prior, setup, settings=None) -> dict:
    """The prior keys of a life record (see :mod:`qualbayes.priors.evidence`)."""
    from qualbayes.priors import evidence  # noqa: PLC0415

    return evidence.life_prior_evidence(result, data, prior, setup, args.sensitivity, settings)
