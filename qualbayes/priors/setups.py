"""The analysis prior built from statements and earlier data, with the words that explain
it (no command-line knowledge: the command layer checks which options may be combined).

* :func:`beta_setup` - a Beta prior on a probability p (lots, attribute and sampling plans):
  statements (already parsed) or a base prior, then the earlier counts at a weight (the power
  prior of Ibrahim & Chen 2000);
* :func:`gamma_setup` - a gamma prior on a failure rate (MTBF plans), the same way;
* :func:`life_setup` - the Weibull life prior with elicited lognormal parts and earlier
  life data at a weight.
"""

from __future__ import annotations

from dataclasses import dataclass, field


def setup_record(setup, prior_text: str, formula: str) -> dict:
    """The run-record keys of a Beta or gamma setup: its words, the elicited prior, and the
    earlier data with their weight and the power-prior formula."""
    earlier = None
    if setup.earlier is not None:
        earlier = setup.earlier.to_dict() | {
            "weight": setup.weight, "initial_prior": setup.base[2], "prior": prior_text,
            "method": f"power prior (Ibrahim & Chen 2000): {formula}"}
    return {"prior_words": setup.words,
            "prior_elicited": [setup.stated.to_dict()] if setup.stated is not None else [],
            "earlier_data": earlier}


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
        return setup_record(self, f"Beta({self.a:.6g}, {self.b:.6g})",
                            "Beta(a0 + w x0, b0 + w (n0 - x0))")


def beta_setup(statements, base: tuple[float, float, str] | None, earlier_text,
               weight: float | None, quantity: str, sheet=None, columns=None,
               noun: str = "defectives") -> BetaSetup | None:
    """Statements (already parsed) or ``base`` (a0, b0, label) as the initial prior, then
    the earlier data at ``weight``. None when neither statements nor earlier data are
    given (the caller keeps its own prior)."""
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.power_prior import beta_power, earlier_counts  # noqa: PLC0415

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
        """The run-record keys this prior adds."""
        return setup_record(self, self.prior.describe() if self.prior is not None else
                            "none: weight 0 on the flat prior leaves the classical test",
                            "Gamma(a0 + w r0, b0 + w T0)")


def gamma_setup(statements, analysis, earlier_text, weight: float | None) -> GammaSetup:
    """Statements (already parsed) or the ``analysis`` GammaPrior (else the flat prior) as
    the initial prior, then the earlier exposure ``earlier_text`` ("R/T") at ``weight``."""
    from qualbayes.planning.mtbf import GammaPrior  # noqa: PLC0415
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.power_prior import gamma_power, parse_exposure  # noqa: PLC0415

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
    if earlier_text is not None:
        earlier = parse_exposure(earlier_text)
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


def with_elicited(prior, e):
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


def life_setup(prior, shape_statements, life_statements, earlier_text, weight,
               sheet=None, columns=None, units: str = ""):
    """The life prior with the elicited parts put in and the earlier life data (a file) at
    ``weight``: (prior, LifeSetup)."""
    from qualbayes.models.weibull import LifePrior  # noqa: PLC0415
    from qualbayes.priors.elicit import elicit  # noqa: PLC0415
    from qualbayes.priors.power_prior import earlier_life, life_power_prior  # noqa: PLC0415

    elicited = [elicit(st, what=None) for st in (shape_statements, life_statements) if st]
    stated = None
    if elicited:
        stated = LifePrior()
        for e in elicited:
            prior = with_elicited(prior, e)
            stated = with_elicited(stated, e)
    words = [e.words for e in elicited]
    earlier = None
    if earlier_text is not None:
        earlier = earlier_life(earlier_text, sheet, columns, units)
        prior = life_power_prior(prior, earlier, weight)
        words.append(
            f"Borrowed from earlier data: {earlier.words()}, at weight {weight:g} (power "
            f"prior, Ibrahim & Chen 2000): the prior is multiplied by their Weibull likelihood "
            f"to the power {weight:g}, i.e. {weight:g} x their log-likelihood is added to the "
            "log prior. Weight 0 would ignore them; 1 would pool them with the new data as "
            "the same product.")
    return prior, LifeSetup(stated, elicited, earlier, weight, words)
