"""``qualbayes plan ...``: how big a demonstration test or sampling plan must be.

  plan attribute   how many units must pass (c failures allowed) to show R at confidence C?
  plan life        with n units and a Weibull shape, how long must each be tested?
  plan mtbf        how much total test time shows an MTBF goal (chi-square or gamma prior)?
  plan sampling    which single sampling plan (n, c) protects both AQL and LTPD?

All answers are closed forms or exact sums (scipy); only ``--history`` runs the sampler.
"""

from __future__ import annotations

from qualbayes.commands.convert import (  # noqa: F401 - importable from here as before
    optional_probability,
    parse_failures,
    parse_gamma,
    parse_number,
    parse_pair,
    parse_reliability_prior,
    parse_whole,
)
from qualbayes.errors import OptionError

RECORD = "plan_{kind}.json"
WORKBOOK = "plan_{kind}.xlsx"
FIGURE = "plan_{kind}_{curve}.png"



def register(sub) -> None:
    from qualbayes.commands.plan_options import add_plan_parsers  # noqa: PLC0415

    add_plan_parsers(sub, run)


# --------------------------------------------------------------------------- running

def run(args) -> int:
    from qualbayes.commands import convert  # noqa: PLC0415
    from qualbayes.commands.pipeline import Command, check_outputs, execute  # noqa: PLC0415

    kind = args.plan_kind
    convert.seed(args.seed)
    check_outputs(args)  # before --earlier / --history are read
    build = _BUILDERS[kind](args)  # parses and checks every option: nothing computed yet

    def compute() -> dict:
        from qualbayes.provenance import command_line, versions  # noqa: PLC0415

        history = None
        if build.get("history_file"):
            from qualbayes.planning.history import learn_prior  # noqa: PLC0415

            history = learn_prior(build["history_file"], part=args.part, sheet=args.sheet,
                                  columns=args.columns, seed=args.seed)
        record = build["make"](history)
        if "prior_setup" in build:
            from qualbayes.commands.prior_options import plan_prior_evidence  # noqa: PLC0415

            analysis = build["analysis"]
            analysis = history.prior if analysis == "history" and history else analysis
            record.update(plan_prior_evidence(args, kind, record, build["prior_setup"],
                                              analysis))
        record["command"] = command_line(args.argv)
        record["versions"] = versions()
        return record

    def text(record: dict) -> str:
        from qualbayes.evidence.plan_record import plan_text  # noqa: PLC0415

        return plan_text(record)

    return execute(args, Command(compute, text, lambda record: _evidence(record, args)))


def _history_use(args, prior_text, option, on_reliability=True):
    """The analysis prior from its option and --history."""
    if prior_text is None:
        prior = "history" if args.history else "none"
    else:
        prior = parse_reliability_prior(prior_text, option, on_reliability)
    if prior == "same":
        raise OptionError(f"{option} same: 'same' only applies to --design-prior")
    if prior == "history" and not args.history:
        raise OptionError(f"{option} history: give the lot history with --history FILE")
    if args.history and prior != "history" and not (
            getattr(args, "design_prior", None) or "").strip().lower() == "history":
        raise OptionError("--history is given but neither prior uses it "
                          f"(set {option} history or --design-prior history)")
    return prior


def _attribute(args) -> dict:
    from qualbayes.planning.plans import plan_attribute  # noqa: PLC0415

    r = optional_probability(args.reliability, "--reliability")
    c = optional_probability(args.confidence, "--confidence")
    failures = parse_failures(args.failures)
    target = optional_probability(args.assurance, "--assurance")
    max_units = parse_whole(args.max_units, "--max-units", least=1)
    analysis = _history_use(args, args.reliability_prior, "--reliability-prior")
    from qualbayes.commands.prior_options import attribute_prior  # noqa: PLC0415

    setup = attribute_prior(args, analysis)  # --believe / --earlier
    analysis = setup.prior if setup is not None else analysis
    design = "same" if args.design_prior is None else parse_reliability_prior(
        args.design_prior, "--design-prior")
    if design == "none":
        raise OptionError("--design-prior none: leave the option out instead")
    if design == "history" and not args.history:
        raise OptionError("--design-prior history: give the lot history with --history FILE")
    if target is not None and design == "same" and analysis == "none":
        raise OptionError("--assurance needs a design prior: give --design-prior beta:A,B "
                          "(or a --reliability-prior to use as one)")
    a = None if analysis == "none" else analysis
    d = None if design == "same" else design

    def make(history):
        return plan_attribute(r, c, failures, analysis=a, design=d, assurance=target,
                              history=history, max_units=max_units)

    has_design = d is not None or a is not None
    return {"make": make, "history_file": args.history,
            "curves": ["oc"] + (["assurance"] if has_design else []),
            "prior_setup": setup, "analysis": a}


