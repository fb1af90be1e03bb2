"""The scorecard's cell log-likelihood in both exact forms against scipy.stats.betabinom
(reference library): the sum over lots of log BetaBinomial(x | n, alpha_c, beta_c) minus the
binomial coefficients log C(n, x), which neither form computes (constant in the parameters).
Agreement is to floating-point rounding (the forms are algebraic identities)."""

import numpy as np
import pytest
from scipy import special, stats

from qualbayes.models import cell_likelihood as cl


def _cells(rng, count, big=False):
    out = []
    for _ in range(count):
        lots = rng.integers(1, 12)
        n = rng.choice([20, 50, 80, 125] + ([2000, 5000] if big else []), lots)
        p = rng.beta(0.5, 40 if not big else 4, lots)
        out.append((rng.binomial(n, p), n))
    return out


def _reference(cells, alpha, beta):
    total = 0.0
    for (x, n), a, b in zip(cells, alpha, beta, strict=True):
        total += np.sum(stats.betabinom.logpmf(x, n, a, b)
                        - (special.gammaln(n + 1) - special.gammaln(x + 1)
                           - special.gammaln(n - x + 1)))
    return total


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("build", [cl.gamma_terms, cl.rising_terms])
def test_both_forms_equal_scipy_betabinom(seed, build):
    rng = np.random.default_rng(seed)
    cells = _cells(rng, 25, big=seed == 3)
    mu = rng.uniform(0.001, 0.2, len(cells))
    kappa = rng.uniform(2.0, 900.0)
    alpha, beta = mu * kappa, (1 - mu) * kappa
    got = cl.loglik(np, alpha, beta, kappa, build(cells))
    want = _reference(cells, alpha, beta)
    assert got == pytest.approx(want, rel=1e-10, abs=1e-8)


def test_jax_matches_numpy_and_gradients_agree():
    import jax
    import jax.numpy as jnp

    rng = np.random.default_rng(5)
    cells = _cells(rng, 10)
    rising, gamma = cl.rising_terms(cells), cl.gamma_terms(cells)

    def f(terms, z):
        mu = jax.nn.sigmoid(z[:-1])
        kappa = jnp.exp(z[-1])
        return cl.loglik(jnp, mu * kappa, (1 - mu) * kappa, kappa,
                         type(terms)(*map(jnp.asarray, terms)))

    z = jnp.asarray(np.r_[rng.normal(-4, 1, len(cells)), np.log(150.0)])
    assert float(f(rising, z)) == pytest.approx(float(f(gamma, z)), rel=1e-11)
    np.testing.assert_allclose(jax.grad(lambda v: f(rising, v))(z),
                               jax.grad(lambda v: f(gamma, v))(z), rtol=1e-9, atol=1e-9)


def test_counts_and_the_choice_of_form():
    x, n = np.array([0, 1, 3, 3]), np.array([50, 50, 80, 80])
    t = cl.rising_terms([(x, n)])
    assert t.x_above[0, :3].tolist() == [3.0, 2.0, 2.0]  # lots with x > 0, > 1, > 2
    m = dict(zip(t.m[0], t.m_weight[0], strict=True))
    # m in [n - x, n): 49 (the lot 1 of 50), 77, 78, 79 twice (the two lots 3 of 80)
    assert {k: v for k, v in m.items() if v} == {49.0: 1.0, 77.0: 2.0, 78.0: 2.0, 79.0: 2.0}
    assert cl.cell_terms([(x, n)]).__class__ is cl.RisingTerms
    # hundreds of defectives per lot: the logarithms would outnumber the log-gammas' cost
    heavy = [(np.array([900, 1500]), np.array([5000, 6000]))]
    assert isinstance(cl.cell_terms(heavy), cl.GammaTerms)
