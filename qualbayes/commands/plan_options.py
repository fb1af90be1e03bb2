"""The options of ``qualbayes plan ...`` (argparse only; the texts are read by
:mod:`qualbayes.commands.convert`)."""

from __future__ import annotations

from qualbayes.commands.common import HelpFormatter, add_analyst_option
from qualbayes.commands.prior_options import add_prior_options


def add_plan_parsers(sub, run) -> None:
    """The ``plan`` sub-command and its four questions; ``run`` handles all of them."""
    p = sub.add_parser(
        "plan", help="size a demonstration test or a sampling plan",
        description="Demonstration test planning (attribute, Weibull life, constant rate) "
                    "and single sampling plans, classical and Bayesian, with assurance.")
    kinds = p.add_subparsers(dest="plan_kind", metavar="QUESTION", required=True)
    fmt = HelpFormatter

    a = kinds.add_parser(
        "attribute", formatter_class=fmt,
        help="how many units must pass, allowing c failures, to show R at confidence C?",
        description="Pass/fail demonstration: success-run and c-failure binomial plans, or "
                    "Bayesian plans with a Beta prior on R (given, or learned from a lot "
                    "history); assurance under a design prior.")
    goal_options(a)
    failures_option(a)
    a.add_argument("--reliability-prior", metavar="PRIOR",
                   help="analysis prior on R: beta:A,B (R ~ Beta(A, B)), uniform, jeffreys, "
                        "history, or none for the classical plan (default: history when "
                        "--history is given, else none)")
    history_options(a)
    a.add_argument("--design-prior", metavar="PRIOR",
                   help="design prior on R for the assurance: beta:A,B, history, or same "
                        "(the analysis prior; the default when there is one)")
    assurance_option(a)
    a.add_argument("--max-units", default="100000",
                   help="largest test the assurance search considers")
    add_prior_options(a, "R", "attribute")
    output_options(a)
    a.set_defaults(func=run)

    life = kinds.add_parser(
        "life", formatter_class=fmt,
        help="with n units and a Weibull shape, how long must each unit be tested?",
        description="Binomial test with the test time scaled by an assumed Weibull shape: "
                    "test time per unit for the "
                    "units available, allowing c failures, with a known shape or a shape "
                    "range; the trade-off of units against test time.")
    goal_options(life)
    life.add_argument("--mission", required=True,
                      help="mission time t at which R(t) is to be shown (any time unit)")
    shape = life.add_mutually_exclusive_group(required=True)
    shape.add_argument("--shape", help="known Weibull shape beta")
    shape.add_argument("--shape-range", metavar="LO,HI",
                       help="plausible shape range, taken as the central 95%% of a "
                            "lognormal prior on the shape and integrated over")
    life.add_argument("--units", required=True, metavar="N[,N2,...]",
                      help="units available for test; several give the trade-off rows")
    failures_option(life)
    life.add_argument("--reliability-prior", metavar="PRIOR",
                      help="analysis prior on R(mission): beta:A,B (R ~ Beta(A, B)), uniform, "
                           "jeffreys, or none for the classical plan (default: none)")
    life.add_argument("--design-prior", metavar="beta:A,B",
                      help="design prior on R(mission) for the assurance (default: the "
                           "analysis prior, if any)")
    assurance_option(life)
    add_prior_options(life, "R", "life-plan")
    output_options(life)
    life.set_defaults(func=run)

    m = kinds.add_parser(
        "mtbf", formatter_class=fmt,
        help="how much total test time, allowing r failures, shows an MTBF goal?",
        description="Constant failure rate test, time-terminated: chi-square test time, or "
                    "Bayesian test time with a gamma prior on the failure rate.")
    m.add_argument("--mtbf", required=True, help="MTBF goal M (hours or any time unit)")
    m.add_argument("--confidence", required=True, help="confidence C, e.g. 0.8 or 80%%")
    failures_option(m)
    m.add_argument("--rate-prior", metavar="gamma:A,B",
                   help="analysis prior on the failure rate: Gamma(shape A, rate B), B in the "
                        "MTBF's time unit (as if A failures had been seen in B hours)")
    m.add_argument("--design-prior", metavar="PRIOR",
                   help="design prior on the failure rate for the assurance: gamma:A,B or "
                        "same (the analysis prior; the default when there is one)")
    assurance_option(m)
    add_prior_options(m, "rate", "mtbf")
    output_options(m)
    m.set_defaults(func=run)

    s = kinds.add_parser(
        "sampling", formatter_class=fmt,
        help="which single sampling plan (n, c) protects both the producer and the consumer?",
        description="Smallest single sampling plan by attributes meeting the producer's risk "
                    "at the AQL and the consumer's risk at the LTPD (binomial, or "
                    "hypergeometric for a lot size); OC curve; with a prior on lot quality, "
                    "how good accepted lots are.")
    s.add_argument("--aql", required=True, help="acceptable quality level: 0.01, 1%% or ppm")
    s.add_argument("--alpha", default="0.05", help="producer's risk at the AQL")
    s.add_argument("--ltpd", required=True, help="lot tolerance percent defective (LTPD)")
    s.add_argument("--beta", default="0.10", help="consumer's risk at the LTPD")
    s.add_argument("--lot-size", help="lot size N: exact hypergeometric plan")
    s.add_argument("--lot-quality-prior", metavar="PRIOR",
                   help="prior on the defect rate of lots offered: beta:A,B (p ~ Beta(A, B)), "
                        "uniform, jeffreys or history (default: history when --history is "
                        "given)")
    s.add_argument("--spec", help="defect-rate limit for 'accepted lot within spec' "
                                  "(shown with the AQL and LTPD; default limit: the LTPD)")
    s.add_argument("--confidence", metavar="C",
                   help="with a lot-quality prior: the plan protects the consumer when an "
                        "accepted lot is within --spec (else the LTPD) with probability >= C "
                        "(default: 1 - beta)")
    history_options(s)
    add_prior_options(s, "p", "lots")
    output_options(s)
    s.set_defaults(func=run)