def _life(args) -> dict:
    from qualbayes.planning.plans import plan_life  # noqa: PLC0415
    from qualbayes.planning.weibull import ShapePrior  # noqa: PLC0415

    r = optional_probability(args.reliability, "--reliability")
    c = optional_probability(args.confidence, "--confidence")
    mission = parse_number(args.mission, "--mission")
    if args.shape is not None:
        shape = parse_number(args.shape, "--shape")
    else:
        parts = str(args.shape_range).split(",")
        if len(parts) != 2:
            raise OptionError(f"--shape-range {args.shape_range!r}: write LO,HI, e.g. 1.5,3")
        lo, hi = (parse_number(v, "--shape-range") for v in parts)
        if not lo < hi:
            raise OptionError(f"--shape-range {args.shape_range!r}: LO must be below HI")
        shape = ShapePrior.from_range(lo, hi)
    units = [parse_whole(v, "--units", least=1) for v in str(args.units).split(",")]
    failures = parse_failures(args.failures)
    if units[0] <= max(failures):
        raise OptionError(f"--units {units[0]}: need more units on test than allowed "
                          f"failures ({max(failures)})")
    target = optional_probability(args.assurance, "--assurance")
    analysis = None
    if args.reliability_prior is not None:
        analysis = parse_reliability_prior(args.reliability_prior, "--reliability-prior")
        if analysis in ("history", "same"):
            raise OptionError(f"--reliability-prior {args.reliability_prior}: give beta:A,B, "
                              "uniform, jeffreys or none")
        analysis = None if analysis == "none" else analysis
    from qualbayes.commands.prior_options import attribute_prior  # noqa: PLC0415

    setup = attribute_prior(args, analysis)  # --believe / --earlier (X/N at the mission time)
    analysis = setup.prior if setup is not None else analysis
    design = None
    if args.design_prior is not None:
        design = parse_reliability_prior(args.design_prior, "--design-prior")
        if isinstance(design, str):
            raise OptionError(f"--design-prior {args.design_prior!r}: give beta:A,B on "
                              "R(mission)")
    if target is not None and design is None and analysis is None:
        raise OptionError("--assurance needs --design-prior beta:A,B on R(mission) (or a "
                          "--reliability-prior to use as one)")
    has_design = design is not None or analysis is not None
    return {"make": lambda _h: plan_life(r, c, mission, units, shape, failures, design, target,
                                         analysis),
            "curves": ["oc"] + (["assurance"] if has_design else []),
            "prior_setup": setup, "analysis": analysis}


def _mtbf(args) -> dict:
    from qualbayes.planning.plans import plan_mtbf  # noqa: PLC0415

    goal = parse_number(args.mtbf, "--mtbf")
    c = optional_probability(args.confidence, "--confidence")
    failures = parse_failures(args.failures)
    target = optional_probability(args.assurance, "--assurance")
    analysis = None if args.rate_prior is None else parse_gamma(args.rate_prior,
                                                                "--rate-prior")
    if analysis == "same":
        raise OptionError("--rate-prior same: 'same' only applies to --design-prior")
    from qualbayes.commands.prior_options import mtbf_prior  # noqa: PLC0415

    setup = mtbf_prior(args, analysis)  # --believe / --earlier
    analysis = setup.prior if setup is not None else analysis
    design = None if args.design_prior is None else parse_gamma(args.design_prior,
                                                                "--design-prior")
    if design == "same":
        if analysis is None:
            raise OptionError("--design-prior same: there is no --rate-prior to reuse")
        design = analysis
    if target is not None and design is None and analysis is None:
        raise OptionError("--assurance needs a design prior: --design-prior gamma:A,B "
                          "(or a --rate-prior to use as one)")
    has_design = design is not None or analysis is not None
    return {"make": lambda _h: plan_mtbf(goal, c, failures, analysis, design, target),
            "curves": ["oc"] + (["assurance"] if has_design else []),
            "prior_setup": setup, "analysis": analysis}


