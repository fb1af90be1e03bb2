"""Close calls continue the adapted chains; parts fitted as independent problems, each with
its own gate. References: the exact 2-D quadrature of models/lot_history_grid.py (itself
checked against scipy.integrate.dblquad, docs/references.md "Quadrature reference"), and
the Monte Carlo error sd / sqrt(ESS) of a mean."""

import numpy as np
import pytest

from qualbayes.inference.run import SamplerSettings

X1 = np.array([0, 1, 3, 0, 2, 5, 1, 0, 0, 4, 2, 1], float)
N1 = np.array([50, 80, 125, 50, 80, 200, 125, 80, 50, 125, 200, 80], float)
X2, N2 = np.zeros(15), np.full(15, 125.0)  # a clean history: a very different posterior
QUICK = SamplerSettings(num_warmup=500, num_samples=1000, seed=3, target_accept=0.99)
TRAP_N = 7777.0  # a lot inspected this many times marks the part the cliff model spoils
CLIFF_MU = 0.014  # the median of mu for X1 plus 100 of 7,777 (quadrature, lot_history_grid)


def _agrees_with_quadrature(mu, kappa, x, n):
    from qualbayes.inference.diagnostics import ess_bulk
    from qualbayes.models.lot_history_grid import posterior_grid

    g = posterior_grid(x, n, size=400)
    assert g.edge_mass < 1e-6
    for values, exact in ((mu, g.mu), (np.log(kappa), np.log(g.kappa))):
        ess = float(ess_bulk(values))
        m = float(np.sum(g.weight * exact))
        sd = float(np.sqrt(np.sum(g.weight * (exact - m) ** 2)))
        # 4 Monte Carlo errors of the mean plus the grid's discretisation (1% of the sd)
        assert abs(values.mean() - m) <= 4 * sd / np.sqrt(ess) + 0.01 * sd


def _gate_on_all(draws, names):
    from qualbayes.inference.gate import diagnose_arrays

    return diagnose_arrays({"mu": draws["mu"], "log_kappa": np.log(draws["kappa"])}, 0,
                           dims={"mu": ["part"], "log_kappa": ["part"]},
                           coords={"part": names})


def test_a_close_call_continues_the_joint_chains_and_the_gate_sees_every_draw():
    from qualbayes.models.lot_history import fit_histories, more_draws

    fit = fit_histories([(X1, N1)], QUICK, names=["P"], independent=False)
    s = fit.draws["mu"].shape[1]  # the draws per chain of the (possibly retried) fit
    more = more_draws(fit)
    assert more.draws["mu"].shape == (4, 2 * s, 1) and more.diverging.shape == (4, 2 * s)
    assert np.array_equal(more.draws["mu"][:, :s], fit.draws["mu"])  # extended, not new
    assert more.gate.settings["continued_draws_per_chain"] == s
    assert more.gate.settings["warmup"] == fit.gate.settings["warmup"]  # no new warmup
    assert more.gate.attempts == fit.gate.attempts
    # the gate is judged on all 1,000 draws per chain: equal to a fresh diagnosis of them
    fresh = _gate_on_all(more.draws, ["P"])
    assert more.gate.min_ess_bulk == pytest.approx(fresh.min_ess_bulk, rel=1e-12)
    assert more.gate.min_ess_bulk > fit.gate.min_ess_bulk
    # continued chains are still draws of the same posterior (no drift after the warmup)
    _agrees_with_quadrature(more.draws["mu"][:, s:, 0], more.draws["kappa"][:, s:, 0],
                            X1, N1)
    _agrees_with_quadrature(more.draws["mu"][..., 0], more.draws["kappa"][..., 0], X1, N1)
    again = more_draws(more)
    assert again.draws["mu"].shape == (4, 3 * s, 1)
    assert np.array_equal(again.draws["mu"][:, :2 * s], more.draws["mu"])


