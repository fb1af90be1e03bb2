"""The bounds of the quadrature engine (qualbayes/lot_grid_bounds.py): quantiles of mixtures of
Betas against the Newton path they replace (lot_grid_answers.mixture_ppf) and against
scipy.stats.beta (scipy as reference library, docs/references.md "A beta mixture's ... ppf
inverts its cdf"), and the tail bounds that let nodes be counted as 0 or 1 against
scipy.special.betainc.
Tolerances: both paths stop at |F - q| <= 1e-10 (evaluated, or predicted from the Taylor
polynomial), checked with scipy's betainc node by node (1.1e-10: summing rounding); so the
quantiles agree to about 1e-10 / (p F'(p)) relative, asserted at 1e-8 where p F'(p) > 0.01."""

import numpy as np
import pytest
from scipy import special, stats

from qualbayes import lot_grid_answers as qa
from qualbayes import lot_grid_bounds as gb
from qualbayes.models import lot_history_grid as grid


def _mixture(seed, nodes, cols, kappa_high=1e8):
    """Invented grid-like nodes: mean rates around 1%, concentrations from 20 to
    ``kappa_high`` (the grid's range), and lots (x, n) added as in the engine."""
    rng = np.random.default_rng(seed)
    mu = np.exp(rng.normal(np.log(0.01), 0.5, nodes))
    kappa = np.exp(rng.uniform(np.log(20.0), np.log(kappa_high), nodes))
    w = rng.dirichlet(np.full(nodes, 0.3))
    n = rng.choice([0, 50, 80, 315, 2000], cols)
    x = rng.binomial(n, 0.012)
    alpha = (mu * kappa)[:, None] + x[None, :]
    beta = ((1.0 - mu) * kappa)[:, None] + (n - x)[None, :]
    return alpha, beta, w


@pytest.mark.parametrize("seed, nodes, cols, kappa_high", [
    (0, 300, 30, 1e8), (1, 40, 12, 1e3), (2, 500, 8, 1e6), (3, 1, 5, 1e8), (4, 200, 20, 50.0),
])
def test_quantiles_equal_the_newton_path(seed, nodes, cols, kappa_high):
    alpha, beta, w = _mixture(seed, nodes, cols, kappa_high)
    levels = (0.025, 0.5, 0.95, 0.975, 0.999)
    got = gb.mixture_quantiles(levels, alpha, beta, w)
    for i, q in enumerate(levels):
        old = qa.mixture_ppf(q, alpha, beta, w)
        # both invert F to 1e-10 (scipy's betainc node by node), so they agree where F is
        # steep; where it is flat (nodes far apart) both are right and may differ more
        assert (np.abs(_cdf(alpha, beta, w, got[i]) - q) <= 1.1e-10).all()
        assert (np.abs(_cdf(alpha, beta, w, old) - q) <= 1.1e-10).all()
        steep = _dens(alpha, beta, w, old) * old > 1e-2
        np.testing.assert_allclose(got[i][steep], old[steep], rtol=1e-8)


def _cdf(alpha, beta, w, p):
    return w @ special.betainc(alpha, beta, p[None, :])


def _dens(alpha, beta, w, p):
    return w @ stats.beta.pdf(p[None, :], alpha, beta)


def test_quantiles_invert_the_mixture_cdf_of_scipy():
    """F(p_q) = q with F summed from scipy.stats.beta.cdf node by node."""
    alpha, beta, w = _mixture(7, 25, 6, 1e7)
    levels = (0.05, 0.5, 0.95)
    got = gb.mixture_quantiles(levels, alpha, beta, w)
    for i, q in enumerate(levels):
        for k in range(alpha.shape[1]):
            f = w @ stats.beta.cdf(got[i, k], alpha[:, k], beta[:, k])
            assert abs(f - q) <= 1e-9, (q, k, f)


def test_bounds_of_the_grid_nodes_equal_the_newton_path():
    """The summary nodes of a real grid posterior (lots from a Beta(3, 297) process)."""
    rng = np.random.default_rng(11)
    n = rng.choice([50, 80, 125, 200, 315], 200)
    x = rng.binomial(n, rng.beta(3, 297, 200))
    g = grid.posterior_grids([grid.group_terms(x, n)])[0]
    a, b, w = qa.summary_nodes(g)
    rates = np.unique(np.stack([x, n], 1), axis=0)
    alpha = a[:, None] + rates[:, 0]
    beta = b[:, None] + (rates[:, 1] - rates[:, 0])
    got = gb.mixture_quantiles((0.025, 0.975, 0.95), alpha, beta, w)
    for i, q in enumerate((0.025, 0.975, 0.95)):
        np.testing.assert_allclose(got[i], qa.mixture_ppf(q, alpha, beta, w), rtol=1e-8)


def test_tail_bounds_hold_against_scipy_betainc():
    """I_p(a, b) <= the lower-tail bound and 1 - I_p(a, b) <= the upper-tail bound wherever
    they apply, for parameters from 0.05 to 1e8 and p across (0, 1); and a node counted as
    0 or 1 is within GATE of scipy's value."""
    rng = np.random.default_rng(3)
    a = np.exp(rng.uniform(np.log(0.05), np.log(1e8), 4000))
    b = np.exp(rng.uniform(np.log(0.05), np.log(1e8), 4000))
    mean = a / (a + b)
    sd = np.sqrt(mean * (1 - mean) / (a + b + 1))
    p = np.clip(mean + sd * rng.normal(0, 12, 4000), 1e-12, 1 - 1e-12)
    a, b, p = a[:, None], b[:, None], p[:, None]  # one node and its own p per row
    log_p, log_q = np.log(p), np.log1p(-p)
    e = np.exp(a * log_p + b * log_q - special.betaln(a, b))
    low, up = gb.tail_bounds(a, b, log_p, log_q, e)
    exact = special.betainc(a, b, p)
    # the bound's own rounding: e = exp(a log p + b log(1-p) - log B(a, b)) with log B of
    # parameters up to 1e8 (log-gammas near 2e9, each good to about 1e-16 of that)
    rel = 1e-6
    assert (exact <= low * (1 + rel) + 1e-300).all()
    assert (special.betainc(b, a, 1 - p) <= up * (1 + rel) + 1e-300).all()
    assert (np.isfinite(low) | np.isfinite(up)).mean() > 0.5  # the bounds do apply
    cut = (low <= gb.GATE) | (up <= gb.GATE)
    assert cut.sum() > 100  # far-tail points are counted as 0 or 1
    for col in range(0, 4000, 400):  # one column of nodes at one p, as the engine calls it
        got = gb.mixture_cdf(a[col:col + 1], b[col:col + 1], log_p[col:col + 1],
                             log_q[col:col + 1], e[col:col + 1])
        assert abs(got[0, 0] - exact[col, 0]) <= gb.GATE + 1e-15


def test_quantiles_of_nodes_far_apart_need_bisection_and_still_invert_the_cdf():
    """Two very narrow nodes far apart: the mixture's CDF is flat between them, so Halley's
    steps leave the bracket and the search bisects; F at the answer is q (scipy's betainc,
    node by node)."""
    alpha = np.array([[1e6], [3e6]])
    beta = np.array([[99e6], [97e6]])
    w = np.array([0.5, 0.5])
    for q in (0.1, 0.25, 0.5, 0.75, 0.9):
        got = gb.mixture_quantiles((q,), alpha, beta, w)[0, 0]
        assert abs(w @ special.betainc(alpha[:, 0], beta[:, 0], got) - q) <= 1e-10
