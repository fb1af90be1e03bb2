r"""Priors from one or two statements, solved exactly (scipy.special and scipy.optimize).

Every statement is a quantile constraint :math:`F(v_i) = c_i` on a modelled variable X
(:mod:`qualbayes.priors.statements`); a statement on a decreasing function of X (R = 1 - p,
MTBF = 1/rate, R(T) = exp(-H(T))) is turned around first: :math:`\Pr(g(X) \le v) = c` becomes
:math:`F(g^{-1}(v)) = 1 - c`.

**Beta** (a defect rate or failure probability p; a reliability through p = 1 - R). Two
constraints :math:`v_1 < v_2`, :math:`c_1 < c_2` determine (a, b) uniquely (van Dorp &
Mazzuchi, 2000, J. Statist. Comput. Simul. 67:189, cited from memory). They are solved by
nested root finding: for a given a, :math:`I_{v_1}(a, b) = c_1` has one root b(a), because the
regularised incomplete beta function :math:`I_v(a, b)` rises with b; the outer equation
:math:`h(a) = I_{v_2}(a, b(a)) - c_2` runs from :math:`c_1 - c_2 < 0` (a -> 0, the mass splits
between 0 and 1) to :math:`1 - c_2 > 0` (a -> infinity, the mass gathers at v_1), and Brent's
method finds its root on log a. One constraint leaves one parameter free; it is set to
a = 1, so that :math:`1 - (1 - v)^b = c` gives :math:`b = \ln(1 - c) / \ln(1 - v)`: the uniform
prior updated with b - 1 defect-free units (the density falls from p = 0).

**Lognormal** (a Weibull shape, scale or B-life; the cumulative hazard H(T) = -ln R(T)):
:math:`\ln v_i = \mu + \sigma z_i` with :math:`z_i = \Phi^{-1}(c_i)`, so
:math:`\sigma = (\ln v_2 - \ln v_1)/(z_2 - z_1)`, :math:`\mu = \ln v_1 - \sigma z_1`
(closed form). One constraint cannot fix a spread and is refused.

**Gamma** (a constant failure rate, shape a, rate b): the ratio of two quantiles depends on a
alone, :math:`G^{-1}(c_2; a)/G^{-1}(c_1; a) = v_2/v_1`, and falls from infinity to 1 as a
grows; Brent's method on log a, then :math:`b = G^{-1}(c_1; a)/v_1`. One constraint: a = 1
(an exponential prior, "one failure's worth" of evidence), :math:`b = -\ln(1 - c)/v`.

Each result carries the fitted quantiles next to the stated ones, so the engineer can check
the prior says what was meant, and a sentence in words. Statements no prior of the family can
meet are refused with the reason (a higher probability at a lower value, the same value at two
probabilities, more than two statements, values out of numerical reach).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from qualbayes.errors import OptionError
from qualbayes.priors.statements import OPTION, Statement, format_value

#: Statements are met to this accuracy in probability (checked after solving).
PROB_TOL = 1e-10
_LOG_LIMIT = 60.0  # parameters are searched within exp(-60) .. exp(60)

#: stated quantity -> (modelled variable, map to it, decreasing?)
_TO_VARIABLE = {
    "p": ("p", lambda v: v, False),
    "R": ("p", lambda v: 1.0 - v, True),
    "rate": ("rate", lambda v: v, False),
    "mtbf": ("rate", lambda v: 1.0 / v, True),
    "shape": ("shape", lambda v: v, False),
    "scale": ("scale", lambda v: v, False),
}

VARIABLE_WORDS = {
    "p": "p", "rate": "the failure rate", "shape": "the Weibull shape",
    "scale": "the Weibull scale",
}


@dataclass(frozen=True)
class Elicited:
    """A prior that meets the statements. ``params``: beta {a, b}; lognormal {mu, sigma} of
    ln X; gamma {a, rate}. ``fitted``: per constraint {prob, stated, fitted} on X."""

    family: str
    variable: str
    params: dict
    statements: tuple[Statement, ...]
    constraints: tuple[tuple[float, float], ...]
    fitted: tuple[dict, ...]
    assumption: str | None = None
    words: str = ""
    time: float | None = field(default=None)  # T of H(T), q of B_q (as a fraction)

    # ------------------------------------------------------------------ distribution
    def cdf(self, x):
        x = np.asarray(x, float)
        p = self.params
        if self.family == "beta":
            return special.betainc(p["a"], p["b"], x)
        if self.family == "gamma":
            return special.gammainc(p["a"], p["rate"] * x)
        with np.errstate(divide="ignore"):
            return special.ndtr((np.log(x) - p["mu"]) / p["sigma"])

    def ppf(self, q):
        q = np.asarray(q, float)
        p = self.params
        if self.family == "beta":
            return special.betaincinv(p["a"], p["b"], q)
        if self.family == "gamma":
            return special.gammaincinv(p["a"], q) / p["rate"]
        return np.exp(p["mu"] + p["sigma"] * special.ndtri(q))

    def pdf(self, x):
        x = np.asarray(x, float)
        p = self.params
        with np.errstate(divide="ignore", invalid="ignore"):
            if self.family == "beta":
                a, b = p["a"], p["b"]
                log = (special.xlogy(a - 1, x) + special.xlog1py(b - 1, -x)
                       - special.betaln(a, b))
            elif self.family == "gamma":
                a, r = p["a"], p["rate"]
                log = a * math.log(r) + special.xlogy(a - 1, x) - r * x - special.gammaln(a)
            else:
                z = (np.log(x) - p["mu"]) / p["sigma"]
                log = -0.5 * z * z - np.log(x * p["sigma"] * math.sqrt(2 * math.pi))
            return np.exp(log)

    def mean(self) -> float:
        p = self.params
        if self.family == "beta":
            return p["a"] / (p["a"] + p["b"])
        if self.family == "gamma":
            return p["a"] / p["rate"]
        return math.exp(p["mu"] + 0.5 * p["sigma"] ** 2)

    def frozen(self):
        """The scipy.stats frozen distribution (imports scipy.stats)."""
        from scipy import stats  # noqa: PLC0415

        p = self.params
        if self.family == "beta":
            return stats.beta(p["a"], p["b"])
        if self.family == "gamma":
            return stats.gamma(p["a"], scale=1.0 / p["rate"])
        return stats.lognorm(p["sigma"], scale=math.exp(p["mu"]))

    def describe(self) -> str:
        p, v = self.params, self.variable
        if self.family == "beta":
            return f"{v} ~ Beta({p['a']:.6g}, {p['b']:.6g})"
        if self.family == "gamma":
            return f"{v} ~ Gamma(shape {p['a']:.6g}, rate {p['rate']:.6g})"
        return f"ln({v}) ~ Normal({p['mu']:.6g}, {p['sigma']:.6g}^2)"

    def to_dict(self) -> dict:
        return {"family": self.family, "variable": self.variable, "params": dict(self.params),
                "prior": self.describe(), "statements": [s.to_dict() for s in self.statements],
                "constraints": [{"value": v, "prob": c} for v, c in self.constraints],
                "fitted": list(self.fitted), "assumption": self.assumption,
                "words": self.words, "time": self.time}


# --------------------------------------------------------------------------- constraints

def variable_of(statement: Statement) -> tuple[str, float | None]:
    """The modelled variable a statement is about (and its T or q)."""
    key = statement.family_key
    if key == "R(T)":
        return f"H({statement.time:g})", statement.time
    if key == "B":
        return statement.quantity, statement.time
    return _TO_VARIABLE[key][0], None


def constraints_on(statements: list[Statement], option: str = OPTION
                   ) -> tuple[str, float | None, list[tuple[float, float, Statement]]]:
    """All statements' constraints on their common variable, sorted by value:
    (variable, T or q, [(value, P(X <= value), statement)])."""
    variables = {variable_of(s) for s in statements}
    if len(variables) != 1:
        names = ", ".join(sorted(v for v, _ in variables))
        raise OptionError(f"{option}: the statements are about different quantities ({names}); "
                          "state one quantity per prior (convert the others first)")
    (variable, time), = variables
    out = []
    for s in statements:
        key = s.family_key
        if key == "R(T)":
            mapped = [(-math.log(v), 1.0 - c) for v, c in s.constraints()]
        elif key == "B":
            mapped = list(s.constraints())
        else:
            _, g, decreasing = _TO_VARIABLE[key]
            mapped = [(g(v), 1.0 - c if decreasing else c) for v, c in s.constraints()]
        out += [(v, c, s) for v, c in mapped]
    out.sort(key=lambda t: (t[0], t[1]))
    return variable, time, out


def check_order(cons: list[tuple[float, float, Statement]], option: str = OPTION) -> None:
    """A prior's CDF rises: a higher value must carry a higher probability."""
    if len(cons) > 2:
        raise OptionError(
            f"{option}: {len(cons)} quantile conditions (a range counts as two) - a prior of "
            "two parameters meets at most two exactly; give one range, or a median and one "
            "bound, or two bounds")
    if len(cons) == 2:
        (v1, c1, s1), (v2, c2, s2) = cons
        if v1 == v2:
            raise OptionError(f"{option}: {s1.text!r} and {s2.text!r} put two probabilities "
                              f"({c1:.4g} and {c2:.4g}) on the same value {v1:g}")
        if c1 == c2:
            raise OptionError(f"{option}: {s1.text!r} and {s2.text!r} give the same "
                              f"probability {c1:.4g} to two different values")
        if c1 > c2:
            raise OptionError(
                f"{option}: {s1.text!r} and {s2.text!r} contradict each other: the value with "
                f"the higher probability below it must be the higher value, but P(X <= "
                f"{v1:.6g}) = {c1:.4g} exceeds P(X <= {v2:.6g}) = {c2:.4g} (e.g. an upper "
                "quantile below the median). No prior of any family can meet both")


