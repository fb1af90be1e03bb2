"""Single-lot closed form against scipy.stats and published values."""

import numpy as np
import pytest
from scipy import stats

from qualbayes.data.lot_table import LotTable
from qualbayes.lot_question import assess_lots
from qualbayes.models import lot_posterior as conj
from qualbayes.models.lot_prior import JEFFREYS, UNIFORM, parse_lot_prior
from qualbayes.questions import ACCEPT, REJECT, UNDECIDED, decide, parse_rate


def _table(rows):
    import pandas as pd

    frame = pd.DataFrame(rows, columns=["lot", "inspected", "defectives", "lot_size"])
    for c in ("part", "supplier", "date"):
        frame[c] = None
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    frame["row"] = range(2, 2 + len(frame))
    return LotTable(frame, "mem.csv", None, 1, {}, [])


@pytest.mark.parametrize("a,b", [(1, 1), (0.5, 0.5), (2.5, 400)])
@pytest.mark.parametrize("x,n", [(0, 30), (3, 125), (17, 50)])
def test_posterior_and_summaries_match_scipy_beta(a, b, x, n):
    # Conjugacy: Beta(a+x, b+n-x) (Hamada et al., Bayesian Reliability, 2008, ch. 2);
    # scipy.stats.beta is the reference implementation of the distribution.
    ap, bp = conj.posterior(x, n, a, b)
    assert (ap, bp) == (a + x, b + n - x)
    s = conj.summarise(ap, bp, 0.02, 0.9)
    ref = stats.beta(a + x, b + n - x)
    assert s["posterior_mean"] == pytest.approx(ref.mean(), rel=1e-12)
    assert s["interval_low"] == pytest.approx(ref.ppf(0.05), rel=1e-10)
    assert s["interval_high"] == pytest.approx(ref.ppf(0.95), rel=1e-10)
    assert s["upper_bound"] == pytest.approx(ref.ppf(0.9), rel=1e-10)
    assert s["prob_within_spec"] == pytest.approx(ref.cdf(0.02), rel=1e-10)


@pytest.mark.parametrize("n,expected", [(30, 0.0950), (100, 0.0295), (300, 0.00994)])
def test_zero_defect_upper_bounds_clopper_pearson_and_rule_of_three(n, expected):
    # Exact Clopper-Pearson 95% upper bound after 0 defectives in n is beta.ppf(0.95, 1, n)
    # (docs/references.md; Hanley & Lippman-Hand 1983, JAMA 249:1743 for the rule of three, 3/n).
    # It is the posterior bound of Beta(x + 1, n - x), i.e. a_post = 1, b_post = n.
    cp = conj.summarise(1.0, float(n), 0.5, 0.95)["upper_bound"]
    assert cp == pytest.approx(expected, abs=5e-5 if n < 300 else 5e-6)
    # The uniform prior Beta(1, 1) gives Beta(1, n + 1): closed form 1 - 0.05 ** (1/(n+1)),
    # a little below Clopper-Pearson and close to the rule of three.
    ap, bp = conj.posterior(0, n, UNIFORM.a, UNIFORM.b)
    ub = conj.summarise(ap, bp, 0.5, 0.95)["upper_bound"]
    assert ub == pytest.approx(1 - 0.05 ** (1 / (n + 1)), rel=1e-10)
    assert ub < cp
    assert ub == pytest.approx(3 / n, rel=0.1)


def test_spec_parsing():
    assert parse_rate("0.01") == 0.01
    assert parse_rate("1%") == pytest.approx(0.01)
    assert parse_rate("10000ppm") == pytest.approx(0.01)
    assert parse_rate(" 250 ppm ") == pytest.approx(0.00025)
    for bad in ("0", "100%", "-1%", "abc", "1.5"):
        with pytest.raises(ValueError):
            parse_rate(bad)


def test_prior_parsing():
    assert parse_lot_prior("Uniform") == UNIFORM
    assert parse_lot_prior("jeffreys") == JEFFREYS
    p = parse_lot_prior("beta:0.5,200")
    assert (p.a, p.b) == (0.5, 200)
    for bad in ("beta:0,1", "beta:1", "beta:-1,2", "flat", "beta:nan,1"):
        with pytest.raises(ValueError):
            parse_lot_prior(bad)


def test_decision_rule_three_ways():
    assert decide(0.96, 0.95) == ACCEPT
    assert decide(0.95, 0.95) == ACCEPT
    assert decide(0.04, 0.95) == REJECT
    assert decide(0.5, 0.95) == UNDECIDED
    assert decide(0.99, 0.95, converged=False) == "not-converged"


@pytest.mark.parametrize("x,n,a,b,spec,c", [
    (0, 50, 1, 1, 0.01, 0.95), (1, 125, 1, 1, 0.02, 0.9), (0, 10, 0.5, 0.5, 0.005, 0.99),
    (2, 200, 2, 300, 0.01, 0.95)])
def test_extra_clean_units_is_the_smallest_count(x, n, a, b, spec, c):
    ap, bp = conj.posterior(x, n, a, b)
    m = conj.extra_clean_units(ap, bp, spec, c)
    assert m is not None and m > 0
    # re-run the conjugate update with m more clean units (accepts) and with m - 1 (does not)
    with_m = stats.beta(a + x, b + n + m - x).cdf(spec)
    with_fewer = stats.beta(a + x, b + n + m - 1 - x).cdf(spec)
    assert with_m >= c > with_fewer


def test_extra_clean_units_zero_defects_uniform_closed_form():
    # With x = 0 and Beta(1, 1): P(p <= s) = 1 - (1 - s)^(n + 1 + m) (integral of Beta(1, b)),
    # so m = ceil(ln(1 - C) / ln(1 - s)) - n - 1.
    n, s, c = 80, 0.01, 0.95
    m = conj.extra_clean_units(1.0, n + 1.0, s, c)
    assert m == int(np.ceil(np.log(1 - c) / np.log(1 - s))) - n - 1


def test_remaining_defectives_match_scipy_betabinom():
    # Finite lot: defectives among the N - n units not inspected ~ BetaBinomial(N - n, a', b').
    r = conj.remaining_defectives(np.array([2.0]), np.array([300.0]), np.array([1800]), 0.95)
    ref = stats.betabinom(1800, 2.0, 300.0)
    assert r["median"][0] == ref.ppf(0.5)
    assert r["upper_bound"][0] == ref.ppf(0.95)


def test_assess_lots_end_to_end_decisions():
    table = _table([("L1", 400, 0, 5000), ("L2", 80, 0, None), ("L3", 50, 9, 1000)])
    res = assess_lots(table, spec=0.01, confidence=0.95, prior="uniform")
    got = dict(zip(res.lots["lot"], res.lots["decision"], strict=True))
    assert got == {"L1": ACCEPT, "L2": UNDECIDED, "L3": REJECT}
    l2 = res.lots.set_index("lot").loc["L2"]
    # L2 needs m more clean units with 1 - 0.99^(81 + m) >= 0.95
    assert l2["extra_clean_units_to_accept"] == int(np.ceil(np.log(0.05) / np.log(0.99))) - 81
    assert pd_isna(l2["remaining_units"])
    l1 = res.lots.set_index("lot").loc["L1"]
    assert l1["remaining_units"] == 4600
    assert l1["remaining_defectives_upper"] == stats.betabinom(4600, 1, 401).ppf(0.95)


def pd_isna(v):
    import pandas as pd

    return pd.isna(v)