def _sampling(args) -> dict:
    from qualbayes.planning import sampling  # noqa: PLC0415
    from qualbayes.planning.plans import plan_sampling  # noqa: PLC0415
    from qualbayes.questions import parse_rate  # noqa: PLC0415

    aql = parse_rate(args.aql, "--aql")
    ltpd = parse_rate(args.ltpd, "--ltpd")
    alpha = optional_probability(args.alpha, "--alpha")
    beta = optional_probability(args.beta, "--beta")
    lot = None if args.lot_size is None else parse_whole(args.lot_size, "--lot-size", least=2)
    spec = None if args.spec is None else parse_rate(args.spec, "--spec")
    sampling.check_inputs(aql, alpha, ltpd, beta, lot)  # AQL < LTPD, lot size usable
    if args.lot_quality_prior is None:
        prior = "history" if args.history else None
    else:
        prior = parse_reliability_prior(args.lot_quality_prior, "--lot-quality-prior",
                                        on_reliability=False)
        if prior in ("none", "same"):
            raise OptionError(f"--lot-quality-prior {args.lot_quality_prior!r}: choose "
                              "beta:A,B, uniform, jeffreys or history")
    if prior == "history" and not args.history:
        raise OptionError("--lot-quality-prior history: give the lot history with --history")
    if args.history and prior != "history":
        raise OptionError("--history is given but --lot-quality-prior does not use it")
    level = optional_probability(args.confidence, "--confidence")
    from qualbayes.commands.prior_options import sampling_prior  # noqa: PLC0415

    setup = sampling_prior(args, prior)  # --believe / --earlier
    prior = setup.prior if setup is not None else prior
    if level is not None and prior is None and not args.sensitivity:
        raise OptionError("--confidence applies to the Bayesian view: give a "
                          "--lot-quality-prior (or --believe / --earlier, or --sensitivity)")

    def make(history):
        if prior == "history":
            return plan_sampling(aql, alpha, ltpd, beta, lot, spec=spec, history=history,
                                 level=level)
        return plan_sampling(aql, alpha, ltpd, beta, lot, prior=prior, spec=spec, level=level)

    return {"make": make, "history_file": args.history, "curves": ["oc"],
            "prior_setup": setup, "analysis": prior}


_BUILDERS = {"attribute": _attribute, "life": _life, "mtbf": _mtbf, "sampling": _sampling}


def _evidence(record: dict, args) -> dict:
    """The files of --out DIR: run record, workbook, curve figures (drawn in memory) and,
    with a prior option, the prior figure; written as one group."""
    from qualbayes.commands.pipeline import figure_writer, record_writer  # noqa: PLC0415
    from qualbayes.commands.prior_options import figure_file, used  # noqa: PLC0415
    from qualbayes.evidence.plan_plots import plan_figures  # noqa: PLC0415
    from qualbayes.evidence.plan_record import plan_sheets  # noqa: PLC0415
    from qualbayes.evidence.workbook import workbook_writer  # noqa: PLC0415

    kind = args.plan_kind
    files = {RECORD.format(kind=kind): record_writer(record, draws=True),
             WORKBOOK.format(kind=kind): workbook_writer(plan_sheets(record))}
    for name, png in plan_figures(record).items():
        files[FIGURE.format(kind=kind, curve=name)] = figure_writer(png)
    if used(args):
        files[FIGURE.format(kind=kind, curve="prior")] = figure_file(record)
    return files