def test_independent_parts_agree_with_quadrature_and_continue_part_by_part():
    from qualbayes.models.lot_history import fit_histories, more_draws

    names = ["1", "X[1"]
    fit = fit_histories([(X1, N1), (X2, N2)], QUICK, names=names)
    assert fit.gate.settings["sampler"].endswith("every part its own sampler")
    assert fit.diverging_parts.shape == (4, 1000, 2) and fit.diverging.shape == (4, 1000)
    more = more_draws(fit)
    assert more.draws["kappa"].shape == (4, 2000, 2)
    assert np.array_equal(more.draws["kappa"][:, :1000], fit.draws["kappa"])
    assert more.diverging_parts.shape == (4, 2000, 2)
    assert more.gate.settings["continued_draws_per_chain"] == 1000
    fresh = _gate_on_all(more.draws, names)
    for name in names:
        assert more.gate.select(part=name).min_ess_bulk == pytest.approx(
            fresh.select(part=name).min_ess_bulk, rel=1e-12)
    for j, (x, n) in enumerate([(X1, N1), (X2, N2)]):
        _agrees_with_quadrature(more.draws["mu"][:, :, j], more.draws["kappa"][:, :, j], x, n)
    idata = more.to_idata()
    assert idata.sample_stats["diverging"].dims == ("chain", "draw", "part")
    assert [str(v) for v in idata.sample_stats["part"].values] == names


def test_one_failing_part_does_not_mark_another(monkeypatch):
    """A part whose posterior NUTS cannot cross (a cliff in the density) fails its own gate
    with its own divergences, is retried alone, and loses only its own lots' verdicts; the
    part named "1" keeps its verdicts although "X[1" ends with "1"."""
    import jax.numpy as jnp
    import numpyro
    import pandas as pd

    from qualbayes.data.lot_table import LotTable
    from qualbayes.inference.run import recording_fits
    from qualbayes.lot_question import assess_lots
    from qualbayes.models import lot_history

    def cliff(x, n, w, scale):
        mu, _kappa = lot_history.hyperprior_sites(x.shape[0], scale)
        loglik = numpyro.distributions.BetaBinomial(
            mu * _kappa, (1.0 - mu) * _kappa, total_count=n).log_prob(x)
        numpyro.factor("x", jnp.sum(w * loglik))
        trapped = jnp.any(n == TRAP_N)
        numpyro.factor("cliff", jnp.where(trapped & (jnp.sum(mu) < CLIFF_MU), -2000.0, 0.0))

    monkeypatch.setattr(lot_history, "lot_history_model", cliff)
    rows = [(f"A{i}", "1", int(n), int(x)) for i, (x, n) in enumerate(zip(X1, N1, strict=True))]
    rows += [(f"B{i}", "X[1", int(n), int(x)) for i, (x, n) in enumerate(zip(X1, N1,
                                                                            strict=True))]
    rows.append(("B-trap", "X[1", int(TRAP_N), 100))  # about the history's own rate
    frame = pd.DataFrame([(lot, part, None, None, None, n, x, i + 2) for i, (lot, part, n, x)
                          in enumerate(rows)],
                         columns=["lot", "part", "supplier", "date", "lot_size", "inspected",
                                  "defectives", "row"])
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    table = LotTable(frame, "cliff.csv", None, 1, {}, [])
    with recording_fits() as fits:
        res = assess_lots(table, spec=0.05, confidence=0.9, prior="history", settings=QUICK)
    good, bad = res.diagnostics["1"], res.diagnostics["X[1"]
    assert good["passed"] and good["divergences"] == 0, good["reasons"]
    assert not bad["passed"] and bad["divergences"] > 0
    assert bad["settings"]["retried_parts"] == ["X[1"]  # retried alone
    lots = res.lots
    assert set(lots.loc[lots.part == "X[1", "decision"]) == {"not-converged"}
    assert "not-converged" not in set(lots.loc[lots.part == "1", "decision"])
    fit = fits[-1]
    assert fit.diverging_parts[:, :, 0].sum() == 0 and fit.diverging_parts[:, :, 1].sum() > 0