# --------------------------------------------------------------------------- solvers

def beta_from_quantiles(constraints: list[tuple[float, float]]) -> tuple[float, float, str | None]:
    """(a, b, assumption) of the Beta with ``F(v_i) = c_i`` (one or two constraints)."""
    from scipy import optimize  # noqa: PLC0415

    if len(constraints) == 1:
        (v, c), = constraints
        return 1.0, math.log1p(-c) / math.log1p(-v), (
            "one statement fixes one parameter; the other is set to a = 1 (the uniform prior "
            "updated with b - 1 defect-free units: the density falls from p = 0)")
    (v1, c1), (v2, c2) = constraints

    def b_for(log_a: float) -> float:
        a = math.exp(log_a)

        def f(log_b):
            return float(special.betainc(a, math.exp(log_b), v1)) - c1

        lo, hi = _bracket(f, -2.0, 2.0, rising=True)
        return optimize.brentq(f, lo, hi, xtol=1e-15, rtol=1e-15, maxiter=500)

    def h(log_a: float) -> float:
        return float(special.betainc(math.exp(log_a), math.exp(b_for(log_a)), v2)) - c2

    lo, hi = _bracket(h, -2.0, 2.0, rising=True)
    log_a = optimize.brentq(h, lo, hi, xtol=1e-15, rtol=1e-15, maxiter=500)
    return math.exp(log_a), math.exp(b_for(log_a)), None


