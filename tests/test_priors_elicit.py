"""Priors from statements: each elicited prior reproduces its stated quantiles (reference
library: scipy.stats), refusals of statements no prior can meet, and the option parsing.

Tolerance: the stated values are met to a relative 1e-6 by the fitted distribution's
quantile function as scipy.stats computes it (the solver itself works to ~1e-12 in
probability, so 1e-6 leaves room only for the conditioning of the quantile function).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special, stats

from qualbayes.errors import OptionError
from qualbayes.priors.elicit import beta_from_quantiles, elicit
from qualbayes.priors.statements import parse_statement, parse_statements

ALL = ("p", "R", "R(T)", "shape", "scale", "B", "rate", "mtbf")
REL = 1e-6


def fit(*texts):
    return elicit(parse_statements(list(texts), ALL))


def reproduces(prior, frozen):
    """Every stated (value, probability) is the fitted distribution's quantile (scipy)."""
    for value, prob in prior.constraints:
        assert frozen.ppf(prob) == pytest.approx(value, rel=REL), (value, prob)
        assert frozen.cdf(value) == pytest.approx(prob, abs=1e-9)


# --------------------------------------------------------------------------- Beta

@pytest.mark.parametrize("texts", [
    ("p=0.2%", "p<0.5%@90%"),  # a median and an upper quantile
    ("p<0.1%@10%", "p<1%@90%"),  # two quantiles
    ("0.05%<p<2%@90%",),  # a central range
    ("p>0.5%@80%", "p<3%@99%"),
    ("p=30%", "p<60%@95%"),  # a large rate
    ("p<1e-6@5%", "p<0.9@95%"),  # very wide: a < 1 and b < 1
    ("p=0.1%", "p<0.1001%@60%"),  # very narrow: a and b in the tens of thousands
    ("p=1ppm", "p<5ppm@90%"),
])
def test_beta_from_two_quantiles_reproduces_them_scipy(texts):
    prior = fit(*texts)
    a, b = prior.params["a"], prior.params["b"]
    reproduces(prior, stats.beta(a, b))  # scipy.stats.beta as the reference library
    assert prior.family == "beta" and prior.assumption is None


def test_beta_reliability_statements_become_a_beta_on_p():
    # "90% sure R > 0.95" is "90% sure p = 1 - R < 0.05"; the median of R is 0.98
    prior = fit("R>0.95@90%", "R=0.98")
    ref = stats.beta(prior.params["a"], prior.params["b"])
    assert ref.ppf(0.9) == pytest.approx(0.05, rel=REL)
    assert ref.ppf(0.5) == pytest.approx(0.02, rel=REL)
    # and on R itself (scipy: R ~ Beta(b, a))
    r = stats.beta(prior.params["b"], prior.params["a"])
    assert r.ppf(0.1) == pytest.approx(0.95, rel=REL)


def test_beta_from_one_statement_is_beta_one_b_in_closed_form():
    # 1 - (1 - v)^b = c  =>  b = ln(1 - c) / ln(1 - v); checked with scipy.stats.beta
    prior = fit("p<0.5%@90%")
    assert prior.params["a"] == 1.0
    assert prior.params["b"] == pytest.approx(math.log(0.1) / math.log(0.995), rel=1e-14)
    reproduces(prior, stats.beta(1.0, prior.params["b"]))
    assert "a = 1" in prior.assumption and "Assumption" in prior.words


@settings(max_examples=150, deadline=None)
@given(v1=st.floats(1e-5, 0.9), ratio=st.floats(1.05, 50.0), c1=st.floats(0.01, 0.9),
       gap=st.floats(0.02, 0.95))
def test_beta_any_consistent_pair_is_met(v1, ratio, c1, gap):
    v2 = min(v1 * ratio, 0.999)
    c2 = c1 + gap * (0.999 - c1)
    if not (v2 > v1 * 1.001 and c2 > c1 + 1e-3):
        return
    a, b, _ = beta_from_quantiles([(v1, c1), (v2, c2)])
    assert special.betainc(a, b, v1) == pytest.approx(c1, abs=1e-9)
    assert special.betainc(a, b, v2) == pytest.approx(c2, abs=1e-9)


def test_beta_two_quantile_root_is_unique_along_the_search():
    # the outer function h(a) = I_{v2}(a, b(a)) - c2 rises monotonically, so the root the
    # solver finds is the only one (van Dorp & Mazzuchi 2000, cited from memory; checked here
    # numerically on a grid)
    from scipy import optimize

    v1, c1, v2, c2 = 0.002, 0.5, 0.005, 0.9

    def b_for(a):
        return optimize.brentq(lambda lb: special.betainc(a, math.exp(lb), v1) - c1, -30, 40)

    grid = np.exp(np.linspace(-4, 5, 120))
    h = np.array([special.betainc(a, math.exp(b_for(a)), v2) - c2 for a in grid])
    rising = h < (1 - c2) - 1e-9  # before it saturates at 1 - c2 in floating point
    assert np.all(np.diff(h[rising]) > 0) and np.all(np.diff(h) > -1e-12)
    assert h[0] < 0 < h[-1] and np.count_nonzero(np.diff(np.sign(h))) == 1


# --------------------------------------------------------------------------- lognormal

@pytest.mark.parametrize("texts,variable", [
    (("1.5<shape<3@90%",), "shape"),
    (("shape=2", "shape<4@95%"), "shape"),
    (("scale>4000@90%", "scale=8000"), "scale"),
    (("B10>2000@90%", "B10=5000"), "B10"),
    (("1000<B1<3000@80%",), "B1"),
])
def test_lognormal_reproduces_its_quantiles_scipy(texts, variable):
    prior = fit(*texts)
    assert prior.family == "lognormal" and prior.variable == variable
    ref = stats.lognorm(prior.params["sigma"], scale=math.exp(prior.params["mu"]))
    reproduces(prior, ref)


