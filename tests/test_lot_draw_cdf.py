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


def _fresh_and_scan(combos, a, b, confidence, basis=ld.LOT):
    fresh = ld.probabilities(a, b, 4, combos, 0.01, basis)
    scan = ld.probabilities(a, b, 4, combos, 0.01, basis, reuse={}, until_close=confidence)
    return fresh, scan


def test_a_round_that_may_continue_stops_at_its_first_close_call():
    # C set to one lot's own P: that lot is too close to call, so the scan stops at a close
    # lot; every P and every MCSE it computed are those of the full computation
    rng = np.random.default_rng(11)
    combos = _combos(rng, 150, True)
    a, b = _draws(12, 4000)
    prob = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT)[0]
    inside = np.flatnonzero((prob > 0.2) & (prob < 0.99))
    confidence = float(prob[inside[len(inside) // 2]])
    (p0, e0, x0), (p1, e1, x1) = _fresh_and_scan(combos, a, b, confidence)
    assert np.array_equal(p0, p1) and np.array_equal(x0, x1)
    done = ~np.isnan(e1)
    assert 0 < done.sum() < len(combos)  # stopped early
    assert np.array_equal(e0[done], e1[done])
    x = np.array([c[0] for c in combos])
    close = ld.decide(p1[done], e1[done], x[done], confidence)[1]
    assert close[-1] and close.sum() == 1  # the last lot computed is the first close one


def test_a_round_without_a_close_call_computes_every_mcse():
    # C where no lot is within 3 MCSE of either threshold: the scan computes every MCSE and
    # gives the full computation's numbers, bit for bit
    rng = np.random.default_rng(13)
    combos = _combos(rng, 60, True)
    a, b = _draws(14, 4000)
    prob, err, _ = ld.probabilities(a, b, 4, combos, 0.01, ld.LOT)
    x = np.array([c[0] for c in combos])
    clear = [c for c in np.linspace(0.5, 0.999, 500)
             if not ld.decide(prob, err, x, c)[1].any()]
    assert clear  # some C leaves every lot settled
    fresh, scan = _fresh_and_scan(combos, a, b, float(clear[0]))
    for got, want in zip(scan, fresh, strict=True):
        assert np.array_equal(got, want)


def test_answers_of_a_stopped_round_say_only_that_a_lot_is_close():
    import pandas as pd

    from qualbayes.lot_answers import answer_lots

    rng = np.random.default_rng(15)
    combos = _combos(rng, 80, True)
    frame = pd.DataFrame({"defectives": [c[0] for c in combos],
                          "inspected": [c[1] for c in combos],
                          "lot_size": [c[3] for c in combos],
                          "decision_basis": [ld.LOT] * len(combos)})
    a, b = _draws(16, 4000)
    whole = answer_lots(frame, a, b, 4, 0.01, 0.95, full=False, reuse={})
    p = np.asarray(whole["prob_within_spec"])
    confidence = float(p[np.flatnonzero((p > 0.2) & (p < 0.99))[0]])
    part = answer_lots(frame, a, b, 4, 0.01, confidence, full=False, reuse={},
                       until_close=True)
    assert part["_partial"] is True and set(part) == {"too_close", "_partial"}
    assert sum(part["too_close"]) == 1
    try:
        answer_lots(frame, a, b, 4, 0.01, confidence, full=True, until_close=True)
    except ValueError:
        pass
    else:
        raise AssertionError("until_close with full answers must be refused")


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
