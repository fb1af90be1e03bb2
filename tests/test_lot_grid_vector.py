"""The vectorised quadrature answers (qualbayes/lot_grid_vector.py, lot_grid_sums.py) against
the per-lot reference path (lot_grid_answers.answer_group, which sums node by node, one
distinct lot at a time) on invented histories, and the mixture sums against
scipy.stats.betabinom (the external reference, docs/references.md: "Defectives D among the
N - n units not inspected").
Tolerances: the two paths do the same arithmetic in another order (products of up to a few
thousand ratios, sums over thousands of nodes), so they agree to rounding: relative 1e-9 or
absolute 1e-10 (the stated error is a difference of two such sums), far below any printed
digit; counts and decisions must be equal."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from qualbayes import lot_grid_answers as qa
from qualbayes import lot_grid_sums as sums
from qualbayes import lot_grid_vector as qv
from qualbayes.models import lot_history_grid as grid
from qualbayes.search import smallest_int


def _history(seed, lots, rate=0.01, ns=(50, 80, 125, 200, 315), sizes=(800, 2000, 5000),
             blank=0.2, process=0.2):
    rng = np.random.default_rng(seed)
    n = rng.choice(ns, lots)
    x = rng.binomial(n, rng.beta(3, 3 / rate, lots))
    size = rng.choice(sizes, lots).astype(object)
    size[rng.random(lots) < blank] = None
    full = rng.random(lots) < 0.05  # a few lots inspected whole
    size[full] = n[full]
    basis = np.where(rng.random(lots) < process, "process", "lot").astype(object)
    basis[pd.isna(size)] = "process"
    return x.astype(float), n.astype(float), pd.array(list(size), "Int64"), basis


def _same(ref, new):
    assert set(ref) == set(new)
    for c in ref:
        a, b = np.asarray(ref[c]), np.asarray(new[c])
        assert a.shape == b.shape, c
        if a.dtype == object and c not in ("decision",):
            for u, v in zip(a, b, strict=True):
                assert (u is None and v is None) or (u is not None and v is not None
                                                     and u == v), (c, u, v)
        elif c == "decision":
            assert list(a) == list(b)
        else:
            np.testing.assert_allclose(b.astype(float), a.astype(float), rtol=1e-9, atol=1e-10,
                                       err_msg=c)


@pytest.mark.parametrize("seed, lots, rate, spec, conf", [
    (0, 40, 0.01, 0.01, 0.95),
    (1, 120, 0.004, 0.01, 0.9),
    (2, 25, 0.03, 0.02, 0.95),
    (3, 60, 0.01, 0.005, 0.99),
    (4, 8, 0.0005, 0.01, 0.95),
])
def test_vectorised_answers_equal_the_per_lot_path(seed, lots, rate, spec, conf):
    x, n, size, basis = _history(seed, lots, rate)
    g = grid.posterior_grids([grid.group_terms(x, n)])[0]
    ref = qa.answer_group(g, x, n, size, basis, spec, conf)
    new = qv.answer_group_vector(g, x, n, size, basis, spec, conf)
    _same(ref, new)
    np.testing.assert_allclose(qv.outlier_pvalues(g, x, n), qa.outlier_pvalues(g, x, n),
                               rtol=1e-9, atol=1e-12)


def test_large_lots_need_many_counts_and_match():
    """Lots of 50,000 units at a 5% rate: the defectives left run past the first blocks of
    counts, and the limit's count past 64."""
    x, n, size, basis = _history(7, 10, 0.05, ns=(200, 500), sizes=(20_000, 50_000),
                                 blank=0.0, process=0.0)
    g = grid.posterior_grids([grid.group_terms(x, n)])[0]
    _same(qa.answer_group(g, x, n, size, basis, 0.05, 0.95),
          qv.answer_group_vector(g, x, n, size, basis, 0.05, 0.95))


def test_many_groups_do_not_depend_on_threads_or_blocks(monkeypatch):
    rng = np.random.default_rng(5)
    frames = []
    for j in range(7):
        x, n, size, basis = _history(10 + j, int(rng.integers(1, 30)))
        frames.append(pd.DataFrame({"defectives": x, "inspected": n, "lot_size": size,
                                    "decision_basis": basis, "part": f"Q{j}"}))
    frame = pd.concat(frames, ignore_index=True)
    groups = {f"Q{j}": np.flatnonzero(frame["part"] == f"Q{j}") for j in range(7)}
    one = qa.answer_groups(frame, groups, 0.01, 0.95, None, workers=1)
    monkeypatch.setattr(qa, "BLOCK", 2)
    two = qa.answer_groups(frame, groups, 0.01, 0.95, None, workers=2)
    for k in groups:
        for c, v in one[k]["columns"].items():
            np.testing.assert_array_equal(np.asarray(v), np.asarray(two[k]["columns"][c]))
        assert one[k]["next_lot"] == two[k]["next_lot"]


def test_mixture_sums_against_scipy_betabinom():
    """sum_i w_i P(D <= k) with D ~ BetaBinomial(R, a_i + x, b_i + n - x), against
    scipy.stats.betabinom.cdf node by node."""
    rng = np.random.default_rng(3)
    a, b = rng.uniform(0.2, 40, 300), rng.uniform(50, 5e4, 300)
    w = rng.dirichlet(np.ones(300))
    x, n, size = np.array([0, 1, 3, 2]), np.array([50, 80, 125, 315]), 2000
    k = np.array([19, 18, 5, 17])
    got = sums.lot_basis_probs(a, b, np.log(w)[None, :], x, n, size, k)[0]
    want = [w @ stats.betabinom.cdf(kk, size - nn, a + xx, b + nn - xx)
            for xx, nn, kk in zip(x, n, k, strict=True)]
    np.testing.assert_allclose(got, want, rtol=1e-10)


def test_lockstep_search_equals_smallest_int():
    rng = np.random.default_rng(9)
    thresholds = rng.integers(0, 5000, 200)
    caps = rng.integers(0, 6000, 200)
    degenerate_from = np.where(rng.random(200) < 0.3, rng.integers(0, 5000, 200), 10**9)
    got = sums.smallest_many(lambda idx, m: (m >= thresholds[idx], m >= degenerate_from[idx]),
                             caps)

    class Degenerate(Exception):
        pass

    for j in range(200):
        def ok(m, j=j):
            if m >= degenerate_from[j]:
                raise Degenerate
            return m >= thresholds[j]
        try:
            want = smallest_int(ok, 0, int(caps[j]))
        except Degenerate:
            want = None
        assert (got[j] if got[j] >= 0 else None) == want, j