def test_lognormal_range_matches_the_life_models_own_range_rule():
    # a central 95% range gives the same lognormal as --shape-prior LO,HI
    from qualbayes.models.weibull import lognormal_from_range

    prior = fit("1.5<shape<4@95%")
    m, s = lognormal_from_range(1.5, 4.0)
    assert prior.params["mu"] == pytest.approx(m, rel=1e-14)
    assert prior.params["sigma"] == pytest.approx(s, rel=1e-9)


def test_reliability_at_time_statements_give_a_lognormal_on_the_cumulative_hazard():
    # R(T) > 0.9 at 90%  <=>  H(T) = -ln R(T) < -ln 0.9 at 90%
    prior = fit("R(5000)>0.9@90%", "R(5000)=0.97")
    assert prior.variable == "H(5000)" and prior.time == 5000.0
    ref = stats.lognorm(prior.params["sigma"], scale=math.exp(prior.params["mu"]))
    assert ref.ppf(0.9) == pytest.approx(-math.log(0.9), rel=REL)
    assert ref.ppf(0.5) == pytest.approx(-math.log(0.97), rel=REL)


# --------------------------------------------------------------------------- gamma

@pytest.mark.parametrize("texts", [
    ("rate<0.001@90%", "rate=0.0002"),
    ("mtbf>500@90%", "mtbf=2000"),
    ("mtbf>100@99%", "mtbf>5000@10%"),
    ("1e-5<rate<1e-3@90%",),
])
def test_gamma_reproduces_its_quantiles_scipy(texts):
    prior = fit(*texts)
    assert prior.family == "gamma" and prior.variable == "rate"
    reproduces(prior, stats.gamma(prior.params["a"], scale=1.0 / prior.params["rate"]))


def test_gamma_from_one_statement_is_exponential():
    # a = 1: P(rate <= v) = 1 - exp(-b v) = c  =>  b = -ln(1 - c) / v
    prior = fit("mtbf>1000@90%")
    assert prior.params["a"] == 1.0
    assert prior.params["rate"] == pytest.approx(-math.log(0.1) * 1000.0, rel=1e-14)
    reproduces(prior, stats.gamma(1.0, scale=1.0 / prior.params["rate"]))


# --------------------------------------------------------------------------- words

def test_words_state_the_statements_the_prior_and_the_fitted_quantiles():
    prior = fit("p=0.2%", "p<0.5%@90%")
    w = prior.words
    assert "90% sure that p is below 0.5%" in w and "median 0.2%" in w
    assert "Beta(" in w and "fitted 90% point 0.5%" in w
    d = prior.to_dict()
    assert [f["prob"] for f in d["fitted"]] == [0.5, 0.9]
    assert all(abs(f["fitted"] - f["stated"]) <= REL * f["stated"] for f in d["fitted"])


# --------------------------------------------------------------------------- refusals

@pytest.mark.parametrize("texts,words", [
    (("p=0.5%", "p<0.2%@90%"), "contradict"),  # upper quantile below the median
    (("p<0.2%@90%", "p<0.5%@50%"), "contradict"),
    (("R=0.9", "R>0.95@90%"), "contradict"),  # on R: 90% sure above 0.95 but median 0.9
    (("p<0.5%@90%", "p<0.5%@80%"), "same value"),
    (("p<0.5%@90%", "p<0.8%@90%"), "same probability"),
    (("p=0.2%", "p<0.5%@90%", "p<1%@99%"), "at most two"),
    (("0.1%<p<1%@90%", "p=0.3%"), "at most two"),  # a range counts as two
    (("shape<3@90%",), "spread"),  # a lognormal needs two conditions
    (("shape=2", "B10>2000@90%"), "different quantities"),
])
def test_statements_no_prior_can_meet_are_refused_with_the_reason(texts, words):
    with pytest.raises(OptionError, match=words):
        fit(*texts)


@pytest.mark.parametrize("text,words", [
    ("p<0.5%@100%", "strictly between 0 and 1"),  # certainty
    ("p<0.5%@0%", "strictly between 0 and 1"),
    ("p<0.5%@1.5", "strictly between 0 and 1"),
    ("p<150%@90%", "probability"),  # a defect rate above 100%
    ("p<0@90%", "strictly between 0 and 1"),
    ("R>1@90%", "strictly between 0 and 1"),
    ("shape<0@90%", "> 0"),
    ("shape<3%@90%", "plain number"),
    ("p<0.5%", "how sure"),
    ("3<shape<1.5@90%", "lower end"),
    ("B0<300@90%", "percentage"),
    ("q<0.5@90%", "unknown quantity"),
    ("p<0,5%@90%", "thousands separators"),
    ("p is small", "not a statement"),
])
def test_bad_statements_give_a_clear_error(text, words):
    with pytest.raises(OptionError, match=words):
        parse_statement(text)


def test_a_statement_on_another_quantity_is_refused_by_the_question():
    with pytest.raises(OptionError, match="does not apply here"):
        parse_statements(["shape<3@90%"], ("p",))


def test_statements_split_on_semicolons_and_repeat():
    s = parse_statements(["p=0.2%; p<0.5%@90%"], ("p",))
    assert [x.kind for x in s] == ["median", "below"]
    assert parse_statements(["p=0.2%", "p<0.5%@90%"], ("p",)) == s