def test_identical_parts_in_different_chunks_draw_independent_streams():
    """Two parts with the same data, sampled in different chunks, must not repeat the same
    random stream (else their Monte Carlo errors are one error counted twice); both still
    agree with the quadrature."""
    from qualbayes.models.lot_history_parts import fit_parts
    from qualbayes.models.lot_spread import HistoryPrior

    s = SamplerSettings(num_warmup=300, num_samples=300, seed=5, target_accept=0.99)
    fit = fit_parts([(X1, N1), (X1, N1)], s, ["A", "B"], HistoryPrior(), chunk=1)
    a, b = fit.draws["mu"][:, :, 0], fit.draws["mu"][:, :, 1]
    assert not np.allclose(a, b)
    for j in (0, 1):
        _agrees_with_quadrature(fit.draws["mu"][:, :, j], fit.draws["kappa"][:, :, j], X1, N1)


def test_a_part_draws_the_same_whatever_the_other_parts_of_its_call():
    """Parts share a compiled call (vmapped): part 0's draws must not depend on the data of
    the part beside it, and two identical parts in one call must not share a stream. Each
    part's keys come from the seed and its own index, so its draws are the same whatever
    shares its call."""
    from qualbayes.models.lot_history_parts import fit_parts
    from qualbayes.models.lot_spread import HistoryPrior

    s = SamplerSettings(num_warmup=200, num_samples=200, seed=7, target_accept=0.99,
                        retry=False)
    beside_other = fit_parts([(X1, N1), (X2, N2)], s, ["A", "B"], HistoryPrior(), chunk=4)
    beside_same = fit_parts([(X1, N1), (X1, N1)], s, ["A", "B"], HistoryPrior(), chunk=4)
    for var in ("mu", "kappa"):
        assert np.array_equal(beside_other.draws[var][:, :, 0], beside_same.draws[var][:, :, 0])
    assert not np.allclose(beside_same.draws["mu"][:, :, 0], beside_same.draws["mu"][:, :, 1])
    assert np.array_equal(beside_other.diverging_parts[:, :, 0],
                          beside_same.diverging_parts[:, :, 0])


def test_a_part_is_continued_alone_from_its_own_chains():
    from qualbayes.models.lot_history import fit_histories, more_draws

    names = ["1", "X[1"]
    s = SamplerSettings(num_warmup=300, num_samples=300, seed=11, target_accept=0.99,
                        retry=False)
    fit = fit_histories([(X1, N1), (X2, N2)], s, names=names)
    more = more_draws(fit, parts=[1])
    assert more.coords["part"] == ["X[1"] and more.draws["mu"].shape == (4, 600, 1)
    assert np.array_equal(more.draws["kappa"][:, :300, 0], fit.draws["kappa"][:, :, 1])
    assert more.diverging_parts.shape == (4, 600, 1)
    assert more.gate.settings["continued_draws_per_chain"] == 300
    fresh = _gate_on_all(more.draws, ["X[1"])
    assert more.gate.select(part="X[1").min_ess_tail == pytest.approx(
        fresh.select(part="X[1").min_ess_tail, rel=1e-12)
    # the continued draws are still draws of the part's posterior
    _agrees_with_quadrature(more.draws["mu"][..., 0], more.draws["kappa"][..., 0], X2, N2)


