"""Each draw's beta-binomial CDF, lot by lot and many lots at once, and P reused between
close-call rounds (qualbayes.lot_draw_cdf, qualbayes.lot_decisions.probabilities).

Reference: scipy.stats.betabinom (reference library, docs/references.md); the reuse and the
many-lots form are checked number for number against the one-lot, all-draws computation.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from qualbayes import lot_decisions as ld
from qualbayes.lot_draw_cdf import betabinom_cdf, lot_cdfs


def _draws(seed: int, d: int):
    rng = np.random.default_rng(seed)
    mu = rng.beta(4, 400, d)
    kappa = np.exp(rng.normal(np.log(300), 0.7, d))
    return mu * kappa, (1 - mu) * kappa


def test_many_lots_equal_one_lot_at_a_time_and_scipy():
    # draws with pmf(0) far below e^-600 (a = 800: summed in logarithms) among ordinary ones
    a, b = _draws(1, 300)
    a[::7] = 800.0
    alpha, beta = a + 2, b + 123
    ks = [0, 5, 40, 2900, 12, 12]
    rems = [10, 700, 4000, 3000, 950, 951]
    many = lot_cdfs(ks, rems, alpha, beta)
    for row, (k, r) in enumerate(zip(ks, rems, strict=True)):
        one = betabinom_cdf(k, r, alpha, beta)
        assert np.array_equal(many[row], one)  # bit for bit
        expected = stats.betabinom.cdf(k, r, alpha, beta)
        np.testing.assert_allclose(one, expected, rtol=1e-9, atol=1e-300)


def test_a_draw_gives_the_same_number_whatever_draws_come_with_it():
    a, b = _draws(2, 500)
    a[::11] = 900.0  # some draws summed in logarithms
    alpha, beta = a + 1, b + 79
    whole = betabinom_cdf(30, 3000, alpha, beta)
    parts = np.concatenate([betabinom_cdf(30, 3000, alpha[:173], beta[:173]),
                            betabinom_cdf(30, 3000, alpha[173:], beta[173:])])
    assert np.array_equal(whole, parts)


def _combos(rng, k: int, lot: bool):
    n = rng.choice([50, 80, 125, 200], size=k).astype(float)
    x = rng.binomial(n.astype(int), 0.01).astype(float)
    size = rng.integers(300, 6000, size=k)
    size[:3] = n[:3].astype(int)  # fully inspected lots
    if lot:
        return list(dict.fromkeys((xi, ni, int(si - ni), int(si)) for xi, ni, si in
                                  zip(x, n, size, strict=True)))
    return list(dict.fromkeys((xi, ni, None, None) for xi, ni in zip(x, n, strict=True)))


def test_probabilities_reused_between_rounds_equal_a_fresh_computation():
    # chains continued twice (1,000 more draws per chain each time): P, its MCSE and the
    # exact flag from the reused numbers are those of all the draws at once, bit for bit
    rng = np.random.default_rng(3)
    a, b = _draws(4, 4 * 3000)
    a_ch, b_ch = a.reshape(4, 3000), b.reshape(4, 3000)
    for basis, combos in ((ld.LOT, _combos(rng, 150, True)),
                          (ld.PROCESS, _combos(rng, 60, False))):
        reuse: dict = {}
        for per_chain in (1000, 2000, 3000):
            da, db = a_ch[:, :per_chain].ravel(), b_ch[:, :per_chain].ravel()
            again = ld.probabilities(da, db, 4, combos, 0.01, basis, reuse=reuse)
            fresh = ld.probabilities(da, db, 4, combos, 0.01, basis)
            for got, want in zip(again, fresh, strict=True):
                assert np.array_equal(got, want)
            assert reuse["a"].shape == (4, per_chain)  # kept for the next round


def test_reuse_is_dropped_when_the_draws_are_not_continued_chains():
    rng = np.random.default_rng(5)
    combos = _combos(rng, 40, True)
    a, b = _draws(6, 4000)
    reuse: dict = {}
    ld.probabilities(a, b, 4, combos, 0.01, ld.LOT, reuse=reuse)
    other_a, other_b = _draws(7, 8000)  # a refit: new draws from the start
    got = ld.probabilities(other_a, other_b, 4, combos, 0.01, ld.LOT, reuse=reuse)
    want = ld.probabilities(other_a, other_b, 4, combos, 0.01, ld.LOT)
    for g, w in zip(got, want, strict=True):
        assert np.array_equal(g, w)
    assert np.array_equal(reuse["a"], other_a.reshape(4, -1))


def test_reuse_keeps_nothing_past_its_memory_budget(monkeypatch):
    rng = np.random.default_rng(8)
    combos = _combos(rng, 40, True)
    a, b = _draws(9, 4000)
    monkeypatch.setattr(ld, "REUSE_VALUES", len(combos) * 4000 - 1)
    reuse: dict = {"a": np.zeros((4, 10))}
    got = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT, reuse=reuse)
    assert reuse == {}
    want = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT)
    for g, w in zip(got, want, strict=True):
        assert np.array_equal(g, w)


def test_passes_of_any_size_give_the_same_numbers(monkeypatch):
    # lot_cdfs sums PASS_VALUES lots x draws at a time (for the processor's cache): one lot
    # per pass, two, or all at once give the same numbers, bit for bit
    from qualbayes import lot_draw_cdf

    a, b = _draws(10, 300)
    a[::7] = 800.0  # some draws summed in logarithms
    alpha, beta = a + 1, b + 90
    ks = [0, 5, 40, 12, 12, 31, 7]
    rems = [10, 700, 4000, 950, 951, 3100, 600]
    got = []
    for values in (1, 600, 10**9):
        monkeypatch.setattr(lot_draw_cdf, "PASS_VALUES", values)
        got.append(lot_cdfs(ks, rems, alpha, beta))
    assert np.array_equal(got[0], got[1]) and np.array_equal(got[0], got[2])


def test_a_lot_settled_in_a_round_keeps_its_p_and_the_others_use_every_draw():
    # C set to one lot's own P from the first half of the draws: that lot (and perhaps a
    # few others) is too close to call in the first round. In the second round, on all the
    # draws, the lots settled in the first keep that round's P, MCSE and exact flag and its
    # number of draws; the close ones are summed over every draw, the same numbers as a
    # fresh computation; the g values kept are only those of lots still close
    from qualbayes.lot_answers import settled_probabilities

    rng = np.random.default_rng(11)
    combos = _combos(rng, 150, True)
    x = np.array([c[0] for c in combos], float)
    a, b = _draws(12, 4000)
    a_ch, b_ch = a.reshape(4, -1), b.reshape(4, -1)
    half = a_ch[:, :500].ravel(), b_ch[:, :500].ravel()
    fresh1 = ld.probabilities(*half, 4, combos, 0.01, ld.LOT)
    inside = np.flatnonzero((fresh1[0] > 0.2) & (fresh1[0] < 0.99))
    confidence = float(fresh1[0][inside[len(inside) // 2]])
    close1 = ld.decide(fresh1[0], fresh1[1], x, confidence)[1]
    assert 0 < close1.sum() < len(combos)
    fresh2 = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT)
    settled, reuse = {}, {}
    got1 = settled_probabilities(*half, 4, combos, x, 0.01, ld.LOT, confidence, reuse, settled)
    for g, w in zip(got1[:3], fresh1, strict=True):
        assert np.array_equal(g, w)
    assert (got1[3] == 2000).all()
    assert set(settled) == {c for c, near in zip(combos, close1, strict=True) if not near}
    assert set(reuse["g"]) == {c for c, near in zip(combos, close1, strict=True) if near}
    got2 = settled_probabilities(a, b, 4, combos, x, 0.01, ld.LOT, confidence, reuse, settled)
    for g, w1, w2 in zip(got2[:3], fresh1, fresh2, strict=True):
        assert np.array_equal(g[~close1], w1[~close1])
        assert np.array_equal(g[close1], w2[close1])
    assert (got2[3][~close1] == 2000).all() and (got2[3][close1] == 4000).all()
    close2 = ld.decide(got2[0], got2[1], x, confidence)[1]
    assert not close2[~close1].any()  # a settled lot stays settled
    assert set(reuse["g"]) == {c for c, near in zip(combos, close2, strict=True) if near}


def test_answers_carry_the_draws_behind_each_p_only_when_rounds_settle_lots():
    import pandas as pd

    from qualbayes.lot_answers import answer_lots

    rng = np.random.default_rng(15)
    combos = _combos(rng, 80, True)
    frame = pd.DataFrame({"defectives": [c[0] for c in combos],
                          "inspected": [c[1] for c in combos],
                          "lot_size": [c[3] for c in combos],
                          "decision_basis": [ld.LOT] * len(combos)})
    a, b = _draws(16, 4000)
    plain = answer_lots(frame, a, b, 4, 0.01, 0.95, full=False)
    assert "prob_within_spec_draws" not in plain
    rounds = answer_lots(frame, a, b, 4, 0.01, 0.95, full=False, reuse={}, settled={})
    assert list(rounds["prob_within_spec_draws"]) == [4000] * len(frame)
    assert np.array_equal(rounds["prob_within_spec"], plain["prob_within_spec"])
    full = answer_lots(frame, a, b, 4, 0.01, 0.95, known=rounds)
    assert list(full["prob_within_spec_draws"]) == [4000] * len(frame)


def test_blocks_on_threads_give_the_numbers_of_one_thread(monkeypatch):
    # _many_g sums its blocks on threads: the same (j, g) in the same order as on one
    monkeypatch.setattr(ld, "BLOCK_VALUES", 3 * 4000)  # three lots per block: many blocks
    rng = np.random.default_rng(17)
    combos = _combos(rng, 120, True)
    a, b = _draws(18, 4000)
    a_ch, b_ch = a.reshape(4, -1), b.reshape(4, -1)
    new = [False] * len(combos)
    one = list(ld._many_g(a_ch, b_ch, 0, combos, new, 0.01, ld.LOT, workers=1))
    three = list(ld._many_g(a_ch, b_ch, 0, combos, new, 0.01, ld.LOT, workers=3))
    assert [j for j, _, _ in one] == [j for j, _, _ in three]
    assert all(np.array_equal(g1, g3) and e1 == e3
               for (_, g1, e1), (_, g3, e3) in zip(one, three, strict=True))


def test_every_mcse_is_that_of_its_lot_alone_on_any_path():
    # the MCSEs are computed 16 lots at a time (mcse_means), whether every g is kept or
    # not: each is the number mcse_mean gives the lot's own g, bit for bit
    from qualbayes.inference.mcse import mcse_mean

    rng = np.random.default_rng(19)
    combos = _combos(rng, 53, True)  # 3 full blocks and a part
    a, b = _draws(20, 4000)
    want = [mcse_mean(ld.draws_g(a, b, x, n, rem, 0.01, ld.LOT, size)[0].reshape(4, -1))
            for x, n, rem, size in combos]
    kept = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT, reuse={}, workers=3)[1]
    plain = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT, workers=1)[1]
    assert np.array_equal(kept, want) and np.array_equal(plain, want)
