"""Prior objects from Python (qualbayes.priors): the distribution protocol against
scipy.stats, statements solved exactly, the power prior in closed form, and sensitivity
tables through the public API.

Sources (docs/references.md): scipy.stats as reference library; the power prior
Beta(a0 + w x0, b0 + w (n0 - x0)) and Gamma(a0 + w r0, b0 + w T0) of Ibrahim & Chen (2000),
Statistical Science 15:46; conjugacy for the sensitivity rows (Hamada et al. 2008, ch. 2).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, special, stats

import qualbayes as qb
from qualbayes.errors import ParameterError
from qualbayes.priors import (
    Beta,
    BetaMixture,
    Gamma,
    LogNormal,
    Prior,
    from_statements,
    power,
    sensitivity,
)


def test_the_package_names_stay_the_functions_after_every_module_is_loaded():
    import importlib
    import pkgutil

    import qualbayes.priors as package

    for info in pkgutil.iter_modules(package.__path__):
        if info.name != "life_sensitivity":  # the jax path; its name is no export
            importlib.import_module(f"qualbayes.priors.{info.name}")
    for name in package.__all__:
        assert not isinstance(getattr(package, name), type(package)), name


@pytest.mark.parametrize("prior, ref", [
    (Beta(2.0, 300.0), stats.beta(2.0, 300.0)),
    (Gamma(3.0, 1500.0), stats.gamma(3.0, scale=1 / 1500.0)),
    (LogNormal(0.7, 0.3), stats.lognorm(0.3, scale=np.exp(0.7))),
])
def test_members_follow_scipy(prior, ref):
    assert isinstance(prior, Prior)
    x = ref.ppf([0.01, 0.3, 0.5, 0.9])
    np.testing.assert_allclose(prior.logpdf(x), ref.logpdf(x), rtol=1e-12)
    np.testing.assert_allclose(prior.cdf(x), ref.cdf(x), rtol=1e-12)
    np.testing.assert_allclose(prior.ppf([0.1, 0.6]), ref.ppf([0.1, 0.6]), rtol=1e-12)
    assert prior.mean() == pytest.approx(ref.mean(), rel=1e-12)
    assert prior.rvs(size=5, random_state=1).shape == (5,)
    assert isinstance(prior.describe(), str)


def test_to_numpyro_has_the_same_density():
    jnp = pytest.importorskip("jax.numpy")
    from qualbayes.inference.run import jax_scope

    with jax_scope():
        for prior, x in ((Beta(2.0, 30.0), 0.05), (Gamma(2.0, 10.0), 0.3),
                         (LogNormal(1.0, 0.5), 2.0)):
            got = float(prior.to_numpyro().log_prob(jnp.asarray(x)))
            assert got == pytest.approx(float(prior.logpdf(x)), rel=1e-10)


def test_a_beta_mixture_is_a_distribution():
    mix = BetaMixture(np.array([1.0, 4.0, 2.0]), np.array([200.0, 300.0, 50.0]))
    total, _ = integrate.quad(lambda p: np.exp(mix.logpdf(p)), 0, 1, points=[0.01, 0.05],
                              limit=200)
    assert total == pytest.approx(1.0, abs=1e-8)
    for q in (0.05, 0.5, 0.95):
        assert float(mix.cdf(mix.ppf(q))) == pytest.approx(q, abs=1e-10)
    assert mix.mean() == pytest.approx(np.mean([1 / 201, 4 / 304, 2 / 52]), rel=1e-12)


def test_statements_are_met_exactly():
    p = from_statements("p<0.5%@90%")
    assert isinstance(p, Beta)
    assert stats.beta(p.a, p.b).cdf(0.005) == pytest.approx(0.9, abs=1e-10)
    rate = from_statements("mtbf>1000@90%")  # P(rate <= 1/1000) = 0.9
    assert isinstance(rate, Gamma)
    assert stats.gamma(rate.a, scale=1 / rate.rate).cdf(1e-3) == pytest.approx(0.9, abs=1e-10)
    shape = from_statements("1.5<shape<3@90%")
    assert isinstance(shape, LogNormal) and shape.variable == "shape"
    np.testing.assert_allclose(shape.ppf([0.05, 0.95]), [1.5, 3.0], rtol=1e-10)
    with pytest.raises(ParameterError) as err:
        from_statements("p<0.5%")  # no "how sure"
    assert err.value.parameter == "statements" and "--" not in str(err.value)


def test_the_power_prior_in_closed_form():
    assert power((2, 500), 0.5) == Beta(2.0, 250.0, label="power prior, weight 0.5")
    b = power((2, 500), 0.3, base=Beta(0.5, 0.5))
    assert (b.a, b.b) == pytest.approx((0.5 + 0.6, 0.5 + 0.3 * 498))
    g = power((2, 1909.0), 1.0, base=Gamma(2.0, 1400.0))
    assert (g.a, g.rate) == pytest.approx((4.0, 3309.0))  # NIST 8.4.6 posterior Gamma(4, 3309)
    lots = pd.DataFrame({"lot": ["a", "b"], "inspected": [100, 400], "defectives": [1, 1]})
    pooled = power(lots, 1.0)
    assert (pooled.a, pooled.b) == (3.0, 499.0)
    with pytest.raises(ParameterError) as err:
        power((2, 500), 1.5)
    assert err.value.parameter == "weight"


def test_a_lots_sensitivity_table_is_the_conjugate_answer_under_each_prior():
    lots = pd.DataFrame({"lot": ["L1", "L2", "L3"], "inspected": [300, 50, 125],
                         "defectives": [0, 3, 1]})
    result = qb.assess_lots(lots, spec="1%", confidence=0.9)
    table = sensitivity(result, {"vague": Beta(0.5, 0.5), "stated": Beta(1.0, 150.0)})
    x, n = lots["defectives"].to_numpy(), lots["inspected"].to_numpy()
    for label, (a, b) in {"as run": (1, 1), "vague": (0.5, 0.5), "stated": (1, 150)}.items():
        got = table[table["prior"] == label]["prob"].to_numpy()
        np.testing.assert_allclose(got, special.betainc(a + x, b + n - x, 0.01), rtol=1e-12)
    assert set(table.columns) >= {"lot", "prior", "prob", "decision", "depends_on_prior"}
    assert "depends on the prior" in table.attrs["summary"]


def test_a_plan_sensitivity_table_through_the_api():
    plan = qb.plan_attribute(reliability=0.9, confidence=0.9, failures=0)
    table = sensitivity(plan)
    # uniform prior, 0 of 22 failed: P(R >= 0.9) = 1 - 0.9^23 (conjugacy)
    uniform = table[table["prior"] == "uniform"]
    assert uniform["prob"].item() == pytest.approx(1 - 0.9**23, rel=1e-10)
    assert uniform["decision"].item() == "demonstrated"


@pytest.mark.slow
def test_a_life_sensitivity_table_through_the_api():
    from qualbayes.inference.run import SamplerSettings

    rng = np.random.default_rng(8)
    t = np.sort(rng.weibull(2.0, 12) * 1000.0)
    life = pd.DataFrame({"unit": [f"u{i}" for i in range(12)], "time": t,
                         "status": ["F"] * 9 + ["S"] * 3})
    fast = SamplerSettings(num_warmup=500, num_samples=500, seed=3)
    result = qb.assess_life(life, mission=100, target=0.9, settings=fast)
    table = sensitivity(result, settings=fast)
    assert table["prior"].iloc[0].startswith("as run")
    as_run = table[table["prior"].str.startswith("as run")]["prob"].item()
    assert as_run == pytest.approx(result.to_frame()["prob_meets_target"].item())
    assert set(table["decision"]) <= {"meets", "does-not-meet", "undecided", "not-converged",
                                      "not usable"}
