"""The answering pass after a history fit, made faster (issue 18, item 1): the clean-unit
count searched from a first guess gives the same smallest count as the doubling search it
replaces (tests/answers_reference.py, the code before the change), including its
"weights degenerate: no count" rule, on many cases; and against outside references where a
closed form exists.

External check values (docs/references.md, "Lot decisions" and "Reference libraries"): the
zero-failure (success-run) closed form P(p <= s) = 1 - (1 - s)^(n + m + 1) under the uniform
prior; scipy.stats.betabinom and scipy.stats.beta as reference libraries.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from answers_reference import extra_clean_units as reference_extra
from scipy import stats

from qualbayes import lot_answers
from qualbayes import lot_decisions as ld
from qualbayes.models.lot_history_grid import posterior_grid
from qualbayes.search import smallest_int
from qualbayes.search_near import doubling_path, smallest_near

# ------------------------------------------------------------------ the search itself

def _conditions(rng):
    """(value function, cap, answer) triples: smooth, saturating, stepped and flat values,
    answers at 0, inside, at the cap and none."""
    out = []
    for _ in range(150):
        cap = int(rng.choice([0, 1, 5, 100, 5000, 10**9]))
        answer = int(rng.integers(0, cap + 1)) if rng.random() < 0.85 else None
        root = (answer - 0.5) if answer is not None else cap + 10.0
        kind = rng.integers(0, 4)
        if kind == 0:
            out.append((lambda m, r=root: m - r, cap, answer))
        elif kind == 1:  # saturating: logistic in m
            scale = float(rng.uniform(0.5, 50))
            out.append((lambda m, r=root, s=scale: np.tanh((m - r) / s), cap, answer))
        elif kind == 2:  # a step: no slope information at all
            out.append((lambda m, r=root: 1.0 if m > r else -1.0, cap, answer))
        else:  # flat stretches
            out.append((lambda m, r=root: np.floor((m - r) / 7.0) + (m > r), cap, answer))
    return out


def test_smallest_near_finds_the_smallest_int_answer_from_any_start():
    rng = np.random.default_rng(20261202)
    for value, cap, answer in _conditions(rng):
        expected = smallest_int(lambda m, v=value: v(m) >= 0, 0, cap)
        assert expected == answer
        for start in {0, cap, cap // 2, answer if answer is not None else 0,
                      int(rng.integers(0, cap + 1))}:
            for slope in (None, 1.0, 1e-6, 1e6):
                seen = []

                def counted(m, v=value, seen=seen, cap=cap):
                    assert 0 <= m <= cap
                    seen.append(m)
                    return v(m)

                got = smallest_near(counted, start, cap, slope=slope)
                assert got == expected, (cap, answer, start, slope)
                assert len(seen) == len(set(seen))  # never the same point twice
                assert len(seen) <= 4 * max(1, cap).bit_length() + 8


def test_smallest_near_uses_a_known_true_point_without_evaluating_it():
    seen = []
    got = smallest_near(lambda m: seen.append(m) or (m - 99.5), 10, 1000, true_at=100)
    assert got == 100 and 100 not in seen


def test_doubling_path_is_the_points_the_doubling_search_tests():
    for answer, cap in ((0, 10), (1, 10), (6, 100), (64, 64), (None, 37), (1000, 10**9)):
        tested = []
        smallest_int(lambda m, a=answer, t=tested: t.append(m) or (a is not None and m >= a), 0,
                     cap)
        assert doubling_path(answer, cap) == tested


def test_the_early_ess_check_is_a_count_the_doubling_search_tests():
    # a count m below the answer: the doubling search tests _doubling_point(m) too, so a
    # degenerate weight there means that search gave None
    for cap in (0, 1, 2, 5, 37, 100, 1000):
        for answer in [*range(cap + 1), None]:
            path = set(doubling_path(answer, cap))
            for m in range(cap + 1 if answer is None else answer):
                assert ld._doubling_point(m, cap) in path, (cap, answer, m)


def test_gap_has_the_sign_of_the_comparison_itself():
    rng = np.random.default_rng(1)
    for c in (0.5, 0.9, 0.95, 0.975, 0.999):
        near = [c, np.nextafter(c, 0), np.nextafter(c, 1), 0.0, 1.0, *rng.uniform(0, 1, 50)]
        for p in near:
            assert (ld._gap(float(p), c) >= 0) == (p >= c), (p, c)


# ------------------------------------------------------------------ against the old search

def _history_draws(x, n, draws, seed):
    rng = np.random.default_rng(seed)
    post = posterior_grid(np.asarray(x, float), np.asarray(n, float))
    pick = rng.choice(post.mu.size, size=draws, p=post.weight)
    return post.a[pick], post.b[pick]


HISTORIES = {  # invented inspection histories: x defectives of n
    "typical": ([0, 1, 2, 0, 1, 3, 0, 1, 0, 2, 1, 0], [125, 125, 200, 80, 125, 315, 50,
                                                       125, 80, 200, 125, 50]),
    "clean": ([0] * 15, [125] * 15),
    "spread": ([0, 9, 0, 1, 14, 0, 2, 0], [125, 125, 80, 200, 125, 50, 315, 125]),
}


@pytest.mark.parametrize("history", sorted(HISTORIES))
def test_extra_clean_units_equal_the_doubling_search(history):
    a0, b0 = _history_draws(*HISTORIES[history], draws=1000, seed=3)
    cases = found = none = 0
    calls_old = calls_new = 0
    for x in (0, 1, 3, 8):
        for n in (50, 315):
            for size in (None, n, n + 1, n + 5, 800, 5000):
                rem = None if size is None else size - n
                for basis in (ld.LOT, ld.PROCESS):
                    for spec, c in ((0.01, 0.95), (0.02, 0.9), (0.001, 0.99)):
                        tested = []
                        old = reference_extra(a0, b0, x, n, rem, size, spec, c, basis,
                                              calls=tested)
                        seen = []
                        new = _counting_extra(a0, b0, x, n, rem, size, spec, c, basis, seen)
                        assert new == old, (history, x, n, size, basis, spec, c)
                        cases += 1
                        found += old is not None
                        none += old is None
                        calls_old += len(tested)
                        calls_new += len(seen)
    # both outcomes occur, so the comparison covers the ESS rule and the search
    assert found > 20 and none > 5, (found, none)
    assert calls_new < 0.6 * calls_old, (calls_new, calls_old)


def _counting_extra(a0, b0, x, n, rem, size, spec, c, basis, seen):
    """lot_decisions.extra_clean_units, recording the counts at which its search sums the
    draws (the first guess's one-draw sums and the ESS checks are not counted)."""
    real = ld.smallest_near

    def counted(value, *args, **kw):
        if value.__name__ != "value":
            return real(value, *args, **kw)
        return real(lambda m: seen.append(m) or value(m), *args, **kw)

    ld.smallest_near = counted
    try:
        return ld.extra_clean_units(a0, b0, x, n, rem, size, spec, c, basis)
    finally:
        ld.smallest_near = real


@pytest.mark.parametrize("draws,size", [(1000, 10**7), (1000, 10**8), (1, 10**6)])
def test_extra_clean_units_of_huge_lots_equal_the_doubling_search(draws, size):
    # the continuous limit of the lot's sum (many draws) and long one-draw sums
    if draws > 1:
        a0, b0 = _history_draws(*HISTORIES["typical"], draws=draws, seed=5)
    else:
        a0, b0 = np.ones(1), np.ones(1)
    for x, n in ((0, 125), (2, 315), (0, 3000)):
        old = reference_extra(a0, b0, x, n, size - n, size, 0.01, 0.95, ld.LOT)
        assert ld.extra_clean_units(a0, b0, x, n, size - n, size, 0.01, 0.95, ld.LOT) == old


def test_too_few_draws_for_the_weights_give_no_count_as_before():
    a0, b0 = _history_draws(*HISTORIES["typical"], draws=150, seed=4)  # below MIN_WEIGHT_ESS
    for rem, size, basis in ((None, None, ld.PROCESS), (675, 800, ld.LOT)):
        assert reference_extra(a0, b0, 1, 125, rem, size, 0.01, 0.95, basis) is None
        assert ld.extra_clean_units(a0, b0, 1, 125, rem, size, 0.01, 0.95, basis) is None


# ------------------------------------------------------------------ against outside references

@pytest.mark.parametrize("n,spec,c", [(1, 0.01, 0.95), (13, 0.0025, 0.9), (200, 0.001, 0.99),
                                      (50, 0.05, 0.6)])
def test_one_draw_process_basis_matches_the_success_run_closed_form(n, spec, c):
    # uniform prior, no defectives: P(p <= s) = 1 - (1 - s)^(n + m + 1) (success run, the
    # zero-failure closed form; docs/references.md)
    m = ld.extra_clean_units(np.ones(1), np.ones(1), 0.0, float(n), None, None, spec, c,
                             ld.PROCESS)
    closed = int(np.ceil(np.log(1 - c) / np.log(1 - spec) - 1)) - n
    assert m == max(closed, 0)


@pytest.mark.parametrize("a,b,x,n,size,spec,c", [
    (1.0, 1.0, 0, 50, 800, 0.01, 0.95), (0.5, 0.5, 1, 125, 2000, 0.01, 0.9),
    (3.0, 300.0, 2, 80, 5000, 0.01, 0.95), (1.0, 1.0, 0, 315, 320, 0.01, 0.95),
    (2.0, 150.0, 4, 200, 800, 0.01, 0.99)])
def test_one_draw_lot_basis_matches_scipy_betabinom_scanned_over_every_count(a, b, x, n, size,
                                                                              spec, c):
    # reference: scipy.stats.betabinom (docs/references.md): the lot is within spec when
    # D <= floor(s N) - x of its R - m uninspected units, D ~ BetaBinomial(R - m, a + x,
    # b + n - x + m); the smallest m whose probability reaches C, by scanning every m
    rem = size - n
    k_star = int(np.floor(spec * size - x + 1e-9))
    m = np.arange(rem + 1)
    prob = stats.betabinom(rem - m, a + x, b + n - x + m).cdf(k_star)
    expected = int(m[np.flatnonzero(prob >= c)[0]])
    got = ld.extra_clean_units(np.array([a]), np.array([b]), float(x), float(n), rem, size,
                               spec, c, ld.LOT)
    assert got == expected


# ------------------------------------------------------------------ the whole pass

def test_answer_lots_equal_the_earlier_answering_pass(monkeypatch):
    rng = np.random.default_rng(8)
    k = 120
    n = rng.choice([50, 80, 125, 200, 315], size=k)
    frame = pd.DataFrame({"defectives": rng.binomial(n, 0.012).astype(float),
                          "inspected": n.astype(float),
                          "lot_size": pd.array(rng.choice([800, 2000, 5000, None], size=k),
                                               dtype="Int64")})
    frame["decision_basis"] = np.where(frame["lot_size"].notna(), "lot", "process")
    a0, b0 = _history_draws(*HISTORIES["typical"], draws=4000, seed=9)
    known = lot_answers.answer_lots(frame, a0, b0, 4, 0.01, 0.95, full=False)
    new = lot_answers.answer_lots(frame, a0, b0, 4, 0.01, 0.95, known=known, workers=3)
    alone = lot_answers.answer_lots(frame, a0, b0, 4, 0.01, 0.95, known=known, workers=1)
    for column, values in alone.items():  # the threads change no number
        assert pd.Series(list(values)).equals(pd.Series(list(new[column]))), column
    # the earlier clean-unit search, mixture quantile, beta-binomial blocks and CDF, each
    # draw summed on its own (no shared mixture sums)
    from answers_reference import betabinom_cdf, log_pmf_block, mixture_ppf

    from qualbayes import lot_decisions
    from qualbayes.models import mixtures

    monkeypatch.setattr(lot_answers, "extra_clean_units",
                        lambda *args, ess_cache=None, lot_sums=None: reference_extra(*args))
    monkeypatch.setattr(lot_answers, "lot_sums", lambda *args, **kw: (None, None))
    monkeypatch.setattr(lot_decisions, "betabinom_cdf", betabinom_cdf)
    monkeypatch.setattr(mixtures, "ppf", mixture_ppf)
    monkeypatch.setattr(mixtures, "_log_pmf_block", log_pmf_block)
    old = lot_answers.answer_lots(frame, a0, b0, 4, 0.01, 0.95, known=known)
    counts = pd.Series(list(new["extra_clean_units_to_accept"]))
    assert counts.notna().sum() > 20  # the comparison covers real counts
    assert pd.Series(list(new["remaining_defectives_upper"])).notna().sum() > 50
    for column, values in old.items():
        assert pd.Series(list(values)).equals(pd.Series(list(new[column]))), column


# ------------------------------------------------------------------ mixture quantiles

def _mixtures(rng, count):
    """(alpha, beta) draws of lot-rate mixtures: narrow and wide, tiny and large rates,
    a million clean units."""
    out = []
    for i in range(count):
        d = int(rng.choice([2, 50, 1000]))
        mu = rng.beta(*([2, 200] if i % 3 else [5, 5]), size=d)
        kappa = np.exp(rng.normal(np.log(rng.choice([30, 300, 3000])), rng.uniform(0.1, 1.5), d))
        x = int(rng.integers(0, 12))
        n = float(rng.choice([50, 315, 10**6])) + x
        out.append((mu * kappa + x, (1 - mu) * kappa + n - x))
    return out


def test_mixture_quantiles_equal_the_earlier_newton_bit_for_bit(monkeypatch):
    from answers_reference import mixture_ppf

    from qualbayes.models import mixtures

    real, skipped = mixtures._newton_lands, []

    def counted(*args):
        landed = real(*args)
        skipped.append(landed)
        return landed

    monkeypatch.setattr(mixtures, "_newton_lands", counted)
    rng = np.random.default_rng(12)
    for alpha, beta in _mixtures(rng, 60):
        for q in (0.025, 0.5, 0.9, 0.95, 0.975, 0.999):
            assert mixtures.ppf(q, alpha, beta) == mixture_ppf(q, alpha, beta), q
    assert sum(skipped) > 50  # the skipped evaluation occurred, and changed no quantile


def test_skipped_newton_check_lands_within_the_stopping_tolerance():
    # the bound of _newton_lands against the mixture CDF itself at every Newton step it
    # certifies; reference: the mixture CDF and density as means of scipy.stats.beta's
    from qualbayes.models import mixtures

    rng = np.random.default_rng(13)
    certified = refused = 0
    for alpha, beta in _mixtures(rng, 40):
        comp = stats.beta(alpha, beta)
        for q in (0.025, 0.5, 0.95, 0.975):
            p0 = mixtures.ppf(q, alpha, beta)
            if not 1e-300 < p0 < 1 - 1e-12:
                continue
            t = float(np.log(p0) - np.log1p(-p0)) + float(rng.uniform(-1e-2, 1e-2))
            for _ in range(4):
                p = float(1 / (1 + np.exp(-t)))
                f = float(np.mean(comp.cdf(p))) - q
                terms = comp.pdf(p) * p * (1 - p)  # each draw's term of dF/dt
                nxt = t - f / float(np.mean(terms))
                p_next = float(1 / (1 + np.exp(-nxt)))
                if mixtures._newton_lands(f, nxt - t, p, p_next, alpha, beta, terms):
                    certified += 1
                    assert abs(float(np.mean(comp.cdf(p_next))) - q) <= 1e-11
                else:
                    refused += 1
                t = nxt
    assert certified > 20 and refused > 20, (certified, refused)


def test_pmf_blocks_equal_the_earlier_sum_in_logs_bit_for_bit():
    from answers_reference import log_pmf_block
    from scipy import special

    from qualbayes.models import mixtures

    rng = np.random.default_rng(14)
    for alpha, beta in _mixtures(rng, 30):
        for remaining in (1, 9, 675, 4875):
            first = special.betaln(alpha, beta + remaining) - special.betaln(alpha, beta)
            for k0, k1 in ((0, 1), (0, 40), (5, 300), (remaining - 3, remaining + 4)):
                if k0 < 0 or k1 <= k0:
                    continue
                new = mixtures._log_pmf_block(k0, k1, remaining, alpha, beta, first)
                old = log_pmf_block(k0, k1, remaining, alpha, beta, first)
                assert np.array_equal(new[0], old[0]) and np.array_equal(new[1], old[1])
    # the whole quantile against scipy.stats.betabinom (reference library)
    a, b = rng.uniform(1, 5, 300), rng.uniform(100, 900, 300)
    for q in (0.5, 0.95):
        k, exact = mixtures.betabinom_quantile(q, 1875, a, b)
        cdf = np.mean(stats.betabinom.cdf([k, k - 1], 1875, a[:, None], b[:, None]), axis=0)
        assert exact and cdf[0] >= q - 1e-12 > cdf[1]


def test_full_pass_keeps_the_approximate_flag_of_the_deciding_pass():
    # a lot of 10^8 units: P by the continuous limit (approximate) in the deciding pass;
    # the full pass reusing it keeps the flag and adds its own columns
    frame = pd.DataFrame({"defectives": [1.0, 0.0], "inspected": [125.0, 125.0],
                          "lot_size": pd.array([10**8, 800], dtype="Int64"),
                          "decision_basis": ["lot", "lot"]})
    a0, b0 = _history_draws(*HISTORIES["typical"], draws=4000, seed=6)
    known = lot_answers.answer_lots(frame, a0, b0, 4, 0.01, 0.95, full=False)
    assert list(known["_approximate"]) == [True, False]
    full = lot_answers.answer_lots(frame, a0, b0, 4, 0.01, 0.95, known=known)
    assert list(full["_approximate"]) == [True, False]
    assert not pd.isna(full["remaining_defectives_upper"][0])