def test_a_close_call_continues_every_part_of_the_fit():
    """C set 2.2 MCSE above lot B's P of the first round (part "P"; the first run, at C = the
    exact quadrature P, gives both): B is too close to call (within 3 MCSE) and the cap
    could settle it (more than 3 x MCSE / 2 at four times the draws), so the fit's chains
    are continued, every part's from its own state, so that the parts keep equal numbers of
    draws (one InferenceData); part "Q" (a clean history, P far above C) keeps its
    decisions. Reference: the 2-D quadrature of models/lot_history_grid.py."""
    import pandas as pd

    from qualbayes.data.lot_table import LotTable
    from qualbayes.lot_question import assess_lots
    from qualbayes.models import lot_history_grid as grid

    rows = [("A", "P", 80, 0), ("B", "P", 125, 1), ("C", "P", 80, 2)]
    rows += [(f"Q{i}", "Q", 125, 0) for i in range(15)]
    frame = pd.DataFrame([(lot, part, None, None, None, n, x, i + 2)
                          for i, (lot, part, n, x) in enumerate(rows)],
                         columns=["lot", "part", "supplier", "date", "lot_size", "inspected",
                                  "defectives", "row"])
    frame["lot_size"] = frame["lot_size"].astype("Int64")
    c = float(grid.prob_within(grid.posterior_grid([0, 1, 2], [80, 125, 80], size=800),
                               [1], [125], 0.03)[0])
    first = assess_lots(LotTable(frame.copy(), "t.csv", None, 1, {}, []), 0.03, c, "history",
                        seed=2).lots.set_index("lot").loc["B"]
    assert first["prob_within_spec_draws"] == 4000  # nothing the cap could settle: no round
    c = float(first["prob_within_spec"] + 2.2 * first["prob_within_spec_mcse"])
    res = assess_lots(LotTable(frame, "t.csv", None, 1, {}, []), 0.03, c, "history",
                      seed=2)
    assert res.converged
    p_draws, q_draws = res.draws["P"]["mu"], res.draws["Q"]["mu"]
    assert p_draws.shape[1] == q_draws.shape[1] > 1000  # both continued, equal draws
    assert res.diagnostics["P"]["settings"]["continued_draws_per_chain"] > 0
    assert any(n.startswith("close calls: the adapted chains") for n in res.notes)
    q_lots = res.lots[res.lots.part == "Q"]
    assert set(q_lots["decision"]) == {"accept"} and not q_lots["too_close"].any()
    # every P and MCSE follows from the recorded draws: the first draws / 4 of each chain
    # (its own column); the clean part's lots were settled in the first round, lot B (C at
    # its exact P) only later
    from scipy import special

    from qualbayes.inference.mcse import mcse_mean

    for lot in res.lots.itertuples():
        d = int(lot.prob_within_spec_draws) // 4
        mu, kappa = res.draws[lot.part]["mu"][:, :d], res.draws[lot.part]["kappa"][:, :d]
        g = special.betainc(mu * kappa + lot.defectives,
                            (1 - mu) * kappa + lot.inspected - lot.defectives, 0.03)
        assert lot.prob_within_spec == pytest.approx(g.mean(), rel=1e-12, abs=1e-15)
        assert lot.prob_within_spec_mcse == pytest.approx(mcse_mean(g), rel=1e-9, abs=1e-15)
    assert set(q_lots["prob_within_spec_draws"]) == {4000}
    assert int(res.lots.set_index("lot").loc["B", "prob_within_spec_draws"]) > 4000


def _close_and_clean_parts(clean_parts: int):
    """Part "P" (0, 1 and 2 defectives of 80, 125, 80) and ``clean_parts`` clean parts (8
    lots of 0 of 200 each), and C: the exact (quadrature) P of P's lot "B" (1 of 125) at a
    spec of 3%, so that lot is within a few MCSE of C and the call is close. Reference: the
    2-D quadrature of models/lot_history_grid.py."""
    import pandas as pd

    from qualbayes.models import lot_history_grid as grid

    rows = [("A", "P", 80, 0), ("B", "P", 125, 1), ("C", "P", 80, 2)]
    rows += [(f"Q{k}-{i}", f"Q{k}", 200, 0) for k in range(clean_parts) for i in range(8)]
    frame = pd.DataFrame(rows, columns=["lot", "part", "inspected", "defectives"])
    c = float(grid.prob_within(grid.posterior_grid([0, 1, 2], [80, 125, 80], size=800),
                               [1], [125], 0.03)[0])
    return frame, c