def lognormal_from_quantiles(constraints: list[tuple[float, float]]) -> tuple[float, float]:
    """(mu, sigma) of ln X with ``F(v_i) = c_i`` (two constraints)."""
    (v1, c1), (v2, c2) = constraints
    z1, z2 = float(special.ndtri(c1)), float(special.ndtri(c2))
    sigma = (math.log(v2) - math.log(v1)) / (z2 - z1)
    return math.log(v1) - sigma * z1, sigma


def gamma_from_quantiles(constraints: list[tuple[float, float]]
                         ) -> tuple[float, float, str | None]:
    """(shape a, rate b, assumption) of the gamma with ``F(v_i) = c_i``."""
    from scipy import optimize  # noqa: PLC0415

    if len(constraints) == 1:
        (v, c), = constraints
        return 1.0, -math.log1p(-c) / v, (
            "one statement fixes one parameter; the shape is set to a = 1 (an exponential "
            "prior: one failure's worth of evidence)")
    (v1, c1), (v2, c2) = constraints
    target = math.log(v2) - math.log(v1)

    def g(log_a: float) -> float:  # falls with a
        a = math.exp(log_a)
        q1, q2 = float(special.gammaincinv(a, c1)), float(special.gammaincinv(a, c2))
        if not (q1 > 0 and q2 > 0):
            return 1e300  # a -> 0: the lower quantile underflows, the ratio is unbounded
        return target - (math.log(q2) - math.log(q1))

    lo, hi = _bracket(g, -2.0, 2.0, rising=True)
    log_a = optimize.brentq(g, lo, hi, xtol=1e-15, rtol=1e-15, maxiter=500)
    a = math.exp(log_a)
    return a, float(special.gammaincinv(a, c1)) / v1, None