def goal_options(p) -> None:
    p.add_argument("--reliability", required=True, help="reliability goal R*, e.g. 0.9")
    p.add_argument("--confidence", required=True, help="confidence C, e.g. 0.9 or 90%%")


def failures_option(p) -> None:
    p.add_argument("--failures", default="0", metavar="K|A..B|A,B,...",
                   help="allowed failures: K gives the table for 0..K")


def assurance_option(p) -> None:
    p.add_argument("--assurance", metavar="P",
                   help="wanted assurance (probability the test passes under the design "
                        "prior): find the smallest plan reaching it")


def history_options(p) -> None:
    p.add_argument("--history", metavar="FILE",
                   help="lot history (xlsx/csv, as for 'qualbayes lots') to learn a prior "
                        "from (hierarchical model, NUTS, convergence-gated)")
    p.add_argument("--part", help="part number in the history file (needed if it has several)")
    p.add_argument("--sheet", help="xlsx sheet of the history file")
    p.add_argument("--columns", metavar="KEY=HEADER,...",
                   help="name history columns whose headers are not recognised")


def output_options(p) -> None:
    p.add_argument("--seed", type=int, default=20261202, help="random seed for the sampler")
    p.add_argument("--json", action="store_true", help="write one JSON document to stdout")
    p.add_argument("--out", metavar="DIR",
                   help="write the run record (JSON), workbook and curve PNGs into DIR")
    p.add_argument("--report", metavar="DIR",
                   help="write the audit report (HTML, PDF, workbook, run record, figures) "
                        "into the new folder DIR")
    p.add_argument("--force", action="store_true",
                   help="allow replacing files of an earlier run in --out or --report")
    add_analyst_option(p)