def test_with_many_parts_a_close_call_continues_only_its_own_part(monkeypatch):
    """From ``ALONE_FROM`` parts, a close call continues only the parts that have one. The
    continued part's draws are bit for bit those it gets when every part is continued (each
    part continues from its own adapted state with its own keys), so its answers are the
    same; the other parts keep their first draws. The parts then hold different numbers of
    draws: ``idata`` raises ``DrawCountError`` and ``idata_of`` gives each part with its own
    divergence flags."""
    import qualbayes as qb
    from qualbayes import lot_history_answers

    frame, c = _close_and_clean_parts(lot_history_answers.ALONE_FROM)
    s = SamplerSettings(num_warmup=500, num_samples=500, seed=2, target_accept=0.99)
    alone = qb.assess_lots(frame, spec="3%", confidence=c, prior="history", settings=s)
    assert alone.converged
    p_mu = alone.assessment.draws["P"]["mu"]
    assert p_mu.shape[1] > 500  # P was continued
    for k in range(lot_history_answers.ALONE_FROM):
        assert alone.assessment.draws[f"Q{k}"]["mu"].shape == (4, 500)  # the others were not
    assert any(f"(1 of {lot_history_answers.ALONE_FROM + 1} parts)" in n for n in alone.notes)
    assert alone.diagnostics["P"]["settings"]["continued_draws_per_chain"] > 0
    assert "continued_draws_per_chain" not in alone.diagnostics["Q0"]["settings"]
    assert alone.assessment.sampler["parts_continued"] == 1
    with pytest.raises(qb.DrawCountError, match="idata_of"):
        _ = alone.idata
    one = alone.idata_of("P")
    np.testing.assert_array_equal(one.posterior["mu"].values[..., 0], p_mu)
    last = [f for f in alone.fits if getattr(f, "coords", {}).get("part") == ["P"]][-1]
    np.testing.assert_array_equal(one.sample_stats["diverging"].values[..., 0],
                                  last.diverging_parts[..., 0])

    monkeypatch.setattr(lot_history_answers, "ALONE_FROM", 10**9)
    every = qb.assess_lots(frame, spec="3%", confidence=c, prior="history", settings=s)
    np.testing.assert_array_equal(every.assessment.draws["P"]["mu"], p_mu)
    assert every.assessment.draws["Q0"]["mu"].shape == p_mu.shape  # every part continued
    assert every.idata.posterior["mu"].shape == (4, p_mu.shape[1], len(alone.diagnostics))
    cols = ["lot", "prob_within_spec", "prob_within_spec_mcse", "decision", "too_close"]
    on_p = alone.lots["part"] == "P"
    assert alone.lots.loc[on_p, cols].equals(every.lots.loc[on_p, cols])
    assert alone.lots["decision"].tolist() == every.lots["decision"].tolist()


@pytest.mark.parametrize("seed", [0, 3, 123_456_789, 2**40 + 7, -5, 2**63 - 1])
def test_part_keys_equal_the_operations_one_by_one(seed):
    """The parts' keys computed in numpy (``part_keys``) and by the fallback compiled program
    (``_keys_program``, with ``_key_indices``) give the same bits as jax.random's operations
    run one by one (fold_in of the part's index into the seed's key, then split by chain)."""
    import jax
    import jax.numpy as jnp

    from qualbayes.inference.run import jax_scope
    from qualbayes.models.lot_parts_program import _key_indices, _keys_program, part_keys

    with jax_scope():
        for parts, width in (([0], 1), ([5, 9], 2), ([3, 4, 5], 4), ([999], 1)):
            got = part_keys(seed, np.array(parts), 4, width)
            assert isinstance(got, np.ndarray)  # numpy: no program compiled
            program = np.asarray(_keys_program(4)(np.int64(seed),
                                                  _key_indices(np.array(parts), width)))
            idx = list(parts) + list(range(parts[-1] + 1, parts[-1] + 1 + width - len(parts)))
            base = jax.random.PRNGKey(seed)
            one_by_one = jnp.stack([jax.random.split(jax.random.fold_in(base, j), 4)
                                    for j in idx], axis=1)
            assert got.shape == (4, width, 2) and got.dtype == np.uint32
            np.testing.assert_array_equal(got, np.asarray(one_by_one))
            np.testing.assert_array_equal(program, np.asarray(one_by_one))