def _bracket(f, lo: float, hi: float, rising: bool) -> tuple[float, float]:
    """Widen [lo, hi] (on a log scale) until f changes sign; ValueError if out of reach."""
    sign = 1.0 if rising else -1.0
    while sign * f(lo) > 0:
        lo -= 4.0
        if lo < -_LOG_LIMIT:
            raise ValueError("no root: the parameter would lie below exp(-60)")
    while sign * f(hi) < 0:
        hi += 4.0
        if hi > _LOG_LIMIT:
            raise ValueError("no root: the parameter would lie above exp(60)")
    return lo, hi


# --------------------------------------------------------------------------- the API

FAMILIES = {"p": "beta", "rate": "gamma"}  # every other variable is lognormal


def elicit(statements: list[Statement], option: str = OPTION,
           what: str | None = None) -> Elicited:
    """The prior that meets the statements (all about one quantity), with its fitted
    quantiles and a sentence in words; :class:`OptionError` when none can."""
    if not statements:
        raise OptionError(f"{option}: no statement given")
    variable, time, cons = constraints_on(statements, option)
    check_order(cons, option)
    family = FAMILIES.get(variable, "lognormal")
    pairs = [(v, c) for v, c, _ in cons]
    texts = "; ".join(s.text for s in statements)
    if family == "lognormal" and len(pairs) == 1:
        raise OptionError(f"{option} {texts!r}: a lognormal prior on {variable} needs its "
                          "spread too: give a range (e.g. '1.5<shape<3@90%') or a second "
                          "statement (e.g. a median and an upper bound)")
    try:
        if family == "beta":
            a, b, assumption = beta_from_quantiles(pairs)
            params = {"a": a, "b": b}
        elif family == "gamma":
            a, rate, assumption = gamma_from_quantiles(pairs)
            params = {"a": a, "rate": rate}
        else:
            mu, sigma = lognormal_from_quantiles(pairs)
            params, assumption = {"mu": mu, "sigma": sigma}, None
    except (ValueError, RuntimeError, OverflowError) as err:
        raise OptionError(f"{option} {texts!r}: no {family} prior meets these statements "
                          f"within numerical reach ({err}); state them less extremely") from None
    if not all(math.isfinite(v) and (k == "mu" or v > 0) for k, v in params.items()):
        raise OptionError(f"{option} {texts!r}: no {family} prior meets these statements "
                          "within numerical reach")
    prior = Elicited(family, variable, params, tuple(statements), tuple(pairs), (), assumption,
                     "", time)
    achieved = [float(prior.cdf(v)) for v, _ in pairs]
    if any(abs(got - c) > PROB_TOL for got, (_, c) in zip(achieved, pairs, strict=True)):
        raise OptionError(f"{option} {texts!r}: the {family} prior found misses the statements "
                          f"(P = {achieved} for {[c for _, c in pairs]}); state them less "
                          "extremely")
    fitted = tuple({"prob": c, "stated": v, "fitted": float(prior.ppf(c)), "achieved": got}
                   for (v, c), got in zip(pairs, achieved, strict=True))
    prior = Elicited(family, variable, params, tuple(statements), tuple(pairs), fitted,
                     assumption, "", time)
    return Elicited(family, variable, params, tuple(statements), tuple(pairs), fitted,
                    assumption, _words(prior, what), time)


def _show(v: float, variable: str) -> str:
    return format_value(v, "p") if variable == "p" else f"{v:.6g}"


def _words(prior: Elicited, what: str | None) -> str:
    name = what or VARIABLE_WORDS.get(prior.variable, prior.variable)
    said = "; ".join(s.words() for s in prior.statements)
    lo, med, hi = (float(x) for x in prior.ppf([0.05, 0.5, 0.95]))
    checks = ", ".join(f"P({prior.variable} <= {_show(f['stated'], prior.variable)}) = "
                       f"{f['achieved']:.6f} (stated {f['prob']:.6g}; fitted "
                       f"{100 * f['prob']:.4g}% point {_show(f['fitted'], prior.variable)})"
                       for f in prior.fitted)
    text = (f"You stated: {said}. Prior on {name}: {prior.describe()}, median "
            f"{_show(med, prior.variable)}, 90% between {_show(lo, prior.variable)} and "
            f"{_show(hi, prior.variable)}. It meets the statements: {checks}.")
    if prior.assumption:
        text += f" Assumption: {prior.assumption}."
    return text
